"""Weights with few nonzero signed digits (``max_digits``), checked with a digit count of the
test's own, on a synthetic separable set and on scikit-learn's bundled digits."""

import numpy as np
import pytest

sklearn = pytest.importorskip("sklearn")
from sklearn.datasets import load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.preprocessing import StandardScaler

from thresh2hdl.analysis import csd_digits
from thresh2hdl.errors import InputError
from thresh2hdl.model.data import Dataset
from thresh2hdl.model.records import FeatureFormat
from thresh2hdl.train import DigitBudget, digit_count
from thresh2hdl.train.perceptron import FitOptions, accuracy, fit
from thresh2hdl.train.quantize import FloatModel, decide, fold_normalisation, to_integer_weights
from helpers import naf_weight, separable_rows

BUDGETS = (None, 3, 2, 1)


def most_digits(weights):
    return max(naf_weight(w) for w in np.ravel(weights))


def total_digits(weights):
    return sum(naf_weight(w) for w in np.ravel(weights))


def test_naf_weight_is_oeis_a007302_and_the_cost_shiftadd_pays():
    # OEIS A007302, a(0..16) (from memory; they follow from the definition above).
    assert [naf_weight(n) for n in range(17)] == [0, 1, 1, 2, 1, 2, 2, 2, 1, 2, 2, 3, 2, 3, 2,
                                                  2, 1]
    values = np.arange(-5000, 5000)
    assert [naf_weight(v) for v in values] == digit_count(values).tolist()
    assert all(naf_weight(v) == len(csd_digits(v)) for v in range(5000))


@pytest.mark.parametrize("bits", [4, 6, 8])
@pytest.mark.parametrize("k", [1, 2, 3])
def test_nearest_value_within_the_budget_is_the_nearest(bits, k):
    # Against every integer of the bit range, enumerated and counted with naf_weight.
    limit = (1 << (bits - 1)) - 1
    allowed = np.array([v for v in range(-limit, limit + 1) if naf_weight(v) <= k])
    real = np.linspace(-limit - 2.5, limit + 2.5, 3001)
    got = DigitBudget(k, limit).nearest(real)
    assert most_digits(got) <= k and np.abs(got).max() <= limit
    assert np.allclose(np.abs(got - real), np.abs(allowed[None, :] - real[:, None]).min(axis=1))


def dataset(x, y):
    return Dataset("test", tuple(f"f{i}" for i in range(x.shape[1])), np.asarray(x),
                   np.asarray(y))


def test_separable_set_within_budget():
    # Synthetic separable 12-bit rows (helpers.separable_rows), 8-bit weights. Measured: digits
    # in all 9, 8, 7, 3 (none, K = 3, 2, 1); train accuracy 1.0, 1.0, 1.0, 0.9675.
    rows = np.array(separable_rows(400))
    x, y = rows[:, :4], rows[:, 4]
    formats = [FeatureFormat(f"f{i}", 12) for i in range(4)]
    results = {}
    for k in BUDGETS:
        model, log = fit(dataset(x, y), formats=formats,
                         options=FitOptions(weight_bits=8, max_digits=k))
        weights = model.unit.weights
        if k is not None:
            assert most_digits(weights) <= k, (k, weights)
        assert log.as_dict()["digits_total"] == total_digits(weights)
        results[k] = (log.train_accuracy, total_digits(weights))
    assert results[None][0] == 1.0
    assert results[2][0] >= results[None][0] - 0.02
    assert results[1][0] >= results[None][0] - 0.06
    assert results[None][1] >= results[3][1] >= results[2][1] > results[1][1]


@pytest.fixture(scope="module")
def digits_set():
    # scikit-learn's bundled 8x8 digits (raw 0..16 codes), split as in issue 16.
    x, y = load_digits(return_X_y=True)
    return train_test_split(x.astype(np.int64), y, test_size=0.25, random_state=0)


@pytest.fixture(scope="module")
def digits_float(digits_set):
    """A standardised logistic regression on the training split, folded onto raw codes."""
    x_train, _, y_train, _ = digits_set
    scaler = StandardScaler().fit(x_train)
    float_model = LogisticRegression(max_iter=5000).fit(scaler.transform(x_train), y_train)
    return fold_normalisation(FloatModel(float_model.coef_, float_model.intercept_,
                                         scaler.mean_, scaler.scale_, np.zeros(64, int),
                                         np.full(64, 16)))


def test_digits_float_model_folded_within_budgets(digits_set, digits_float):
    # The quantize path at 6 bits (standardised logistic regression, scikit-learn 1.9.1).
    # Measured: digits in all 921 (none), 921 (K = 3: no 6-bit weight needs 4), 855 (K = 2),
    # 572 (K = 1); test accuracy 0.962 for all four; agreement with the float model on the
    # test rows 0.989, 0.989, 0.987, 0.971.
    x_train, x_test, y_train, y_test = digits_set
    weights, bias = digits_float
    float_test = decide(x_test @ weights.T + bias)
    found = {}
    for k in BUDGETS:
        result = to_integer_weights(weights, bias, 6, x_train, labels=y_train,
                                    refine_epochs=20, centre=np.full(64, 8), max_digits=k)
        if k is not None:
            assert most_digits(result.weights) <= k
        assert sum(result.digits) == total_digits(result.weights)
        decided = decide(x_test @ result.weights.T + result.biases.astype(float))
        found[k] = (np.mean(decided == y_test), np.mean(decided == float_test),
                    total_digits(result.weights))
    assert found[None][0] >= 0.95        # the README's figure for 6 bits, unbudgeted
    assert found[None][2] >= found[3][2] > found[2][2] > found[1][2]
    assert found[2][0] >= found[None][0] - 0.01 and found[2][1] >= found[None][1] - 0.01
    assert found[1][0] >= found[None][0] - 0.03 and found[1][1] >= found[None][1] - 0.04


