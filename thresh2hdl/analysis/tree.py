"""The plan of constant weights: an adder tree of products (``tree``) or of shifted inputs
(``shiftadd``), every node sized exactly over the declared input ranges.

Products are formed from the weight's magnitude, ``x * |w|``, and the weight's sign is carried
into the adder that consumes them (``a - b`` instead of ``a + (-b)``): a negative constant then
costs no more than a positive one.
"""

from .intervals import term_range, witnesses
from .records import Analysis, Node
from .shared import FEATURE, shared_name
from .widths import csd_digits, score_widths

__all__ = ["analyse_constant"]


class _Tree:
    """The nodes of a plan being built, and the linear form in the features each computes.

    A node's exact range is the sum of its terms' ranges. With shift-add leaves a feature can
    appear in several leaves, so the coefficients are merged first (plain interval arithmetic
    over the children would overestimate)."""

    def __init__(self, ranges):
        self.ranges = ranges
        self.nodes = []
        self.coefficients = {}    # node index -> {feature: coefficient}

    def add(self, coeffs=None, **fields):
        node = Node(index=len(self.nodes), **fields)
        self.nodes.append(node)
        if coeffs is not None:
            self.coefficients[node.index] = coeffs
        return node

    def exact(self, coeffs, constant=0):
        lo = hi = constant
        for feature, c in coeffs.items():
            a, b = c * self.ranges[feature][0], c * self.ranges[feature][1]
            lo, hi = lo + min(a, b), hi + max(a, b)
        return lo, hi

    def scaled(self, child, shift, sign=1, name=None, shared=False):
        """A ``scaled`` node: ``child << shift`` (wiring), at the child's level."""
        coeffs = {f: c << shift for f, c in self.coefficients[child.index].items()}
        lo, hi = self.exact(coeffs)
        return self.add(coeffs, name=name, kind="scaled", children=(child.index,), lo=lo,
                        hi=hi, level=child.level, sign=sign, magnitude=1 << shift,
                        shared=shared)

    def combine(self, left, right, kind):
        """The coefficients of ``left + right`` (``add``), ``left - right`` (``sub``) or
        ``right - left`` (``rsub``)."""
        merged = dict(self.coefficients[left.index])
        factor = {"add": 1, "sub": -1, "rsub": -1}[kind]
        if kind == "rsub":
            merged = {f: -c for f, c in merged.items()}
            factor = 1
        for f, c in self.coefficients[right.index].items():
            merged[f] = merged.get(f, 0) + factor * c
        return {f: c for f, c in merged.items() if c}


def analyse_constant(model, unit, score_bits, arch, sharing=None, unit_index=None):
    """Plan ``unit``'s tree (``arch`` ``tree`` or ``shiftadd``) and size every node exactly.
    ``sharing``: a bank's :class:`~.shared.SharingPlan` (shiftadd), whose terms for unit
    ``unit_index`` are the leaves."""
    ranges, weights = model.feature_ranges, unit.weights
    tree = _Tree(ranges)
    layer = _leaves(tree, weights, ranges, arch) if sharing is None else \
        _shared_leaves(tree, sharing, sharing.unit_terms[unit_index])
    # A bank needs every unit's score for its argmax, whether or not the ports show them.
    has_score = model.ports.has_score or model.is_bank
    folded = False
    level = 0
    if arch == "shiftadd" and layer:
        layer, folded = _smallest_first(tree, layer, unit.bias if has_score else 0)
        level = layer[0].level
    layer, level = _pair_neighbours(tree, layer, level)

    nodes = tree.nodes
    tree_root = layer[0].index if layer else None
    terms = [term_range(w, lo, hi) for w, (lo, hi) in zip(weights, ranges)]
    score_lo = sum(t[0] for t in terms) + unit.bias
    score_hi = sum(t[1] for t in terms) + unit.bias

    score_node = None
    if tree_root is not None:
        root = nodes[tree_root]
        if has_score and not folded and (unit.bias != 0 or root.sign < 0):
            score_node = tree.add(name="score_sum", kind="bias", children=(tree_root,),
                                  lo=score_lo, hi=score_hi, level=level + 1, sign=1,
                                  constant=unit.bias).index
        else:
            score_node = tree_root
        # The tree must be exact: its root's contribution is the sum of every term.
        inside = unit.bias if folded else 0
        assert _root_is_exact(nodes, tree_root, score_lo - unit.bias + inside,
                              score_hi - unit.bias + inside)

    score_bits_min, score_bits = score_widths(score_lo, score_hi, score_bits)
    witness_min, witness_max = witnesses(weights, ranges)
    return Analysis(feature_ranges=tuple(ranges), weights=tuple(weights), bias=unit.bias,
                    nodes=tuple(nodes), tree_root=tree_root, score_node=score_node,
                    score_range=(score_lo, score_hi), score_bits_min=score_bits_min,
                    score_bits=score_bits, witness_min=witness_min, witness_max=witness_max,
                    tree_levels=level, has_score=has_score, arch=arch)


