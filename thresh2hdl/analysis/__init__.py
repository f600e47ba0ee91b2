"""Ranges and widths: one plan per architecture, the records they give, and the input guard.

``analyse`` plans one unit (:mod:`.plan` picks :mod:`.tree`, :mod:`.serial` or :mod:`.loadable`),
``analyse_bank`` a bank (:mod:`.bank`, its shared terms :mod:`.shared`); every plan is an
:class:`Analysis` of :class:`Node` records (:mod:`.records`), sized with :mod:`.widths` over the exact ranges of :mod:`.intervals`; loadable products as
rows of partial products: :mod:`.rows`.
"""

from .bank import BankPlan, analyse_bank
from .guard import InputGuard, guard_words, resolve_guard
from .intervals import prefix_ranges
from .plan import analyse
from .rows import row_bit
from .records import ARCHITECTURES, SERIAL_NODES, Analysis, Node, check_architecture
from .shared import SharingPlan, plan_sharing, shared_name
from .widths import (MAX_SCORE_BITS, bit_growth_bound, csd_digits, signed_bits, unsigned_bits,
                     value_bits)

__all__ = ["ARCHITECTURES", "SERIAL_NODES", "MAX_SCORE_BITS", "check_architecture", "Analysis",
           "Node", "BankPlan", "analyse", "analyse_bank", "prefix_ranges", "csd_digits",
           "signed_bits", "unsigned_bits", "value_bits", "bit_growth_bound", "InputGuard",
           "guard_words", "resolve_guard", "SharingPlan", "plan_sharing", "shared_name",
           "row_bit"]
