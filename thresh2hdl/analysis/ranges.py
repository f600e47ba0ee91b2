"""Exact range and width analysis of a threshold unit over the declared input ranges.

The score ``w . x + b`` is a sum of independent terms, so interval arithmetic over it is exact:
every bound below is reached by some input inside the declared ranges (the witnesses). The adder
tree is planned here, once, and both the circuit and the report read the plan, so the width
the report states is the width the circuit has.

Products are formed from the weight's magnitude, ``x * |w|``, and the weight's sign is carried
into the adder that consumes them (``a - b`` instead of ``a + (-b)``): a negative constant then
costs no more than a positive one.
"""

import heapq
from dataclasses import dataclass

from ..errors import InputError

__all__ = ["BankPlan", "analyse_bank", "csd_digits", "ARCHITECTURES", "signed_bits", "unsigned_bits", "value_bits", "Node", "Analysis", "analyse",
           "bit_growth_bound", "MAX_SCORE_BITS", "SERIAL_NODES", "prefix_ranges"]

MAX_SCORE_BITS = 128
ARCHITECTURES = ("tree", "shiftadd", "serial")
SERIAL_NODES = ("sample", "magnitude", "product", "accumulator", "sum")


def csd_digits(value):
    """Canonical signed digits (non-adjacent form) of ``value >= 0``: ``[(shift, +-1), ...]``.

    No two nonzero digits are adjacent, which makes the count of nonzero digits minimal
    (Reitwiesner 1960); ``value == sum(d << shift)``.
    """
    if value < 0:
        raise ValueError(f"value must be non-negative, not {value}")
    digits = []
    shift = 0
    while value:
        if value & 1:
            digit = 2 - (value & 3)      # +1 when value = 1 (mod 4), -1 when value = 3 (mod 4)
            digits.append((shift, digit))
            value -= digit
        value >>= 1
        shift += 1
    return digits


def signed_bits(lo, hi):
    """Fewest bits of two's complement that hold every integer in ``[lo, hi]``."""
    if lo > hi:
        raise ValueError(f"empty range [{lo}, {hi}]")
    bits = 1
    while not (-(1 << (bits - 1)) <= lo and hi <= (1 << (bits - 1)) - 1):
        bits += 1
    return bits


def unsigned_bits(hi):
    """Fewest bits of unsigned binary that hold ``hi`` (at least 1)."""
    if hi < 0:
        raise ValueError(f"negative value {hi} has no unsigned width")
    return max(1, hi.bit_length())


def value_bits(lo, hi):
    """Width and signedness of a node: unsigned when it cannot be negative, else signed."""
    if lo >= 0:
        return unsigned_bits(hi), False
    return signed_bits(lo, hi), True


def bit_growth_bound(input_bits, weight_bits, count):
    """The textbook bound on a signed dot product's width: ``a + b + ceil(log2 N)``.

    Common practice (bit growth of a sum of N products of a-bit and b-bit two's complement
    numbers); the exact analysis must never need more than this.
    """
    return input_bits + weight_bits + max(0, (count - 1).bit_length())


@dataclass(frozen=True)
class Node:
    """One value of the datapath: a constant product, an adder/subtractor, or the bias adder.

    ``lo``/``hi`` bound the value the node computes; the true contribution of the node to the
    score is ``sign`` times that value. ``level`` is the combinational depth: 0 for products,
    ``k`` for the k-th adder level, one past the tree for the bias node.
    """

    index: int
    name: str
    kind: str            # "product", "add", "sub", "rsub" (right minus left), "bias"
    children: tuple
    lo: int
    hi: int
    level: int
    sign: int = 1
    feature: int | None = None
    magnitude: int = 0   # |weight| of a product
    constant: int = 0    # the bias of a "bias" node

    @property
    def bits(self):
        return value_bits(self.lo, self.hi)[0]

    @property
    def is_signed(self):
        return self.lo < 0

    @property
    def register_shift(self):
        """Known zero low bits of a shifted input (a power-of-two product), which pipeline
        registers leave out: they carry ``value >> register_shift``."""
        if self.kind != "product" or self.magnitude <= 0 or self.magnitude & (self.magnitude - 1):
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



