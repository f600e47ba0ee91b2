"""From real-valued weights to B-bit integer weights on raw codes, keeping the decisions.

A threshold unit's decision is unchanged by a positive scale of its weights and bias, so the
only thing integer rounding can change is which inputs land on which side. The scale is chosen,
from a list of candidates, to agree best with the real-valued decisions on the data; candidates
past the point where the largest weights clip are included, because one near-constant feature
(a tiny normalisation ``scale``) can fold into a weight so large that scaling by it rounds every
other weight to zero. A bank of units decided by argmax shares one scale, since only a common
scale leaves an argmax unchanged. With labelled data the integer weights are then refined by
perceptron-style corrections of one step, clipped to B bits, keeping the best (pocket). A budget
of nonzero signed digits per weight (:mod:`.digits`) is kept by both steps.
"""

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..model import MAX_BIAS_BITS, MAX_FEATURES, MAX_UNITS
from .budget import TotalCap, check_digit_budget, check_total_keeps_a_decision, prune_to_total
from .digits import DigitBudget, check_max_digits, digit_count, digits_per_unit

__all__ = ["FLOAT_ARRAYS", "FloatModel", "load_float_model", "fold_normalisation",
           "IntegerWeights", "to_integer_weights", "decide"]


# The arrays of a float model's .npz (documented in docs/model-format.md).
FLOAT_ARRAYS = ("coef", "intercept", "offset", "scale", "input_lo", "input_hi", "classes")


@dataclass(frozen=True)
class FloatModel:
    """A real-valued linear model as read from a float model's .npz, checked."""

    coef: np.ndarray        # (units, features)
    intercept: np.ndarray   # (units,)
    offset: np.ndarray      # (features,): the model saw (code - offset) / scale
    scale: np.ndarray
    input_lo: np.ndarray    # raw integer code range of each feature
    input_hi: np.ndarray
    source: str = "<float model>"
    classes: tuple | None = None   # data label of each decision, as in the model file


def load_float_model(path):
    """Read ``coef``, ``intercept``, optional ``offset``/``scale``, ``input_lo``/``input_hi``
    and optional ``classes``; every problem is one :class:`InputError` naming the array."""
    path = Path(path)
    source = str(path)
    arrays = _read_arrays(path, source)
    coef, intercept, offset, scale = _coefficients(arrays, source)
    units, features = coef.shape
    lo, hi = _input_ranges(arrays, features, source)
    classes = _classes(arrays, units, source)
    model = FloatModel(coef, intercept, offset, scale, lo.astype(np.int64), hi.astype(np.int64),
                       source, classes)
    with np.errstate(over="ignore", invalid="ignore"):
        weights, bias = fold_normalisation(model)
        reach = np.abs(weights) @ np.maximum(np.abs(lo), np.abs(hi)) + np.abs(bias)
    if not np.all(np.isfinite(reach)):
        raise InputError("the weights folded onto raw codes (coef / scale) give scores beyond "
                         "double precision; rescale the float model", source=source, field="coef")
    return model


def _read_arrays(path, source):
    """Every array of the archive, read without pickles; only :data:`FLOAT_ARRAYS`, and the
    ones a model needs."""
    try:
        archive = np.load(path, allow_pickle=False)
    except FileNotFoundError:
        raise InputError("no such file", source=source) from None
    except (OSError, ValueError) as error:
        raise InputError(f"not a readable .npz archive ({error})", source=source) from None
    with archive:
        arrays = {}
        for name in archive.files:
            try:
                arrays[name] = archive[name]
            except Exception as error:
                raise InputError(f"array {name!r} cannot be read ({error})",
                                 source=source) from None
    known = set(FLOAT_ARRAYS)
    unknown = sorted(set(arrays) - known)
    if unknown:
        raise InputError(f"unknown array {unknown[0]!r}; expected {', '.join(sorted(known))}",
                         source=source)
    for name in ("coef", "intercept", "input_lo", "input_hi"):
        if name not in arrays:
            raise InputError(f"missing array {name!r}", source=source)
    return arrays


def _real(arrays, name, shape, source):
    """Array ``name`` as finite float64 numbers of ``shape``."""
    value = arrays[name]
    if value.dtype.kind not in "iuf" or value.dtype == bool:
        raise InputError(f"must hold numbers, not {value.dtype}", source=source, field=name)
    value = value.astype(np.float64)
    if value.shape != shape:
        raise InputError(f"has shape {value.shape}, expected {shape}", source=source,
                         field=name)
    if not np.all(np.isfinite(value)):
        raise InputError("holds NaN or infinity", source=source, field=name)
    return value


