import numpy as np
from hypothesis import given, settings, strategies as st

from thresh2hdl.verify.reference import BankReference, ReferenceModel, cycle_model
from thresh2hdl.verify.vectors import random_vectors


def test_scores_equal_python_integer_arithmetic():
    rng = np.random.default_rng(1)
    weights = rng.integers(-1000, 1000, 16).tolist()
    ranges = [(0, 4095)] * 16
    x = rng.integers(0, 4096, (500, 16))
    ref = ReferenceModel(weights=weights, bias=-12345, feature_ranges=ranges)
    assert ref.exact_in_int64
    # Outside reference: Python's arbitrary-precision integers (exact by definition, common
    # practice), independent of numpy.
    expected = [sum(int(a) * b for a, b in zip(row, weights)) - 12345 for row in x]
    assert ref.scores(x).tolist() == expected
    assert ref.decisions(x).tolist() == [int(s > 0) for s in expected]


def test_bank_scores_at_the_float64_limit_equal_python_integers():
    # The bank's float64 matrix product is used only while every partial sum stays within
    # 2**53 (the float64 significand, IEEE 754); at the edge of that bound it must still
    # equal Python's exact integers, here with every term near its largest.
    n = 64
    big = (1 << 53) // (n * ((1 << 20) - 1))         # |w| * max|x| * n stays <= 2**53
    weights = [[big - k] * (n // 2) + [-(big - k)] * (n // 2) for k in range(3)]
    ranges = [(-(1 << 20) + 1, (1 << 20) - 1)] * n
    units = [ReferenceModel(weights=w, bias=0, feature_ranges=ranges) for w in weights]
    assert all(u.exact_in_float64 for u in units)
    x = np.array([[(1 << 20) - 1] * (n // 2) + [-(1 << 20) + 1] * (n // 2),
                  [(1 << 20) - 1] * n] + [[(-1) ** i * ((1 << 20) - 1 - i) for i in range(n)]])
    expected = [[sum(int(a) * b for a, b in zip(row, w)) for w in weights] for row in x]
    assert BankReference(units).scores(x).tolist() == expected
    assert abs(expected[0][0]) > (1 << 52)


def test_random_vectors_cover_every_code_uniformly():
    # 4-bit and 12-bit columns share 16-bit lanes of the raw draws; a chi-square test on the
    # 4-bit column (15 degrees of freedom, 0.1% critical value 37.7 from standard tables,
    # common practice) and the extremes of the 12-bit one.
    rows = random_vectors(np.random.default_rng(5), [(0, 15), (-2048, 2047), (3, 10)], 160_000)
    counts = np.bincount(rows[:, 0], minlength=16)
    chi2 = ((counts - 10_000) ** 2 / 10_000).sum()
    assert chi2 < 37.7
    assert rows[:, 1].min() == -2048 and rows[:, 1].max() == 2047
    assert rows[:, 2].min() == 3 and rows[:, 2].max() == 10


def test_wide_models_use_python_integers():
    # 64 products of 32-bit x 32-bit values exceed int64 (2^62 * 64 = 2^68): numpy's int64
    # would wrap, so the reference must switch to exact Python integers.
    weights = [-(1 << 31)] * 64
    ranges = [(-(1 << 31), (1 << 31) - 1)] * 64
    ref = ReferenceModel(weights=weights, bias=0, feature_ranges=ranges)
    assert not ref.exact_in_int64
    x = [[-(1 << 31)] * 64]
    assert ref.scores(x).tolist() == [64 * (1 << 62)]
    assert ref.decisions(x).tolist() == [1]


def test_decision_is_strictly_positive():
    ref = ReferenceModel(weights=[1], bias=-5, feature_ranges=[(0, 10)])
    assert ref.decisions([[4], [5], [6]]).tolist() == [0, 0, 1]


def gold_pipeline(latency, count, offers, accepts):
    """A second, deliberately literal model: a shift register that moves when allowed."""
    pipe = [None] * latency
    sent, out, t, log = 0, [], 0, []
    while len(out) < count:
        valid = sent < count and offers[t % len(offers)]
        ready = accepts[t % len(accepts)]
        if latency == 0:
            if valid and ready:
                out.append(sent)
                log.append(t)
                sent += 1
        else:
            head = pipe[-1]
            if head is not None and ready:
                out.append(head)
                log.append(t)
            if head is None or ready:
                pipe = [sent if valid else None] + pipe[:-1]
                if valid:
                    sent += 1
        t += 1
    return out, log


@settings(max_examples=80, deadline=None)
@given(latency=st.integers(0, 5), count=st.integers(1, 30),
       offers=st.lists(st.booleans(), min_size=1, max_size=9).map(lambda v: v + [True]),
       accepts=st.lists(st.booleans(), min_size=1, max_size=9).map(lambda v: v + [True]))
def test_cycle_model_delivers_every_input_once_in_order(latency, count, offers, accepts):
    trace = cycle_model(latency, count, offer=lambda t: offers[t % len(offers)],
                        accept=lambda t: accepts[t % len(accepts)])
    transfers = trace["out_valid"] & trace["out_ready"]
    assert trace["out_index"][transfers].tolist() == list(range(count))
    accepted = trace["in_valid"] & trace["in_ready"]
    assert int(accepted.sum()) == count
    out, log = gold_pipeline(latency, count, offers, accepts)
    assert out == list(range(count))
    assert np.flatnonzero(transfers).tolist() == log


def test_always_ready_latency():
    trace = cycle_model(3, 5, offer=lambda t: True, accept=lambda t: True)
    assert trace["out_valid"].tolist() == [False] * 3 + [True] * 5
    assert trace["out_index"][3:].tolist() == [0, 1, 2, 3, 4]
