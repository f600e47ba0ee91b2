"""The plan of the proof: every datapath value the design computes, its pipeline stage, its
exact range and the linear form (weights and constant over the features) it must hold.

The plan is built from the model and the component's adder plan, not read from the netlist;
:func:`check_cover` ties it to the model: the forms of the scores must be the model's weights
and bias, term for term.
"""

from ..names import (SCORE_CONST, argmax_compare_name, argmax_names, bias_name,
                     flag_part_name, unit_prefix, weight_name)
from .rows import row_value, rows_as_products
from .split import plan_split
from .values import Value, form_range

__all__ = ["Value", "Plan", "check_cover"]


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
        # Split scores arrive part by part: a bank's argmax compares them whole, this many
        # stages behind the levels it is planned at.
        self.wait = plan_split(self, component) if self.split else 0
        self.final_stage += self.wait
        if model.is_bank:
            self.class_value = self._argmax(component.bank)
        check_cover(self, model)

    def add(self, value):
        self.values[value.name] = value
        return value

    def linear(self, name, kind, operands, stage, coeffs, constant=0, **extra):
        coeffs = {f: c for f, c in coeffs.items() if c}
        lo, hi = form_range(coeffs, constant, self.ranges)
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
            if node.kind == "row":
                self.add(row_value(node, name, prefix, common))
                continue
            children = [self.values[names[c]] for c in node.children]
            if node.kind == "bias":
                self.add(Value(name, "addreg", (children[0].name,),
                               coeffs={**children[0].coeffs, ("b",): 1},
                               register=bias_name(prefix), **common))
                continue
            if node.kind not in ("add", "sub", "rsub"):
                raise RuntimeError(f"a loadable unit has no {node.kind} node")
            left, right = children
            fa, fb = {"add": (1, 1), "sub": (1, -1), "rsub": (-1, 1)}[node.kind]
            coeffs = {key: fa * c for key, c in left.coeffs.items()}
            for key, c in right.coeffs.items():
                coeffs[key] = coeffs.get(key, 0) + fb * c
            self.add(Value(name, node.kind, (left.name, right.name), coeffs=coeffs, **common))
        self.weight_bits = (analysis.weight_range[1] - analysis.weight_range[0]).bit_length()
        self.loadable = True
        self.unit_scores.append((names[analysis.score_node], 1, 0))

    def _argmax(self, plan):
        """The argmax as the circuit plans it: a tournament, left (lower index) wins ties."""
        layer = []
        for index, (name, sign, bias) in enumerate(self.unit_scores):
            if name is None or sign != 1 or bias != 0:
                raise RuntimeError("a bank's unit scores must be values of the plan")
            layer.append((name, None, index, index))

        def merge(level, tag, left, right):
            (a, ia, first, _), (b, ib, _, last) = left, right
            stage = self.stage_of(level + 1) + self.wait
            lo = min(self.values[a].lo, self.values[b].lo)
            hi = max(self.values[a].hi, self.values[b].hi)
            score, chosen = argmax_names(tag)
            compared = argmax_compare_name(tag)
            self.closed.update((score, chosen, compared))
            self.add(Value(compared, "compare", (a, b), self.stage_of(level) + self.wait, 0, 1,
                           False))
            self.add(Value(score, "max", (compared, a, b), stage, lo, hi, True, first=first,
                           last=last))
            self.add(Value(chosen, "pick", (compared, a, b, ia, ib), stage, first, last, False,
                           first=first, last=last))
            return score, chosen, first, last

        return plan.tournament(layer, merge)[1]      # None for a bank of one unit: class 0


def check_cover(plan, model):
    """The plan's score forms must be the model's weights and bias, term for term (with
    loadable weights: each feature's product with its register and the bias register, once
    each)."""
    units = model.units
    if plan.loadable:
        wanted = {("w", i): 1 for i in range(len(model.features))} | {("b",): 1}
        for name, _, _ in plan.unit_scores:
            value = plan.values[name]
            if rows_as_products(value.coeffs, plan.weight_bits) != wanted or value.constant:
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
