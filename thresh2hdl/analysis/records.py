"""The plan's records: a :class:`Node` per value of the datapath and the :class:`Analysis` of a
unit, and the names of the architectures a plan can be made for.

The plan is made once; the circuit and the report both read these records, so the width the
report states is the width the circuit has.
"""

from dataclasses import dataclass

from ..errors import InputError
from .widths import value_bits

__all__ = ["ARCHITECTURES", "SERIAL_NODES", "check_architecture", "Node", "Analysis"]

ARCHITECTURES = ("tree", "shiftadd", "serial")
SERIAL_NODES = ("sample", "magnitude", "product", "accumulator", "sum")


def check_architecture(arch, *, field="arch"):
    """Return ``arch`` if it is one of :data:`ARCHITECTURES`, else refuse it as ``field``
    (the name the caller's user knows it by: a parameter, a settings key or an option)."""
    if arch not in ARCHITECTURES:
        raise InputError(f"must be one of {', '.join(ARCHITECTURES)}, not {arch!r}",
                         field=field)
    return arch


@dataclass(frozen=True)
class Node:
    """One value of the datapath: a constant product, an adder/subtractor, or the bias adder.

    ``lo``/``hi`` bound the value the node computes; the true contribution of the node to the
    score is ``sign`` times that value. ``level`` is the combinational depth: 0 for products,
    ``k`` for the k-th adder level, one past the tree for the bias node. A ``shared`` node is
    a term several units of a bank use (:mod:`.shared`): built once, under its own name in
    every unit; a ``scaled`` node is its child shifted left (wiring, no adder).
    """

    index: int
    name: str
    kind: str            # "product", "add", "sub", "rsub" (right minus left), "bias", "offset",
                         # "scaled" (the child times ``magnitude``, a power of two), "row"
                         # (loadable: the feature times its weight's bit ``magnitude``)
    children: tuple
    lo: int
    hi: int
    level: int
    sign: int = 1
    feature: int | None = None
    magnitude: int = 0   # |weight| of a product
    constant: int = 0    # the bias of a "bias" node
    shared: bool = False  # one node for the whole bank, named without a unit's prefix

    def wire_name(self, prefix):
        """The node's name in the design: ``prefix`` (a bank unit's) and its own, or its own
        alone when it is shared."""
        return self.name if self.shared else prefix + self.name

    @property
    def bits(self):
        return value_bits(self.lo, self.hi)[0]

    @property
    def is_signed(self):
        return self.lo < 0

    @property
    def register_shift(self):
        """Known zero low bits of a shifted input (a power-of-two product, a row), which
        pipeline registers leave out: they carry ``value >> register_shift``."""
        if self.kind not in ("product", "row") or self.magnitude <= 0 or self.magnitude & (self.magnitude - 1):
            return 0     # (magnitude 0: a product of loadable weights, no constant shift)
        return min(self.magnitude.bit_length() - 1, self.bits - 1)


@dataclass(frozen=True)
class Analysis:
    """Ranges, widths and the adder-tree plan of one unit."""

    feature_ranges: tuple
    weights: tuple
    bias: int
    nodes: tuple          # in dependency order; children before parents
    tree_root: int | None  # index of the node holding +-(w . x), None when every weight is zero
    score_node: int | None  # index of the node holding the score, None when it is a constant
    score_range: tuple
    score_bits_min: int
    score_bits: int
    witness_min: tuple
    witness_max: tuple
    tree_levels: int       # adder levels of the tree (0 for one product)
    has_score: bool
    arch: str = "tree"
    weight_range: tuple | None = None   # loadable weights: the declared range of each weight
    bias_range: tuple | None = None     # and of the bias; None: the weights are constants
    dsp_products: int | None = None     # loadable tree: products kept whole (the rest rows,
                                        # analysis/rows.py); None: every product whole

    @property
    def loadable(self):
        return self.weight_range is not None

    @property
    def bias_folded(self):
        """The bias is a leaf of the tree (shiftadd with a score): the root is the score."""
        return any(node.kind == "offset" for node in self.nodes)

    def node(self, name):
        """The node called ``name`` (for the serial plan: one of :data:`SERIAL_NODES`)."""
        return next(node for node in self.nodes if node.name == name)

    @property
    def headroom_bits(self):
        """Bits of the score port beyond the fewest that can hold every reachable score."""
        return self.score_bits - self.score_bits_min

    @property
    def final_level(self):
        """Level of the last combinational step (bias and decision)."""
        return self.tree_levels + 1

    @property
    def levels(self):
        """How many levels the datapath has, the one count every message and report uses:
        level 0 the products, then each adder level (``s{level}_*``), then the bias and
        decision. One register stage after each is the deepest pipeline. A serial design has
        one: its multiply-accumulate."""
        return 1 if self.arch == "serial" else self.final_level + 1

    @property
    def threshold(self):
        """When the score is not output, y = (root > threshold) (sign +1) or (root < threshold).

        Comparing against a constant saves the bias adder.
        """
        root = self.nodes[self.tree_root]
        return -self.bias if root.sign > 0 else self.bias
