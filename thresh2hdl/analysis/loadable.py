"""The plan of loadable weights: weights and bias are registers behind a write port, so every
width holds every score that any weights in the declared ranges can give.

Each term ranges over the product of its feature's range and the declared weight range, and the
terms stay independent, so sums of their ranges remain exact (every bound is reached by some
input and some loaded weights).
"""

from .intervals import box_product, prefixes, union, witnesses
from .records import SERIAL_NODES, Analysis, Node
from .rows import row_tree_nodes
from .widths import score_widths

__all__ = ["analyse_loadable"]


def analyse_loadable(model, unit, score_bits, arch, weight_range, bias_range,
                     dsp_products=None):
    """Plan ``unit`` with loadable weights: a ``tree`` of products or one ``serial``
    multiply-accumulate. The trained values are only where the registers start.
    ``dsp_products`` (tree): only the first this many products are whole multiplications;
    the others are rows of partial products in the tree (:mod:`.rows`)."""
    ranges = model.feature_ranges
    terms = [box_product(r, weight_range) for r in ranges]
    score_lo = sum(t[0] for t in terms) + bias_range[0]
    score_hi = sum(t[1] for t in terms) + bias_range[1]
    if arch == "serial":
        nodes, tree_root, score_node, level = _serial_nodes(ranges, terms, weight_range,
                                                            bias_range)
    elif dsp_products is not None:
        weight_bits = (weight_range[1] - weight_range[0]).bit_length()
        nodes, tree_root, score_node, level = row_tree_nodes(ranges, weight_range, weight_bits,
                                                             dsp_products, bias_range)
    else:
        nodes, tree_root, score_node, level = _tree_nodes(terms, score_lo, score_hi)
    score_bits_min, score_bits = score_widths(
        score_lo, score_hi, score_bits, of=" of the loadable weights", field="weight_range")
    # The witnesses are of the weights the registers start with (the trained ones).
    witness_min, witness_max = witnesses(unit.weights, ranges)
    return Analysis(feature_ranges=tuple(ranges), weights=tuple(unit.weights), bias=unit.bias,
                    nodes=tuple(nodes), tree_root=tree_root, score_node=score_node,
                    score_range=(score_lo, score_hi), score_bits_min=score_bits_min,
                    score_bits=score_bits, witness_min=witness_min, witness_max=witness_max,
                    tree_levels=level, has_score=model.ports.has_score or model.is_bank,
                    arch=arch, weight_range=tuple(weight_range),
                    bias_range=tuple(bias_range), dsp_products=dsp_products)


def _serial_nodes(ranges, terms, weight_range, bias_range):
    """The multiply-accumulate's values, each the union over the beats of its range."""
    sums = prefixes(terms, bias_range)
    values = [("sample", "sample", union(ranges)), ("weight", "weight", weight_range),
              ("product", "product", union(terms)),
              ("accumulator", "accumulator", union(sums[:-1])),
              ("sum", "add", union(sums[1:]))]
    nodes = [Node(index=i, name=name, kind=kind, children=(), lo=lo, hi=hi, level=0)
             for i, (name, kind, (lo, hi)) in enumerate(values)]
    return nodes, None, SERIAL_NODES.index("sum"), 0


def _tree_nodes(terms, score_lo, score_hi):
    """A product per feature, neighbours added level by level, then the bias adder."""
    nodes = []
    layer = []
    for index, (lo, hi) in enumerate(terms):
        layer.append(Node(index=len(nodes), name=f"p{index}", kind="product", children=(),
                          lo=lo, hi=hi, level=0, feature=index))
        nodes.append(layer[-1])
    level = 0
    while len(layer) > 1:
        level += 1
        paired = []
        for position in range(0, len(layer) - 1, 2):
            left, right = layer[position], layer[position + 1]
            paired.append(Node(index=len(nodes), name=f"s{level}_{position // 2}",
                               kind="add", children=(left.index, right.index),
                               lo=left.lo + right.lo, hi=left.hi + right.hi, level=level))
            nodes.append(paired[-1])
        if len(layer) % 2:
            paired.append(layer[-1])
        layer = paired
    tree_root = layer[0].index
    nodes.append(Node(index=len(nodes), name="score_sum", kind="bias",
                      children=(tree_root,), lo=score_lo, hi=score_hi, level=level + 1))
    return nodes, tree_root, nodes[-1].index, level
