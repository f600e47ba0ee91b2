"""File-level calls behind ``thresh2hdl fit`` and ``thresh2hdl quantize``.

They read the user's files, run :mod:`thresh2hdl.train` or :mod:`thresh2hdl.train.quantize`, and
write the model file and its log together, atomically.
"""

import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..model import (FeatureFormat, Model, Unit, check_ranges, load_toml, model_to_toml,
                     parse_features, read_csv)
from ..errors import InputError
from ..names import check_identifier
from ..outdir import write_files
from ..train import (FitOptions, check_digit_budget, check_max_digits, class_unit_name, decide,
                     fit, fold_normalisation, load_float_model, to_integer_weights)

__all__ = ["fit_csv", "quantize_npz", "input_formats", "QuantizeResult", "SWEEP_BITS",
           "SWEEP_DIGIT_SHARES"]

SWEEP_BITS = tuple(range(2, 13))
# The budgets in all the sweep tries at the chosen width: these shares of its digits in all.
SWEEP_DIGIT_SHARES = (1.0, 0.9, 0.8, 0.7, 0.6, 0.5, 0.4, 0.3)


def log_path_for(model_path, kind):
    model_path = Path(model_path)
    return model_path.with_name(f"{model_path.stem}.{kind}.json")


def check_outputs(out_path, kind, inputs):
    """Refuse a model or log path that is one of the input files: writing it would destroy
    what it was made from."""
    for output in (Path(out_path), log_path_for(out_path, kind)):
        for name in inputs:
            if name is not None and output.resolve() == Path(name).resolve():
                raise InputError(f"is also the input file {name}; choose another --out",
                                 source=output)


def input_formats(names, *, input_bits=None, signed=False, formats_file=None):
    """Declared input formats: one width for all columns, or a TOML file of [[feature]] tables."""
    if formats_file is not None:
        data = load_toml(formats_file, "formats file")
        unknown = sorted(set(data) - {"feature"})
        if unknown:
            raise InputError(f"unknown key {unknown[0]!r}; only [[feature]] tables belong here",
                             source=formats_file)
        formats = parse_features(data.get("feature"), source=formats_file)
        declared = tuple(f.name for f in formats)
        if declared != tuple(names):
            raise InputError(f"declares features {', '.join(declared[:5])}..., but the data has "
                             f"columns {', '.join(names[:5])}...; they must match in order",
                             source=formats_file)
        return list(formats)
    if input_bits is None:
        return None
    try:
        return [FeatureFormat(name, input_bits, signed) for name in names]
    except ValueError as error:
        raise InputError(str(error), field="--input-bits") from None


def fit_csv(data_path, out_path, *, label="label", input_bits=None, signed=False,
            formats_file=None, options=FitOptions(), module="thresh_unit", force=False):
    """Train on a CSV and write ``out_path`` (model file) and ``<stem>.fit.json`` (the log)."""
    out_path = Path(out_path)
    check_outputs(out_path, "fit", (data_path, formats_file))
    dataset = read_csv(data_path, label=label)
    formats = input_formats(dataset.feature_names, input_bits=input_bits, signed=signed,
                            formats_file=formats_file)
    model, log = fit(dataset, formats=formats, options=options, module=module)
    record = {"data": Path(data_path).name, "rows": len(dataset), "options": options.__dict__,
              **log.as_dict()}
    comment = (f"Trained by thresh2hdl fit on {Path(data_path).name} ({len(dataset)} rows); "
               f"train accuracy {log.train_accuracy:.4f}")
    write_files({out_path: model_to_toml(model, comment=comment),
                 log_path_for(out_path, "fit"): json.dumps(record, indent=2) + "\n"},
                force=force)
    return model, log


@dataclass(frozen=True)
class QuantizeResult:
    model: Model
    bits: int
    agreement: float
    accuracy: float | None
    float_accuracy: float | None
    sweep: tuple            # ((bits, agreement, accuracy, digits), ...) when swept
    recommended_bits: int | None
    rows: int
    rows_source: str
    max_digits: int | None = None   # the budget of nonzero signed digits per weight, if any
    digits_per_unit: tuple = ()     # nonzero signed digits of each unit's weights
    digit_budget: int | None = None     # the budget of nonzero signed digits in all, if any
    digit_sweep: tuple = ()         # ((budget, agreement, accuracy, digits), ...) when swept
    recommended_digit_budget: int | None = None