def _coefficients(arrays, source):
    """``coef`` as (units, features) within the model's limits, ``intercept`` one per unit,
    ``offset`` (default 0) and ``scale`` (default 1, positive) one per feature."""
    coef = arrays["coef"]
    if coef.ndim == 1:
        coef = coef.reshape(1, -1)
    if coef.ndim != 2 or coef.shape[0] < 1 or coef.shape[1] < 1:
        raise InputError(f"must be (units, features), not shape {coef.shape}", source=source,
                         field="coef")
    units, features = coef.shape
    if features > MAX_FEATURES or units > MAX_UNITS:
        raise InputError(f"has {units} units of {features} features; a model takes at most "
                         f"{MAX_UNITS} units of {MAX_FEATURES} features", source=source,
                         field="coef")
    arrays["coef"] = coef
    coef = _real(arrays, "coef", (units, features), source)
    intercept = _real(arrays, "intercept", (units,), source) if np.ndim(arrays["intercept"]) \
        else _real(arrays, "intercept", (), source).reshape(1)
    if intercept.shape != (units,):
        raise InputError(f"has {intercept.shape[0]} values for {units} units", source=source,
                         field="intercept")
    offset = _real(arrays, "offset", (features,), source) if "offset" in arrays \
        else np.zeros(features)
    scale = _real(arrays, "scale", (features,), source) if "scale" in arrays \
        else np.ones(features)
    if np.any(scale <= 0):
        raise InputError(f"must be positive, not {scale[scale <= 0][0]}", source=source,
                         field="scale")
    return coef, intercept, offset, scale


def _input_ranges(arrays, features, source):
    """``input_lo`` and ``input_hi``: integer codes of at most 32 bits, ``lo <= hi``."""
    lo = _real(arrays, "input_lo", (features,), source)
    hi = _real(arrays, "input_hi", (features,), source)
    for name, value in (("input_lo", lo), ("input_hi", hi)):
        if np.any(value != np.round(value)):
            raise InputError("must hold integer codes", source=source, field=name)
        if np.any(np.abs(value) >= 2.0 ** 32):
            raise InputError("holds a code beyond 32 bits, wider than any input", source=source,
                             field=name)
    if np.any(lo > hi):
        j = int(np.flatnonzero(lo > hi)[0])
        raise InputError(f"input_lo[{j}] = {lo[j]:g} is above input_hi[{j}] = {hi[j]:g}",
                         source=source, field="input_lo")
    return lo, hi


def _classes(arrays, units, source):
    """The data label of each decision, if the archive has ``classes``, else None."""
    if "classes" not in arrays:
        return None
    values = arrays["classes"]
    wanted = 2 if units == 1 else units
    if values.dtype.kind not in "iu" or values.shape != (wanted,):
        raise InputError(f"must be {wanted} integer labels (one unit: the labels of "
                         f"decisions 0 and 1; a bank: one per unit)", source=source,
                         field="classes")
    classes = tuple(int(v) for v in values)
    if len(set(classes)) != len(classes):
        raise InputError(f"must be {wanted} different labels", source=source,
                         field="classes")
    return classes


def fold_normalisation(model):
    """Weights and bias on raw codes: ``coef.((x - offset)/scale) + b = W.x + b'``."""
    weights = model.coef / model.scale
    bias = model.intercept - weights @ model.offset
    return weights, bias


def decide(scores):
    """y = score > 0 for one unit; argmax (ties to the lowest index) for a bank."""
    scores = np.asarray(scores)
    if scores.ndim == 1 or scores.shape[1] == 1:
        return (scores.reshape(len(scores), -1)[:, 0] > 0).astype(np.int64)
    return np.argmax(scores, axis=1)


@dataclass(frozen=True)
class IntegerWeights:
    """Integer weights and biases inside a bit budget, and how they were chosen."""

    weights: np.ndarray     # (units, features) int64, each inside B-bit signed range
    biases: np.ndarray      # (units,) Python ints (object)
    scale: float            # the common (bank) or first unit's scale chosen
    agreement: float        # with the real-valued decisions on the rows used
    refined: bool
    max_digits: int | None = None   # the budget of nonzero signed digits per weight, if any
    digits: tuple = ()              # nonzero signed digits of each unit's weights, summed
    digit_budget: int | None = None     # the budget of nonzero signed digits in all, if any


