import itertools
import math

import pytest
from hypothesis import given, settings, strategies as st

from helpers import make_model
from thresh2hdl.errors import InputError
from thresh2hdl.analysis import (ARCHITECTURES, analyse, analyse_bank, bit_growth_bound,
                                 check_architecture, signed_bits, unsigned_bits, value_bits)


def twos_complement_bits(value):
    # Common practice: a two's complement integer v needs bit_length(v) + 1 bits when v >= 0,
    # and bit_length(~v) + 1 when v < 0 (Python's int.bit_length, Python 3.11 docs).
    return (value if value >= 0 else ~value).bit_length() + 1


@pytest.mark.parametrize("lo, hi", [(0, 0), (-1, 0), (-1, 1), (0, 1), (-128, 127), (-129, 127),
                                    (-128, 128), (5, 5), (-(1 << 70), 3), (0, (1 << 90) - 1)])
def test_signed_bits_is_the_twos_complement_width(lo, hi):
    expected = max(twos_complement_bits(lo), twos_complement_bits(hi))
    if (lo, hi) == (0, 0):
        expected = 1
    assert signed_bits(lo, hi) == expected


def test_unsigned_and_node_widths():
    assert unsigned_bits(0) == 1 and unsigned_bits(255) == 8 and unsigned_bits(256) == 9
    assert value_bits(0, 4095) == (12, False)
    assert value_bits(-1, 4095) == (13, True)


def full_range_model(count, a, b, symmetric=False):
    # Every input and weight at the most negative value of its format: the worst case of a
    # signed a-bit x b-bit dot product.
    weight = -(1 << (b - 1)) + (1 if symmetric else 0)
    lo = -(1 << (a - 1)) + (1 if symmetric else 0)
    hi = (1 << (a - 1)) - 1
    return make_model([weight] * count, bits=a, signed=True, ranges=[(lo, hi)] * count)


@pytest.mark.parametrize("count", [1, 2, 3, 4, 5, 8, 16, 64, 65, 100, 256])
@pytest.mark.parametrize("a, b", [(8, 8), (12, 8), (4, 6)])
def test_full_range_width_is_a_plus_b_plus_floor_log2_n(count, a, b):
    # Bit growth of a signed dot product (common practice, e.g. Lyons, "Understanding Digital
    # Signal Processing", 3rd ed., section 12.3): with every operand at its full two's complement
    # range the exact width is a + b + floor(log2 N), never more than the textbook bound
    # a + b + ceil(log2 N), and the two agree when N is a power of two.
    analysis = analyse(full_range_model(count, a, b))
    assert analysis.score_bits_min == a + b + int(math.floor(math.log2(count)))
    assert analysis.score_bits_min <= bit_growth_bound(a, b, count)
    assert analysis.score_bits_min >= bit_growth_bound(a, b, count) - 1


def test_worked_examples():
    # From the examples (8-bit x 8-bit): N = 3 -> 17 bits, N = 65 -> 22 bits.
    assert analyse(full_range_model(3, 8, 8)).score_bits_min == 17
    assert analyse(full_range_model(65, 8, 8)).score_bits_min == 22


@pytest.mark.parametrize("count", [1, 2, 4, 8, 64, 65, 100])
def test_symmetric_ranges_save_a_bit(count):
    # Symmetric ranges ([-(2^(a-1)-1), 2^(a-1)-1]) remove the one product 2^(a-1) * 2^(b-1) that
    # forces the extra bit: the exact width is the two's complement width of
    # N * (2^(a-1)-1) * (2^(b-1)-1), which is one bit less than the full-range width whenever N
    # is a power of two (common practice; computed here independently of the analysis).
    a = b = 8
    peak = count * ((1 << (a - 1)) - 1) * ((1 << (b - 1)) - 1)
    analysis = analyse(full_range_model(count, a, b, symmetric=True))
    assert analysis.score_bits_min == twos_complement_bits(peak)
    if count & (count - 1) == 0:
        assert analysis.score_bits_min == a + b + int(math.log2(count)) - 1


def brute_force(weights, bias, ranges):
    scores = [sum(w * x for w, x in zip(weights, xs)) + bias
              for xs in itertools.product(*[range(lo, hi + 1) for lo, hi in ranges])]
    return min(scores), max(scores)


