"""The integer reference model: the single source of truth for every simulator and proof.

``score = w . x + b`` and ``y = score > 0``, computed exactly. numpy int64 is used only when the
range analysis proves that no partial sum can leave int64; otherwise Python integers are used.
"""

import numpy as np

__all__ = ["ReferenceModel", "BankReference", "cycle_model"]

_INT64_LIMIT = (1 << 63) - 1
_FLOAT64_EXACT = 1 << 53      # every integer of at most this magnitude is a float64


class ReferenceModel:
    """Exact integer evaluation of one threshold unit.

    Parameters
    ----------
    weights : sequence of int
    bias : int
    feature_ranges : sequence of (int, int)
        The declared input ranges; they decide whether int64 is provably exact.

    Examples
    --------
    >>> ref = ReferenceModel(weights=[2, -3], bias=1, feature_ranges=[(0, 15), (0, 15)])
    >>> ref.scores([[4, 3], [0, 1]]).tolist()
    [0, -2]
    >>> ref.decisions([[5, 3]]).tolist()
    [1]
    """

    def __init__(self, *, weights, bias, feature_ranges):
        self.weights = tuple(int(w) for w in weights)
        self.bias = int(bias)
        self.feature_ranges = tuple((int(lo), int(hi)) for lo, hi in feature_ranges)
        # Worst case of any partial sum in any evaluation order: the sum of absolute terms.
        bound = abs(self.bias) + sum(abs(w) * max(abs(lo), abs(hi))
                                     for w, (lo, hi) in zip(self.weights, self.feature_ranges))
        self.exact_in_int64 = bound <= _INT64_LIMIT
        self.exact_in_float64 = bound <= _FLOAT64_EXACT

    @classmethod
    def from_model(cls, model):
        """The reference for a model: a :class:`BankReference` when it has several units."""
        if model.is_bank:
            return BankReference([cls(weights=u.weights, bias=u.bias,
                                      feature_ranges=model.feature_ranges)
                                  for u in model.units])
        return cls(weights=model.unit.weights, bias=model.unit.bias,
                   feature_ranges=model.feature_ranges)

    def scores(self, vectors):
        """Scores of input vectors (rows), as int64 when provably exact, else Python ints."""
        if self.exact_in_int64:
            x = np.asarray(vectors, dtype=np.int64)
            x = x.reshape(-1, len(self.weights))
            # Integer matmul in numpy is exact (no BLAS, wraps only on overflow, which the bound
            # above rules out).
            return x @ np.asarray(self.weights, dtype=np.int64) + np.int64(self.bias)
        x = np.asarray(vectors, dtype=object).reshape(-1, len(self.weights))
        w = np.asarray(self.weights, dtype=object)
        return np.array([int(sum(row * w)) + self.bias for row in x], dtype=object)

    def decisions(self, vectors):
        """``1`` where the score is strictly positive, else ``0``."""
        return self.decide(self.scores(vectors))

    @staticmethod
    def decide(scores):
        """The decisions of scores already computed by :meth:`scores`."""
        return (scores > 0).astype(np.uint8)


