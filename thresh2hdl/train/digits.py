"""Weights with few nonzero signed digits, the cost of a constant product in ``shiftadd``.

``shiftadd`` builds ``x * w`` from one shifted copy of ``x`` per nonzero digit of ``w``'s
canonical signed-digit (non-adjacent) form, so a budget of K digits per weight bounds the adders
of every product. Coefficients chosen as sums of a few signed powers of two are the classic way to
make FIR filters without multipliers (Lim and Parker, 1983); the count of nonzero digits of n is
OEIS A007302, ``popcount(n xor 3n)``. This module counts them and moves integers into a budget;
:func:`thresh2hdl.train.quantize.to_integer_weights` uses it while scaling and refining.
"""

from functools import lru_cache

import numpy as np

from ..errors import InputError

__all__ = ["digit_count", "digits_per_unit", "check_digits_option", "check_max_digits",
           "DigitBudget",
           "one_digit_fewer", "nearest_within"]


def digit_count(values):
    """Nonzero canonical signed digits of each integer (sign ignored): ``popcount(n ^ 3n)``."""
    magnitude = np.abs(np.asarray(values, dtype=np.int64))
    return np.bitwise_count(np.bitwise_xor(magnitude, 3 * magnitude)).astype(np.int64)


def digits_per_unit(weights):
    """The nonzero digits of each unit's weights (rows), summed: the adders ``shiftadd`` pays."""
    return [int(digit_count(row).sum()) for row in np.atleast_2d(np.asarray(weights,
                                                                            dtype=np.int64))]


def check_digits_option(value, field, what):
    """``None`` (no budget) or a positive integer; anything else is refused by ``field``'s
    name, saying it must be a positive whole number of ``what``."""
    if value is not None and (isinstance(value, bool) or not isinstance(value, (int, np.integer))
                              or value < 1):
        raise InputError(f"must be a positive whole number of {what}, not {value!r}",
                         field=field)
    return None if value is None else int(value)


def check_max_digits(value):
    """The budget per weight: ``None`` or a positive integer."""
    return check_digits_option(value, "max_digits", "nonzero digits per weight")


def _count(v):
    return (abs(v) ^ (3 * abs(v))).bit_count()


# Nearest values within a budget. Every x of at most k digits has a top digit 2^M with
# (2/3) 2^M < |x| < (4/3) 2^M, so the largest x <= v (or smallest x >= v) for v > 0, which lies
# in [p, 2p] for p = 2^floor(log2 v), has M = log2 p or log2 p + 1; the rest is the same
# question for v - 2^M with one digit fewer. Two branches a level, at most k levels.

@lru_cache(maxsize=1 << 16)
def _nearest(v, k, up):
    """The smallest integer of at most ``k`` nonzero digits that is ``>= v`` (``up``), else the
    largest that is ``<= v`` (None: none is). A negative ``v`` is the mirror question."""
    if _count(v) <= k:
        return v
    if k == 0:
        return 0 if (v <= 0 if up else v >= 0) else None
    if v < 0:
        found = _nearest(-v, k, not up)
        return None if found is None else -found
    p = 1 << (v.bit_length() - 1)
    found = [top + rest for top in (p, 2 * p)
             if (rest := _nearest(v - top, k - 1, up)) is not None]
    return min(found) if up else max(found)


def _below(v, k):
    return _nearest(v, k, False)


def _above(v, k):
    return _nearest(v, k, True)


class DigitBudget:
    """At most ``k`` nonzero signed digits per weight, inside ``[-limit, limit]``."""

    def __init__(self, k, limit):
        self.k = k
        self.limit = int(limit)

    def _up(self, v):
        x = _above(v, self.k)
        return x if x <= self.limit else _below(self.limit, self.k)

    def _down(self, v):
        x = _below(v, self.k)
        return x if x >= -self.limit else _above(-self.limit, self.k)

    def nearest(self, real):
        """Each real value moved to the nearest integer within the budget (ties to the smaller
        magnitude). The integer nearest ``r`` lies beside ``rint(r)``: the budget's neighbours
        of ``rint(r)`` are the only candidates (past ``limit``, the largest within it)."""
        real = np.clip(np.nan_to_num(np.asarray(real, dtype=np.float64)), -self.limit,
                       self.limit)
        values, where = np.unique(np.rint(real).astype(np.int64), return_inverse=True)
        down = np.array([self._down(int(v)) for v in values], dtype=np.int64)[where]
        up = np.array([self._up(int(v)) for v in values], dtype=np.int64)[where]
        gap_down, gap_up = np.abs(real - down), np.abs(real - up)
        take_up = (gap_up < gap_down) | ((gap_up == gap_down) & (np.abs(up) < np.abs(down)))
        return np.where(take_up, up, down).reshape(real.shape)


def one_digit_fewer(value, limit):
    """The integers of one nonzero digit fewer than ``value`` nearest it below and above,
    inside ``[-limit, limit]`` (one or two values; none for 0): a digit dropped or shrunk."""
    value = int(value)
    fewer = _count(value) - 1
    if fewer < 0:
        return ()
    found = {_below(value, fewer), _above(value, fewer)}
    return tuple(sorted(v for v in found if v is not None and abs(v) <= limit))


def nearest_within(real, k, limit):
    """``real`` moved to the nearest integer of at most ``k`` nonzero digits (0 for k = 0)."""
    if k == 0:
        return np.zeros(np.shape(real), dtype=np.int64)
    return DigitBudget(k, limit).nearest(real)
