"""The plan of the proof: every datapath value the design computes, its pipeline stage, its
exact range and the linear form (weights and constant over the features) it must hold.

The plan is built from the model and the component's adder plan, not read from the netlist;
:func:`check_cover` ties it to the model: the forms of the scores must be the model's weights
and bias, term for term.
"""

from dataclasses import dataclass

from ..names import (SCORE_CONST, argmax_compare_name, argmax_names, bias_name,
                     flag_part_name, unit_prefix, weight_name)

__all__ = ["Value", "Plan", "check_cover", "range_test"]


@dataclass
class Value:
    name: str
    kind: str          # input, product, scaled, add, sub, rsub, bias, const, compare, max, pick,
                       # flag; loadable weights: mul (a feature times its weight register),
                       # addreg (an operand plus the bias register)
    operands: tuple    # names of other values
    stage: int
    lo: int
    hi: int
    signed: bool
    coeffs: dict | None = None   # feature -> coefficient of the linear form (None: argmax)
    constant: int = 0
    feature: int | None = None
    magnitude: int = 0
    first: int = 0     # argmax values: the unit indices they cover
    last: int = 0
    register_shift: int = 0   # a shifted input's registers carry value >> register_shift
    features: tuple = ()      # a flag of the inputs: the features whose codes it tests
    register: str | None = None   # mul, addreg: the weight or bias register it reads
    parts: int = 1            # a split adder: its part count (its value: the parts' sum)
    piece: dict | None = None  # a split adder's piece (psum, plow, pcarry, ptop, pnot, dstep):
                               # what its formula reads (see Plan._split)


def _form_range(coeffs, constant, ranges):
    lo = hi = constant
    for feature, c in coeffs.items():
        a, b = c * ranges[feature][0], c * ranges[feature][1]
        lo, hi = lo + min(a, b), hi + max(a, b)
    return lo, hi