def _score_widths(score_lo, score_hi, score_bits, *, of="", field="unit"):
    """The fewest bits of the score, and the port's (``score_bits``, refused if narrower)."""
    score_bits_min = signed_bits(score_lo, score_hi)
    if score_bits_min > MAX_SCORE_BITS:
        raise InputError(f"the score needs {score_bits_min} bits, more than the limit of "
                         f"{MAX_SCORE_BITS}; use narrower weights or input ranges", field=field)
    if score_bits is None:
        return score_bits_min, score_bits_min
    if score_bits < score_bits_min:
        raise InputError(f"score_bits {score_bits} cannot hold the score range "
                         f"[{score_lo}, {score_hi}]{of}; it needs at least {score_bits_min}",
                         field="score_bits")
    return score_bits_min, score_bits


def _witnesses(weights, ranges):
    """The inputs that reach the lowest and the highest score."""
    return (tuple(lo if w > 0 else hi for w, (lo, hi) in zip(weights, ranges)),
            tuple(hi if w > 0 else lo for w, (lo, hi) in zip(weights, ranges)))


def _term_range(weight, lo, hi):
    a, b = weight * lo, weight * hi
    return min(a, b), max(a, b)


def analyse(model, *, score_bits=None, arch="tree", unit_index=None, weight_range=None,
            bias_range=None):
    """Plan the adder tree of ``model.unit`` and size every node exactly.

    ``score_bits`` (default: the model's, else the minimum) may be wider than needed; the extra
    bits are reported as headroom. A narrower request is refused: it could overflow.
    ``arch="shiftadd"`` has no multipliers: each weight's magnitude is recoded in canonical
    signed digits and every nonzero digit becomes a shifted input, a leaf of the same tree.
    ``arch="serial"`` plans one multiply-accumulate that takes a feature per beat (nodes
    :data:`SERIAL_NODES`).
    ``weight_range`` and ``bias_range`` (``(lo, hi)``, both or neither) plan loadable weights:
    every weight and the bias may be any value in its declared range, and every width holds
    every score those allow (the trained values are only where the registers start).
    """
    if arch not in ARCHITECTURES:
        raise InputError(f"must be one of {', '.join(ARCHITECTURES)}, not {arch!r}",
                         field="arch")
    unit = model.unit if unit_index is None else model.units[unit_index]
    ranges = model.feature_ranges
    weights = unit.weights
    if score_bits is None:
        score_bits = model.score_bits
    if weight_range is not None:
        if arch == "shiftadd":
            raise InputError("shiftadd recodes each constant weight into shifts and adds, so "
                             "its weights cannot be loaded; use --arch tree or serial",
                             field="--loadable-weights")
        return _analyse_loadable(model, unit, score_bits, arch, weight_range, bias_range)
    if arch == "serial":
        return _analyse_serial(model, unit, score_bits)

    nodes = []

    def add(**kwargs):
        node = Node(index=len(nodes), **kwargs)
        nodes.append(node)
        return node

    coefficients = {}    # node index -> {feature: coefficient} of the value the node computes

    def exact(coeffs, constant=0):
        # A node computes a linear form in independent features: its exact range is the sum
        # of each term's range. With shift-add leaves a feature can appear in several leaves,
        # so the coefficients are merged first (plain interval arithmetic would overestimate).
        lo = hi = constant
        for feature, c in coeffs.items():
            a, b = c * ranges[feature][0], c * ranges[feature][1]
            lo, hi = lo + min(a, b), hi + max(a, b)
        return lo, hi

    def combine(left, right, kind):
        merged = dict(coefficients[left.index])
        factor = {"add": 1, "sub": -1, "rsub": -1}[kind]
        if kind == "rsub":
            merged = {f: -c for f, c in merged.items()}
            factor = 1
        for f, c in coefficients[right.index].items():
            merged[f] = merged.get(f, 0) + factor * c
        return {f: c for f, c in merged.items() if c}

    layer = []
    for index, (weight, (lo, hi)) in enumerate(zip(weights, ranges)):
        if weight == 0:
            continue
        magnitude = abs(weight)
        sign = 1 if weight > 0 else -1
        if arch == "tree":
            layer.append(add(name=f"p{index}", kind="product", children=(), lo=lo * magnitude,
                             hi=hi * magnitude, level=0, sign=sign, feature=index,
                             magnitude=magnitude))
            coefficients[layer[-1].index] = {index: magnitude}
            continue
        for shift, digit in csd_digits(magnitude):
            layer.append(add(name=f"p{index}_{shift}", kind="product", children=(),
                             lo=lo << shift, hi=hi << shift, level=0, sign=sign * digit,
                             feature=index, magnitude=1 << shift))
            coefficients[layer[-1].index] = {index: 1 << shift}

    # A bank needs every unit's score for its argmax, whether or not the ports show them.
    has_score = model.ports.has_score or model.is_bank
    folded = False
    level = 0
    if arch == "shiftadd" and layer:
        layer, folded = _smallest_first(layer, unit.bias if has_score else 0, add, combine,
                                        exact, coefficients)
        level = layer[0].level
    while len(layer) > 1:
        level += 1
        next_layer = []
        for position in range(0, len(layer) - 1, 2):
            left, right = layer[position], layer[position + 1]
            if left.sign == right.sign:
                kind, sign = "add", left.sign
            elif left.sign > 0:
                kind, sign = "sub", 1
            else:
                kind, sign = "rsub", 1
            coeffs = combine(left, right, kind)
            lo, hi = exact(coeffs)
            next_layer.append(add(name=f"s{level}_{position // 2}", kind=kind,
                                  children=(left.index, right.index), lo=lo, hi=hi,
                                  level=level, sign=sign))
            coefficients[next_layer[-1].index] = coeffs
        if len(layer) % 2:
            next_layer.append(layer[-1])
        layer = next_layer

    tree_root = layer[0].index if layer else None
    terms = [_term_range(w, lo, hi) for w, (lo, hi) in zip(weights, ranges)]
    score_lo = sum(t[0] for t in terms) + unit.bias
    score_hi = sum(t[1] for t in terms) + unit.bias

    score_node = None
    if tree_root is not None:
        root = nodes[tree_root]
        if has_score and not folded and (unit.bias != 0 or root.sign < 0):
            score_node = add(name="score_sum", kind="bias", children=(tree_root,), lo=score_lo,
                             hi=score_hi, level=level + 1, sign=1, constant=unit.bias).index
        else:
            score_node = tree_root
        # The tree must be exact: its root's contribution is the sum of every term.
        inside = unit.bias if folded else 0
        assert _root_is_exact(nodes, tree_root, score_lo - unit.bias + inside,
                              score_hi - unit.bias + inside)

    score_bits_min, score_bits = _score_widths(score_lo, score_hi, score_bits)
    witness_min, witness_max = _witnesses(weights, ranges)
    return Analysis(feature_ranges=tuple(ranges), weights=tuple(weights), bias=unit.bias,
                    nodes=tuple(nodes), tree_root=tree_root, score_node=score_node,
                    score_range=(score_lo, score_hi), score_bits_min=score_bits_min,
                    score_bits=score_bits, witness_min=witness_min, witness_max=witness_max,
                    tree_levels=level, has_score=has_score, arch=arch)


