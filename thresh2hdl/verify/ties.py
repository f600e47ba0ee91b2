"""Vectors where a bank's argmax is most often written wrong: two or three units tied at the top
score, and each unit the winner.

Random inputs almost never tie two scores exactly, yet the tie rule (the lower index wins) is
what a hand-edited or mis-generated comparator gets wrong first. The ties are solved from the
model like the witnesses: on top of a start that favours the units concerned, features are set
so that the scores are equal exactly (integer solutions of ``d·x = t`` along two features, by the
extended Euclidean algorithm), and kept only where no other unit scores higher. Each unit the
winner drives every comparison of the argmax tree both ways and every bit of the class index.
"""

import itertools
import math

import numpy as np

__all__ = ["argmax_vectors"]

ATTEMPTS = 40          # starts tried per pair or triple of units
PER_PAIR = 2           # tie vectors kept per pair (and per triple) of units
MAX_TRIPLES = 30       # triples of units tried, at most (a bank of 10 has 120)
# Starts tried in all, for the winners, the pairs and the triples: a bank of 256 units has
# 32,640 pairs, most of them of units that are never the top, so the work is bounded, the
# units that can win are found first and only their pairs are tried, nearest indices first
# (the argmax compares neighbouring groups, so a tie across each comparison comes early).
BUDGET = {"winners": 3000, "pairs": 4000, "triples": 1200}


class _Budget:
    def __init__(self, starts):
        self.left = starts

    def take(self):
        self.left -= 1
        return self.left >= 0


def _scores(analyses, row):
    return [sum(int(w) * int(x) for w, x in zip(a.weights, row)) + a.bias for a in analyses]


def _start(analyses, favoured, rng, keep, totals):
    """A vector at the corners that favour the units ``favoured`` over the rest, a random
    ``1 - keep`` of its features drawn within range instead (``totals``: each feature's
    weights summed over all units)."""
    ranges = analyses[0].feature_ranges
    others = max(len(analyses) - len(favoured), 1)
    row = []
    for f, (lo, hi) in enumerate(ranges):
        mine = sum(analyses[k].weights[f] for k in favoured)
        pull = mine * others - (totals[f] - mine) * len(favoured)
        if rng.random() < keep and pull != 0:
            row.append(hi if pull > 0 else lo)
        else:
            row.append(int(rng.integers(lo, hi, endpoint=True)))
    return row