class Plan:
    """The values of the design, their stages and linear forms, built from the model."""

    def __init__(self, component, model):
        self.model = model
        self.latency = component.latency
        self.reset = component.config.reset               # its kind (hardware.RESET_KINDS)
        self.clock_enable = component.config.clock_enable
        boundaries = component.register_boundaries
        self.stage_of = lambda level: sum(1 for b in boundaries if b < level)
        self.ranges = model.feature_ranges
        self.values = {}
        self.unit_scores = []     # per unit: (value name or None, sign, bias) of its score
        self.loadable = False     # the weights and biases are registers (their forms: terms)
        self.closed = set()       # values that may be cut points
        units = component.unit_analyses
        for index, analysis in enumerate(units):
            prefix = unit_prefix(index) if model.is_bank else ""
            self._unit(analysis, prefix, model.units[index] if model.is_bank else model.unit)
        self.guard = component.config.guard
        if self.guard.flag:
            # The out-of-range flag: an OR tree whose layer j is made with level j (layer 0
            # from the inputs' comparisons), then carried with the result.
            layers, below = self.guard.flag_layers, []
            for j, layer in enumerate(layers):
                made = []
                for k, group in enumerate(layer):
                    name = flag_part_name(j, k, j == len(layers) - 1)
                    operands = () if j == 0 else tuple(below[c] for c in group)
                    # A part over features no tighter than their ports is 0 (its flops
                    # dropped): read as that constant, on a lemma that it is.
                    hi = int(any(f in self.guard.tight for f in group) if j == 0 else
                             any(self.values[o].hi for o in operands))
                    self.add(Value(name, "flag", operands, 0 if j == 0 else self.stage_of(j),
                                   0, hi, False, features=group if j == 0 else ()))
                    made.append(name)
                below = made
        self.final_stage = self.stage_of(component.final_level)
        self.split = dict(component.split_parts)
        self.split_bits = component.config.split_bits
        self.skew = component.config.carry_registers
        self.decision = None      # split: the last step of the decision chain
        if self.split:
            self._split(component.analysis)
        if model.is_bank:
            self.class_value = self._argmax(component.bank)
        check_cover(self, model)

    def add(self, value):
        self.values[value.name] = value
        return value

    def linear(self, name, kind, operands, stage, coeffs, constant=0, **extra):
        coeffs = {f: c for f, c in coeffs.items() if c}
        lo, hi = _form_range(coeffs, constant, self.ranges)
        return self.add(Value(name, kind, tuple(operands), stage, lo, hi, lo < 0, coeffs,
                               constant, **extra))

    def _unit(self, analysis, prefix, unit):
        """The unit's values (a shared one once for the bank, under its own name); a value can
        be a cut point when its subtree holds every leaf of its features (with shift-add
        digits a feature has several leaves; a cut between two of them would free values that
        are tied, and fail a true lemma). Leaves are counted through shared terms, as often
        as the unit reads them; a shared value is never a cut point."""
        if analysis.loadable:
            self._loadable_unit(analysis, prefix)
            return
        nodes = analysis.nodes
        names = [node.wire_name(prefix) for node in nodes]
        leaves = {}
        for node in nodes:
            if node.kind == "product":
                leaves[node.index] = {node.feature: 1}
            else:
                merged = {}
                for c in node.children:
                    for f, k in leaves[c].items():
                        merged[f] = merged.get(f, 0) + k
                leaves[node.index] = merged
        total = leaves[analysis.tree_root] if analysis.tree_root is not None else {}
        for node in nodes:
            if not node.shared and all(total[f] == k for f, k in leaves[node.index].items()):
                self.closed.add(names[node.index])
        for node in nodes:
            name = names[node.index]
            if name in self.values:
                continue                 # shared, planned with an earlier unit
            stage = self.stage_of(node.level)
            if node.kind == "product":
                self.linear(name, "product", (), stage, {node.feature: node.magnitude},
                            feature=node.feature, magnitude=node.magnitude,
                            register_shift=node.register_shift)
                continue
            children = [self.values[names[c]] for c in node.children]
            if node.kind == "scaled":     # wiring: the child shifted left
                child = children[0]
                self.linear(name, "scaled", (child.name,), stage,
                            {f: c * node.magnitude for f, c in child.coeffs.items()},
                            child.constant * node.magnitude, magnitude=node.magnitude)
                continue
            if node.kind == "offset":     # child + constant, whatever the child's sign
                child = children[0]
                self.linear(name, "bias", (child.name,), stage, dict(child.coeffs),
                            node.constant + child.constant)
                continue
            if node.kind == "bias":
                child = children[0]
                factor = 1 if nodes[node.children[0]].sign > 0 else -1
                self.linear(name, "bias" if factor > 0 else "rbias", (child.name,), stage,
                            {f: factor * c for f, c in child.coeffs.items()},
                            node.constant + factor * child.constant)
                continue
            left, right = children
            fa, fb = {"add": (1, 1), "sub": (1, -1), "rsub": (-1, 1)}[node.kind]
            coeffs = {f: fa * left.coeffs.get(f, 0) + fb * right.coeffs.get(f, 0)
                      for f in set(left.coeffs) | set(right.coeffs)}
            self.linear(name, node.kind, (left.name, right.name), stage, coeffs,
                        fa * left.constant + fb * right.constant)
        if analysis.score_node is None and self.model.is_bank:
            name = prefix + SCORE_CONST
            self.linear(name, "const", (), 0, {}, analysis.bias)
            self.unit_scores.append((name, 1, 0))
        elif analysis.score_node is None:
            self.unit_scores.append((None, 1, analysis.bias))
        elif nodes[analysis.score_node].kind == "bias":
            self.unit_scores.append((names[analysis.score_node], 1, 0))
        else:
            root = nodes[analysis.tree_root]
            self.unit_scores.append((names[analysis.tree_root], root.sign,
                                     0 if analysis.bias_folded else analysis.bias))

    def _loadable_unit(self, analysis, prefix):
        """A unit of loadable weights: each product a feature times its weight register, the
        adders as planned, then the bias register. Its form is over those terms (``("w", i)``
        for feature ``i``'s product, ``("b",)`` for the bias), each value's range the exact
        one of the analysis (every weight and bias the declared widths allow)."""
        nodes = analysis.nodes
        names = [node.wire_name(prefix) for node in nodes]
        for node in nodes:
            name, stage = names[node.index], self.stage_of(node.level)
            common = dict(stage=stage, lo=node.lo, hi=node.hi, signed=node.lo < 0)
            if node.kind == "product":
                self.add(Value(name, "mul", (), coeffs={("w", node.feature): 1},
                               feature=node.feature,
                               register=weight_name(prefix, node.feature), **common))
                continue
            children = [self.values[names[c]] for c in node.children]
            if node.kind == "bias":
                self.add(Value(name, "addreg", (children[0].name,),
                               coeffs={**children[0].coeffs, ("b",): 1},
                               register=bias_name(prefix), **common))
                continue
            if node.kind != "add":
                raise RuntimeError(f"a loadable unit has no {node.kind} node")
            left, right = children
            coeffs = dict(left.coeffs)
            for key, c in right.coeffs.items():
                coeffs[key] = coeffs.get(key, 0) + c
            self.add(Value(name, "add", (left.name, right.name), coeffs=coeffs, **common))
        self.loadable = True
        self.unit_scores.append((names[analysis.score_node], 1, 0))

    def _split(self, analysis):
        """A split adder's pieces, as :func:`~thresh2hdl.hardware.trees.build_split_tree`
        makes them: part ``j`` at ``j * skew`` stages after the node's, a low part's sum
        (``{N}_p{j}_sum``: A + B + the carry in, exact) giving the part (its low bits) and the
        carry (its top bit), the top part (A + B + the carry in), a subtrahend's parts
        complemented where they are made; then the decision chain over the result's parts (a
        part nonzero or one below it, the top part not negative: ``score > 0`` read from the
        top down, as digits are compared)."""
        b, skew, nodes = self.split_bits, self.skew, analysis.nodes
        for node in nodes:
            count = self.split.get(node.name, 1)
            if count == 1:
                continue
            self.values[node.name].parts = count
            constant, kind = None, node.kind
            if kind in ("offset", "bias"):
                constant = node.constant
                kind = "rsub" if node.kind == "bias" and nodes[node.children[0]].sign < 0 \
                    else "add"
            subtrahend = {"add": None, "sub": 1, "rsub": 0}[kind]
            first = self.stage_of(node.level)
            for j in range(count):
                at, top = first + j * skew, j == count - 1
                operands = []
                for position, child in enumerate(node.children):
                    name = nodes[child].name
                    if position == subtrahend:
                        name = self._complement(name, j, top)
                        operands.append(("value", name))
                    else:
                        operands.append(("slice", name))
                if constant is not None:
                    shifted = constant >> (j * b)
                    operands.append(("const", shifted if top else shifted % (1 << b)))
                carry = ("const", int(kind != "add")) if j == 0 else \
                    ("value", f"{node.name}_c{j - 1}")
                piece = {"node": node.name, "j": j, "top": top, "operands": operands,
                         "carry": carry}
                if top:
                    whole = self.values[node.name]      # its range from its form
                    lo, hi = whole.lo >> (j * b), whole.hi >> (j * b)
                    self.add(Value(f"{node.name}_p{j}", "ptop", (), at, lo, hi, lo < 0,
                                   piece=piece))
                    continue
                total = f"{node.name}_p{j}_sum"
                self.add(Value(total, "psum", (), at, 0, (1 << (b + 1)) - 1, False,
                               piece=piece))
                fixed = _fixed_part(self.values[node.name], j, b)
                lo, hi = (0, (1 << b) - 1) if fixed is None else (fixed, fixed)
                self.add(Value(f"{node.name}_p{j}", "plow", (total,), at, lo, hi, False))
                self.add(Value(f"{node.name}_c{j}", "pcarry", (total,), at, 0, 1, False))
        self._decision_chain(analysis)

    def _decision_chain(self, analysis):
        """The decision over the result's parts from the lowest up: with a score, ``score >
        0`` (a part nonzero or one below; the top part not negative); without one, the tree's
        root against the threshold that ``score > 0`` means (the plan's own bias and sign,
        not the circuit's constant), a part beyond its digit of the threshold or equal to it
        with the parts below beyond: digits compared from the top."""
        b, skew, nodes = self.split_bits, self.skew, analysis.nodes
        with_score = analysis.has_score or analysis.loadable
        result = nodes[analysis.score_node if with_score else analysis.tree_root]
        threshold, greater = None, True
        if not with_score:
            _, sign, extra = self.unit_scores[0]
            threshold, greater = (-extra, True) if sign > 0 else (extra, False)
        count, below = self.split.get(result.name, 1), None
        for j in range(count):
            at, top = self.final_stage + j * skew, j == count - 1
            name = "decision" if count == 1 else f"decision_p{j}"
            part = result.name if count == 1 else f"{result.name}_p{j}"
            piece = {"part": part, "below": below,
                     "sign": top and self.values[result.name].lo < 0}
            lo, hi = 0, 1
            if threshold is not None:
                limit = threshold >> (j * b)
                piece.update(limit=limit if top else limit % (1 << b), greater=greater)
                decided = decided_step(self.values[part], piece)
                if decided is not None:     # a constant, whose flops synthesis drops
                    lo = hi = decided
            self.add(Value(name, "dstep", (), at, lo, hi, False, piece=piece))
            below = name
        self.decision = below

    def _complement(self, name, j, top):
        """The complement of part ``j`` of value ``name``, a value of its own made where
        that part is made (``{name}_p{j}_not``, or ``_t{j}_not`` for a top part)."""
        own = f"{name}_{'t' if top else 'p'}{j}_not"
        if own not in self.values:
            source = self.values[name]
            made = source.stage if source.parts == 1 else \
                self.values[f"{name}_p{min(j, source.parts - 1)}"].stage
            b = self.split_bits
            fixed = None if top else _fixed_part(source, j, b)
            if top:
                lo, hi = -(source.hi >> (j * b)) - 1, -(source.lo >> (j * b)) - 1
            elif fixed is not None:
                lo = hi = (1 << b) - 1 - fixed
            elif source.lo >= 0 and source.hi >> (j * b) < 1 << b:
                # The part of a small non-negative value: its complement's high bits are 1s.
                lo, hi = (1 << b) - 1 - (source.hi >> (j * b)), (1 << b) - 1
            else:
                lo, hi = 0, (1 << b) - 1
            self.add(Value(own, "pnot", (name,), made, lo, hi, lo < 0,
                           piece={"node": name, "j": j, "top": top}))
        return own

    def _argmax(self, plan):
        """The argmax as the circuit plans it: a tournament, left (lower index) wins ties."""
        layer = []
        for index, (name, sign, bias) in enumerate(self.unit_scores):
            if name is None or sign != 1 or bias != 0:
                raise RuntimeError("a bank's unit scores must be values of the plan")
            layer.append((name, None, index, index))

        def merge(level, tag, left, right):
            (a, ia, first, _), (b, ib, _, last) = left, right
            stage = self.stage_of(level + 1)
            lo = min(self.values[a].lo, self.values[b].lo)
            hi = max(self.values[a].hi, self.values[b].hi)
            score, chosen = argmax_names(tag)
            compared = argmax_compare_name(tag)
            self.closed.update((score, chosen, compared))
            self.add(Value(compared, "compare", (a, b), self.stage_of(level), 0, 1, False))
            self.add(Value(score, "max", (compared, a, b), stage, lo, hi, True, first=first,
                           last=last))
            self.add(Value(chosen, "pick", (compared, a, b, ia, ib), stage, first, last, False,
                           first=first, last=last))
            return score, chosen, first, last

        return plan.tournament(layer, merge)[1]      # None for a bank of one unit: class 0