class BankReference:
    """Units sharing the inputs: scores per unit, decision = index of the largest score, ties
    going to the lowest index.

    Examples
    --------
    >>> bank = BankReference([ReferenceModel(weights=[1, 0], bias=0, feature_ranges=[(0, 9)] * 2),
    ...                       ReferenceModel(weights=[0, 1], bias=0, feature_ranges=[(0, 9)] * 2)])
    >>> bank.decisions([[3, 5], [5, 3], [4, 4]]).tolist()
    [1, 0, 0]
    """

    def __init__(self, units):
        self.units = tuple(units)

    def scores(self, vectors):
        """Scores, shape (rows, units)."""
        if all(unit.exact_in_float64 for unit in self.units):
            # One float64 matrix product (BLAS) for all units. Exact: every product and every
            # partial sum, in whatever order BLAS adds them, is an integer no larger than the
            # unit's bound, and float64 holds each such integer exactly.
            x = np.asarray(vectors, dtype=np.float64).reshape(-1, len(self.units[0].weights))
            w = np.array([unit.weights for unit in self.units], dtype=np.float64)
            b = np.array([unit.bias for unit in self.units], dtype=np.int64)
            return (x @ w.T).astype(np.int64) + b
        columns = [unit.scores(vectors) for unit in self.units]
        if all(c.dtype != object for c in columns):
            return np.stack(columns, axis=1)
        return np.stack([np.asarray(c, dtype=object) for c in columns], axis=1)

    def decisions(self, vectors):
        return self.decide(self.scores(vectors))

    @staticmethod
    def decide(scores):
        """The class of each row of scores already computed by :meth:`scores`."""
        if scores.dtype != object:
            return np.argmax(scores, axis=1)     # first maximum: ties to the lowest index
        return np.array([max(range(len(row)), key=lambda i: (row[i], -i)) for row in scores])


def cycle_model(latency, count, *, offer, accept, beats=1):
    """Cycle-exact model of the valid/ready handshake of a pipeline of ``latency`` stages.

    The pipeline advances as a whole when its last stage is empty or being read
    (``advance = out_ready or not out_valid``), and ``in_ready`` is ``advance``. With no register
    stages the unit is combinational: ``out_valid = in_valid`` and ``in_ready = out_ready``.
    With ``beats > 1`` (the serial architecture) each input takes that many valid beats; the
    beats before its last are taken whatever the pipeline does (``in_ready`` high) and only
    the last enters the pipeline, so ``in_ready`` is ``advance`` only on a last beat.

    ``offer(t)`` says whether the source wants to send in cycle ``t`` (it does only while inputs
    are left) and ``accept(t)`` is the sink's ``out_ready``. The run stops when all ``count``
    inputs have come out. Returns per-cycle arrays ``in_valid``, ``in_ready``, ``out_valid``,
    ``out_ready``, ``in_index`` (which beat is presented: ``input * beats + beat``; the input
    itself when ``beats == 1``) and ``out_index`` (which input is on the output, -1 where
    ``out_valid`` is low).

    A clock enable's held cycles are not modelled here: a held cycle changes no state, so
    :func:`~thresh2hdl.verify.stimulus.with_held_cycles` inserts them into a run afterwards,
    each with ``in_ready`` and ``out_valid`` 0.
    """
    if beats > 1 and latency == 0:
        raise ValueError("a serial (beats > 1) pipeline needs at least one register stage")
    rows = {key: [] for key in ("in_valid", "in_ready", "out_valid", "out_ready", "in_index",
                                "out_index")}
    stages = [-1] * latency       # input index held by each stage, -1 when empty
    total = count * beats
    accepted = emitted = 0        # beats accepted, inputs emitted
    t = 0
    while emitted < count:
        valid = accepted < total and bool(offer(t))
        ready = bool(accept(t))
        last = accepted % beats == beats - 1
        if latency == 0:
            out_valid, out_index, advance = valid, (accepted if valid else -1), ready
        else:
            out_index = stages[-1]
            out_valid = out_index >= 0
            advance = ready or not out_valid
        in_ready = advance or not last
        for key, value in (("in_valid", valid), ("in_ready", in_ready),
                           ("out_valid", out_valid), ("out_ready", ready),
                           ("in_index", min(accepted, total - 1)), ("out_index", out_index)):
            rows[key].append(value)
        if out_valid and ready:
            emitted += 1
        entering = accepted // beats if (valid and in_ready and last) else -1
        if advance and latency:
            stages = [entering] + stages[:-1]
        if valid and in_ready:
            accepted += 1
        t += 1
    return {key: np.asarray(value, dtype=np.int64 if key.endswith("index") else bool)
            for key, value in rows.items()}
