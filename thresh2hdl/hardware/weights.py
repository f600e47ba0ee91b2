"""Loadable weights: the registers that hold every unit's weights and bias, and the port that
writes them: the plain write port (``weight_write`` / ``weight_address`` / ``weight_data``) or
an AXI4-Lite slave with read-back (:mod:`.register_bus`), both with one address map."""

from amaranth.hdl import Mux, Signal, signed
from amaranth.lib.wiring import In

from ..names import bias_name, learned_name, unit_prefix, weight_name
from .register_bus import axi_lite_members, build_axi_lite

__all__ = ["WeightStore", "weight_addresses", "register_file", "write_members"]


def weight_addresses(model):
    """How many addresses the write port has: every unit's weights, then its bias."""
    return len(model.units) * (len(model.features) + 1)


def register_file(config):
    """The registers in address order: their widths and the values they reset to."""
    widths, values = [], []
    for unit in config.model.units:
        widths += [config.weight_bits] * len(unit.weights) + [config.bias_bits]
        values += list(unit.weights) + [unit.bias]
    return tuple(widths), tuple(values)


def write_members(config):
    """The write port's signature members (none unless the weights are loadable)."""
    if not config.loadable_weights:
        return {}
    if config.weight_port == "axi4-lite":
        return axi_lite_members(weight_addresses(config.model))
    return {"weight_write": In(1),
            "weight_address": In(range(weight_addresses(config.model))),
            "weight_data": In(signed(max(config.weight_bits, config.bias_bits)))}


class WeightStore:
    """Weight and bias registers of every unit, reset to the trained values, written through
    ``weight_write``/``weight_address``/``weight_data``: unit ``u``'s weight ``i`` at address
    ``u * (features + 1) + i``, its bias at ``u * (features + 1) + features``. A write takes
    effect from the next clock (with on-chip learning's lag, the learning code writes the
    copies itself: see :mod:`.learning`); the data's low bits are kept. With ``weight_port``
    ``axi4-lite`` the same registers are the slave's words."""

    def __init__(self, m, component, config, copy_bits=None):
        self.weights, self.biases = [], []
        registers = []
        model = config.model
        for u, unit in enumerate(model.units):
            prefix = unit_prefix(u) if model.is_bank else ""
            row = []
            for i, value in enumerate(unit.weights):
                row.append(Signal(signed(config.weight_bits), name=weight_name(prefix, i),
                                  init=value))
            bias = Signal(signed(config.bias_bits), name=bias_name(prefix), init=unit.bias)
            registers += row + [bias]
            self.weights.append(row)
            self.biases.append(bias)
        self.config = config
        # The registers the port writes (and on-chip learning moves), in address order: the
        # datapath's own, or with a learning lag copies of them that they follow a cycle later
        # (the update's loop then stays short and local, away from what reads the weights).
        self.read = registers      # what the datapath (and on-chip learning's read-back) reads
        self.registers = registers if not config.learning_lag else \
            [self._copy(register, bits) for register, bits in zip(registers, copy_bits)]
        # What each register the port writes stands for: itself, or its copy clamped.
        self.values = registers if not config.learning_lag else \
            [self._clamped(m, copy, len(register))
             for copy, register in zip(self.registers, registers)]
        if config.learning_lag:
            m.d.sync += [register.eq(value) for register, value in zip(registers, self.values)]
        self.owned_weights, self.owned_biases = [], []
        start = 0
        for row in self.weights:
            self.owned_weights.append(self.registers[start:start + len(row)])
            self.owned_biases.append(self.registers[start + len(row)])
            start += len(row) + 1
        if not config.on_chip_learning:
            self.connect_port(m, component)

    @staticmethod
    def _copy(register, bits):
        """``register``'s learning copy, ``bits`` wide: the update's sum before its clamp
        (the clamp is then read from the copy's own flip-flops, off the adder's path)."""
        return Signal(signed(bits), name=learned_name(register.name), init=register.init)

    @staticmethod
    def _clamped(m, copy, bits):
        """The value ``copy`` stands for: clamped to ``bits``, a wire of its own."""
        value = Signal(signed(bits), name=f"{copy.name}_clamped")
        m.d.comb += value.eq(clamped(copy, bits))
        return value

    def connect_port(self, m, component):
        """The write port (or slave). With on-chip learning it is connected after the
        updates, so that a write in the same cycle wins over an update."""
        if self.config.weight_port == "axi4-lite":
            build_axi_lite(m, component, self.registers)
            return
        for address, register in enumerate(self.registers):
            self._write(m, component, register, address)

    @staticmethod
    def written(component, address):
        """Whether the port writes the register at ``address`` in this cycle."""
        return component.weight_write & (component.weight_address == address)

    @staticmethod
    def _write(m, component, register, address):
        with m.If(WeightStore.written(component, address)):
            m.d.sync += register.eq(component.weight_data[:len(register)])


def clamped(value, bits):
    """``value`` clamped to ``bits``-bit two's complement: itself where its bits from
    ``bits - 1`` up are all equal, else the limit on its sign's side (a LUT per bit, read from
    the value's own bits)."""
    if len(value) <= bits:
        return value
    top = value[bits - 1:]
    inside = (top == 0) | (top == (1 << len(top)) - 1)
    lo, hi = -(1 << (bits - 1)), (1 << (bits - 1)) - 1
    return Mux(inside, value[:bits].as_signed(), Mux(value[-1], lo, hi))