def prefix_ranges(weights, bias, ranges):
    """Exact range of ``bias + w[0] x[0] + ... + w[k-1] x[k-1]`` for k = 0 .. N: what a
    multiply-accumulate holds after k beats."""
    return _prefixes([_term_range(w, lo, hi) for w, (lo, hi) in zip(weights, ranges)],
                     (bias, bias))


def _prefixes(terms, start):
    lo, hi = start
    out = [(lo, hi)]
    for a, b in terms:
        lo, hi = lo + a, hi + b
        out.append((lo, hi))
    return out


def _box_product(a, b):
    """Exact range of ``x * w`` for independent ``x`` in ``a`` and ``w`` in ``b``: the
    product is bilinear, so its extremes are at corners."""
    corners = [x * w for x in a for w in b]
    return min(corners), max(corners)


def _analyse_loadable(model, unit, score_bits, arch, weight_range, bias_range):
    """Weights and bias are registers: each term ranges over the product of its feature's
    range and the declared weight range, and the terms stay independent, so sums of their
    ranges remain exact (every bound is reached by some input and some loaded weights)."""
    ranges = model.feature_ranges
    terms = [_box_product(r, weight_range) for r in ranges]
    score_lo = sum(t[0] for t in terms) + bias_range[0]
    score_hi = sum(t[1] for t in terms) + bias_range[1]
    nodes = []
    if arch == "serial":
        prefixes = _prefixes(terms, bias_range)
        values = [("sample", "sample", _union(ranges)), ("weight", "weight", weight_range),
                  ("product", "product", _union(terms)),
                  ("accumulator", "accumulator", _union(prefixes[:-1])),
                  ("sum", "add", _union(prefixes[1:]))]
        nodes = [Node(index=i, name=name, kind=kind, children=(), lo=lo, hi=hi, level=0)
                 for i, (name, kind, (lo, hi)) in enumerate(values)]
        tree_root, score_node, level = None, SERIAL_NODES.index("sum"), 0
    else:
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
        score_node = nodes[-1].index
    score_bits_min, score_bits = _score_widths(
        score_lo, score_hi, score_bits, of=" of the loadable weights", field="--weight-bits")
    # The witnesses are of the weights the registers start with (the trained ones).
    witness_min, witness_max = _witnesses(unit.weights, ranges)
    return Analysis(feature_ranges=tuple(ranges), weights=tuple(unit.weights), bias=unit.bias,
                    nodes=tuple(nodes), tree_root=tree_root, score_node=score_node,
                    score_range=(score_lo, score_hi), score_bits_min=score_bits_min,
                    score_bits=score_bits, witness_min=witness_min, witness_max=witness_max,
                    tree_levels=level, has_score=model.ports.has_score or model.is_bank,
                    arch=arch, weight_range=tuple(weight_range),
                    bias_range=tuple(bias_range))