def _leaves(tree, weights, ranges, arch):
    """Level 0: a product per nonzero weight (``tree``), or a shifted input per nonzero
    canonical signed digit of its magnitude (``shiftadd``)."""
    layer = []
    for index, (weight, (lo, hi)) in enumerate(zip(weights, ranges)):
        if weight == 0:
            continue
        magnitude = abs(weight)
        sign = 1 if weight > 0 else -1
        if arch == "tree":
            layer.append(tree.add({index: magnitude}, name=f"p{index}", kind="product",
                                  children=(), lo=lo * magnitude, hi=hi * magnitude, level=0,
                                  sign=sign, feature=index, magnitude=magnitude))
            continue
        layer += [_product(tree, index, shift, sign * digit)
                  for shift, digit in csd_digits(magnitude)]
    return layer


def _shared_leaves(tree, sharing, terms):
    """Level 0 and the shared terms: a unit's terms left after sharing, each a shifted input
    or a shared term scaled by its shift (with the unit's sign)."""
    made = {}
    layer = []
    for source, shift, sign in terms:
        if source[0] == FEATURE:
            layer.append(_product(tree, source[1], shift, sign))
            continue
        node = _shared_node(tree, sharing, source[1], made)
        name = f"{node.name}_{shift}"
        serial = 1
        while name in made:    # the same term twice at one shift: a name of its own
            name, serial = f"{node.name}_{shift}_{serial}", serial + 1
        made[name] = tree.scaled(node, shift, sign, name=name)
        layer.append(made[name])
    return layer


def _product(tree, feature, shift, sign, shared=False):
    """A shifted input: ``x[feature] << shift``."""
    lo, hi = tree.ranges[feature]
    return tree.add({feature: 1 << shift}, name=f"p{feature}_{shift}", kind="product",
                    children=(), lo=lo << shift, hi=hi << shift, level=0, sign=sign,
                    feature=feature, magnitude=1 << shift, shared=shared)


def _shared_node(tree, sharing, index, made):
    """Shared term ``index`` and what it needs, once in this unit's nodes (``made``: name ->
    node); named as in every other unit, one adder a level above its operands."""
    name = shared_name(index)
    if name in made:
        return made[name]
    term = sharing.terms[index]
    operands = []
    for (kind, source), shift in (term.first, term.second):
        if kind == FEATURE:
            key = f"p{source}_{shift}"
            if key not in made:
                made[key] = _product(tree, source, shift, 1, shared=True)
            operands.append(made[key])
            continue
        child = _shared_node(tree, sharing, source, made)
        key = f"{child.name}_s{shift}"
        if shift and key not in made:
            made[key] = tree.scaled(child, shift, name=key, shared=True)
        operands.append(made[key] if shift else child)
    left, right = operands
    kind = "add" if term.sign > 0 else "sub"
    coeffs = tree.combine(left, right, kind)
    lo, hi = tree.exact(coeffs)
    made[name] = tree.add(coeffs, name=name, kind=kind, children=(left.index, right.index),
                          lo=lo, hi=hi, level=max(left.level, right.level) + 1, sign=1,
                          shared=True)
    return made[name]


def _pair_neighbours(tree, layer, level):
    """The ``tree`` adders: neighbours paired level by level in feature order, an odd last
    node carried up unpaired; a pair of opposite signs is one subtraction."""
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
            coeffs = tree.combine(left, right, kind)
            lo, hi = tree.exact(coeffs)
            next_layer.append(tree.add(coeffs, name=f"s{level}_{position // 2}", kind=kind,
                                       children=(left.index, right.index), lo=lo, hi=hi,
                                       level=level, sign=sign))
        if len(layer) % 2:
            next_layer.append(layer[-1])
        layer = next_layer
    return layer, level


