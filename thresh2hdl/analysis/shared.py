"""Terms shared across a shift-add bank's units: common sub-expressions of its constant matrix.

Every unit of a bank reads the same features, so a sum of two shifted inputs that several
units need can be made once. In ``shiftadd`` each unit's score is a sum of terms
``sign * (source << shift)``, one per nonzero canonical signed digit of a weight, the source a
feature. :func:`plan_sharing` repeatedly takes the two-term pattern that occurs most often
(Hartley 1996, "Subexpression sharing in filters using canonic signed digit multipliers", a
greedy search over two-term patterns), makes it a shared term ``t = a + (b << d)`` or
``a - (b << d)`` (or with ``a`` the shifted one), and replaces every non-overlapping occurrence
by ``t``, until no pattern occurs twice. Each occurrence saves one adder and the shared term
costs one, so every step saves ``occurrences - 1``.

Ties go to the smallest pattern in a fixed order, so the plan (and the Verilog made from it) is
the same on every run.
"""

import heapq
from collections import Counter, defaultdict
from dataclasses import dataclass

from .widths import csd_digits

__all__ = ["FEATURE", "SHARED", "SharedTerm", "SharingPlan", "plan_sharing", "shared_name"]

FEATURE, SHARED = 0, 1     # a source is (FEATURE, feature index) or (SHARED, term index)


def shared_name(index):
    """The name of shared term ``index``, the same in every unit (and in the Verilog)."""
    return f"share{index}"


@dataclass(frozen=True)
class SharedTerm:
    """``first + sign * second``, each operand ``(source, shift)``; at most one shift is
    nonzero."""

    first: tuple
    second: tuple
    sign: int
    uses: int          # occurrences replaced when it was made (at least 2)


@dataclass(frozen=True)
class SharingPlan:
    """The shared terms (each refers only to features and earlier terms) and, per unit, the
    terms left to sum: ``(source, shift, sign)``, sorted."""

    terms: tuple
    unit_terms: tuple
    digit_terms: tuple    # per unit: its nonzero signed digits, before sharing

    @property
    def adders_without(self):
        """Adders summing every unit's digits on its own (the bias aside)."""
        return sum(max(n - 1, 0) for n in self.digit_terms)

    @property
    def adders_with(self):
        """Adders with sharing: one per shared term, and each unit's sum of what is left."""
        return len(self.terms) + sum(max(len(terms) - 1, 0) for terms in self.unit_terms)

    def users(self, index):
        """The units whose sums need shared term ``index`` (directly or inside another)."""
        needs = [set() for _ in self.terms]
        for j, term in enumerate(self.terms):
            needs[j].add(j)
            for (kind, source), _ in (term.first, term.second):
                if kind == SHARED:
                    needs[j] |= needs[source]
        return tuple(u for u, terms in enumerate(self.unit_terms)
                     if any(index in needs[source] for (kind, source), _, _ in terms
                            if kind == SHARED))

    def definition(self, feature_names=None):
        """Each term's definition as text, e.g. ``x3 - (x7 << 2)``, for the report."""
        def operand(source, shift):
            kind, index = source
            name = shared_name(index) if kind == SHARED else \
                (feature_names[index] if feature_names else f"x{index}")
            return f"({name} << {shift})" if shift else name
        return tuple(f"{operand(*t.first)} {'+' if t.sign > 0 else '-'} {operand(*t.second)}"
                     for t in self.terms)


def digit_terms(weights):
    """A unit's terms before sharing: ``((FEATURE, i), shift, sign)`` per nonzero digit."""
    terms = []
    for index, weight in enumerate(weights):
        if weight:
            sign = 1 if weight > 0 else -1
            terms += [((FEATURE, index), shift, sign * digit)
                      for shift, digit in csd_digits(abs(weight))]
    return sorted(terms)


def _pattern(left, right):
    """The pattern of two terms (``left`` before ``right`` in sorted order): both sources, their
    shifts above the lower one, and the relative sign; None for one source at one shift."""
    (a, sa, ga), (b, sb, gb) = left, right
    if (a, sa) == (b, sb):
        return None
    base = min(sa, sb)
    return (a, sa - base, b, sb - base, ga * gb)


