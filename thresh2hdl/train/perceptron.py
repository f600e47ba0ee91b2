"""Perceptron training on raw integer codes, giving an integer model that is exact on raw codes.

Training runs on centred codes with a bias input at the codes' scale: ``a = (x - c, S)``, where
``c`` is the midpoint of each feature's declared range and ``S`` half the widest span. A bias input
of 1 beside 10-12-bit codes makes the bias learn thousands of times slower than the weights, and
the rule can take hundreds of epochs on separable data; at the codes' scale it converges in a
few. Because ``w . (x - c) + w_b S = w . x + (w_b S - w . c)``, the trained integers fold into an
integer model on raw codes exactly.
"""

from dataclasses import dataclass, field

import numpy as np

from ..model import FeatureFormat, MAX_FEATURES, Model, Unit, check_ranges
from ..errors import InputError
from ..names import check_identifier
from .budget import check_digit_budget
from .digits import check_max_digits, digits_per_unit
from .kernel import epoch_walker
from .quantize import to_integer_weights

__all__ = ["FitOptions", "FitLog", "train_unit", "fit", "choice_lines", "weight_width", "RULES",
           "KEEP", "DEFAULT_MAX_WEIGHT_BITS", "class_unit_name", "predict", "accuracy"]

RULES = ("classic", "symmetric")
KEEP = ("last", "pocket", "averaged")
DEFAULT_MAX_WEIGHT_BITS = 12


@dataclass(frozen=True)
class FitOptions:
    """How to train. ``rule``: ``classic`` updates by ``(y - y_hat) x`` with ``y_hat = z > 0``;
    ``symmetric`` updates by ``s x`` whenever ``s z <= 0`` (``s = +-1``), as reference libraries
    do. ``keep``: the last weights, the ``pocket`` ones (best training accuracy at the end of an
    epoch) or the ``averaged`` ones (mean over every step, rounded). The default is ``pocket``:
    on data that is not separable the rule never settles, and the last weights are wherever the
    last mistakes left them (held out on ``test_train.py``'s synthetic noisy 12-bit sets, the
    defaults scored 0.81-0.85 against 0.66-0.79 for the last weights at full precision).

    ``weight_bits`` B: training runs at full integer precision, the result is scaled into B-bit
    signed range (the scale that best keeps its decisions on the training rows, letting the
    largest weights clip), then training continues inside the budget for ``refine_epochs``
    epochs with every correction one step per weight and clipped to B bits, keeping the most
    accurate weights. Halving or clipping during the first phase instead was measured to lose
    far more (digits, B = 6: 0.54 test accuracy with halving).

    Without ``weight_bits``, weights wider than ``max_weight_bits`` (default 12) at full
    precision are brought into that many bits the same way; None keeps full precision. Raw
    12-bit codes easily train into 16-22-bit weights, and every multiplier and adder of the
    circuit grows with them; 12 bits lost no held-out accuracy on the noisy sets tried.

    ``max_digits`` K: every weight has at most K nonzero canonical signed digits, the adders of
    its product in ``shiftadd``: the weights are brought into the bit budget (the full-precision
    width when there is none) at the nearest values within K digits, and the refinement keeps
    them there (see :func:`~thresh2hdl.train.quantize.to_integer_weights`). ``digit_budget`` N:
    at most N nonzero signed digits over all the weights, dropped where the training decisions
    lose least, the refinement capped at N (see :mod:`~thresh2hdl.train.budget`)."""

    rule: str = "classic"
    keep: str = "pocket"
    epochs: int = 100
    until_clean: bool = True
    shuffle: bool = True
    seed: int = 0
    holdout: float = 0.0
    weight_bits: int | None = None
    max_weight_bits: int | None = DEFAULT_MAX_WEIGHT_BITS
    centre: bool = True
    bias_input: int | None = None     # default: half the widest declared span
    refine_epochs: int = 20
    max_digits: int | None = None
    digit_budget: int | None = None

    def __post_init__(self):
        if self.rule not in RULES:
            raise InputError(f"must be one of {', '.join(RULES)}, not {self.rule!r}",
                             field="rule")
        if self.keep not in KEEP:
            raise InputError(f"must be one of {', '.join(KEEP)}, not {self.keep!r}",
                             field="keep")
        if not isinstance(self.epochs, int) or not 1 <= self.epochs <= 100_000:
            raise InputError(f"must be an integer from 1 to 100000, not {self.epochs!r}",
                             field="epochs")
        if not 0.0 <= self.holdout < 1.0:
            raise InputError(f"must be a fraction from 0 to below 1, not {self.holdout!r}",
                             field="holdout")
        for bits in (self.weight_bits, self.max_weight_bits):
            if bits is not None and (not isinstance(bits, int) or not 2 <= bits <= 32):
                raise InputError(f"must be an integer from 2 to 32 or 'full', not {bits!r}",
                                 field="weight_bits")
        if self.bias_input is not None and self.bias_input < 1:
            raise InputError(f"must be a positive integer, not {self.bias_input!r}",
                             field="bias_input")
        check_max_digits(self.max_digits)
        check_digit_budget(self.digit_budget)


