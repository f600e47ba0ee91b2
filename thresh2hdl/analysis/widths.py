"""Widths of integer values: two's complement and unsigned bit counts, canonical signed digits,
and the score port's width checked against its exact range.

Every plan sizes its nodes with these, and the circuit sizes its signals with the same calls, so
a width is worked out one way everywhere.
"""

from ..errors import InputError

__all__ = ["MAX_SCORE_BITS", "csd_digits", "signed_bits", "unsigned_bits", "value_bits",
           "bit_growth_bound", "score_widths"]

MAX_SCORE_BITS = 128


def csd_digits(value):
    """Canonical signed digits (non-adjacent form) of ``value >= 0``: ``[(shift, +-1), ...]``.

    No two nonzero digits are adjacent, which makes the count of nonzero digits minimal
    (Reitwiesner 1960); ``value == sum(d << shift)``.
    """
    if value < 0:
        raise ValueError(f"value must be non-negative, not {value}")
    digits = []
    shift = 0
    while value:
        if value & 1:
            digit = 2 - (value & 3)      # +1 when value = 1 (mod 4), -1 when value = 3 (mod 4)
            digits.append((shift, digit))
            value -= digit
        value >>= 1
        shift += 1
    return digits


def signed_bits(lo, hi):
    """Fewest bits of two's complement that hold every integer in ``[lo, hi]``."""
    if lo > hi:
        raise ValueError(f"empty range [{lo}, {hi}]")
    bits = 1
    while not (-(1 << (bits - 1)) <= lo and hi <= (1 << (bits - 1)) - 1):
        bits += 1
    return bits


def unsigned_bits(hi):
    """Fewest bits of unsigned binary that hold ``hi`` (at least 1)."""
    if hi < 0:
        raise ValueError(f"negative value {hi} has no unsigned width")
    return max(1, hi.bit_length())


def value_bits(lo, hi):
    """Width and signedness of a node: unsigned when it cannot be negative, else signed."""
    if lo >= 0:
        return unsigned_bits(hi), False
    return signed_bits(lo, hi), True


def bit_growth_bound(input_bits, weight_bits, count):
    """The textbook bound on a signed dot product's width: ``a + b + ceil(log2 N)``.

    Common practice (bit growth of a sum of N products of a-bit and b-bit two's complement
    numbers); the exact analysis must never need more than this.
    """
    return input_bits + weight_bits + max(0, (count - 1).bit_length())


def score_widths(score_lo, score_hi, score_bits, *, of="", field="unit"):
    """The fewest bits of the score, and the port's (``score_bits``, refused if narrower).

    ``of`` says whose range it is in the refusal (``" of the loadable weights"``); ``field`` is
    what to narrow when the score is wider than any port may be."""
    score_bits_min = signed_bits(score_lo, score_hi)
    if score_bits_min > MAX_SCORE_BITS:
        raise InputError(f"the score needs {score_bits_min} bits, more than the limit of "
                         f"{MAX_SCORE_BITS}; use narrower weights or input ranges", field=field)
    if score_bits is None:
        return score_bits_min, score_bits_min
    if score_bits < score_bits_min:
        raise InputError(f"score_bits {score_bits} cannot hold the score range "
                         f"[{score_lo}, {score_hi}]{of}; it needs at least {score_bits_min}",
                         field="score_bits")
    return score_bits_min, score_bits