def _extended_gcd(a, b):
    if b == 0:
        return (a, 1, 0) if a >= 0 else (-a, -1, 0)
    g, x, y = _extended_gcd(b, a % b)
    return g, y, x - (a // b) * y


_WIDE = 1 << 62


def _steps(value, step, lo, hi):
    """The integers ``k`` with ``lo <= value + k * step <= hi``, as ``(low, high)``."""
    if step == 0:
        return (-_WIDE, _WIDE) if lo <= value <= hi else (1, 0)
    first, last = sorted(((lo - value) / step, (hi - value) / step))
    return int(np.ceil(first)), int(np.floor(last))


def _within(*spans):
    return max(lo for lo, _ in spans), min(hi for _, hi in spans)


def _pick(rng, low, high):
    return int(rng.integers(low, high, endpoint=True)) if high - low < _WIDE else low


def _dot(d, row):
    return sum(int(di) * int(x) for di, x in zip(d, row))


def _solve_two(row, d, target, a, b, ranges, rng):
    """``row`` with features ``a`` and ``b`` changed so that ``d·row == target`` exactly and
    both stay in range, or None. Integer solutions of ``d_a x_a + d_b x_b = t`` are one
    solution plus ``k (d_b/g, -d_a/g)``; ``k`` is drawn from the span that keeps both in."""
    t = target - _dot(d, row) + d[a] * row[a] + d[b] * row[b]
    g, p, q = _extended_gcd(d[a], d[b])
    if g == 0 or t % g:
        return None
    xa, xb = p * (t // g), q * (t // g)
    step_a, step_b = d[b] // g, -d[a] // g
    low, high = _within(_steps(xa, step_a, *ranges[a]), _steps(xb, step_b, *ranges[b]))
    if low > high:
        return None
    k = _pick(rng, low, high)
    out = list(row)
    out[a], out[b] = xa + k * step_a, xb + k * step_b
    return out


def _solve_keeping(row, kept, d, target, features, ranges, rng):
    """``row`` (where ``kept·row`` is already right) changed along four ``features`` so that
    ``d·row == target`` too: moves along ``(a, b)`` and ``(c, e)`` that leave ``kept·row``
    alone, ``m`` and ``n`` of them, with ``m u + n v`` the gap (extended Euclid again)."""
    a, b, c, e = features
    g1, g2 = math.gcd(kept[a], kept[b]), math.gcd(kept[c], kept[e])
    if g1 == 0 or g2 == 0:
        return None
    move_ab = (kept[b] // g1, -kept[a] // g1)
    move_ce = (kept[e] // g2, -kept[c] // g2)
    u = d[a] * move_ab[0] + d[b] * move_ab[1]
    v = d[c] * move_ce[0] + d[e] * move_ce[1]
    gap = target - _dot(d, row)
    h, p, q = _extended_gcd(u, v)
    if h == 0 or gap % h:
        return None
    m0, n0 = p * (gap // h), q * (gap // h)
    m_span = _within(_steps(row[a], move_ab[0], *ranges[a]), _steps(row[b], move_ab[1],
                                                                     *ranges[b]))
    n_span = _within(_steps(row[c], move_ce[0], *ranges[c]), _steps(row[e], move_ce[1],
                                                                     *ranges[e]))
    # m = m0 + s v/h and n = n0 - s u/h for any integer s.
    low, high = _within(_steps(m0, v // h, *m_span), _steps(n0, -u // h, *n_span))
    if low > high or m_span[0] > m_span[1] or n_span[0] > n_span[1]:
        return None
    step = _pick(rng, low, high)
    m, n = m0 + step * (v // h), n0 - step * (u // h)
    out = list(row)
    out[a] += m * move_ab[0]
    out[b] += m * move_ab[1]
    out[c] += n * move_ce[0]
    out[e] += n * move_ce[1]
    return out


def _approach(row, d, target, ranges, rng):
    """``row`` moved feature by feature (in a random order, each within its range) to bring
    ``d·row`` near ``target``, so that two features can then make it exact."""
    row = list(row)
    for f in rng.permutation(len(row)):
        gap = target - _dot(d, row)
        if gap == 0:
            break
        if d[f]:
            lo, hi = ranges[f]
            row[f] = min(max(row[f] + round(gap / d[f]), lo), hi)
    return row


def _approach_keeping(row, kept, d, target, ranges, rng):
    """As :func:`_approach`, by moves along two features at a time that leave ``kept·row``
    alone."""
    row = list(row)
    n = len(row)
    for _ in range(2 * n):
        gap = target - _dot(d, row)
        if gap == 0:
            break
        a, b = (int(f) for f in rng.choice(n, 2, replace=False))
        g = math.gcd(kept[a], kept[b])
        if g == 0:
            continue
        move = (kept[b] // g, -kept[a] // g)
        effect = d[a] * move[0] + d[b] * move[1]
        if effect == 0:
            continue
        low, high = _within(_steps(row[a], move[0], *ranges[a]),
                            _steps(row[b], move[1], *ranges[b]))
        m = min(max(round(gap / effect), low), high)
        row[a] += m * move[0]
        row[b] += m * move[1]
    return row


def _tie(analyses, units, rng, totals, budget):
    """A vector where ``units`` (two or three) share the top score, or None."""
    ranges = analyses[0].feature_ranges
    first = analyses[units[0]]
    differences = [([int(w) - int(v) for w, v in zip(first.weights, analyses[u].weights)],
                    analyses[u].bias - first.bias) for u in units[1:]]
    movable = [f for f, (lo, hi) in enumerate(ranges) if lo < hi]
    for attempt in range(ATTEMPTS):
        if not budget.take():
            return None
        row = _start(analyses, units, rng, 1 - attempt / ATTEMPTS, totals)
        (d, target) = differences[0]
        free = [f for f in movable if d[f] != 0]
        if len(free) < 2:
            return None
        row = _approach(row, d, target, ranges, rng)
        row = _solve_two(row, d, target, *(int(f) for f in rng.choice(free, 2, replace=False)),
                         ranges, rng)
        if row is not None and len(differences) > 1:
            if len(movable) < 4:
                return None
            row = _approach_keeping(row, d, *differences[1], ranges, rng)
            features = [int(f) for f in rng.choice(movable, 4, replace=False)]
            row = _solve_keeping(row, d, *differences[1], features, ranges, rng)
        if row is None:
            continue
        scores = _scores(analyses, row)
        top = max(scores)
        if all(scores[u] == top for u in units):
            return row
    return None


def _winner(analyses, unit, rng, totals, attempts):
    """A vector where ``unit`` alone has the top score, or None."""
    for attempt in range(attempts):
        row = _start(analyses, [unit], rng, 1 - attempt / attempts, totals)
        scores = _scores(analyses, row)
        if scores[unit] > max(s for k, s in enumerate(scores) if k != unit):
            return row
    return None


def argmax_vectors(analyses, seed=0):
    """The argmax's groups for a bank's unit ``analyses``: ``[(group name, rows)]``, each
    row within the declared ranges (empty for one unit)."""
    if len(analyses) < 2:
        return []
    rng = np.random.default_rng([seed, 21])
    count = len(analyses)
    totals = [sum(a.weights[f] for a in analyses) for f in range(len(analyses[0].weights))]
    attempts = max(4, min(ATTEMPTS, BUDGET["winners"] // count))
    winners = {unit: row for unit in range(count)
               if (row := _winner(analyses, unit, rng, totals, attempts))}
    can_win = sorted(winners)
    budget = _Budget(BUDGET["pairs"])
    pairs = []
    for i, j in sorted(itertools.combinations(can_win, 2), key=lambda p: (p[1] - p[0], p)):
        for _ in range(PER_PAIR):
            row = _tie(analyses, (i, j), rng, totals, budget)
            if row is not None:
                pairs.append(row)
    triples = list(itertools.combinations(can_win, 3))
    if len(triples) > MAX_TRIPLES:
        triples = [triples[n] for n in sorted(rng.choice(len(triples), MAX_TRIPLES,
                                                         replace=False))]
    budget = _Budget(BUDGET["triples"])
    threes = [row for units in triples if (row := _tie(analyses, units, rng, totals, budget))]
    return [("each unit the winner", list(winners.values())),
            ("two units tied at the top", pairs), ("three units tied at the top", threes)]
