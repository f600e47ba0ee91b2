"""Input vectors for verification: the corners the range analysis names, then random ones;
for loadable weights, the weight sets written through the port, each with its vectors."""

from dataclasses import replace

import numpy as np

from ..model import Unit
from .ties import argmax_vectors

__all__ = ["VectorSet", "make_vectors", "outside_vectors", "random_vectors", "reload_sets",
           "RANDOM_GROUP"]

DEFAULT_RANDOM_VECTORS = 10_000
RANDOM_GROUP = "random within the declared ranges"


class VectorSet:
    """Named groups of input vectors (rows), kept in order so a failure can say where it came from.

    Values are int64 when every feature fits (always, for inputs of at most 32 bits).
    """

    def __init__(self, feature_count):
        self.feature_count = feature_count
        self._groups = []

    def add(self, name, rows):
        rows = np.asarray(rows, dtype=np.int64).reshape(-1, self.feature_count)
        if len(rows):
            self._groups.append((name, rows))

    @property
    def groups(self):
        return tuple((name, len(rows)) for name, rows in self._groups)

    @property
    def array(self):
        if not self._groups:
            return np.zeros((0, self.feature_count), dtype=np.int64)
        return np.concatenate([rows for _, rows in self._groups])

    def origin(self, index):
        """Which group vector ``index`` belongs to, as ``(group name, index inside it)``."""
        for name, rows in self._groups:
            if index < len(rows):
                return name, index
            index -= len(rows)
        raise IndexError(index)

    def __len__(self):
        return sum(len(rows) for _, rows in self._groups)


def random_vectors(rng, ranges, count):
    """``count`` vectors drawn uniformly within the declared ranges."""
    return _random_within(rng, ranges, count)


