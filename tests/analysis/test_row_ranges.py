"""Loadable products as rows of partial products (``dsp_products``): every node's range exact,
checked by exhaustion against the tree evaluated in the test, and the refusals."""

import itertools

import pytest

from helpers import bank_model, make_model
from thresh2hdl.analysis import analyse
from thresh2hdl.errors import InputError
from thresh2hdl.hardware import UnitConfig


def node_values(analysis, codes, weights, weight_bits):
    """Each node's value for one input and one set of weights, written out in the test: a
    row is x times bit j of its weight, shifted by j (two's complement bits, common practice);
    adders by their kind; the bias node without its bias."""
    values = []
    for node in analysis.nodes:
        if node.kind == "product":
            values.append(codes[node.feature] * weights[node.feature])
        elif node.kind == "row":
            bit = node.magnitude.bit_length() - 1
            raw = weights[node.feature] % (1 << weight_bits)
            values.append(codes[node.feature] * ((raw >> bit) & 1) << bit)
        elif node.kind == "bias":
            values.append(values[node.children[0]])
        else:
            a, b = (values[c] for c in node.children)
            values.append({"add": a + b, "sub": a - b, "rsub": b - a}[node.kind])
    return values


@pytest.mark.parametrize("signed, dsp_products, weight_bits", [
    (False, 0, 3), (True, 0, 3), (True, 1, 3), (False, 1, 2), (True, 0, 2)])
def test_every_range_is_exact_by_exhaustion(signed, dsp_products, weight_bits):
    # By exhaustion: every code of two 2-bit features and every weight of weight_bits bits;
    # the bias range is added at the root, so the bias node is compared without it.
    model = make_model([1, -1], 0, bits=2, signed=signed)
    half = 1 << (weight_bits - 1)
    analysis = analyse(model, weight_range=(-half, half - 1), bias_range=(0, 0),
                       dsp_products=dsp_products)
    codes = range(-2, 2) if signed else range(4)
    seen = [[] for _ in analysis.nodes]
    for x in itertools.product(codes, repeat=2):
        for w in itertools.product(range(-half, half), repeat=2):
            for index, value in enumerate(node_values(analysis, x, w, weight_bits)):
                seen[index].append(value)
            # the root is the score: every product's rows add up to x * w
            assert seen[analysis.score_node][-1] == x[0] * w[0] + x[1] * w[1]
    for node, values in zip(analysis.nodes, seen):
        assert (node.lo, node.hi) == (min(values), max(values)), node.name
    kinds = {node.kind for node in analysis.nodes}
    assert "row" in kinds and ("sub" in kinds or "rsub" in kinds)


def test_rows_keep_the_score_range_of_whole_products_and_add_levels():
    model = make_model([3, -5, 7, 1], -20, bits=12)
    whole = analyse(model, weight_range=(-128, 127), bias_range=(-1000, 999))
    rows = analyse(model, weight_range=(-128, 127), bias_range=(-1000, 999), dsp_products=2)
    assert rows.score_range == whole.score_range and rows.levels > whole.levels
    assert sum(n.kind == "product" for n in rows.nodes) == 2
    assert sum(n.kind == "row" for n in rows.nodes) == 2 * 8
    row = next(n for n in rows.nodes if n.name == "p3_b5")
    assert row.register_shift == 5 and row.sign == 1
    assert next(n for n in rows.nodes if n.name == "p3_b7").sign == -1


@pytest.mark.parametrize("options, contains", [
    ({"dsp_products": 1}, "loadable"),
    ({"dsp_products": -1, "loadable_weights": True}, "non-negative"),
    ({"dsp_products": True, "loadable_weights": True}, "non-negative"),
    ({"dsp_products": 1, "loadable_weights": True, "arch": "serial"}, "tree"),
    ({"dsp_products": 0, "loadable_weights": True, "weight_bits": 1}, "2 or more"),
])
def test_bad_requests_are_refused(options, contains):
    model = make_model([-1, -1, 0], 0, bits=4)      # weights a 1-bit register holds
    with pytest.raises(InputError, match=contains) as error:
        UnitConfig(model, **options)
    assert error.value.field == "dsp_products" and "\n" not in str(error.value)


def test_a_bank_is_refused():
    with pytest.raises(InputError, match="bank"):
        UnitConfig(bank_model([[1, 2], [2, 1]], [0, 0]), loadable_weights=True, dsp_products=1)
