"""The component for a configuration, of the kind its plan has (:func:`~.plan.design_kind`)."""

from .bank import ThresholdBank
from .plan import design_kind
from .serial import SerialThreshold
from .unit import ThresholdUnit

__all__ = ["make_component", "COMPONENTS"]

COMPONENTS = {"unit": ThresholdUnit, "bank": ThresholdBank, "serial": SerialThreshold}


def make_component(config):
    """The component for a model: one unit, or a bank of units with an argmax; the serial
    architecture (either) is a :class:`~.serial.SerialThreshold`."""
    return COMPONENTS[design_kind(config)](config)
