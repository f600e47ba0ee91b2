"""Judging a simulator's recorded outputs against a stimulus's expectations, cycle by cycle."""

from dataclasses import dataclass

import numpy as np

__all__ = ["Mismatch", "CompareResult", "compare"]


@dataclass(frozen=True)
class Mismatch:
    cycle: int
    signal: str
    expected: int
    got: int | None     # None: the simulator showed an unknown (x) value
    vector_index: int | None

    def describe(self, stimulus, feature_names=None, origin=None):
        text = f"cycle {self.cycle}: {self.signal} = {self.got}, expected {self.expected}"
        if self.vector_index is not None and self.vector_index >= 0:
            row = stimulus.vectors[self.vector_index].tolist()
            names = feature_names or [f"x{i}" for i in range(len(row))]
            text += f" for vector {self.vector_index}"
            if origin is not None:
                text += f" ({origin(self.vector_index)[0]})"
            text += ": " + ", ".join(f"{n}={v}" for n, v in zip(names, row))
        return text


@dataclass(frozen=True)
class CompareResult:
    mismatches: tuple       # the first few, in cycle order
    mismatch_count: int     # every mismatching (cycle, signal)
    vectors_checked: int    # vectors that came out and were compared


def compare(stimulus, in_ready, out_valid, decisions, scores, *, flags=None, bus=None,
            limit=10):
    """Every cycle's handshake outputs, and the results of every valid output cycle.

    ``scores`` may be None when the design has no score port; ``flags`` (the out-of-range
    output per cycle) is compared when the stimulus expects one. The mismatches kept are the
    earliest ``limit`` over every output, in cycle order. ``bus``: the AXI4-Lite weight
    port's outputs by name (``awready``...), judged where the stimulus's ``bus`` checks them.
    """
    mismatches = []
    total = 0

    def note(cycles, signal, expected, got, index):
        # Each output's earliest ``limit``: the earliest ``limit`` of all are among them.
        nonlocal total
        total += len(cycles)
        for t in cycles[:limit]:
            value = got[t]
            mismatches.append(Mismatch(int(t), signal, int(expected[t]),
                                       None if value is None else int(value), int(index[t])))

    in_ready = np.asarray(in_ready).astype(bool)
    out_valid = np.asarray(out_valid).astype(bool)
    index = stimulus.expect_out_index
    note(np.flatnonzero(in_ready != stimulus.expect_in_ready), "in_ready",
         stimulus.expect_in_ready, in_ready, stimulus.in_vector)
    note(np.flatnonzero(out_valid != stimulus.expect_out_valid), "out_valid",
         stimulus.expect_out_valid, out_valid, index)
    shown = np.flatnonzero(stimulus.expect_out_valid & out_valid)
    if stimulus.expect_flags is not None:
        expected_f = np.zeros(stimulus.cycles, dtype=np.int64)
        expected_f[shown] = stimulus.expect_flags[index[shown]]
        got_f = np.asarray(flags).astype(np.int64)
        note(shown[got_f[shown] != expected_f[shown]], "out_of_range", expected_f, got_f,
             index)
        if stimulus.flag_masks_results:
            shown = shown[expected_f[shown] == 0]
    expected_y = np.zeros(stimulus.cycles, dtype=np.int64)
    expected_y[shown] = stimulus.expect_decisions[index[shown]]
    got_y = np.asarray(decisions).astype(np.int64)
    note(shown[got_y[shown] != expected_y[shown]], "decision", expected_y, got_y, index)
    if scores is not None:
        expect = stimulus.expect_scores.reshape(len(stimulus.expect_scores), -1)
        got_all = np.asarray(scores).reshape(stimulus.cycles, -1)
        for unit in range(expect.shape[1]):
            signal = "score" if expect.shape[1] == 1 else f"score[{unit}]"
            got_s = got_all[:, unit]
            expected_s = np.zeros(stimulus.cycles, dtype=expect.dtype)
            expected_s[shown] = expect[index[shown], unit]
            if got_s.dtype == object or expected_s.dtype == object:
                got_s, expected_s = got_s.astype(object), expected_s.astype(object)
            bad = shown[got_s[shown] != expected_s[shown]]
            note(bad, signal, expected_s, got_s, index)
    if stimulus.bus is not None:
        nowhere = np.full(stimulus.cycles, -1)
        for name, expected in stimulus.bus.expected.items():
            got = np.asarray(bus[name])
            if got.dtype == object:      # an unknown (x) value is None: never a match
                got = np.array([-1 if g is None else g for g in got], dtype=np.int64)
            wrong = got != expected
            note(np.flatnonzero(wrong & stimulus.bus.checked(name)),
                 stimulus.bus.channel.prefix + name,
                 expected, got, nowhere)
    mismatches.sort(key=lambda m: m.cycle)
    transfers = int(np.count_nonzero(stimulus.expect_out_valid & stimulus.out_ready))
    return CompareResult(mismatches=tuple(mismatches[:limit]), mismatch_count=total,
                         vectors_checked=transfers)
