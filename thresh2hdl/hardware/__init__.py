"""The hardware of a design: its plan (:class:`DesignPlan`, apart from any component) and the
Amaranth components built from it: a unit, a bank with an argmax, a serial unit."""

from .clocking import (DEFAULT_RESET, RESET_KINDS, reset_domain, reset_is_async, reset_is_low,
                       reset_port)
from .stream import INTERFACES, MAX_TDATA_BITS, Lane, StreamLayout
from .config import FULL_PIPELINE, MAX_SERIAL_FEATURES, UnitConfig, sample_shape
from .plan import DesignPlan, plan_design
from .register_bus import WEIGHT_PORTS
from .weights import register_file, weight_addresses
from .unit import ThresholdUnit
from .bank import ThresholdBank
from .serial import SerialThreshold
from .make import make_component

__all__ = ["DEFAULT_RESET", "RESET_KINDS", "reset_domain", "reset_is_async", "reset_is_low",
           "reset_port", "INTERFACES", "MAX_TDATA_BITS", "Lane", "StreamLayout",
           "FULL_PIPELINE", "MAX_SERIAL_FEATURES", "UnitConfig", "sample_shape", "DesignPlan",
           "plan_design", "WEIGHT_PORTS", "register_file", "weight_addresses", "ThresholdUnit", "ThresholdBank",
           "SerialThreshold", "make_component"]
