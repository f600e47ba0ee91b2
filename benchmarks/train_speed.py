"""Training throughput: ours against scikit-learn's Perceptron, measured in the same run.

    python benchmarks/train_speed.py

Prints samples x features per second for each and the ratio (target: ours >= 1.0x) on
100,000 x 16 integer codes, for a separable set (the trigger case: a margin around the
threshold) and a noisy one (labels flipped at random), so the figure is not one flattering case.
Both train the symmetric rule for the same epochs, in file order, with no early stop.
"""

import time
import warnings

import numpy as np
from sklearn.exceptions import ConvergenceWarning
from sklearn.linear_model import Perceptron

from thresh2hdl.train.perceptron import FitOptions, train_unit

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


def main():
    for name, noise in (("separable", 0.0), ("noisy (5% flipped)", 0.05)):
        x, y = data(noise)
        a = np.hstack([x - 2048, np.full((ROWS, 1), 2048)])
        options = FitOptions(rule="symmetric", keep="last", epochs=EPOCHS, until_clean=False,
                             shuffle=False)      # the last weights, as scikit-learn returns
        ours = best_of(3, lambda: train_unit(a, y, options, np.random.default_rng(0)))

        def reference():
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", ConvergenceWarning)
                Perceptron(eta0=1, penalty=None, shuffle=False, tol=None,
                           max_iter=EPOCHS).fit(x - 2048, y)

        theirs = best_of(3, reference)
        work = ROWS * FEATURES * EPOCHS
        print(f"{name}: ours {work / ours:.3e} sample-features/s, scikit-learn "
              f"{work / theirs:.3e}; ratio {theirs / ours:.2f}x (target >= 1.0x)")


if __name__ == "__main__":
    main()
