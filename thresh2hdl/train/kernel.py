"""The perceptron's walk through one epoch: one implementation, compiled when numba is there.

A mistake changes the weights, so the rule is a loop over rows that cannot be vectorised; in
Python each row (or each mistake, skipping blocks of correct rows with numpy) is an
interpreter step, 0.04x scikit-learn's Cython on noisy data (``benchmarks/train_speed.py``).
:func:`walk_epoch` is written in the subset of Python that ``numba.njit`` compiles, and
:func:`epoch_walker` gives that compiled form, or the same function uncompiled when numba cannot
be imported (the tests run both). Integers are int64 throughout, as numpy's were before.
"""

__all__ = ["walk_epoch", "epoch_walker", "compiled"]

_walker = None


def walk_epoch(a, order, sign, target, w, total, classic, averaged):
    """Visit the rows of ``a`` in ``order`` once, updating ``w`` in place; return the mistakes.

    ``classic``: a mistake is ``(z > 0) != target``; else (symmetric) ``sign * z <= 0``. Either
    way the step is ``w += sign * row``. With ``averaged``, ``total`` gains the weights after
    every row (after the update on a mistake), added once per change of the weights: integer
    sums, so grouping them leaves the result unchanged."""
    d = a.shape[1]
    mistakes = 0
    unchanged = 0          # rows since the weights last changed, not yet in ``total``
    for k in range(order.shape[0]):
        i = order[k]
        z = 0
        for j in range(d):
            z += a[i, j] * w[j]
        wrong = ((z > 0) != target[i]) if classic else (sign[i] * z <= 0)
        if wrong:
            if averaged:
                for j in range(d):
                    total[j] += unchanged * w[j]
                unchanged = 0
            for j in range(d):
                w[j] += sign[i] * a[i, j]
            mistakes += 1
        unchanged += 1
    if averaged:
        for j in range(d):
            total[j] += unchanged * w[j]
    return mistakes


def epoch_walker():
    """:func:`walk_epoch` compiled by numba, or as written if numba cannot be imported.

    numba is imported here, on the first training, not with the package: it takes about 0.4 s,
    and the compile about 0.7 s more, once; the machine code is cached beside this module, or in
    numba's user cache folder where that is not writable, or not at all where neither is."""
    global _walker
    if _walker is None:
        try:
            import numba
        except ImportError:
            _walker = walk_epoch
        else:
            try:
                _walker = numba.njit(cache=True, nogil=True)(walk_epoch)
            except RuntimeError:     # no cache folder it can write: compile every process
                _walker = numba.njit(nogil=True)(walk_epoch)
    return _walker


def compiled():
    """Whether training runs the compiled walk."""
    return epoch_walker() is not walk_epoch
