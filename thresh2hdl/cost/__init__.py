"""Cost: synthesis and place-and-route estimates."""

from .estimate import (CELL_NAMES, LUT4_RULES, TARGETS, device_name, estimate_cost,
                       lut4_equivalents, needs_text, synthesis_figures)

__all__ = ["CELL_NAMES", "LUT4_RULES", "TARGETS", "device_name", "estimate_cost",
           "lut4_equivalents", "needs_text", "synthesis_figures"]