def _formats_for(float_model, names):
    formats = []
    for name, lo, hi in zip(names, float_model.input_lo.tolist(), float_model.input_hi.tolist()):
        is_signed = lo < 0
        bits = 1
        while not ((-(1 << (bits - 1)) <= lo and hi <= (1 << (bits - 1)) - 1) if is_signed
                   else hi <= (1 << bits) - 1):
            bits += 1
        if bits > 32:
            raise InputError(f"the code range [{lo}, {hi}] needs more than 32 bits",
                             source=float_model.source, field="input_lo")
        formats.append(FeatureFormat(name, bits, is_signed, int(lo), int(hi)))
    return formats


def quantize_npz(npz_path, out_path, *, bits=None, data_path=None, label="label", sweep=False,
                 tolerance=0.01, refine_epochs=20, module="thresh_unit", seed=0, force=False,
                 max_digits=None, digit_budget=None):
    """Fold a float model onto raw codes and write it as an integer model file; with
    ``max_digits`` K, every weight has at most K nonzero canonical signed digits, with
    ``digit_budget`` N, all the weights together at most N. ``sweep`` tries the widths of
    :data:`SWEEP_BITS`, then at the width chosen the budgets in all of
    :data:`SWEEP_DIGIT_SHARES`; either recommendation is taken where its option is not given."""
    _check_quantize(module, bits, sweep, tolerance)
    max_digits = check_max_digits(max_digits)
    digit_budget = check_digit_budget(digit_budget)
    check_outputs(out_path, "quantize", (npz_path, data_path))
    float_model = load_float_model(npz_path)
    units, count = float_model.coef.shape
    dataset = _dataset_for(float_model, data_path, label)
    names = list(dataset.feature_names) if dataset is not None else [f"x{i}" for i in range(count)]
    formats = _formats_for(float_model, names)
    classes = float_model.classes or ((0, 1) if units == 1 else tuple(range(units)))
    x, labels, rows_source = _rows_for(float_model, dataset, formats, classes, seed)
    weights, bias = fold_normalisation(float_model)
    float_decisions = decide(x.astype(np.float64) @ weights.T + bias)
    float_accuracy = float(np.mean(float_decisions == labels)) if labels is not None else None
    centre = np.array([(f.min + f.max) // 2 for f in formats])

    def at(b, total=None):
        try:
            result = to_integer_weights(weights, bias, b, x, labels=labels,
                                        refine_epochs=refine_epochs if labels is not None else 0,
                                        seed=seed, centre=centre, max_digits=max_digits,
                                        digit_budget=total)
        except InputError as error:
            if error.field in ("max_digits", "digit_budget"):   # the options', named as such
                raise
            raise InputError(str(error), source=npz_path) from None
        decided = decide(x.astype(np.float64) @ result.weights.T.astype(np.float64)
                         + result.biases.astype(np.float64))
        agreement = float(np.mean(decided == float_decisions))
        accuracy = float(np.mean(decided == labels)) if labels is not None else None
        return result, agreement, accuracy

    table, recommended = _sweep(at, float_accuracy, tolerance) if sweep else ([], None)
    chosen = bits if bits is not None else recommended
    digit_table, recommended_total = _sweep_digits(lambda n: at(chosen, n), float_accuracy,
                                                   tolerance) if sweep else ([], None)
    total = digit_budget if digit_budget is not None else recommended_total
    result, agreement, accuracy = at(chosen, total)
    model = _integer_model(module, formats, classes, result, npz_path)
    outcome = QuantizeResult(model, chosen, agreement, accuracy, float_accuracy, tuple(table),
                             recommended, len(x), rows_source, max_digits, result.digits, total,
                             tuple(digit_table), recommended_total)
    record = {"float_model": Path(npz_path).name, "bits": chosen, "rows": rows_source,
              "agreement_with_float": agreement, "accuracy": accuracy,
              "float_accuracy": float_accuracy, "scale": result.scale,
              "max_digits": max_digits, "digit_budget": total,
              "digits_per_unit": list(result.digits), "digits_total": sum(result.digits),
              "sweep": [{"bits": b, "agreement": a, "accuracy": c, "digits": d}
                        for b, a, c, d in table],
              "recommended_bits": recommended,
              "digit_sweep": [{"digit_budget": n, "agreement": a, "accuracy": c, "digits": d}
                              for n, a, c, d in digit_table],
              "recommended_digit_budget": recommended_total, "tolerance": tolerance}
    comment = (f"Folded and quantized by thresh2hdl quantize from {Path(npz_path).name} at "
               f"{chosen}-bit weights"
               + (f" of at most {max_digits} nonzero signed digits" if max_digits else "")
               + (f", at most {total} in all" if total else "")
               + f"; agreement with the float model {agreement:.4f} on {rows_source}")
    write_files({Path(out_path): model_to_toml(model, comment=comment),
                 log_path_for(out_path, "quantize"): json.dumps(record, indent=2) + "\n"},
                force=force)
    return outcome


def _check_quantize(module, bits, sweep, tolerance):
    try:
        check_identifier(module, "module name")
    except ValueError as error:
        raise InputError(str(error), field="--module") from None
    if bits is None and not sweep:
        raise InputError("give --bits B (2..32) or --sweep", field="--bits")
    if bits is not None and not 2 <= bits <= 32:
        raise InputError(f"must be an integer from 2 to 32, not {bits}", field="--bits")
    if not 0 <= tolerance < 1:
        raise InputError(f"must be a fraction from 0 to below 1, not {tolerance}",
                         field="--tolerance")


def _dataset_for(float_model, data_path, label):
    """The labelled rows, when given: one column per input of the float model."""
    if data_path is None:
        return None
    dataset = read_csv(data_path, label=label)
    count = float_model.coef.shape[1]
    if len(dataset.feature_names) != count:
        raise InputError(f"has {len(dataset.feature_names)} feature columns, the float model "
                         f"{count}", source=dataset.source, field="line 1")
    return dataset


def _rows_for(float_model, dataset, formats, classes, seed):
    """The rows the quantized model is judged on: the data (with class indices), else random
    codes within the input ranges. Returns ``(x, labels or None, what they are)``."""
    if dataset is None:
        rng = np.random.default_rng(seed)
        x = rng.integers(float_model.input_lo, float_model.input_hi,
                         size=(10_000, float_model.coef.shape[1]), endpoint=True)
        return x, None, "10000 random vectors within the input ranges"
    check_ranges(dataset, formats)
    lookup = {c: i for i, c in enumerate(classes)}
    unknown = sorted(set(dataset.classes) - set(lookup))
    if unknown:
        raise InputError(f"label {unknown[0]} is not one of the model's classes "
                         f"{list(classes)}", source=dataset.source, field="label")
    labels = np.array([lookup[int(v)] for v in dataset.labels], dtype=np.int64)
    return dataset.x, labels, f"{Path(dataset.source).name} ({len(dataset.x)} rows)"


def _close(agreement, accuracy, float_accuracy, tolerance):
    """Within ``tolerance`` of the float model: its accuracy with labels, else agreement."""
    return (accuracy >= float_accuracy - tolerance) if float_accuracy is not None \
        else agreement >= 1 - tolerance


def _sweep(at, float_accuracy, tolerance):
    """Every width of SWEEP_BITS with its digits in all, and the fewest bits within
    ``tolerance`` of the float model; the widest when none is."""
    table = []
    for b in SWEEP_BITS:
        result, agreement, accuracy = at(b)
        table.append((b, agreement, accuracy, sum(result.digits)))
    for b, agreement, accuracy, _ in table:
        if _close(agreement, accuracy, float_accuracy, tolerance):
            return table, b
    return table, SWEEP_BITS[-1]


def _sweep_digits(at, float_accuracy, tolerance):
    """At the chosen width, the budgets in all of SWEEP_DIGIT_SHARES of its digits without
    one, each with its figures, and the budget giving the fewest digits within ``tolerance``
    of the float model (None, no budget, when none is)."""
    whole = sum(at(None)[0].digits)
    budgets = sorted({max(1, round(share * whole)) for share in SWEEP_DIGIT_SHARES},
                     reverse=True)
    table = []
    for budget in budgets:
        try:
            result, agreement, accuracy = at(budget)
        except InputError as error:
            if error.field != "digit_budget":
                raise
            break               # so few digits keep no decision: the sweep stops
        table.append((budget, agreement, accuracy, sum(result.digits)))
    close = [row for row in table if _close(row[1], row[2], float_accuracy, tolerance)]
    return table, min(close, key=lambda row: (row[3], -row[0]))[0] if close else None


def _integer_model(module, formats, classes, result, npz_path):
    units = len(result.biases)
    unit_names = ["unit"] if units == 1 else [class_unit_name(c) for c in classes]
    try:
        return Model(module=module, features=formats,
                     units=[Unit(n, tuple(int(v) for v in w), int(b))
                            for n, w, b in zip(unit_names, result.weights, result.biases)],
                     class_labels=classes)
    except ValueError as error:
        raise InputError(f"cannot make an integer model of it: {error}",
                         source=npz_path) from None
