"""The perceptron rule as the fabric runs it: saturating, in a fixed order, with the updates
of the samples still in the pipeline not yet seen.

The hardware (``build --on-chip-learning``) keeps its weights and biases in registers of the
declared widths. A labelled sample is classified with the registers as they are when it
enters; when its result leaves the pipeline, each unit whose decision differs from its own
target bit moves every weight by ``eta x`` and its bias by ``bias_step`` (towards the target),
each sum clamped to the register's range, so that no update can overflow. ``eta`` is a power
of two: ``x << shift`` or, for a negative shift, ``x >> -shift`` (an arithmetic shift: the
floor of ``x eta``). With samples arriving back to back, sample ``k`` is classified before
the updates of the ``delay`` samples just before it (``delay`` = the pipeline's latency)
have landed; samples further apart see every earlier update.

:func:`learn_in_order` is that rule on a sequence; :func:`fit_on_chip` repeats it over a
dataset epoch by epoch, so that a host can predict exactly what the hardware learns.
"""

from dataclasses import dataclass, field, replace
from fractions import Fraction

import numpy as np

from ..errors import InputError
from ..model import Unit, check_ranges
from .perceptron import accuracy

__all__ = ["OnChipRule", "learn_in_order", "fit_on_chip", "OnChipLog", "parse_learning_rate",
           "unit_targets", "MIN_SHIFT", "MAX_SHIFT", "MAX_REGISTER_BITS"]

MIN_SHIFT, MAX_SHIFT = -32, 16
MAX_REGISTER_BITS = 32   # every register is read back whole in one word


def parse_learning_rate(text):
    """``eta`` as written (``1/64``, ``0.25``, ``2``): its power of two, or an error that says
    what is wrong."""
    try:
        value = Fraction(str(text).strip())
    except (ValueError, ZeroDivisionError):
        raise InputError(f"must be a power of two such as 1/64, 0.25 or 2, not {text!r}",
                         field="learning_rate") from None
    if value <= 0 or (value.numerator & (value.numerator - 1)) or \
            (value.denominator & (value.denominator - 1)) or \
            (value.numerator != 1 and value.denominator != 1):
        raise InputError(f"must be a power of two such as 1/64, 0.25 or 2 (the update is a "
                         f"shift), not {text!r}", field="learning_rate")
    shift = value.numerator.bit_length() - value.denominator.bit_length()
    if not MIN_SHIFT <= shift <= MAX_SHIFT:
        raise InputError(f"must be from 2^{MIN_SHIFT} to 2^{MAX_SHIFT}, not {text!r}",
                         field="learning_rate")
    return shift


def _signed_range(bits):
    return -(1 << (bits - 1)), (1 << (bits - 1)) - 1


@dataclass(frozen=True)
class OnChipRule:
    """The update: ``eta = 2**shift``, the bias's step, the registers' signed widths.

    Examples
    --------
    >>> rule = OnChipRule(shift=-2, bias_step=4, weight_bits=4, bias_bits=8)
    >>> rule.steps(np.array([7, -7, 3])).tolist()      # floor(x / 4)
    [1, -2, 0]
    >>> rule.update([6, 0, -8], 100, np.array([7, -7, 3]), +1)
    ([7, -2, -8], 104)
    """

    shift: int = 0
    bias_step: int = 1
    weight_bits: int = 8
    bias_bits: int = 16

    def __post_init__(self):
        if not isinstance(self.shift, int) or not MIN_SHIFT <= self.shift <= MAX_SHIFT:
            raise InputError(f"the learning rate's power of two must be an integer from "
                             f"{MIN_SHIFT} to {MAX_SHIFT}, not {self.shift!r}",
                             field="learning_rate")
        for key in ("weight_bits", "bias_bits"):
            bits = getattr(self, key)
            if not isinstance(bits, int) or not 2 <= bits <= MAX_REGISTER_BITS:
                raise InputError(f"must be an integer from 2 to {MAX_REGISTER_BITS} with "
                                 f"on-chip learning, not {bits!r}", field=key)
        lo, hi = _signed_range(self.bias_bits)
        if not isinstance(self.bias_step, int) or not 1 <= self.bias_step <= hi:
            raise InputError(f"must be an integer from 1 to {hi} (the bias register's "
                             f"largest value), not {self.bias_step!r}", field="bias_step")

    @property
    def learning_rate(self):
        """``eta`` as a fraction."""
        return Fraction(2) ** self.shift

    @property
    def weight_range(self):
        return _signed_range(self.weight_bits)

    @property
    def bias_range(self):
        return _signed_range(self.bias_bits)

    def steps(self, x):
        """``eta x`` of each feature, as the shifter makes it (floor for ``eta < 1``)."""
        x = np.asarray(x, dtype=np.int64)
        return x << self.shift if self.shift >= 0 else x >> -self.shift

    def update(self, weights, bias, steps, sign):
        """One unit's registers after a mistake: ``sign`` +1 (target 1, decided 0) or -1."""
        lo, hi = self.weight_range
        moved = [min(hi, max(lo, int(w) + sign * int(s))) for w, s in zip(weights, steps)]
        blo, bhi = self.bias_range
        return moved, min(bhi, max(blo, int(bias) + sign * self.bias_step))

    def check_holds(self, model):
        """The model's weights and biases are where the registers start: they must fit."""
        lo, hi = self.weight_range
        weights = [w for u in model.units for w in u.weights]
        if weights and not lo <= min(weights) <= max(weights) <= hi:
            raise InputError(f"{self.weight_bits} bits cannot hold the starting weights (from "
                             f"{min(weights)} to {max(weights)}); declare more weight bits",
                             field="weight_bits")
        blo, bhi = self.bias_range
        biases = [u.bias for u in model.units]
        if not blo <= min(biases) <= max(biases) <= bhi:
            raise InputError(f"{self.bias_bits} bits cannot hold the starting biases (from "
                             f"{min(biases)} to {max(biases)}); declare more bias bits",
                             field="bias_bits")


