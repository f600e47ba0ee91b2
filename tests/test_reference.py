import numpy as np
from hypothesis import given, settings, strategies as st

from thresh2hdl.reference import ReferenceModel, cycle_model


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