def _union(pairs):
    pairs = list(pairs)
    return min(p[0] for p in pairs), max(p[1] for p in pairs)


def _analyse_serial(model, unit, score_bits):
    """One multiply-accumulate shared by every beat: each value's range is the union over the
    beats of its exact range in that beat, so no beat can overflow it (and every bound is
    reached in some beat by some input: the plan stays exact)."""
    ranges, weights = model.feature_ranges, unit.weights
    prefixes = prefix_ranges(weights, unit.bias, ranges)
    values = [
        ("sample", "sample", _union(ranges)),
        # The product is of the weight's magnitude; the sign makes the sum add or subtract.
        ("magnitude", "weight", (0, max(abs(w) for w in weights))),
        ("product", "product", _union(_term_range(abs(w), lo, hi)
                                      for w, (lo, hi) in zip(weights, ranges))),
        # The running sum entering a beat: the bias in the first, the held sum after.
        ("accumulator", "accumulator", _union(prefixes[:-1])),
        ("sum", "add", _union(prefixes[1:])),
    ]
    nodes = tuple(Node(index=i, name=name, kind=kind, children=(), lo=lo, hi=hi, level=0)
                  for i, (name, kind, (lo, hi)) in enumerate(values))
    score_lo, score_hi = prefixes[-1]
    widest = max(n.bits for n in nodes)
    if widest > MAX_SCORE_BITS + 1:
        raise InputError(f"the accumulator needs {widest} bits, more than the limit of "
                         f"{MAX_SCORE_BITS + 1}; use narrower weights or input ranges",
                         field="unit")
    score_bits_min, score_bits = _score_widths(score_lo, score_hi, score_bits)
    has_score = model.ports.has_score or model.is_bank
    witness_min, witness_max = _witnesses(weights, ranges)
    return Analysis(feature_ranges=tuple(ranges), weights=tuple(weights), bias=unit.bias,
                    nodes=nodes, tree_root=None, score_node=SERIAL_NODES.index("sum"),
                    score_range=(score_lo, score_hi), score_bits_min=score_bits_min,
                    score_bits=score_bits, witness_min=witness_min, witness_max=witness_max,
                    tree_levels=0, has_score=has_score, arch="serial")


