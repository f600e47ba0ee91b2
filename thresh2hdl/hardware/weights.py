"""Loadable weights: the registers that hold every unit's weights and bias, and their write
port (``weight_write`` / ``weight_address`` / ``weight_data``)."""

from amaranth.hdl import Signal, signed
from amaranth.lib.wiring import In

from ..names import unit_prefix

__all__ = ["WeightStore", "weight_addresses", "write_members"]


def weight_addresses(model):
    """How many addresses the write port has: every unit's weights, then its bias."""
    return len(model.units) * (len(model.features) + 1)


def write_members(config):
    """The write port's signature members (none unless the weights are loadable)."""
    if not config.loadable_weights:
        return {}
    return {"weight_write": In(1),
            "weight_address": In(range(weight_addresses(config.model))),
            "weight_data": In(signed(max(config.weight_bits, config.bias_bits)))}


class WeightStore:
    """Weight and bias registers of every unit, reset to the trained values, written through
    ``weight_write``/``weight_address``/``weight_data``: unit ``u``'s weight ``i`` at address
    ``u * (features + 1) + i``, its bias at ``u * (features + 1) + features``. A write takes
    effect from the next clock; the data's low bits are kept."""

    def __init__(self, m, component, config):
        self.weights, self.biases = [], []
        model = config.model
        features = len(model.features)
        for u, unit in enumerate(model.units):
            prefix = unit_prefix(u) if model.is_bank else ""
            row = []
            for i, value in enumerate(unit.weights):
                register = Signal(signed(config.weight_bits), name=f"{prefix}weight{i}",
                                  init=value)
                self._write(m, component, register, u * (features + 1) + i)
                row.append(register)
            bias = Signal(signed(config.bias_bits), name=f"{prefix}bias", init=unit.bias)
            self._write(m, component, bias, u * (features + 1) + features)
            self.weights.append(row)
            self.biases.append(bias)

    @staticmethod
    def _write(m, component, register, address):
        with m.If(component.weight_write & (component.weight_address == address)):
            m.d.sync += register.eq(component.weight_data[:len(register)])