def _smallest_first(tree, leaves, bias):
    """The shift-add tree: leaves of each sign summed on their own, level by level, the
    smallest ranges paired first at each level, then one subtraction.

    Every adder but the last adds terms of one sign, so none needs inverted operands (on
    iCE40 each subtracted bit costs a LUT of its own before the carry chain) and, for
    unsigned inputs, none carries sign bits; small values meet small values, so the wide
    adders are few; every value is paired as soon as it is made, so few wait in pipeline
    registers. A bias is folded in as one more leaf of its sign when a score is computed: no
    adder of its own at the widest width. Returns the new layer (one node) and whether the
    bias was folded. Measured while developing it (Yosys 0.70, nextpnr 0.11, iCE40 UP5K, the
    unit of ``benchmarks/cost.py``): 592 LUT4 against 839 for pairing neighbours in feature
    order; against the two smallest first whatever their level (Huffman's construction), 590
    LUT4, but 8 levels instead of 12 and, every level registered, 893 flip-flops against 1,711.
    """
    groups = {1: [n for n in leaves if n.sign > 0], -1: [n for n in leaves if n.sign < 0]}
    fold_into = None
    if bias > 0 and groups[1]:
        fold_into = 1
    elif bias < 0 and groups[-1] and groups[1]:
        fold_into = -1
    roots, offsets = {}, {}       # offsets: the bias inside a node's value, where folded
    for sign, group in groups.items():
        if group:
            roots[sign] = _sum_one_sign(tree, group, sign, bias if sign == fold_into else 0,
                                        offsets)
    if len(roots) == 1:
        return [next(iter(roots.values()))], fold_into is not None
    plus, minus = roots[1], roots[-1]
    coeffs = tree.combine(plus, minus, "sub")
    lo, hi = tree.exact(coeffs, offsets.get(plus.index, 0) - offsets.get(minus.index, 0))
    node = tree.add(coeffs, name="difference", kind="sub", children=(plus.index, minus.index),
                    lo=lo, hi=hi, level=max(plus.level, minus.level) + 1, sign=1)
    return [node], fold_into is not None


def _sum_one_sign(tree, group, sign, bias, offsets):
    """Sum the leaves of one sign level by level: at each level the values ready (made at an
    earlier level) are sorted by range and paired, the two smallest, then the next two, an
    odd largest left for the next level; a nonzero ``bias`` joins them as a constant leaf (an
    ``offset`` node). Records in ``offsets`` the bias inside each node."""
    prefix = "pos" if sign > 0 else "neg"
    items = [(node.level, node.hi, k, node) for k, node in enumerate(group)]
    if bias:
        items.append((0, abs(bias), -1, None))      # the bias as a constant leaf
    serial, order = 0, len(items)
    level = min(item[0] for item in items)
    while len(items) > 1:
        level += 1
        ready = sorted((item for item in items if item[0] < level),
                       key=lambda item: (item[1], item[2]))
        if len(ready) < 2:
            continue
        pairs = ready[:len(ready) - len(ready) % 2]
        taken = {item[2] for item in pairs}
        items = [item for item in items if item[2] not in taken]
        for (_, _, _, a), (_, _, _, b) in zip(pairs[::2], pairs[1::2]):
            if a is None or b is None:
                child = a if b is None else b
                coeffs = tree.coefficients[child.index]
                lo, hi = tree.exact(coeffs, abs(bias))
                node = tree.add(coeffs, name=f"{prefix}_bias", kind="offset",
                                children=(child.index,), lo=lo, hi=hi, level=child.level + 1,
                                sign=sign, constant=abs(bias))
            else:
                coeffs = tree.combine(a, b, "add")
                lo, hi = tree.exact(coeffs, offsets.get(a.index, 0) + offsets.get(b.index, 0))
                node = tree.add(coeffs, name=f"{prefix}{serial}", kind="add",
                                children=(a.index, b.index), lo=lo, hi=hi,
                                level=max(a.level, b.level) + 1, sign=sign)
                serial += 1
            inner = abs(bias) if node.kind == "offset" else \
                offsets.get(node.children[0], 0) + offsets.get(node.children[-1], 0)
            if inner:
                offsets[node.index] = inner
            order += 1
            items.append((node.level, node.hi, order, node))
    return items[0][3]


def _root_is_exact(nodes, root, lo, hi):
    node = nodes[root]
    if node.sign > 0:
        return (node.lo, node.hi) == (lo, hi)
    return (-node.hi, -node.lo) == (lo, hi)