@dataclass
class FitLog:
    """What training did, for the fit log (``as_dict``) and the command's summary."""

    mistakes_per_epoch: list = field(default_factory=list)   # per unit: list of counts
    train_accuracy: float | None = None
    holdout_accuracy: float | None = None
    epochs_run: list = field(default_factory=list)
    warnings: list = field(default_factory=list)
    full_precision_bits: int | None = None   # signed width of the widest weight as trained
    budget_bits: int | None = None           # the budget applied (None: full precision kept)
    weight_bits: int | None = None           # signed width of the widest weight kept
    digits_per_unit: list = field(default_factory=list)   # nonzero signed digits, per unit

    def as_dict(self):
        return {"mistakes_per_epoch": self.mistakes_per_epoch, "epochs_run": self.epochs_run,
                "train_accuracy": self.train_accuracy, "holdout_accuracy": self.holdout_accuracy,
                "full_precision_weight_bits": self.full_precision_bits,
                "weight_budget_bits": self.budget_bits, "weight_bits": self.weight_bits,
                "digits_per_unit": self.digits_per_unit,
                "digits_total": sum(self.digits_per_unit), "warnings": self.warnings}


def weight_width(weights):
    """Signed two's-complement bits of the widest of ``weights`` (rows of integers)."""
    values = [int(v) for row in weights for v in row] or [0]
    return max((v if v >= 0 else ~v).bit_length() for v in values) + 1


def train_unit(a, target, options, rng):
    """Train one unit on augmented integer rows ``a`` (last column the bias input).

    Returns the kept weights (int64, same length as a row), the mistakes of each epoch, and
    for ``keep="averaged"`` the exact mean weights (floats) before rounding, else None.

    Each epoch's row order comes from ``rng`` here; the walk through the rows is
    :func:`~thresh2hdl.train.kernel.walk_epoch`, compiled (tests compare it, compiled and not,
    with a literal one-row loop and with scikit-learn).
    """
    a = np.ascontiguousarray(a, dtype=np.int64)
    target = np.ascontiguousarray(target, dtype=bool)
    n, d = a.shape
    w = np.zeros(d, dtype=np.int64)
    sign = np.where(target, 1, -1).astype(np.int64)
    total = np.zeros(d, dtype=np.int64)
    steps = 0
    best, best_correct = w.copy(), -1
    mistakes_log = []
    walk = epoch_walker()
    in_file_order = np.arange(n, dtype=np.int64)
    for _ in range(options.epochs):
        order = rng.permutation(n).astype(np.int64, copy=False) if options.shuffle else in_file_order
        mistakes = int(walk(a, order, sign, target, w, total, options.rule == "classic",
                            options.keep == "averaged"))
        steps += n
        mistakes_log.append(mistakes)
        if options.keep == "pocket":
            correct = int(np.count_nonzero((a @ w > 0) == target))
            if correct > best_correct:
                best, best_correct = w.copy(), correct
        if options.until_clean and mistakes == 0:
            break
    if options.keep == "pocket":
        return best, mistakes_log, None
    if options.keep == "averaged":
        mean = total / max(steps, 1)
        return np.rint(mean).astype(np.int64), mistakes_log, mean
    return w, mistakes_log, None


def class_unit_name(label):
    """The unit name of a class label: ``class_3``, or ``class_neg3`` for -3."""
    return f"class_{label}" if label >= 0 else f"class_neg{-label}"