def _round_weights(weights, bias, k, limit):
    w = np.clip(np.rint(weights * k), -limit, limit).astype(np.int64)
    b = np.rint(bias * k)
    return w, b


def _scores(w, b, x):
    return x.astype(np.float64) @ w.T.astype(np.float64) + b


def _candidates(weights, limit):
    magnitudes = np.sort(np.abs(weights[weights != 0]))[::-1]
    if len(magnitudes) == 0:
        return [1.0]
    base = limit / magnitudes[0]
    found = {base}
    # Scales that let the largest 1, 2, ... weights clip (near-constant features).
    for m in magnitudes[1: min(len(magnitudes), 24)]:
        found.add(limit / m)
    found.update(base * f for f in np.geomspace(0.25, 1.0, 9))
    return sorted(found)


def to_integer_weights(weights, bias, bits, x, *, labels=None, refine_epochs=0, seed=0,
                       centre=None, max_digits=None, digit_budget=None):
    """Integer weights within ``bits`` (signed) and integer biases for real ``weights``/``bias``.

    ``x`` are raw-code rows on which decisions are compared: the scale is chosen to agree best
    with the real-valued decisions there. With ``labels`` (decision indices: 0/1 for one unit,
    the unit index for a bank) and ``refine_epochs``, the weights are then corrected on those
    rows, one step at a time, clipped to ``bits``, keeping the most accurate. ``max_digits`` K:
    each weight becomes the nearest value of at most K nonzero signed digits (at the scale of
    :func:`_within_digits`), and a correction that leaves the budget moves to the nearest value
    within it. ``digit_budget`` N: at most N nonzero signed digits over all the weights, see
    :func:`_within_total`.
    """
    max_digits = check_max_digits(max_digits)
    digit_budget = check_digit_budget(digit_budget)
    weights = np.atleast_2d(np.asarray(weights, dtype=np.float64))
    bias = np.atleast_1d(np.asarray(bias, dtype=np.float64))
    x = np.asarray(x, dtype=np.int64)
    limit = (1 << (bits - 1)) - 1
    budget = DigitBudget(max_digits, limit) if max_digits is not None else None
    wanted = decide(_scores(weights, bias, x))

    def agreement_of(w, b):
        return float(np.mean(decide(_scores(w, b, x)) == wanted))

    # One scale for all units: exact for a bank (argmax), and for one unit the only unit.
    tried = []
    best = None
    for k in _candidates(weights, limit):
        with np.errstate(over="ignore", invalid="ignore"):
            w, b = _round_weights(weights, bias, k, limit)
        if not np.all(np.abs(b) < 2.0 ** MAX_BIAS_BITS):   # also NaN: no model has this bias
            continue
        tried.append((k, b))
        score = agreement_of(w, b)
        if best is None or score > best[0] + 1e-12:
            best = (score, k, w, b)
    if best is None:
        raise InputError(f"the bias is too large next to the weights: at {bits}-bit weights it "
                         f"needs more than {MAX_BIAS_BITS + 1} bits", field="intercept")
    agreement, k, w, b = best
    if budget is not None:
        agreement, k, w, b = _within_digits(weights, k, tried, budget, agreement_of)
    refined = False
    if labels is not None and refine_epochs:
        w, b = _refine(w, b, x, np.asarray(labels), limit, refine_epochs, seed, centre,
                       budget)
        refined = True
        agreement = agreement_of(w, b)
    if budget is not None:
        _check_some_decision_kept(w, b, x, wanted, budget,
                                  lambda: to_integer_weights(weights, bias, bits, x, labels=labels,
                                                             refine_epochs=refine_epochs,
                                                             seed=seed, centre=centre))
    if digit_budget is not None:
        w, b = _within_total(w, b, x, wanted, labels if refined else None, digit_budget, limit,
                             (refine_epochs, seed, centre, budget))
        agreement = agreement_of(w, b)
    biases = np.array([int(v) for v in b], dtype=object)
    return IntegerWeights(w, biases, float(k), agreement, refined, max_digits,
                          tuple(digits_per_unit(w)), digit_budget)


