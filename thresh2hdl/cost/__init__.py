"""Cost: synthesis and place-and-route estimates."""

from .devices import (CAPACITY_NAMES, DEVICES, FAMILY_DEFAULT, Device, choose_device,
                      device_for_arguments)
from .estimate import (CELL_NAMES, LOGIC_CELL_RULES, LUT4_RULES, TARGETS, device_name,
                       estimate_cost, lut4_equivalents, needs_text, share_used,
                       synthesis_figures)

__all__ = ["CAPACITY_NAMES", "CELL_NAMES", "DEVICES", "Device", "FAMILY_DEFAULT",
           "LOGIC_CELL_RULES", "LUT4_RULES", "TARGETS", "choose_device", "device_for_arguments",
           "device_name", "estimate_cost", "lut4_equivalents", "needs_text", "share_used",
           "synthesis_figures"]