def _random_within(rng, ranges, count):
    lo = np.array([r[0] for r in ranges], dtype=np.int64)
    spans = [r[1] - r[0] for r in ranges]
    # Uniform offsets in [0, span] from the low end. Where span + 1 is a power of two (a full
    # code range, the common case) masking raw random bits is exactly uniform and several
    # times faster than bounded draws; other columns are drawn with an inclusive bound.
    # Raw words are split into the narrowest lanes (16, 32 or 64 bits) that hold every such
    # span, so a 12-bit code costs a quarter of a 64-bit draw.
    masks = [span if span & (span + 1) == 0 else 0 for span in spans]
    lane = next(bits for bits in (16, 32, 64) if max(masks) < 1 << bits)
    words = -(-count * len(ranges) * lane // 64)
    kind = f"<u{lane // 8}"
    raw = rng.bit_generator.random_raw(words).view(kind)[: count * len(ranges)]
    raw = raw.reshape(count, len(ranges)) & np.array(masks, dtype=kind)
    rows = np.add(raw.view(np.int64) if lane == 64 else raw, lo, dtype=np.int64)
    for column, span in enumerate(spans):
        if span & (span + 1):
            rows[:, column] = lo[column] + rng.integers(0, span, size=count, endpoint=True,
                                                        dtype=np.int64)
    return rows


def _near_threshold(rng, analysis, count):
    """Random vectors moved, along one feature, to the score closest to the decision boundary.

    The decision flips between score 0 and 1, so these vectors check ``score > 0`` exactly.
    """
    weights = np.array(analysis.weights, dtype=object)
    nonzero = [i for i, w in enumerate(analysis.weights) if w != 0]
    if not nonzero:
        return np.zeros((0, len(weights)), dtype=np.int64)
    rows = _random_within(rng, analysis.feature_ranges, count)
    for row_index, row in enumerate(rows):
        j = nonzero[rng.integers(len(nonzero))]
        lo, hi = analysis.feature_ranges[j]
        w = analysis.weights[j]
        rest = int(sum(int(x) * int(v) for x, v in zip(row, weights))) - int(row[j]) * w \
            + analysis.bias
        # Want rest + w * x_j in {0, 1}: choose x_j nearest to -rest / w, then nudge by one.
        target = -rest // w + int(rng.integers(0, 2))
        rows[row_index, j] = min(max(target, lo), hi)
    return rows


OUTSIDE_RANDOM = 1000     # random vectors over every port code, when codes outside matter


def outside_vectors(guard, rng, random_count):
    """Codes outside the declared ranges, for a design whose guard defines them: every
    feature at 0, at its port's top and bottom, each guarded feature just outside each bound
    (the others inside), and random codes over every code the ports can carry."""
    ranges, codes = guard.feature_ranges, guard.code_ranges
    inside = [lo for lo, _ in ranges]
    rows = [[0] * len(ranges), [hi for _, hi in codes], [lo for lo, _ in codes]]
    for i in guard.tight:
        (lo, hi), (code_lo, code_hi) = ranges[i], codes[i]
        for value in (lo - 1, hi + 1, code_lo, code_hi):
            if code_lo <= value <= code_hi and not lo <= value <= hi:
                row = list(inside)
                row[i] = value
                rows.append(row)
    return rows, _random_within(rng, codes, min(OUTSIDE_RANDOM, random_count))


def make_vectors(analysis, *, random_count=DEFAULT_RANDOM_VECTORS, seed=0, data=None,
                 others=(), guard=None):
    """Corner vectors (witnesses, all-min, all-max, per-feature extremes), boundary vectors,
    random vectors within the declared ranges, then optional dataset rows. ``others`` are the
    analyses of a bank's other units, whose witnesses join the corners, with the argmax's
    ties and winners (:func:`~thresh2hdl.verify.ties.argmax_vectors`). ``guard``: with an
    input guard that defines codes outside the declared ranges, such codes join too."""
    ranges = analysis.feature_ranges
    n = len(ranges)
    vectors = VectorSet(n)
    vectors.add("witness of the score maximum", [analysis.witness_max])
    vectors.add("witness of the score minimum", [analysis.witness_min])
    if others:
        vectors.add("witnesses of the other units",
                    [w for other in others for w in (other.witness_max, other.witness_min)])
        for name, rows in argmax_vectors([analysis, *others], seed):
            vectors.add(name, rows)
    los = [lo for lo, _ in ranges]
    his = [hi for _, hi in ranges]
    vectors.add("all features at their minimum", [los])
    vectors.add("all features at their maximum", [his])
    extremes = []
    for i in range(n):
        for base, value in ((los, his[i]), (his, los[i])):
            row = list(base)
            row[i] = value
            extremes.append(row)
    vectors.add("one feature at the opposite extreme", extremes)
    scattered = None
    if guard is not None and guard.test_outside:
        corners, scattered = outside_vectors(guard, np.random.default_rng([seed, 11]),
                                             random_count)
        vectors.add("codes outside the declared ranges", corners)
    rng = np.random.default_rng(seed)
    vectors.add("near the decision threshold", _near_threshold(rng, analysis, min(1000, random_count)))
    if scattered is not None:
        vectors.add("random over every port code", scattered)
    vectors.add(RANDOM_GROUP, _random_within(rng, ranges, random_count))
    if data is not None:
        vectors.add("dataset rows", data)
    return vectors


def reload_sets(model, weight_range, bias_range, *, random_count=2000, seed=0, guard=None):
    """Weight sets to load through the write port, each with the vectors to run after it.

    The first two put every weight and bias at the corners of the declared ranges that reach
    the highest and the lowest score of the loadable design, with the inputs that reach them
    (so the widths are tried at their bounds); the third is random. Returns a list of
    ``(model with those weights, VectorSet)``.
    """
    rng = np.random.default_rng([seed, 7])
    ranges = model.feature_ranges
    features = len(ranges)
    sets = []
    for direction in (1, -1, 0):
        units, corner = [], []
        for unit in model.units:
            if direction:
                picks = [max(((x, w) for x in r for w in weight_range),
                             key=lambda xw: direction * xw[0] * xw[1]) for r in ranges]
                weights = tuple(w for _, w in picks)
                corner = [x for x, _ in picks]
                bias = bias_range[1] if direction > 0 else bias_range[0]
            else:
                weights = tuple(int(v) for v in rng.integers(weight_range[0],
                                                             weight_range[1] + 1, features))
                bias = int(rng.integers(bias_range[0], bias_range[1] + 1))
            units.append(Unit(unit.name, weights, bias))
        loaded = replace(model, units=tuple(units))
        vectors = VectorSet(features)
        if corner:
            vectors.add("loaded corner", [corner])
        vectors.add("loaded random", random_vectors(rng, ranges, random_count))
        if guard is not None and guard.test_outside:
            corners, scattered = outside_vectors(guard, rng, min(100, random_count))
            vectors.add("loaded, codes outside the declared ranges", corners + scattered.tolist())
        sets.append((loaded, vectors))
    return sets