def _formats_from_data(x, names, log):
    formats = []
    for j, name in enumerate(names):
        lo, hi = int(x[:, j].min()), int(x[:, j].max())
        is_signed = lo < 0
        bits = 1
        while True:
            code_lo, code_hi = ((-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if is_signed
                                else (0, (1 << bits) - 1))
            if code_lo <= lo and hi <= code_hi:
                break
            bits += 1
        if bits > 32:
            raise InputError(f"column {name!r} spans [{lo}, {hi}], more than 32 bits",
                             field="data")
        formats.append(FeatureFormat(name, bits, is_signed, lo, hi))
    log.warnings.append("no input formats declared: the hardware is sized only for the ranges "
                        "seen in the data; declare --input-bits (or a formats file) to size it "
                        "for every code the sensor can send")
    return formats


def predict(weights, biases, x):
    """Decisions of integer units: y for one unit, argmax (ties to the lowest) for a bank."""
    scores = np.asarray(x, dtype=np.int64) @ np.asarray(weights, dtype=np.int64).T \
        + np.asarray(biases, dtype=np.int64)
    if scores.shape[1] == 1:
        return (scores[:, 0] > 0).astype(np.int64)
    return np.argmax(scores, axis=1)


def fit(dataset, *, formats=None, options=FitOptions(), module="thresh_unit"):
    """Train integer threshold units on ``dataset`` and fold them onto raw codes.

    One unit for two classes; one unit per class (one-vs-rest, argmax) for more. ``formats``
    (a list of :class:`FeatureFormat`, one per column) declares the input ranges; without it the
    ranges come from the data, with a warning. Returns ``(model, log)``.
    """
    log = FitLog()
    try:
        check_identifier(module, "module name")
    except ValueError as error:
        raise InputError(str(error), field="module") from None
    formats = _checked_formats(dataset, formats, log)
    x, labels, classes = dataset.x, dataset.labels, dataset.classes
    train_idx, held_idx = _holdout_split(dataset, options)

    centre = np.array([(f.min + f.max) // 2 for f in formats], dtype=np.int64) \
        if options.centre else np.zeros(len(formats), dtype=np.int64)
    scale = options.bias_input or max(1, max((f.max - f.min + 1) // 2 for f in formats))
    a = np.empty((len(x), x.shape[1] + 1), dtype=np.int64)
    np.subtract(x, centre, out=a[:, :-1])
    a[:, -1] = scale

    unit_classes = [classes[1]] if len(classes) == 2 else list(classes)
    weights, biases = [], []
    for k, positive in enumerate(unit_classes):
        w, mistakes, _ = train_unit(a[train_idx], labels[train_idx] == positive, options,
                                    np.random.default_rng([options.seed, k]))
        log.mistakes_per_epoch.append(mistakes)
        log.epochs_run.append(len(mistakes))
        weights.append(w[:-1])
        # Fold centring and the bias input into one integer bias on raw codes (exact).
        biases.append(int(w[-1]) * int(scale) - int(w[:-1] @ centre))

    log.full_precision_bits = weight_width(weights)
    log.budget_bits = _weight_budget(options, log)
    digits_only = options.max_digits is not None or options.digit_budget is not None
    bits = log.budget_bits if log.budget_bits is not None or not digits_only \
        else log.full_precision_bits      # a digit budget alone: scaled within the same width
    if bits is not None:
        weights, biases = _into_budget(weights, biases, bits, x[train_idx],
                                       labels[train_idx], unit_classes, options, centre)

    labels_out = tuple(classes) if len(classes) > 2 else (classes[0], classes[1])
    try:
        units = [Unit(class_unit_name(c) if len(unit_classes) > 1 else "unit",
                      tuple(int(v) for v in w), b)
                 for c, w, b in zip(unit_classes, weights, biases)]
        model = Model(module=module, features=formats, units=units, class_labels=labels_out)
    except ValueError as error:    # weights past 32 bits, say: a budget keeps them narrow
        raise InputError(f"the trained model is refused: {error}; a smaller --weight-bits "
                         f"keeps the weights narrow", source=dataset.source) from None
    log.weight_bits = weight_width(u.weights for u in model.units)
    log.digits_per_unit = digits_per_unit([u.weights for u in model.units])
    log.train_accuracy = accuracy(model, x[train_idx], labels[train_idx])
    if len(held_idx):
        log.holdout_accuracy = accuracy(model, x[held_idx], labels[held_idx])
    return model, log


def _checked_formats(dataset, formats, log):
    """The dataset's classes and columns within a model's limits, and the input formats: the
    given ones, checked against the data, or ones that fit the data (with a warning)."""
    x, classes = dataset.x, dataset.classes
    if len(classes) < 2:
        raise InputError(f"has one class only ({classes[0] if classes else 'none'}); training "
                         f"needs at least two", source=dataset.source, field="label")
    if len(classes) > 256:
        raise InputError(f"has {len(classes)} classes, more than the limit of 256 units",
                         source=dataset.source, field="label")
    if x.shape[1] > MAX_FEATURES:
        raise InputError(f"has {x.shape[1]} feature columns, more than the limit of "
                         f"{MAX_FEATURES}", source=dataset.source, field="line 1")
    if formats is None:
        formats = _formats_from_data(x, dataset.feature_names, log)
    elif len(formats) != x.shape[1]:
        raise InputError(f"{len(formats)} input formats declared for {x.shape[1]} feature "
                         f"columns", source=dataset.source)
    check_ranges(dataset, formats)
    return formats


def _holdout_split(dataset, options):
    """Rows to train on and row indices to hold out (``options.holdout`` of the rows, at
    random). Without a holdout, every row as a slice: the arrays' views, not copies."""
    count = len(dataset.labels)
    if not options.holdout:
        return slice(None), np.arange(0)
    order = np.random.default_rng(options.seed).permutation(count)
    held = int(round(options.holdout * count))
    train_idx, held_idx = order[: count - held], order[count - held:]
    if held == 0 or len(train_idx) == 0:
        raise InputError("the held-out split leaves no rows on one side; use more data or "
                         "another --holdout", source=dataset.source)
    return train_idx, held_idx


def _weight_budget(options, log):
    """The bit budget to bring the weights into (None: keep full precision), warning when
    full precision is kept though wide."""
    budget = options.weight_bits
    if budget is None and options.max_weight_bits is not None and \
            log.full_precision_bits > options.max_weight_bits:
        budget = options.max_weight_bits
    elif budget is None and log.full_precision_bits > DEFAULT_MAX_WEIGHT_BITS:
        log.warnings.append(f"the weights need {log.full_precision_bits} bits at full precision, "
                            f"and every multiplier and adder grows with them; --weight-bits "
                            f"{DEFAULT_MAX_WEIGHT_BITS} or fewer keeps them narrow")
    return budget


def _into_budget(weights, biases, budget, x, labels, unit_classes, options, centre):
    """Into the bit budget, then go on training inside it (see :class:`FitOptions`)."""
    targets = labels == unit_classes[0] if len(unit_classes) == 1 else \
        np.searchsorted(unit_classes, labels)
    narrow = to_integer_weights(np.array(weights, dtype=np.float64),
                                np.array(biases, dtype=np.float64), budget, x,
                                labels=targets.astype(np.int64),
                                refine_epochs=options.refine_epochs, seed=options.seed,
                                centre=centre, max_digits=options.max_digits,
                                digit_budget=options.digit_budget)
    return list(narrow.weights), [int(v) for v in narrow.biases]


def accuracy(model, x, labels):
    """Fraction of rows whose decision's class label equals the row's label."""
    decided = predict([u.weights for u in model.units], [u.bias for u in model.units], x)
    predicted = np.asarray(model.labels)[decided]
    return float(np.mean(predicted == np.asarray(labels)))


def choice_lines(options, log, *, keep_given=False):
    """What the defaults chose and why, for the command's summary (``keep_given``: --keep was
    on the command line)."""
    if options.keep == "pocket" and not keep_given:
        kept = ("kept the pocket weights (default: the epoch's with the best training accuracy; "
                "the last weights of data that is not separable fall wherever the last mistakes "
                "left them); --keep last or averaged to change")
    else:
        kept = f"kept the {options.keep} weights (--keep {options.keep})"
    width, full = log.weight_bits, log.full_precision_bits
    if options.weight_bits is not None:
        weights = f"weights: {width} bits, inside the budget of --weight-bits {options.weight_bits}"
    elif log.budget_bits is not None:
        weights = (f"weights: {width} bits, brought into the default budget of "
                   f"{log.budget_bits} bits from the {full} that full-precision training gave "
                   f"(narrower multipliers and adders); --weight-bits N for another budget, "
                   f"--weight-bits full to keep full precision")
    elif options.max_weight_bits is not None:
        weights = (f"weights: {width} bits at full precision, inside the default budget of "
                   f"{options.max_weight_bits} bits")
    else:
        weights = f"weights: {width} bits at full precision (--weight-bits full)"
    return [kept, weights, digits_line(log.digits_per_unit, options.max_digits,
                                       options.digit_budget)]


def digits_line(per_unit, max_digits, digit_budget=None):
    """The weights' nonzero signed digits for a command's summary: the adders of ``shiftadd``."""
    per = f" (per unit {', '.join(map(str, per_unit))})" if len(per_unit) > 1 else ""
    budget = f"at most {max_digits} per weight (--max-digits {max_digits})" \
        if max_digits is not None else "no budget per weight (--max-digits K sets one)"
    total = f"; at most {digit_budget} in all (--digit-budget {digit_budget})" \
        if digit_budget is not None else ""
    return f"signed digits: {sum(per_unit)} nonzero in all{per}, {budget}{total}"