def _pairs(terms, others=(), counts=None, step=1):
    """Add ``step`` to ``counts`` for every pattern of two of ``terms`` and of one of ``terms``
    with one of ``others``, overlapping or not: pattern -> count."""
    counts = defaultdict(int) if counts is None else counts
    for i, left in enumerate(terms):
        for right in list(terms[i + 1:]) + list(others):
            pattern = _pattern(*sorted((left, right)))
            if pattern is not None:
                counts[pattern] += step
    return counts


def _update(counts, total, old, new):
    """``counts`` (the pairs of ``old``) made the pairs of ``new``, and the bank's ``total``
    with them: the pairs of the terms that left taken away, those of the terms that came
    added."""
    kept = list((Counter(old) & Counter(new)).elements())
    delta = _pairs(list((Counter(old) - Counter(new)).elements()), kept, step=-1)
    _pairs(list((Counter(new) - Counter(old)).elements()), kept, delta, 1)
    for pattern, n in delta.items():
        for table in (counts, total):
            table[pattern] += n
            if not table[pattern]:
                del table[pattern]


def _occurrences(terms, pattern):
    """The non-overlapping occurrences of ``pattern`` in one unit's sorted terms, as index
    pairs: each term, in order, pairs with the first unused partner after it."""
    a, da, b, db, relative = pattern
    where = defaultdict(list)
    for index, term in enumerate(terms):
        where[term].append(index)
    used, pairs = set(), []
    for i, (source, shift, sign) in enumerate(terms):
        if i in used or source != a or shift < da:
            continue
        partner = (b, shift - da + db, sign * relative)
        j = next((j for j in where.get(partner, ()) if j > i and j not in used), None)
        if j is not None:
            used.update((i, j))
            pairs.append((i, j))
    return pairs


def plan_sharing(weight_rows):
    """The greedy plan over a bank's weights (one row per unit)."""
    units = [digit_terms(row) for row in weight_rows]
    before = tuple(len(terms) for terms in units)
    terms = []
    bounds = [_pairs(unit) for unit in units]     # counts with overlaps: upper bounds
    total = defaultdict(int)
    for counts in bounds:
        for pattern, n in counts.items():
            total[pattern] += n
    while True:
        best = _most_frequent(units, bounds, total)
        if best is None:
            break
        pattern, uses = best
        a, da, b, db, relative = pattern
        source = (SHARED, len(terms))
        terms.append(SharedTerm((a, da), (b, db), relative, uses))
        for k, unit in enumerate(units):
            if bounds[k].get(pattern):
                units[k] = _substitute(unit, pattern, source)
                _update(bounds[k], total, unit, units[k])
    return SharingPlan(tuple(terms), tuple(tuple(unit) for unit in units), before)


def _most_frequent(units, bounds, total):
    """``(pattern, occurrences)`` of the pattern with the most non-overlapping occurrences
    (ties: the smallest pattern), or None when none occurs twice. Patterns are tried in the
    order of their upper bounds, until no bound can beat the best found."""
    heap = [(-n, pattern) for pattern, n in total.items() if n >= 2]
    heapq.heapify(heap)
    best, best_uses = None, 1
    while heap and -heap[0][0] >= max(best_uses, 2):
        _, pattern = heapq.heappop(heap)
        uses = sum(len(_occurrences(unit, pattern)) for unit, counts in zip(units, bounds)
                   if counts.get(pattern))
        if uses > best_uses or (uses == best_uses and best is not None and pattern < best):
            best, best_uses = pattern, uses
    return None if best is None else (best, best_uses)


def _substitute(terms, pattern, source):
    """``terms`` with each occurrence of ``pattern`` replaced by ``source`` at the lower
    shift, with the first operand's sign."""
    pairs = _occurrences(terms, pattern)
    replaced = {index for pair in pairs for index in pair}
    kept = [term for index, term in enumerate(terms) if index not in replaced]
    for i, j in pairs:
        (_, si, gi), (_, sj, _) = terms[i], terms[j]
        kept.append((source, min(si, sj), gi))
    return sorted(kept)
