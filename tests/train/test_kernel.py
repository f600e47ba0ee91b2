"""The epoch walk (train/kernel.py), compiled and not, against the rule as written."""

import json
import subprocess
import sys
import types

import numpy as np
import pytest

from thresh2hdl.train import kernel
from thresh2hdl.train.perceptron import FitOptions, train_unit


def literal_train(a, target, rule, keep, orders, until_clean):
    """The rules as written, one row at a time in Python integers (exact, never wrapping): the
    gold model for the trainer. ``orders``: the rows' order in each epoch."""
    rows = [[int(v) for v in row] for row in a]
    w, total, steps, mistakes_log = [0] * len(rows[0]), [0] * len(rows[0]), 0, []
    best, best_correct = list(w), -1

    def score(row, weights):
        return sum(x * v for x, v in zip(row, weights))

    for order in orders:
        mistakes = 0
        for i in order:
            z, t = score(rows[i], w), bool(target[i])
            s = 1 if t else -1
            if (rule == "classic" and (z > 0) != t) or (rule == "symmetric" and s * z <= 0):
                w = [v + s * x for v, x in zip(w, rows[i])]
                mistakes += 1
            total = [u + v for u, v in zip(total, w)]
            steps += 1
        mistakes_log.append(mistakes)
        correct = sum((score(row, w) > 0) == bool(t) for row, t in zip(rows, target))
        if correct > best_correct:
            best, best_correct = list(w), correct
        if until_clean and mistakes == 0:
            break
    kept = {"last": w, "pocket": best, "averaged": [round(u / steps) for u in total]}[keep]
    return kept, mistakes_log, [u / steps for u in total]


def case_data(case):
    """Rows with a bias column and targets: noisy (never clean), separable (clean within a few
    epochs) or wide (24-bit codes: scores past 32 bits, exact in int64)."""
    rng = np.random.default_rng(len(case))
    bits, rows = (24, 200) if case == "wide" else (7, 300)
    half = 1 << (bits - 1)
    x = rng.integers(-half, half, (rows, 6))
    z = x @ rng.integers(-3, 4, 6)
    if case == "noisy":
        z = z + rng.integers(-half * 4, half * 4, rows)
    else:
        keep = np.abs(z) > half // 4
        x, z = x[keep], z[keep]
    return np.hstack([x, np.full((len(x), 1), half)]), z > 0


@pytest.mark.parametrize("rule", ["classic", "symmetric"])
@pytest.mark.parametrize("keep", ["last", "pocket", "averaged"])
@pytest.mark.parametrize("shuffle", [False, True])
@pytest.mark.parametrize("case, until_clean", [("noisy", True), ("separable", True),
                                               ("separable", False), ("wide", False)])
def test_trainer_equals_literal_loop(rule, keep, shuffle, case, until_clean, walker):
    a, target = case_data(case)
    epochs = 6
    options = FitOptions(rule=rule, keep=keep, epochs=epochs, until_clean=until_clean,
                         shuffle=shuffle)
    w, mistakes, mean = train_unit(a, target, options, np.random.default_rng(5))
    rng = np.random.default_rng(5)   # the trainer draws one order an epoch from its rng
    orders = [rng.permutation(len(a)) if shuffle else range(len(a)) for _ in range(epochs)]
    want_w, want_mistakes, want_mean = literal_train(a, target, rule, keep, orders, until_clean)
    assert w.tolist() == want_w
    assert mistakes == want_mistakes
    if case == "separable" and until_clean:
        assert len(mistakes) < epochs and mistakes[-1] == 0    # stopped at a clean epoch
    if case == "wide":
        assert np.abs(a @ w).max() > 1 << 40    # beyond 32-bit (and float32) arithmetic
    if keep == "averaged":
        assert mean.tolist() == want_mean
    else:
        assert mean is None


def test_fallback_without_numba_trains_the_same():
    # numba made unimportable in a fresh process: the walk runs as written, with equal results.
    a, target = case_data("noisy")
    script = (
        "import sys, json, numpy as np\n"
        "sys.modules['numba'] = None\n"
        "from thresh2hdl.train import kernel, FitOptions, train_unit\n"
        "a, t = (np.array(v) for v in json.loads(sys.stdin.read()))\n"
        "w, m, _ = train_unit(a, t.astype(bool), FitOptions(epochs=4), np.random.default_rng(1))\n"
        "print(json.dumps([kernel.compiled(), w.tolist(), m]))\n")
    done = subprocess.run([sys.executable, "-P", "-c", script], capture_output=True, text=True,
                          input=json.dumps([a.tolist(), target.tolist()]), check=True)
    compiled, w, mistakes = json.loads(done.stdout)
    here, here_mistakes, _ = train_unit(a, target, FitOptions(epochs=4), np.random.default_rng(1))
    assert compiled is False
    assert (w, mistakes) == (here.tolist(), here_mistakes)


def test_numba_compiles_the_walk_when_installed():
    numba = pytest.importorskip("numba")
    walk = kernel.epoch_walker()
    assert kernel.compiled() and isinstance(walk, numba.core.registry.CPUDispatcher)
    assert walk.py_func is kernel.walk_epoch     # the one implementation, compiled


def test_no_writable_cache_compiles_without_one(monkeypatch):
    # numba raises RuntimeError when caching finds no folder it can write (numba 0.68 here,
    # numba/core/caching.py): the walk is then compiled for the process alone.
    calls = []

    def njit(**flags):
        calls.append(flags)
        if flags.get("cache"):
            raise RuntimeError("cannot cache function 'walk_epoch': no locator available")
        return lambda function: ("compiled", function)

    monkeypatch.setitem(sys.modules, "numba", types.SimpleNamespace(njit=njit))
    monkeypatch.setattr(kernel, "_walker", None)
    assert kernel.epoch_walker() == ("compiled", kernel.walk_epoch)
    assert [flags.get("cache", False) for flags in calls] == [True, False]
