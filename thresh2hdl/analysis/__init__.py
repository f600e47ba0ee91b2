"""Ranges and widths: one plan per architecture, and the input guard."""

from .guard import guard_words, resolve_guard
from .ranges import ARCHITECTURES, Analysis, analyse, analyse_bank, signed_bits, value_bits

__all__ = ["guard_words", "resolve_guard", "ARCHITECTURES", "Analysis", "analyse", "analyse_bank",
           "signed_bits", "value_bits"]