def test_digits_fitted_within_budgets(digits_set):
    # The fit path at 6 bits, 20 epochs. Measured: digits in all 890, 890, 873, 581 (none,
    # K = 3, 2, 1); test accuracy 0.958, 0.958, 0.958, 0.933.
    x_train, x_test, y_train, y_test = digits_set
    formats = [FeatureFormat(f"f{i}", 5, False, 0, 16) for i in range(64)]
    found = {}
    for k in BUDGETS:
        model, log = fit(dataset(x_train, y_train), formats=formats,
                         options=FitOptions(epochs=20, weight_bits=6, max_digits=k))
        weights = [u.weights for u in model.units]
        if k is not None:
            assert most_digits(weights) <= k
        assert log.digits_per_unit == [total_digits(w) for w in weights]
        found[k] = (accuracy(model, x_test, y_test), total_digits(weights))
    assert found[None][1] >= found[3][1] > found[2][1] > found[1][1]
    assert found[2][0] >= found[None][0] - 0.01
    assert found[1][0] >= found[None][0] - 0.05


@pytest.mark.parametrize("field", ["max_digits", "digit_budget"])
@pytest.mark.parametrize("value", [0, -1, 1.5, True, "2"])
def test_a_budget_must_be_a_positive_integer(field, value):
    # Per weight and in all alike: the library names the field, never a flag.
    for make in (lambda: FitOptions(**{field: value}),
                 lambda: to_integer_weights([[1.0, -2.0]], [0.5], 6, [[1, 2], [3, 4]],
                                            **{field: value})):
        with pytest.raises(InputError) as caught:
            make()
        assert caught.value.field == field and "--" not in str(caught.value)


def test_a_budget_that_keeps_no_decision_is_refused():
    # 3a + 3b > 89 on 4-bit codes: only a = b = 15 is decided 1. At 6 bits with one digit per
    # weight the scales tried give weights of one power of two and a bias that no code reaches
    # (every row decided 0); with two digits (31, 31, -920) every decision is kept.
    x = np.array(np.meshgrid(range(16), range(16))).reshape(2, -1).T
    with pytest.raises(InputError) as caught:
        to_integer_weights([[3.0, 3.0]], [-89.0], 6, x, max_digits=1)
    assert caught.value.field == "max_digits" and "same decision" in str(caught.value)
    kept = to_integer_weights([[3.0, 3.0]], [-89.0], 6, x, max_digits=2)
    assert kept.agreement == 1.0 and most_digits(kept.weights) <= 2


def digits_bank_within(digits_set, digits_float, total):
    """The quantize path at 6 bits, one digit per weight (572 digits in all, test accuracy
    0.962), then at most ``total`` digits in all: (test accuracy, digits in all)."""
    x_train, x_test, y_train, y_test = digits_set
    weights, bias = digits_float
    result = to_integer_weights(weights, bias, 6, x_train, labels=y_train, refine_epochs=20,
                                centre=np.full(64, 8), max_digits=1, digit_budget=total)
    assert most_digits(result.weights) <= 1 and sum(result.digits) == total_digits(
        result.weights)
    decided = decide(x_test @ result.weights.T + result.biases.astype(float))
    return float(np.mean(decided == y_test)), total_digits(result.weights)


def test_digits_bank_within_a_budget_in_all(digits_set, digits_float):
    # The issue's target: the digits bank (scikit-learn 1.9.1's bundled 8x8 digits, split as
    # above) keeps test accuracy >= 0.95 with as few digits as possible. Measured here, budget
    # in all -> test accuracy (K = 1, 6 bits): 572 -> 0.962, 500 -> 0.962, 450 -> 0.958,
    # 400 -> 0.964, 350 -> 0.960, 300 -> 0.958, 250 -> 0.962, 240 -> 0.958, 230 -> 0.956,
    # 220 -> 0.947, 210 -> 0.936.
    accuracy, digits = digits_bank_within(digits_set, digits_float, 250)
    assert digits == 250 and accuracy >= 0.95


@pytest.mark.slow
@pytest.mark.parametrize("total", [500, 450, 400, 350, 300, 230])
def test_digits_bank_accuracy_against_the_budget_in_all(digits_set, digits_float, total):
    # The curve of the test above, each point checked: the budget is spent to the digit and
    # test accuracy stays >= 0.95 down to 230 digits (about 2.5 times fewer than K = 1 alone).
    accuracy, digits = digits_bank_within(digits_set, digits_float, total)
    assert digits == total and accuracy >= 0.95