def learn_in_order(weights, biases, rows, targets, rule, *, delay=0, labelled=None):
    """The rule over ``rows`` in order, from ``weights`` (units x features) and ``biases``.

    ``targets``: per row, one bit per unit (shape rows x units, or rows for one unit).
    ``labelled``: which rows learn (default all); the others are only classified. ``delay``:
    how many rows before each are still in flight, their updates not yet seen (the pipeline's
    latency for rows back to back). Returns ``(weights, biases, decided, mistakes)``: the
    final registers, each row's per-unit decisions as the hardware made them, and how many
    rows updated some unit.
    """
    w = np.array(weights, dtype=np.int64).reshape(len(biases), -1)
    b = np.array(biases, dtype=np.int64)
    rows = np.asarray(rows, dtype=np.int64)
    targets = np.asarray(targets, dtype=np.int64).reshape(len(rows), len(b))
    labelled = np.ones(len(rows), dtype=bool) if labelled is None else np.asarray(labelled)
    decided = np.zeros((len(rows), len(b)), dtype=np.int64)
    pending = []          # (row, decisions) classified and not yet applied
    mistakes = 0
    for k in range(len(rows)):
        while len(pending) > delay:
            mistakes += _apply(w, b, rows, targets, rule, *pending.pop(0))
        decided[k] = (w @ rows[k] + b) > 0
        if labelled[k]:
            pending.append((k, decided[k]))
        else:
            pending.append((k, None))
    for item in pending:
        mistakes += _apply(w, b, rows, targets, rule, *item)
    return w, b, decided, mistakes


def _apply(w, b, rows, targets, rule, k, decisions):
    if decisions is None:
        return 0
    wrong = np.flatnonzero(decisions != targets[k])
    if len(wrong) == 0:
        return 0
    steps = rule.steps(rows[k])
    for unit in wrong:
        sign = 1 if targets[k, unit] else -1
        moved, bias = rule.update(w[unit], b[unit], steps, sign)
        w[unit], b[unit] = moved, bias
    return 1


@dataclass
class OnChipLog:
    """What the in-fabric rule did, epoch by epoch."""

    mistakes_per_epoch: list = field(default_factory=list)
    train_accuracy: float | None = None

    def as_dict(self):
        return {"mistakes_per_epoch": self.mistakes_per_epoch,
                "epochs_run": len(self.mistakes_per_epoch),
                "train_accuracy": self.train_accuracy}


def unit_targets(model, labels):
    """Each row's target bit per unit: one-vs-rest by the model's class labels (one unit:
    its positive label)."""
    labels = np.asarray(labels)
    if not model.is_bank:
        return (labels == model.labels[1]).astype(np.int64).reshape(-1, 1)
    return np.stack([(labels == c).astype(np.int64) for c in model.labels], axis=1)


def fit_on_chip(dataset, start, rule, *, epochs=20, until_clean=True, delay=0):
    """Run the fabric's rule over ``dataset``'s rows in file order, epoch after epoch, from
    ``start``'s weights (a :class:`~thresh2hdl.model.Model` whose inputs the data must fit).
    Returns ``(model, log)``: the registers after the last epoch, as a model."""
    rule.check_holds(start)
    check_ranges(dataset, start.features)
    if dataset.x.shape[1] != len(start.features):
        raise InputError(f"has {dataset.x.shape[1]} feature columns and the starting model "
                         f"{len(start.features)}", source=dataset.source)
    unknown = sorted(set(np.unique(dataset.labels).tolist()) - set(start.labels))
    if unknown:
        raise InputError(f"has labels {unknown} that the starting model does not decide "
                         f"(its labels: {list(start.labels)})", source=dataset.source,
                         field="label")
    targets = unit_targets(start, dataset.labels)
    w = [u.weights for u in start.units]
    b = [u.bias for u in start.units]
    log = OnChipLog()
    for _ in range(epochs):
        w, b, _, mistakes = learn_in_order(w, b, dataset.x, targets, rule, delay=delay)
        log.mistakes_per_epoch.append(int(mistakes))
        if until_clean and mistakes == 0:
            break
    units = [Unit(u.name, tuple(int(v) for v in row), int(bias))
             for u, row, bias in zip(start.units, w, b)]
    model = replace(start, units=units)
    log.train_accuracy = accuracy(model, dataset.x, dataset.labels)
    return model, log
