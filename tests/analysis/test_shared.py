"""Terms shared across a bank's units (analysis/shared.py, the shift-add plan built on it)."""

import itertools
import random

import pytest

from helpers import bank_model
from thresh2hdl.analysis import analyse_bank, value_bits
from thresh2hdl.analysis.shared import FEATURE, SHARED, plan_sharing


def term_value(plan, source, x):
    """A source's value computed here from the plan's definitions, in plain Python integers."""
    kind, index = source
    if kind == FEATURE:
        return x[index]
    term = plan.terms[index]
    (a, da), (b, db) = term.first, term.second
    return (term_value(plan, a, x) << da) + term.sign * (term_value(plan, b, x) << db)


def unit_sums(plan, x):
    return [sum(sign * (term_value(plan, source, x) << shift) for source, shift, sign in terms)
            for terms in plan.unit_terms]


def plain_products(weights, x):
    # The check: the matrix-vector product as a plain Python sum (no project code).
    return [sum(w * v for w, v in zip(row, x)) for row in weights]


def test_shared_terms_sum_to_the_matrix_vector_product_on_every_input():
    weights = [[3, 5, -7], [3, 5, 6], [-3, 5, 7], [7, 3, 5]]
    plan = plan_sharing(weights)
    assert plan.terms, "this bank repeats x0 + x1 and must share it"
    for x in itertools.product(range(-4, 4), repeat=3):
        assert unit_sums(plan, x) == plain_products(weights, x)


def test_random_banks_share_exactly():
    rng = random.Random(3)
    for _ in range(30):
        features, units = rng.randint(1, 12), rng.randint(2, 6)
        weights = [[rng.randint(-40, 40) * (rng.random() < 0.8) for _ in range(features)]
                   for _ in range(units)]
        plan = plan_sharing(weights)
        for _ in range(20):
            x = [rng.randint(-300, 300) for _ in range(features)]
            assert unit_sums(plan, x) == plain_products(weights, x)
        # Each shared term saves at least one adder (two or more uses, one adder of its own).
        assert plan.adders_with <= plan.adders_without - len(plan.terms)
        assert all(term.uses >= 2 for term in plan.terms)


def test_a_repeated_pattern_is_shared_and_saves_adders():
    # Every unit holds x0 + 2 x1 (weights 1 and 2: one signed digit each), so one shared term
    # serves all four: 4 units x 2 digits = 8 terms, 4 adders alone; shared: 1 + 0 per unit.
    weights = [[1, 2], [1, 2], [2, 4], [-1, -2]]
    plan = plan_sharing(weights)
    assert len(plan.terms) == 1
    assert (plan.adders_without, plan.adders_with) == (4, 1)
    assert plan.users(0) == (0, 1, 2, 3)
    assert plan.definition(["a", "b"]) == ("a + (b << 1)",)
    # Nothing repeats: nothing is shared.
    assert plan_sharing([[1, 0], [0, 1]]).terms == ()


def test_the_plan_is_the_same_on_every_run():
    rng = random.Random(11)
    weights = [[rng.randint(-31, 31) for _ in range(16)] for _ in range(6)]
    assert plan_sharing(weights) == plan_sharing([list(row) for row in weights])


def test_a_shared_bank_plan_counts_its_adders_and_sizes_shared_nodes_exactly():
    weights = [[3, 5, -7, 1], [3, 5, 6, 1], [-3, 5, 7, 2], [7, 3, 5, -1]]
    model = bank_model(weights, [1, -2, 0, 5], bits=3)
    plain = analyse_bank(model, arch="shiftadd")
    shared = analyse_bank(model, arch="shiftadd", share_terms=True)
    sharing = shared.sharing

    def adders(bank):
        return len({node.wire_name(f"u{k}_") for k, unit in enumerate(bank.units)
                    for node in unit.nodes if node.kind in ("add", "sub", "rsub")})

    assert adders(plain) == sharing.adders_without
    assert adders(shared) == sharing.adders_with < sharing.adders_without
    seen = {}
    for unit in shared.units:
        for node in unit.nodes:
            if not node.shared:
                continue
            # The same node in every unit that reads it.
            assert seen.setdefault(node.name, (node.kind, node.lo, node.hi, node.level)) == \
                (node.kind, node.lo, node.hi, node.level)
            # Its exact range, by enumerating every input here (3-bit unsigned codes), and a
            # width that holds exactly that range.
            if node.name.startswith("share") and node.kind != "scaled":
                index = int(node.name[len("share"):])
                values = [term_value(sharing, (SHARED, index), x)
                          for x in itertools.product(range(8), repeat=4)]
                assert (node.lo, node.hi) == (min(values), max(values))
                assert node.bits == value_bits(min(values), max(values))[0]
    assert seen, "no shared node"
    # Every unit's score range is the one without sharing.
    assert [u.score_range for u in shared.units] == [u.score_range for u in plain.units]


def test_sharing_needs_shift_add():
    from thresh2hdl.errors import InputError
    model = bank_model([[1, 2], [1, 2]], [0, 0])
    with pytest.raises(InputError, match="shiftadd"):
        analyse_bank(model, arch="tree", share_terms=True)
