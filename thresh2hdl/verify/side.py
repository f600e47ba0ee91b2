"""Side channels: ports beside the stream that every harness drives and reads cycle by cycle,
each with its own inputs, outputs and when an output counts. Two exist: the AXI4-Lite weight
port (:mod:`.register_bus`) and the on-chip learning ports (:mod:`.learning`). A design has
at most one; the harnesses find it by its ports' prefix."""

from dataclasses import dataclass

import numpy as np

from ..hardware.learning import LEARN_INPUTS, LEARN_OUTPUTS, LEARN_PREFIX
from ..hardware.register_bus import AXI_PREFIX

__all__ = ["SideChannel", "SideRun", "AXI_LITE", "LEARNING", "CHANNELS", "side_ports"]


@dataclass(frozen=True)
class SideChannel:
    """A channel's ports (``prefix`` + short name), in a fixed order, and for each output
    compared only while another is high, that one's short name (``checked_while``)."""

    label: str
    prefix: str
    inputs: tuple
    outputs: tuple
    checked_while: dict


AXI_LITE = SideChannel(
    "axi", AXI_PREFIX,
    ("awvalid", "awaddr", "wvalid", "wdata", "wstrb", "bready", "arvalid", "araddr", "rready"),
    ("awready", "wready", "bvalid", "bresp", "arready", "rvalid", "rdata", "rresp"),
    # A response's payload counts only while its VALID is high.
    {"bresp": "bvalid", "rdata": "rvalid", "rresp": "rvalid"})
LEARNING = SideChannel("learn", LEARN_PREFIX, LEARN_INPUTS, LEARN_OUTPUTS, {})
CHANNELS = (AXI_LITE, LEARNING)


def side_ports(ports):
    """``(channel, {short name: port})`` of the design's side channel, or ``(None, {})``.
    ``ports``: the logical port rows."""
    for channel in CHANNELS:
        found = {port.internal[len(channel.prefix):]: port for port in ports
                 if port.internal.startswith(channel.prefix)}
        if found:
            return channel, found
    return None, {}


@dataclass(frozen=True)
class SideRun:
    """A channel's inputs per cycle and the outputs expected (unsigned, as the port's bits),
    each an int64 array by short name."""

    channel: SideChannel
    inputs: dict
    expected: dict

    def checked(self, name):
        """The cycles where output ``name`` is compared."""
        when = self.channel.checked_while.get(name)
        cycles = len(self.expected[name])
        return np.ones(cycles, dtype=bool) if when is None else self.expected[when] != 0

    def rows(self, names):
        """The arrays of ``names``, inputs or outputs."""
        return [self.inputs[name] if name in self.inputs else self.expected[name]
                for name in names]

    def shown(self, names):
        """The expected outputs of ``names`` where they count, zero elsewhere (so that a
        vector file's rows show what is checked)."""
        return [np.where(self.checked(name), self.expected[name], 0) for name in names]