def _smallest_first(leaves, bias, add, combine, exact, coefficients):
    """The shift-add tree: leaves of each sign summed on their own, always the two with the
    smallest ranges first (as in Huffman's construction), then one subtraction.

    Every adder but the last adds terms of one sign, so none needs inverted operands (on
    iCE40 each subtracted bit costs a LUT of its own before the carry chain) and, for
    unsigned inputs, none carries sign bits; small values meet small values, so the wide
    adders are few. A bias is folded in as one more leaf of its sign when a score is
    computed: no adder of its own at the widest width. Returns the new layer (one node) and
    whether the bias was folded. Measured once while developing it (Yosys 0.70, iCE40, the
    unit of ``benchmarks/cost.py``): 590 LUT4 against 839 for pairing neighbours in feature
    order.
    """
    groups = {1: [n for n in leaves if n.sign > 0], -1: [n for n in leaves if n.sign < 0]}
    fold_into = None
    if bias > 0 and groups[1]:
        fold_into = 1
    elif bias < 0 and groups[-1] and groups[1]:
        fold_into = -1
    roots, offsets = {}, {}       # offsets: the bias inside a node's value, where folded
    for sign, group in groups.items():
        if not group:
            continue
        heap = [(node.hi, k, node) for k, node in enumerate(group)]
        if sign == fold_into:
            heap.append((abs(bias), -1, None))      # the bias as a constant leaf
        heapq.heapify(heap)
        serial, order = 0, len(heap)
        while len(heap) > 1:
            (_, _, a), (_, _, b) = heapq.heappop(heap), heapq.heappop(heap)
            if a is None or b is None:
                child = a if b is None else b
                coeffs = coefficients[child.index]
                lo, hi = exact(coeffs, abs(bias))
                node = add(name=f"{'pos' if sign > 0 else 'neg'}_bias", kind="offset",
                           children=(child.index,), lo=lo, hi=hi, level=child.level + 1,
                           sign=sign, constant=abs(bias))
            else:
                coeffs = combine(a, b, "add")
                lo, hi = exact(coeffs, offsets.get(a.index, 0) + offsets.get(b.index, 0))
                node = add(name=f"{'pos' if sign > 0 else 'neg'}{serial}", kind="add",
                           children=(a.index, b.index), lo=lo, hi=hi,
                           level=max(a.level, b.level) + 1, sign=sign)
                serial += 1
            coefficients[node.index] = coeffs
            inner = abs(bias) if node.kind == "offset" else \
                offsets.get(node.children[0], 0) + offsets.get(node.children[-1], 0)
            if inner:
                offsets[node.index] = inner
            order += 1
            heapq.heappush(heap, (node.hi, order, node))
        roots[sign] = heap[0][2]
    if len(roots) == 1:
        return [next(iter(roots.values()))], fold_into is not None
    plus, minus = roots[1], roots[-1]
    coeffs = combine(plus, minus, "sub")
    lo, hi = exact(coeffs, offsets.get(plus.index, 0) - offsets.get(minus.index, 0))
    node = add(name="difference", kind="sub", children=(plus.index, minus.index), lo=lo,
               hi=hi, level=max(plus.level, minus.level) + 1, sign=1)
    coefficients[node.index] = coeffs
    return [node], fold_into is not None


def _root_is_exact(nodes, root, lo, hi):
    node = nodes[root]
    if node.sign > 0:
        return (node.lo, node.hi) == (lo, hi)
    return (-node.hi, -node.lo) == (lo, hi)


@dataclass(frozen=True)
class BankPlan:
    """Several units sharing the inputs; the decision is the argmax of their scores."""

    units: tuple          # one Analysis per unit
    class_bits: int       # width of the class index
    argmax_levels: int

    @property
    def tree_levels(self):
        return max(unit.tree_levels for unit in self.units)

    @property
    def score_level(self):
        """Level of the bias adders, common to every unit."""
        return self.tree_levels + 1

    @property
    def final_level(self):
        return self.score_level + self.argmax_levels

    @property
    def levels(self):
        """As :attr:`Analysis.levels`, with the argmax's comparison levels after the scores."""
        return 1 if self.units[0].arch == "serial" else self.final_level + 1

    def tournament(self, scores, merge):
        """The argmax as planned: neighbours compared level by level, the lower index on the
        left (it wins ties), an odd last entry carried up unpaired. ``merge(level, tag, left,
        right)`` makes the winner entry of two; returns the final entry."""
        layer, level = list(scores), self.score_level
        while len(layer) > 1:
            level += 1
            merged = [merge(level, f"best{level - self.score_level}_{k // 2}", layer[k],
                            layer[k + 1]) for k in range(0, len(layer) - 1, 2)]
            if len(layer) % 2:
                merged.append(layer[-1])
            layer = merged
        return layer[0]


def analyse_bank(model, *, score_bits=None, arch="tree", weight_range=None, bias_range=None):
    """Analyse every unit of a bank; ``score_bits`` (if given) is the width of every score port."""
    if score_bits is None:
        score_bits = model.score_bits
    units = []
    loadable = {"weight_range": weight_range, "bias_range": bias_range}
    for index in range(len(model.units)):
        own = analyse(model, arch=arch, unit_index=index, **loadable)
        if score_bits is not None:
            if score_bits < own.score_bits_min:
                raise InputError(f"score_bits {score_bits} cannot hold the score range "
                                 f"{list(own.score_range)} of unit {model.units[index].name}; "
                                 f"it needs at least {own.score_bits_min}", field="score_bits")
            own = analyse(model, arch=arch, unit_index=index, score_bits=score_bits,
                          **loadable)
        units.append(own)
    count = len(units)
    return BankPlan(units=tuple(units), class_bits=max(1, (count - 1).bit_length()),
                    argmax_levels=(count - 1).bit_length())
