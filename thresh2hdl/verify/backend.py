"""One contract for every simulator: a back end runs a stimulus and returns what it recorded.

Each simulator is a :class:`SimulatorBackend` made from what it runs (the Amaranth component,
or the Verilog text with its ports and module); the chunk runner and every caller use only
``name``, ``version()`` and ``run()``, so none needs to know which simulator it drives.
"""

from abc import ABC, abstractmethod
from dataclasses import dataclass

import numpy as np

from .compare import compare

__all__ = ["SimulationResult", "SimulatorBackend", "VerilogBackend"]


@dataclass(frozen=True)
class SimulationResult:
    """The outputs a simulator recorded on every cycle of one stimulus."""

    simulator: str
    in_ready: np.ndarray
    out_valid: np.ndarray
    decisions: np.ndarray
    scores: np.ndarray | None
    run_seconds: float | None = None     # the simulator's own run, without data marshalling
    flags: np.ndarray | None = None      # the out-of-range output per cycle, if the design has it
    bus: dict | None = None              # the AXI4-Lite weight port's outputs per cycle, by name

    def check(self, stimulus, *, limit=10):
        return compare(stimulus, self.in_ready, self.out_valid, self.decisions, self.scores,
                       flags=self.flags, bus=self.bus, limit=limit)


class SimulatorBackend(ABC):
    """A simulator ready to run one design."""

    name = ""
    # Runs in this process (no worker thread, so that Ctrl-C stops it at once); the others
    # run a tool in a process of its own, so chunks can be simulated side by side.
    in_process = False

    @abstractmethod
    def version(self):
        """The simulator's name and version, as the report states it."""

    @abstractmethod
    def run(self, stimulus, progress=None):
        """Every cycle of ``stimulus`` through the design: a :class:`SimulationResult`.
        ``progress``: the caller's progress reporter (each back end uses what it can)."""


class VerilogBackend(SimulatorBackend):
    """A simulator of the emitted file itself: made from the Verilog text, its ports
    (:func:`~thresh2hdl.emit.port_table`) and its module name."""

    def __init__(self, verilog_text, ports, module):
        self.verilog_text, self.ports, self.module = verilog_text, ports, module
