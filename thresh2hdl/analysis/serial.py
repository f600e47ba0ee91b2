"""The serial plan: one multiply-accumulate shared by every beat, a feature per beat.

Each value's range is the union over the beats of its exact range in that beat, so no beat can
overflow it (and every bound is reached in some beat by some input: the plan stays exact). The
nodes are :data:`~.records.SERIAL_NODES`.
"""

from ..errors import InputError
from .intervals import prefix_ranges, term_range, union, witnesses
from .records import SERIAL_NODES, Analysis, Node
from .widths import MAX_SCORE_BITS, score_widths

__all__ = ["analyse_serial"]


def analyse_serial(model, unit, score_bits):
    """Plan ``unit`` as one multiply-accumulate of constant weights."""
    ranges, weights = model.feature_ranges, unit.weights
    prefixes = prefix_ranges(weights, unit.bias, ranges)
    values = [
        ("sample", "sample", union(ranges)),
        # The product is of the weight's magnitude; the sign makes the sum add or subtract.
        ("magnitude", "weight", (0, max(abs(w) for w in weights))),
        ("product", "product", union(term_range(abs(w), lo, hi)
                                     for w, (lo, hi) in zip(weights, ranges))),
        # The running sum entering a beat: the bias in the first, the held sum after.
        ("accumulator", "accumulator", union(prefixes[:-1])),
        ("sum", "add", union(prefixes[1:])),
    ]
    nodes = tuple(Node(index=i, name=name, kind=kind, children=(), lo=lo, hi=hi, level=0)
                  for i, (name, kind, (lo, hi)) in enumerate(values))
    score_lo, score_hi = prefixes[-1]
    widest = max(n.bits for n in nodes)
    if widest > MAX_SCORE_BITS + 1:
        raise InputError(f"the accumulator needs {widest} bits, more than the limit of "
                         f"{MAX_SCORE_BITS + 1}; use narrower weights or input ranges",
                         field="unit")
    score_bits_min, score_bits = score_widths(score_lo, score_hi, score_bits)
    has_score = model.ports.has_score or model.is_bank
    witness_min, witness_max = witnesses(weights, ranges)
    return Analysis(feature_ranges=tuple(ranges), weights=tuple(weights), bias=unit.bias,
                    nodes=nodes, tree_root=None, score_node=SERIAL_NODES.index("sum"),
                    score_range=(score_lo, score_hi), score_bits_min=score_bits_min,
                    score_bits=score_bits, witness_min=witness_min, witness_max=witness_max,
                    tree_levels=0, has_score=has_score, arch="serial")
