"""Training throughput: ours against scikit-learn's Perceptron, measured in the same run.

    python benchmarks/train_speed.py

On 100,000 x 16 synthetic 12-bit codes, a separable set (the trigger case: a margin around the
threshold) and a noisy one (5% of the labels flipped at random), so the figure is not one
flattering case. Prints, for each, the ratio scikit-learn's time / ours (target: >= 1.0x for
every line, in one run), best of three:

- ``walk``: ``train_unit``, the training inside ``fit`` (the symmetric rule, rows in file order,
  the last weights, 5 epochs, no early stop), against ``Perceptron(eta0=1, penalty=None,
  shuffle=False, tol=None, max_iter=5)``: the same rule and steps, scikit-learn's own (the
  tests show equal weights, tests/train/test_train.py).
- ``walk, shuffled``: the same with the rows shuffled each epoch (ours from numpy's generator,
  scikit-learn's ``shuffle=True, random_state=0``): the same work in other orders.
- ``fit``: the whole ``fit`` call (input checks, centring, training, folding onto raw codes, the
  training accuracy; full precision, no bit budget) against ``Perceptron.fit`` on the codes.

Then the first training in a fresh process: numba's import and compile with an empty cache,
and with the cache it wrote (the compiled walk is cached; see thresh2hdl/train/kernel.py).
"""

import os
import subprocess
import sys
import tempfile
import time
import warnings

import numpy as np
import sklearn
from sklearn.exceptions import ConvergenceWarning
from sklearn.linear_model import Perceptron

from thresh2hdl.model import FeatureFormat
from thresh2hdl.model.data import Dataset
from thresh2hdl.train import kernel
from thresh2hdl.train.perceptron import FitOptions, fit, train_unit

ROWS, FEATURES, EPOCHS = 100_000, 16, 5


def data(noise, seed=0):
    rng = np.random.default_rng(seed)
    x = rng.integers(0, 4096, (ROWS * 2, FEATURES))
    w = rng.integers(-8, 9, FEATURES)
    z = (x - 2048) @ w
    keep = np.abs(z) > 0.02 * 4096 * np.abs(w).sum() if noise == 0 else np.ones(len(z), bool)
    x, z = x[keep][:ROWS], z[keep][:ROWS]
    y = z > 0
    flip = rng.random(ROWS) < noise
    return x, np.where(flip, ~y, y)


def best_of(runs, function):
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return min(times)


def reference(x, y, **settings):
    """scikit-learn's Perceptron with our symmetric rule's settings (see the module text)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return Perceptron(eta0=1, penalty=None, tol=None, max_iter=EPOCHS, **settings).fit(x, y)


def first_training_seconds(cache_dir):
    """What a fresh process's first training adds: numba's import, then its compile or its
    cache's load (the package itself is imported before the clock starts)."""
    script = ("import time, numpy as np\n"
              "from thresh2hdl.train import kernel\n"
              "start = time.perf_counter()\n"
              "a = np.ones((2, 2), np.int64)\n"
              "kernel.epoch_walker()(a, np.arange(2), np.ones(2, np.int64), np.ones(2, bool),\n"
              "                      np.zeros(2, np.int64), np.zeros(2, np.int64), True, False)\n"
              "print(time.perf_counter() - start)\n")
    done = subprocess.run([sys.executable, "-P", "-c", script], capture_output=True, text=True,
                          check=True, env={**os.environ, "NUMBA_CACHE_DIR": cache_dir})
    return float(done.stdout)


def main():
    print(f"scikit-learn {sklearn.__version__}; our walk "
          f"{'compiled by numba' if kernel.compiled() else 'uncompiled (numba missing)'}")
    work = ROWS * FEATURES * EPOCHS
    formats = [FeatureFormat(f"f{i}", 12) for i in range(FEATURES)]
    for name, noise in (("separable", 0.0), ("noisy (5% flipped)", 0.05)):
        x, y = data(noise)
        a = np.hstack([x - 2048, np.full((ROWS, 1), 2048)])
        dataset = Dataset("synthetic", tuple(f"f{i}" for i in range(FEATURES)), x,
                          y.astype(np.int64))
        settings = dict(rule="symmetric", keep="last", epochs=EPOCHS, until_clean=False)
        in_order = FitOptions(shuffle=False, **settings)
        shuffled = FitOptions(shuffle=True, **settings)
        whole = FitOptions(shuffle=False, max_weight_bits=None, **settings)
        train_unit(a, y, in_order, np.random.default_rng(0))       # compiled before timing
        rows = [
            ("walk", lambda: train_unit(a, y, in_order, np.random.default_rng(0)),
             lambda: reference(x - 2048, y, shuffle=False)),
            ("walk, shuffled", lambda: train_unit(a, y, shuffled, np.random.default_rng(0)),
             lambda: reference(x - 2048, y, shuffle=True, random_state=0)),
            ("fit", lambda: fit(dataset, formats=formats, options=whole),
             lambda: reference(x, y, shuffle=False)),
        ]
        for label, ours_run, theirs_run in rows:
            ours, theirs = best_of(3, ours_run), best_of(3, theirs_run)
            print(f"{name}, {label}: ours {ours * 1e3:.1f} ms ({work / ours:.2e} "
                  f"sample-features/s), scikit-learn {theirs * 1e3:.1f} ms; ratio "
                  f"{theirs / ours:.2f}x (target >= 1.0x)")
    with tempfile.TemporaryDirectory() as cache_dir:
        cold, warm = first_training_seconds(cache_dir), first_training_seconds(cache_dir)
    print(f"first training in a fresh process: {cold:.2f} s with an empty numba cache "
          f"(import and compile), {warm:.2f} s from the cache")


if __name__ == "__main__":
    main()
