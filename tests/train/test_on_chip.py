"""The fabric's rule on the host (train/on_chip.py): outside checks and bad input."""

import numpy as np
import pytest

from helpers import make_model
from thresh2hdl.errors import InputError
from thresh2hdl.model.data import Dataset
from thresh2hdl.train import OnChipRule, fit_on_chip, learn_in_order, parse_learning_rate

WIDE = dict(weight_bits=32, bias_bits=32)     # no register reaches its limit in these runs


def separable(seed, count=400, features=4, bits=8, margin=40):
    """Codes and labels of a hidden unit, rows closer than ``margin`` to its boundary left
    out (synthetic)."""
    rng = np.random.default_rng(seed)
    w = rng.integers(-9, 10, features)
    b = -int(w @ np.full(features, (1 << bits) // 2))
    rows, labels = [], []
    while len(rows) < count:
        x = rng.integers(0, 1 << bits, features)
        z = int(w @ x) + b
        if abs(z) >= margin:
            rows.append(x)
            labels.append(int(z > 0))
    return np.array(rows), np.array(labels), w, b


def test_novikoff_bound_holds_on_separable_data():
    # Novikoff (1962), "On convergence proofs on perceptrons": the perceptron makes at most
    # (R / gamma)^2 mistakes on data separated with margin gamma by a unit vector, R the
    # largest row norm. The rule moves the bias by bias_step = eta B^2: the perceptron on
    # rows augmented with a constant input B, its weight on B times B. The classic rule's
    # mistakes all have s (w . a) <= 0, as the proof needs.
    for seed in range(3):
        x, y, w_star, b_star = separable(seed, margin=200)
        shift, bias_input = 1, 128
        rule = OnChipRule(shift=shift, bias_step=bias_input ** 2 << shift, **WIDE)
        a = np.hstack([x, np.full((len(x), 1), bias_input)]).astype(float)
        u = np.append(w_star, b_star / bias_input).astype(float)
        u /= np.linalg.norm(u)
        gamma = float(np.min(np.where(y == 1, 1, -1) * (a @ u)))
        radius = float(np.max(np.linalg.norm(a, axis=1)))
        w, b, total = np.zeros((1, x.shape[1]), dtype=np.int64), np.zeros(1, np.int64), 0
        for _ in range(200):
            w, b, _, mistakes = learn_in_order(w, b, x, y, rule)
            total += mistakes
            if mistakes == 0:
                break
        assert mistakes == 0 and gamma > 0
        assert total <= (radius / gamma) ** 2, (total, (radius / gamma) ** 2)


@pytest.mark.parametrize("shift", [0, 2])
def test_unsaturated_rule_is_scikit_learn_perceptron_scaled_by_eta(shift):
    # scikit-learn (1.9.1 here) Perceptron (eta0=1, no penalty, no shuffling, tol=None) runs
    # w += s x, b += s whenever s (w.x + b) <= 0; the classic rule differs only where a
    # class-0 row meets w.x + b == 0 exactly (tests/train/test_train.py), which this test
    # checks does not happen after the first update. From zero weights, the rule with
    # eta = 2^shift and a bias step of eta (a bias input of 1) is then eta times
    # scikit-learn's weights.
    from sklearn.linear_model import Perceptron
    x, y, _, _ = separable(5, count=200, margin=1)
    order = np.argsort(-y, kind="stable")[:1].tolist() + list(range(len(y)))
    x, y = x[order], y[order]        # a class-1 row first: both rules update on it
    rule = OnChipRule(shift=shift, bias_step=1 << shift, **WIDE)
    w, b = np.zeros((1, x.shape[1]), dtype=np.int64), np.zeros(1, dtype=np.int64)
    for epoch in range(1, 4):
        for k in range(len(x)):        # the condition, row by row (a literal loop)
            z = int(w[0] @ x[k]) + int(b[0])
            assert not (y[k] == 0 and z == 0 and (w.any() or b.any()))
            w, b, _, _ = learn_in_order(w, b, x[k:k + 1], y[k:k + 1], rule)
        ref = Perceptron(eta0=1, penalty=None, shuffle=False, tol=None,
                         max_iter=epoch).fit(x, y)
        assert w[0].tolist() == [int(v) << shift for v in ref.coef_[0]]
        assert int(b[0]) == int(ref.intercept_[0]) << shift


def test_delay_leaves_the_rows_in_flight_unseen():
    # With delay d, row k is decided by the registers after rows 0 .. k-d-1 alone.
    x, y, _, _ = separable(2, count=60, margin=1)
    rule = OnChipRule(shift=0, bias_step=8, **WIDE)
    start = (np.zeros((1, 4), np.int64), np.zeros(1, np.int64))
    for delay in (0, 1, 3):
        _, _, decided, _ = learn_in_order(*start, x, y, rule, delay=delay)
        for k in range(len(x)):
            w, b, _, _ = learn_in_order(*start, x[:max(0, k - delay)], y[:max(0, k - delay)],
                                        rule, delay=delay)
            assert decided[k, 0] == int(int(w[0] @ x[k]) + int(b[0]) > 0)


def test_saturation_keeps_every_register_in_range():
    x, y, _, _ = separable(3, count=300, margin=1)
    rule = OnChipRule(shift=2, bias_step=50, weight_bits=6, bias_bits=8)
    w, b, _, _ = learn_in_order(np.zeros((1, 4), np.int64), np.zeros(1, np.int64), x, 1 - y,
                                rule)
    assert w.min() >= -32 and w.max() <= 31 and -128 <= b[0] <= 127
    assert {-32, 31} & set(w[0].tolist())


def test_fit_on_chip_runs_epochs_from_the_start_model_until_clean():
    x, y, _, _ = separable(4, count=200, margin=200)
    start = make_model([0, 0, 0, 0], bias=0, bits=8)
    data = Dataset(x=x, labels=y, feature_names=[f.name for f in start.features],
                   source="rows")
    rule = OnChipRule(shift=0, bias_step=128 ** 2, weight_bits=16, bias_bits=28)
    model, log = fit_on_chip(data, start, rule, epochs=200)
    assert log.mistakes_per_epoch[-1] == 0 and log.train_accuracy == 1.0
    w, b = np.zeros((1, 4), np.int64), np.zeros(1, np.int64)
    for mistakes in log.mistakes_per_epoch:
        w, b, _, counted = learn_in_order(w, b, x, y, rule)
        assert counted == mistakes
    assert list(model.unit.weights) == w[0].tolist() and model.unit.bias == int(b[0])


@pytest.mark.parametrize("text", ["3", "0", "-2", "1/3", "0.3", "x", "2^-3", "1/0"])
def test_a_rate_that_is_not_a_power_of_two_is_refused(text):
    with pytest.raises(InputError) as caught:
        parse_learning_rate(text)
    assert caught.value.field == "learning_rate"


def test_rates_read_as_their_power_of_two():
    assert [parse_learning_rate(t) for t in ("1/64", "0.25", "1", "2", 8)] == [-6, -2, 0, 1, 3]


def test_widths_that_cannot_hold_the_start_are_refused():
    rule = OnChipRule(shift=0, bias_step=1, weight_bits=4, bias_bits=8)
    with pytest.raises(InputError) as caught:
        rule.check_holds(make_model([9, 0], bits=4))
    assert caught.value.field == "weight_bits"
