"""The AXI4-Stream form's byte lanes: where each feature sits in the slave stream's TDATA and
each result in the master stream's, per the AMBA AXI4-Stream protocol specification (TDATA an
integer number of bytes). The circuit is the plain one; the form only bundles its ports
(:mod:`thresh2hdl.emit.netlist` packs them), so one design, proof and reference serve both.

Slave TDATA: feature 0 in the lowest bytes, each feature in the fewest whole bytes that hold
its code (the bits above it ignored). Master TDATA: the decision (or class index) in its own
bytes, then the out-of-range flag in a byte of its own when the design has one, then each
score in its own bytes, sign-extended to them.
"""

from dataclasses import dataclass

from amaranth.hdl import Shape

from ..errors import InputError

__all__ = ["INTERFACES", "MAX_TDATA_BITS", "Lane", "StreamLayout", "stream_layout"]

INTERFACES = ("plain", "axi-stream")
# The widest packed TDATA this writer makes. The specification recommends widths up to 1024
# bits (8, 16, ..., 1024; from memory); wider buses are left to the plain interface.
MAX_TDATA_BITS = 1024


@dataclass(frozen=True)
class Lane:
    """One logical port's place in a packed TDATA: the component member, its first bit, its
    own width, the bytes' width it fills, and whether it is signed (a signed output is
    sign-extended to its bytes)."""
    member: str
    offset: int
    width: int
    lane_bits: int
    signed: bool


@dataclass(frozen=True)
class StreamLayout:
    """The slave stream's lanes (``inputs``) and the master stream's (``outputs``)."""
    inputs: tuple
    outputs: tuple

    @property
    def in_bits(self):
        return _end(self.inputs)

    @property
    def out_bits(self):
        return _end(self.outputs)


def _end(lanes):
    last = lanes[-1]
    return last.offset + last.lane_bits


def _lanes(members):
    lanes, offset = [], 0
    for member, width, signed in members:
        lane_bits = 8 * -(-width // 8)
        lanes.append(Lane(member, offset, width, lane_bits, signed))
        offset += lane_bits
    return tuple(lanes)


def stream_layout(signature):
    """The lanes of a design with these ports (its :class:`~.plan.DesignPlan` signature);
    refuses (InputError, field ``interface``) a TDATA wider than :data:`MAX_TDATA_BITS`."""
    members = signature.members
    shapes = {name: Shape.cast(member.shape) for name, member in members.items()}
    features = [(name, shape.width, shape.signed) for name, shape in shapes.items()
                if name.startswith("x")]
    results = [(name, shape.width, shape.signed) for name, shape in shapes.items()
               if name in ("y", "out_of_range") or name.startswith("score")]
    layout = StreamLayout(_lanes(features), _lanes(results))
    for side, bits in (("slave (features)", layout.in_bits), ("master (results)",
                                                             layout.out_bits)):
        if bits > MAX_TDATA_BITS:
            raise InputError(f"the AXI4-Stream {side} TDATA would be {bits} bits, more than "
                             f"the {MAX_TDATA_BITS} this writer makes; use the plain "
                             f"interface", field="interface")
    return layout
