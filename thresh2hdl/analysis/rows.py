"""Loadable products as rows of partial products (``dsp_products``): the first features'
products stay whole multiplications, which synthesis may put into DSP blocks; every other
product is written as one row per weight bit, ``x * bit_j(w) << j`` (the sign bit's row
subtracted, two's complement), and the rows are leaves of the unit's adder tree. A row is one
AND per bit, so each adder level of a multiplier becomes a level of the tree, registered like
any other: the multiplier is pipelined and no DSP block is inferred for it.

Each node's value is ``sum_i x_i * c_i`` over its features, with ``c_i`` ranging over the sums
of its rows' bit weights; ``x_i`` and the weight bits are independent, so the range of
``x_i * c_i`` is the box product of two intervals (its extremes at corners, each reached) and
the ranges of different features add: every range below is exact.
"""

from .intervals import box_product
from .records import Node

__all__ = ["row_tree_nodes", "row_bit"]


def row_bit(node):
    """The weight bit a row multiplies by (its magnitude is ``2 ** bit``)."""
    return node.magnitude.bit_length() - 1


def _range(ranges, coefficients):
    lo = hi = 0
    for feature, span in coefficients.items():
        a, b = box_product(ranges[feature], span)
        lo, hi = lo + a, hi + b
    return lo, hi


def _leaves(ranges, weight_range, weight_bits, dsp_products):
    """``(node fields, coefficient ranges)`` of every leaf, in the order they are paired:
    the whole products, then each other feature's rows, lowest bit first."""
    leaves = []
    for feature in range(len(ranges)):
        if feature < dsp_products:
            leaves.append((dict(name=f"p{feature}", kind="product", feature=feature),
                           {feature: tuple(weight_range)}))
            continue
        for bit in range(weight_bits):
            leaves.append((dict(name=f"p{feature}_b{bit}", kind="row", feature=feature,
                                magnitude=1 << bit, sign=-1 if bit == weight_bits - 1 else 1),
                           {feature: (0, 1 << bit)}))
    return leaves


def _pair(left, right):
    """The adder of two values by their signs: ``kind``, the new sign, and its coefficient
    ranges (the value it computes, not yet signed)."""
    (a, sa), (b, sb) = left, right
    kind, sign = ("add", sa) if sa == sb else ("sub", 1) if sa > 0 else ("rsub", 1)
    first, second = (a, b) if kind != "rsub" else (b, a)
    coefficients = dict(first)
    for feature, (lo, hi) in second.items():
        was = coefficients.get(feature, (0, 0))
        coefficients[feature] = (was[0] + lo, was[1] + hi) if kind == "add" else \
            (was[0] - hi, was[1] - lo)
    return kind, sign, coefficients


def row_tree_nodes(ranges, weight_range, weight_bits, dsp_products, bias_range):
    """The nodes of a loadable unit with rows: leaves at level 0, neighbours paired level by
    level (an odd one carried up), then the bias adder. Returns ``(nodes, tree_root,
    score_node, adder levels)``."""
    nodes, layer = [], []
    for fields, coefficients in _leaves(ranges, weight_range, weight_bits, dsp_products):
        lo, hi = _range(ranges, coefficients)
        node = Node(index=len(nodes), children=(), lo=lo, hi=hi, level=0, **fields)
        nodes.append(node)
        layer.append((node, coefficients))
    level = 0
    while len(layer) > 1:
        level += 1
        paired = []
        for position in range(0, len(layer) - 1, 2):
            (left, a), (right, b) = layer[position], layer[position + 1]
            kind, sign, coefficients = _pair((a, left.sign), (b, right.sign))
            lo, hi = _range(ranges, coefficients)
            node = Node(index=len(nodes), name=f"s{level}_{position // 2}", kind=kind,
                        children=(left.index, right.index), lo=lo, hi=hi, level=level,
                        sign=sign)
            nodes.append(node)
            paired.append((node, coefficients))
        if len(layer) % 2:
            paired.append(layer[-1])
        layer = paired
    root, coefficients = layer[0]
    if root.sign < 0:
        raise ValueError("a tree of rows needs a row that adds (weight_bits >= 2) or a "
                         "whole product")
    lo, hi = _range(ranges, coefficients)
    nodes.append(Node(index=len(nodes), name="score_sum", kind="bias", children=(root.index,),
                      lo=lo + bias_range[0], hi=hi + bias_range[1], level=level + 1))
    return nodes, root.index, nodes[-1].index, level
