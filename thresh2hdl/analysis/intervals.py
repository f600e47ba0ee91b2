"""Exact ranges of sums of independent terms: interval arithmetic that loses nothing.

A score ``w . x + b`` is a sum of terms in independent features, so the range of a sum is the sum
of the terms' ranges and every bound is reached by some input (its witness). The plans build
their node ranges from these.
"""

__all__ = ["term_range", "box_product", "prefixes", "prefix_ranges", "union", "witnesses"]


def term_range(weight, lo, hi):
    """Exact range of ``weight * x`` for ``x`` in ``[lo, hi]``."""
    a, b = weight * lo, weight * hi
    return min(a, b), max(a, b)


def box_product(a, b):
    """Exact range of ``x * w`` for independent ``x`` in ``a`` and ``w`` in ``b``: the
    product is bilinear, so its extremes are at corners."""
    corners = [x * w for x in a for w in b]
    return min(corners), max(corners)


def prefixes(terms, start):
    """Ranges of ``start``, ``start + terms[0]``, ... up to the sum of every term."""
    lo, hi = start
    out = [(lo, hi)]
    for a, b in terms:
        lo, hi = lo + a, hi + b
        out.append((lo, hi))
    return out


def prefix_ranges(weights, bias, ranges):
    """Exact range of ``bias + w[0] x[0] + ... + w[k-1] x[k-1]`` for k = 0 .. N: what a
    multiply-accumulate holds after k beats."""
    return prefixes([term_range(w, lo, hi) for w, (lo, hi) in zip(weights, ranges)],
                    (bias, bias))


def union(pairs):
    """The smallest range holding every range of ``pairs``."""
    pairs = list(pairs)
    return min(p[0] for p in pairs), max(p[1] for p in pairs)


def witnesses(weights, ranges):
    """The inputs that reach the lowest and the highest score."""
    return (tuple(lo if w > 0 else hi for w, (lo, hi) in zip(weights, ranges)),
            tuple(hi if w > 0 else lo for w, (lo, hi) in zip(weights, ranges)))
