"""The argmax's vectors: every row inside the declared ranges, every tie exact and at the top,
every winner alone at the top, judged by plain Python sums written here (the scores'
definition, w·x + b, and the model's rule that the lowest index wins a tie)."""

import itertools

import numpy as np

from helpers import bank_model
from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.verify.ties import _extended_gcd, argmax_vectors
from thresh2hdl.verify.vectors import make_vectors


def scores(model, row):
    return [sum(w * x for w, x in zip(unit.weights, row)) + unit.bias for unit in model.units]


def groups(model, seed=0):
    analyses = make_component(UnitConfig(model)).unit_analyses
    return dict(argmax_vectors(analyses, seed)), analyses[0].feature_ranges


def test_the_extended_euclid_gives_bezout_coefficients():
    # Bezout's identity a x + b y = gcd(a, b) (the extended Euclidean algorithm), against
    # Python's math.gcd, for every pair in a window with both signs and zeros.
    import math
    for a, b in itertools.product(range(-15, 16), repeat=2):
        g, x, y = _extended_gcd(a, b)
        assert a * x + b * y == g == math.gcd(a, b)


def test_ties_and_winners_are_exact_and_in_range():
    for seed in range(6):
        rng = np.random.default_rng(seed)
        count = int(rng.integers(2, 6))
        model = bank_model(rng.integers(-12, 13, (count, 7)).tolist(),
                           rng.integers(-60, 61, count).tolist(), bits=6, is_signed=bool(seed % 2))
        found, ranges = groups(model, seed)
        pairs, winners = set(), set()
        for name, rows in found.items():
            for row in rows:
                assert all(lo <= x <= hi for x, (lo, hi) in zip(row, ranges))
                s = scores(model, row)
                top = [k for k, v in enumerate(s) if v == max(s)]
                if name == "each unit the winner":
                    assert len(top) == 1
                    winners |= set(top)
                elif name == "two units tied at the top":
                    assert len(top) >= 2
                    pairs.add(tuple(top[:2]))
                else:
                    assert len(top) >= 3
        # The units that can win split the input box into convex regions whose adjacency is
        # connected, so at least (winners - 1) pairs meet at a tie on the top.
        assert len(winners) >= 2 and len(pairs) >= len(winners) - 1, (seed, winners, pairs)


def test_a_unit_that_can_never_win_gets_no_winner_vector():
    # Unit 1 scores less than unit 0 on every input (the same weights, a lower bias).
    model = bank_model([[3, -2, 5], [3, -2, 5]], [10, 4], bits=5)
    found, _ = groups(model)
    winners = {max(range(2), key=lambda k: scores(model, row)[k])
               for row in found["each unit the winner"]}
    assert winners == {0}
    assert all(scores(model, row)[0] == scores(model, row)[1] for row in found.get(
        "two units tied at the top", [])) and not found["two units tied at the top"]


def test_the_groups_join_a_banks_vectors_and_not_a_single_units():
    model = bank_model([[3, -2, 5], [-1, 4, 2], [2, 2, -3]], [0, 5, -5], bits=5)
    analyses = make_component(UnitConfig(model)).unit_analyses
    names = [name for name, _ in make_vectors(analyses[0], random_count=10,
                                              others=analyses[1:]).groups]
    assert "two units tied at the top" in names and "each unit the winner" in names
    single = [name for name, _ in make_vectors(analyses[0], random_count=10).groups]
    assert not any("tied" in name or "winner" in name for name in single)