small_models = st.integers(1, 4).flatmap(lambda n: st.tuples(
    st.lists(st.integers(-40, 40), min_size=n, max_size=n),
    st.integers(-300, 300),
    st.lists(st.tuples(st.integers(-6, 6), st.integers(0, 6)).map(
        lambda t: (min(t), max(t))), min_size=n, max_size=n)))


@settings(max_examples=60, deadline=None)
@given(small_models)
def test_score_range_and_witnesses_match_exhaustive_search(case):
    # Independent check: enumerate every input in the declared ranges.
    weights, bias, ranges = case
    model = make_model(weights, bias, bits=4, signed=True, ranges=ranges)
    analysis = analyse(model)
    lo, hi = brute_force(weights, bias, ranges)
    assert analysis.score_range == (lo, hi)
    assert analysis.score_bits_min == signed_bits(lo, hi)
    score = lambda xs: sum(w * x for w, x in zip(weights, xs)) + bias
    assert score(analysis.witness_min) == lo and score(analysis.witness_max) == hi
    # Every tree node's range is reached exactly, and its width holds it.
    for node in analysis.nodes:
        features = sorted(node_features(analysis, node.index))
        sub_w = [abs(weights[i]) if node.kind == "product" else
                 weights[i] * node_sign_of(analysis, node.index) for i in features]
        node_bias = node.constant if node.kind == "bias" else 0
        expect = brute_force(sub_w, node_bias, [ranges[i] for i in features])
        assert (node.lo, node.hi) == expect
        width, is_signed = value_bits(node.lo, node.hi)
        assert node.bits == width and node.is_signed == is_signed


def node_features(analysis, index):
    node = analysis.nodes[index]
    if node.kind == "product":
        return {node.feature}
    return set().union(*(node_features(analysis, c) for c in node.children))


def node_sign_of(analysis, index):
    return analysis.nodes[index].sign


def test_each_nonzero_weight_is_one_leaf():
    model = make_model([3, 0, -2, 5, 0, -1, 7], 4)
    analysis = analyse(model)
    leaves = [n.feature for n in analysis.nodes if n.kind == "product"]
    assert sorted(leaves) == [0, 2, 3, 5, 6]
    root = analysis.nodes[analysis.tree_root]
    assert node_features(analysis, root.index) == {0, 2, 3, 5, 6}


def test_score_bits_headroom_and_refusal():
    model = make_model([100, -100], 0)
    analysis = analyse(model)
    wider = analyse(model, score_bits=analysis.score_bits_min + 3)
    assert wider.headroom_bits == 3
    with pytest.raises(InputError, match="needs at least"):
        analyse(model, score_bits=analysis.score_bits_min - 1)


def test_all_zero_weights_give_a_constant():
    analysis = analyse(make_model([0, 0], 7))
    assert analysis.tree_root is None and analysis.score_range == (7, 7)


def test_score_limit_is_refused():
    model = make_model([-(1 << 31)] * 4096, bits=32, signed=True)
    assert analyse(model).score_bits_min == 32 + 32 + 12
    huge = make_model([1], bias=(1 << 127) - 1, bits=32, signed=True)
    with pytest.raises(InputError, match="limit of 128"):
        analyse(huge)


def test_one_checker_names_the_architectures_and_the_callers_field():
    assert [check_architecture(arch) for arch in ARCHITECTURES] == list(ARCHITECTURES)
    with pytest.raises(InputError, match="must be one of tree, shiftadd, serial, not 'mac'") as error:
        check_architecture("mac", field="--arch")
    assert error.value.field == "--arch"
    model = make_model([3, -2], 0)
    for plan in (analyse, analyse_bank):
        with pytest.raises(InputError) as error:
            plan(model, arch="mac")
        assert error.value.field == "arch"


def test_loadable_refusals_name_the_analysis_parameters_not_options():
    # Library calls: the field is analyse's own parameter, as a library user wrote it.
    model = make_model([3, -2], 0)
    with pytest.raises(InputError, match="use arch tree or serial") as error:
        analyse(model, arch="shiftadd", weight_range=(-8, 7), bias_range=(-8, 7))
    assert error.value.field == "weight_range"
    wide = make_model([1, 1], bits=32, signed=True)
    with pytest.raises(InputError, match="limit of 128") as error:
        analyse(wide, weight_range=(-(1 << 100), 1 << 100), bias_range=(0, 0))
    assert error.value.field == "weight_range"
