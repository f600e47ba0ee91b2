"""Labelled integer data from CSV: a header, integer feature columns and a label column."""

import csv
import io
import math
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..readers import shorten

__all__ = ["Dataset", "read_csv", "check_ranges", "dataset_for_model", "MAX_ROWS"]

MAX_ROWS = 10_000_000


@dataclass(frozen=True)
class Dataset:
    source: str
    feature_names: tuple
    x: np.ndarray          # (rows, features) int64
    labels: np.ndarray     # (rows,) int64

    @cached_property
    def classes(self):
        return tuple(int(c) for c in np.unique(self.labels))

    def __len__(self):
        return len(self.labels)


def _integer(cell, source, line, column):
    text = cell.strip()
    try:
        return int(text)
    except ValueError:
        pass
    name = shorten(column)
    try:
        value = float(text)
    except ValueError:
        raise InputError(f"{name!r} is {shorten(text)!r}, not a number", source=source,
                         field=f"line {line}") from None
    if not math.isfinite(value):
        raise InputError(f"{name!r} is {shorten(text)}, not a finite number", source=source,
                         field=f"line {line}")
    if value != int(value):
        raise InputError(f"{name!r} is {shorten(text)}, not an integer code", source=source,
                         field=f"line {line}")
    return int(value)


def read_csv(path, *, label="label"):
    """Read a CSV of integer codes; every problem is one :class:`InputError` naming the line."""
    path = Path(path)
    source = str(path)
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except FileNotFoundError:
        raise InputError("no such file", source=source) from None
    except IsADirectoryError:
        raise InputError("is a folder, not a CSV file", source=source) from None
    except UnicodeDecodeError as error:
        raise InputError(f"not UTF-8 text (byte {error.start})", source=source) from None
    except OSError as error:
        raise InputError(f"cannot read: {error.strerror}", source=source) from None
    try:
        rows = list(csv.reader(io.StringIO(text)))
    except csv.Error as error:
        raise InputError(f"not valid CSV: {error}", source=source) from None
    rows = [row for row in rows if any(cell.strip() for cell in row)]
    if not rows:
        raise InputError("is empty; it needs a header row and data rows", source=source)
    header = [cell.strip() for cell in rows[0]]
    if len(set(header)) != len(header):
        duplicate = next(name for name in header if header.count(name) > 1)
        raise InputError(f"column {duplicate!r} appears twice in the header", source=source,
                         field="line 1")
    if label not in header:
        raise InputError(f"no label column {label!r} in the header (columns: "
                         f"{', '.join(header[:8])}{', ...' if len(header) > 8 else ''}); "
                         f"name it with --label", source=source, field="line 1")
    if len(rows) < 2:
        raise InputError("has a header but no data rows", source=source)
    if len(rows) - 1 > MAX_ROWS:
        raise InputError(f"has {len(rows) - 1} rows, more than the limit of {MAX_ROWS}",
                         source=source)
    label_index = header.index(label)
    feature_names = tuple(name for i, name in enumerate(header) if i != label_index)
    if not feature_names:
        raise InputError("has no feature columns besides the label", source=source)
    values = np.zeros((len(rows) - 1, len(header)), dtype=np.int64)
    for number, row in enumerate(rows[1:], start=2):
        if len(row) != len(header):
            raise InputError(f"has {len(row)} cells, the header has {len(header)}",
                             source=source, field=f"line {number}")
        for column, cell in enumerate(row):
            value = _integer(cell, source, number, header[column])
            if not -(1 << 62) <= value < (1 << 62):
                raise InputError(f"{header[column]!r} = {shorten(value)} is too large for a code",
                                 source=source,
                                 field=f"line {number}")
            values[number - 2, column] = value
    labels = values[:, label_index]
    x = np.delete(values, label_index, axis=1)
    return Dataset(source=source, feature_names=feature_names, x=x, labels=labels)


def check_ranges(dataset, formats):
    """Every code of every column inside its feature's declared range, or one InputError
    (the first such column's first row). Each column's extremes first, all columns at once:
    column by column, a strided read of a row-major array, took 24 ms of 100,000 x 16 codes."""
    x = dataset.x
    if x.size == 0:
        return
    lo = np.array([f.min for f in formats], dtype=np.int64)
    hi = np.array([f.max for f in formats], dtype=np.int64)
    columns = np.flatnonzero((x.min(axis=0) < lo) | (x.max(axis=0) > hi))
    if len(columns):
        index = int(columns[0])
        feature, column = formats[index], x[:, index]
        row = int(np.argmax((column < feature.min) | (column > feature.max)))
        raise InputError(f"{feature.name!r} = {int(column[row])} is outside its declared "
                         f"range [{feature.min}, {feature.max}]", source=dataset.source,
                         field=f"line {row + 2}")


def dataset_for_model(dataset, model):
    """Check a dataset against a model's features (names, order, declared ranges)."""
    names = tuple(f.name for f in model.features)
    if dataset.feature_names != names:
        missing = [n for n in names if n not in dataset.feature_names]
        detail = f"missing {missing[0]!r}" if missing else "in another order"
        raise InputError(f"feature columns do not match the model ({detail}); the model wants "
                         f"{', '.join(names[:6])}{', ...' if len(names) > 6 else ''}",
                         source=dataset.source, field="line 1")
    check_ranges(dataset, model.features)
    unknown = sorted(set(dataset.classes) - set(model.labels))
    if unknown:
        raise InputError(f"label {unknown[0]} is not one of the model's class labels "
                         f"{list(model.labels)}", source=dataset.source, field="label")
    return dataset
