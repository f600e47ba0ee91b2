"""Register stages: values by (name, stage) with the registers that carry them to later
stages, and the valid/ready handshake that moves the whole pipeline together."""

from amaranth.hdl import Shape, Signal

from ..names import register_name, valid_name
from .clocking import gated

__all__ = ["Stages", "handshake"]


class Stages:
    """Values by (name, stage), with the registers that carry them to later stages."""

    def __init__(self, m, advance, boundaries):
        self.m = m
        self.advance = advance
        self.boundaries = boundaries
        self.values = {}
        self.produced = {}
        self.registers = {}
        self.aliases = {}     # name -> (source, shift): wiring, registers of its own none

    def stage_of(self, level):
        return sum(1 for boundary in self.boundaries if boundary < level)

    def put(self, name, value, stage, shift=0):
        """``shift``: the value's low bits are known zeros (a shifted input), which its
        registers leave out: they carry ``value >> shift``, named by
        :func:`~thresh2hdl.names.register_name` (otherwise Yosys drops the constant flops and,
        with them, the register's name)."""
        self.values[(name, stage)] = value
        self.produced[name] = (stage, value.shape(), shift)

    def alias(self, name, source, shift):
        """``name`` is ``source << shift`` wherever it is read: a shared term scaled for a
        unit takes the shared term's registers, not registers of its own."""
        self.aliases[name] = (source, shift)

    def has(self, name):
        return name in self.produced or name in self.aliases

    def at(self, name, stage):
        if name in self.aliases:
            source, shift = self.aliases[name]
            value = self.at(source, stage)
            return value << shift if shift else value
        first, shape, shift = self.produced[name]
        carried = self.values[(name, first)][shift:] if shift else None
        for k in range(first + 1, stage + 1):
            if (name, k) not in self.values:
                register = Signal(Shape(shape.width - shift, shape.signed),
                                  name=register_name(name, k),
                                  reset_less=True)
                source = carried if shift else self.values[(name, k - 1)]
                with self.m.If(self.advance):
                    self.m.d.sync += register.eq(source)
                self.values[(name, k)] = (register << shift) if shift else register
                self.registers[(name, k)] = register
            carried = self.registers.get((name, k))
        return self.values[(name, stage)]


def handshake(m, component, latency):
    """The valid bits of ``latency`` stages; returns ``advance``, high when every stage moves
    (the last is empty or its result is taken). With a clock enable, ``in_ready`` and
    ``out_valid`` read 0 while it is low (the registers hold: :func:`.clocking.enabled`)."""
    advance = Signal()
    if latency == 0:
        m.d.comb += [component.in_ready.eq(component.out_ready),
                     component.out_valid.eq(component.in_valid)]
        return advance
    valid = [Signal(name=valid_name(k + 1)) for k in range(latency)]
    m.d.comb += [advance.eq(component.out_ready | ~valid[-1]),
                 component.in_ready.eq(gated(component, advance)),
                 component.out_valid.eq(gated(component, valid[-1]))]
    with m.If(advance):
        m.d.sync += valid[0].eq(component.in_valid)
        m.d.sync += [valid[k].eq(valid[k - 1]) for k in range(1, latency)]
    return advance
