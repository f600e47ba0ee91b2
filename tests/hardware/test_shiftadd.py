"""Multiplier-free constant products: canonical signed digits merged into one adder tree."""

import itertools
import re

from hypothesis import given, settings, strategies as st

from helpers import make_model, check_design
from thresh2hdl.hardware import ThresholdUnit, UnitConfig
from thresh2hdl.analysis import analyse, csd_digits
from thresh2hdl.emit.verilog import emit_verilog

# OEIS A007302: number of nonzero digits in the non-adjacent form (canonical signed digits)
# of n, for n = 0..40.
A007302 = [0, 1, 1, 2, 1, 2, 2, 2, 1, 2, 2, 3, 2, 3, 2, 2, 1, 2, 2, 3, 2, 3, 3, 3, 2, 3, 3, 3,
           2, 3, 2, 2, 1, 2, 2, 3, 2, 3, 3, 3, 2]


def test_nonzero_digit_counts_match_oeis_a007302():
    assert [len(csd_digits(n)) for n in range(41)] == A007302


def test_average_over_8_bit_magnitudes():
    # 796 nonzero digits over the 256 8-bit magnitudes (from the issue; the density tends to
    # 1/3, Reitwiesner 1960).
    assert sum(len(csd_digits(n)) for n in range(256)) == 796


@given(st.integers(0, 1 << 40))
def test_digits_rebuild_the_value_and_are_non_adjacent(value):
    digits = csd_digits(value)
    assert sum(d << s for s, d in digits) == value
    shifts = [s for s, _ in digits]
    assert all(b - a >= 2 for a, b in zip(shifts, shifts[1:]))
    assert all(d in (-1, 1) for _, d in digits)


def brute_force_node(analysis, node, weights, ranges):
    """Exact range of a node by enumeration: the node's value over every input."""
    def value(xs):
        return evaluate(analysis, node.index, xs)
    values = [value(xs) for xs in itertools.product(*[range(lo, hi + 1) for lo, hi in ranges])]
    return min(values), max(values)


def evaluate(analysis, index, xs):
    node = analysis.nodes[index]
    if node.kind == "product":
        return xs[node.feature] * node.magnitude
    parts = [evaluate(analysis, c, xs) for c in node.children]
    if node.kind == "add":
        return parts[0] + parts[1]
    if node.kind == "sub":
        return parts[0] - parts[1]
    if node.kind == "rsub":
        return parts[1] - parts[0]
    if node.kind == "offset":          # the bias folded into a sum of one sign
        return parts[0] + node.constant
    child = analysis.nodes[node.children[0]]
    return node.constant + (parts[0] if child.sign > 0 else -parts[0])


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(-60, 60), min_size=1, max_size=3), st.integers(-50, 50))
def test_shiftadd_node_ranges_are_exact(weights, bias):
    ranges = [(-3, 4), (0, 5), (-2, 2)][: len(weights)]
    model = make_model(weights, bias, bits=4, signed=True, ranges=ranges)
    analysis = analyse(model, arch="shiftadd")
    for node in analysis.nodes:
        assert (node.lo, node.hi) == brute_force_node(analysis, node, weights, ranges)
    if analysis.score_node is None:          # every weight zero: a constant score
        assert analysis.score_range == (bias, bias)
        return
    # The root's value times its sign is the dot product, for every input.
    root = analysis.nodes[analysis.score_node]
    for xs in itertools.product(*[range(lo, hi + 1) for lo, hi in ranges]):
        expected = sum(w * x for w, x in zip(weights, xs)) + bias
        got = evaluate(analysis, root.index, xs)
        if root.kind != "bias" and not any(n.kind == "offset" for n in analysis.nodes):
            assert bias == 0
            got *= root.sign
        assert got == expected


def test_shiftadd_verilog_has_no_multiplier():
    model = make_model([37, -5, 100, -127, 3], -17, bits=12)
    text = emit_verilog(ThresholdUnit(UnitConfig(model, arch="shiftadd")), model)
    assert "*" not in re.sub(r"/\*.*?\*/|//[^\n]*|\(\*[^)]*\*\)", "", text)
    plain = emit_verilog(ThresholdUnit(UnitConfig(model)), model)
    assert " * " in plain


cases = st.integers(1, 6).flatmap(lambda n: st.tuples(
    st.lists(st.integers(-(1 << 9), 1 << 9), min_size=n, max_size=n),
    st.integers(-4000, 4000), st.integers(1, 12), st.booleans(), st.integers(0, 4)))


@settings(max_examples=20, deadline=None)
@given(cases)
def test_random_shiftadd_models_agree_with_reference(case):
    weights, bias, bits, is_signed, pipeline = case
    model = make_model(weights, bias, bits=bits, signed=is_signed)
    most = analyse(model, arch="shiftadd").final_level + 1
    dut_check, _ = check_design(model, min(pipeline, most), vectors=100, arch="shiftadd")
    assert dut_check.mismatch_count == 0