def _within_total(w, b, x, wanted, labels, total, limit, refinement):
    """The weights within ``total`` digits in all: digits dropped one at a time where the
    training decisions (``labels``, else the real-valued ones) lose least
    (:func:`.budget.prune_to_total`), then, with labels, the refinement again from there with
    its corrections capped at ``total`` (:class:`.budget.TotalCap`); its pocket keeps the
    pruned weights unless a correction does better."""
    targets = np.asarray(labels) if labels is not None else wanted
    before = decide(_scores(w, b, x))
    w = prune_to_total(w, b, x, targets, total, limit)
    if labels is not None:
        epochs, seed, centre, budget = refinement
        w, b = _refine(w, b, x, targets, limit, epochs, seed, centre, budget,
                       TotalCap(w, total, limit))
    check_total_keeps_a_decision(before, decide(_scores(w, b, x)), wanted, total)
    return w, b


def _within_digits(weights, chosen, tried, budget, agreement_of):
    """The scale and weights within the digit budget: each weight the nearest value of at most
    K digits, at the scale that best keeps the decisions so, among the scales whose weights have
    no more digits in all than at the scale the bits alone chose. There no weight gains a digit,
    so before the refinement the budget never costs more digits in all than no budget. Choosing
    on agreement alone was measured to give more digits in all at K = 2 than without a budget,
    and lower accuracy (digits set, 6 bits, fitted: 941 against 890 digits, test accuracy 0.951
    against 0.958 with this cap).
    """
    options = []
    for order, (k, b) in enumerate(tried):
        w = budget.nearest(weights * k)
        options.append((agreement_of(w, b), int(digit_count(w).sum()), k == chosen, order, k,
                        w, b))
    cap = next(digits for _, digits, is_chosen, *_ in options if is_chosen)
    best = max((o for o in options if o[1] <= cap), key=lambda o: (o[0], -o[1], -o[3]))
    agreement, _, _, _, k, w, b = best
    return agreement, k, w, b


def _check_some_decision_kept(w, b, x, wanted, budget, unbudgeted):
    """Refuse a digit budget under which every row gets one decision, where the real-valued
    weights' decisions differ and the same bits without the budget keep some apart."""
    decided = decide(_scores(w, b, x))
    if len(np.unique(decided)) > 1 or len(np.unique(wanted)) == 1:
        return
    plain = unbudgeted()
    if len(np.unique(decide(_scores(plain.weights, plain.biases.astype(np.float64), x)))) > 1:
        digits = f"{budget.k} nonzero signed digit" + ("s" if budget.k > 1 else "")
        raise InputError(f"with at most {digits} per weight every row "
                         f"gets the same decision, where the real-valued weights' decisions "
                         f"differ; allow more digits per weight", field="max_digits")


def _refine(w, b, x, labels, limit, epochs, seed, centre, budget=None, cap=None):
    """Perceptron-style corrections of one step per weight (the sign of the centred code),
    kept within the digit ``budget`` if there is one: a weight a step takes out of it moves to
    the nearest value within it, often back where it was (4 + 1 goes back to 4 with one digit),
    so only small weights move. Going on to the next value in the step's direction instead
    (4 + 1 to 8) was measured to lose training accuracy: digits set, 6 bits, K = 1, 0.958
    against 0.973, and more digits in all (601 against 547)."""
    rng = np.random.default_rng(seed)
    w = w.copy()
    b = b.astype(np.float64).copy()
    centre = np.zeros(x.shape[1]) if centre is None else np.asarray(centre)
    step_rows = np.sign(x - centre).astype(np.int64)
    units = w.shape[0]

    def accuracy(wc, bc):
        return float(np.mean(decide(_scores(wc, bc, x)) == labels))

    def within(row, step):
        moved = np.clip(row + step, -limit, limit)
        moved = moved if budget is None else budget.nearest(moved)
        return moved if cap is None else cap.keep(row, moved)

    best = (accuracy(w, b), w.copy(), b.copy())
    bias_step = max(1.0, float(np.abs(x - centre).mean()))
    for _ in range(epochs):
        for i in rng.permutation(len(x)):
            scores = w.astype(np.float64) @ x[i] + b
            if units == 1:
                predicted = int(scores[0] > 0)
                if predicted == labels[i]:
                    continue
                sign = 1 if labels[i] else -1
                w[0] = within(w[0], sign * step_rows[i])
                b[0] += sign * bias_step
            else:
                predicted = int(np.argmax(scores))
                if predicted == labels[i]:
                    continue
                w[labels[i]] = within(w[labels[i]], step_rows[i])
                w[predicted] = within(w[predicted], -step_rows[i])
                b[labels[i]] += bias_step
                b[predicted] -= bias_step
        current = accuracy(w, b)
        if current > best[0]:
            best = (current, w.copy(), b.copy())
    return best[1], np.rint(best[2])
