"""The Amaranth components: a unit, a bank with an argmax, a serial unit."""

from .circuit import FULL_PIPELINE, ThresholdUnit, UnitConfig, make_component, weight_addresses

__all__ = ["FULL_PIPELINE", "ThresholdUnit", "UnitConfig", "make_component", "weight_addresses"]