def range_test(held, number, greater):
    """A decision step's test of a part against the threshold's digit ``number`` (``part >
    number`` when ``greater``, else ``<``) decided by the part's range alone: True, False, or
    None when the part's value decides it."""
    if (held.lo > number) if greater else (held.hi < number):
        return True
    if (held.hi <= number) if greater else (held.lo >= number):
        return False
    return None


def decided_step(held, piece):
    """A decision step against the threshold that the part's range decides whatever the
    steps below: 1 or 0; else None."""
    test = range_test(held, piece["limit"], piece["greater"])
    if test is None or (piece["below"] is not None and held.lo <= piece["limit"] <= held.hi):
        return None
    return int(test)


def _fixed_part(value, j, b):
    """Part ``j`` (``b`` bits from ``j * b``) of a linear value when it is the same whatever
    the inputs (every coefficient's low bits are zeros there, as in a shift-add sum of
    shifted inputs: the part is the constant's), else None."""
    if value.coeffs is None:
        return None
    numbers = [c for c in value.coeffs.values() if c]
    zeros = min(((n & -n).bit_length() - 1 for n in numbers), default=1 << 30)
    return (value.constant >> (j * b)) % (1 << b) if (j + 1) * b <= zeros else None


def check_cover(plan, model):
    """The plan's score forms must be the model's weights and bias, term for term (with
    loadable weights: each feature's product with its register and the bias register, once
    each)."""
    units = model.units
    if plan.loadable:
        wanted = {("w", i): 1 for i in range(len(model.features))} | {("b",): 1}
        for name, _, _ in plan.unit_scores:
            value = plan.values[name]
            if value.coeffs != wanted or value.constant:
                raise RuntimeError(f"the adder plan of {name} does not add each product and "
                                   f"the bias once; this is a bug in thresh2hdl")
        return
    for (name, sign, bias), unit in zip(plan.unit_scores, units):
        coeffs, constant = ({}, 0) if name is None else (plan.values[name].coeffs,
                                                         plan.values[name].constant)
        got = [sign * coeffs.get(i, 0) for i in range(len(model.features))]
        if got != list(unit.weights) or sign * constant + bias != unit.bias:
            raise RuntimeError(f"the adder plan of unit {unit.name} does not cover its weights "
                               f"exactly; this is a bug in thresh2hdl")
