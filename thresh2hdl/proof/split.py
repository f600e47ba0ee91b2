"""A split adder's pieces in the proof's plan (:class:`~.forms.Plan`), as
:func:`~thresh2hdl.hardware.trees.build_split_tree` makes them, and what reads them: a unit's
decision chain over its result's parts, or a bank unit's score joined whole for the argmax
(``{score}_whole``, where the widest score's last part has arrived)."""

from ..names import unit_prefix
from .values import Value

__all__ = ["plan_split", "range_test", "decided_step", "fixed_part"]


def plan_split(plan, component):
    """Every split adder's pieces; for a unit, its decision chain; for a bank, each unit's
    score whole (its registers carry it from there), read by the argmax ``wait`` stages
    behind the levels it is planned at (as :mod:`thresh2hdl.hardware.bank` builds it)."""
    if not plan.model.is_bank:
        _split_unit(plan, component.analysis, "")
        decision_chain(plan, component.analysis)
        return 0
    wait = (component.result_parts - 1) * plan.skew
    at = plan.stage_of(component.bank.score_level) + wait
    for index, analysis in enumerate(component.unit_analyses):
        prefix = unit_prefix(index)
        _split_unit(plan, analysis, prefix)
        name, sign, bias = plan.unit_scores[index]
        value = plan.values.get(name)
        if value is None or value.parts == 1:
            continue
        plan.add(Value(f"{name}_whole", "whole", (name,), at, value.lo, value.hi, value.signed,
                       dict(value.coeffs), value.constant))
        plan.unit_scores[index] = (f"{name}_whole", sign, bias)
    return wait


def _split_unit(plan, analysis, prefix):
    """A split adder's pieces, as :func:`~thresh2hdl.hardware.trees.build_split_tree`
    makes them: part ``j`` at ``j * skew`` stages after the node's, a low part's sum
    (``{N}_p{j}_sum``: A + B + the carry in, exact) giving the part (its low bits) and the
    carry (its top bit), the top part (A + B + the carry in), a subtrahend's parts
    complemented where they are made. ``prefix``: a bank unit's (names as built)."""
    b, skew, nodes = plan.split_bits, plan.skew, analysis.nodes
    for node in nodes:
        own = prefix + node.name
        count = plan.split.get(own, 1)
        if count == 1:
            continue
        plan.values[own].parts = count
        constant, kind = None, node.kind
        if kind in ("offset", "bias"):
            constant = node.constant
            kind = "rsub" if node.kind == "bias" and nodes[node.children[0]].sign < 0 \
                else "add"
        subtrahend = {"add": None, "sub": 1, "rsub": 0}[kind]
        first = plan.stage_of(node.level)
        for j in range(count):
            at, top = first + j * skew, j == count - 1
            operands = []
            for position, child in enumerate(node.children):
                name = prefix + nodes[child].name
                if position == subtrahend:
                    name = _complement(plan, name, j, top)
                    operands.append(("value", name))
                else:
                    operands.append(("slice", name))
            if constant is not None:
                shifted = constant >> (j * b)
                operands.append(("const", shifted if top else shifted % (1 << b)))
            carry = ("const", int(kind != "add")) if j == 0 else \
                ("value", f"{own}_c{j - 1}")
            piece = {"node": own, "j": j, "top": top, "operands": operands,
                     "carry": carry}
            if top:
                whole = plan.values[own]      # its range from its form
                lo, hi = whole.lo >> (j * b), whole.hi >> (j * b)
                plan.add(Value(f"{own}_p{j}", "ptop", (), at, lo, hi, lo < 0,
                               piece=piece))
                continue
            total = f"{own}_p{j}_sum"
            plan.add(Value(total, "psum", (), at, 0, (1 << (b + 1)) - 1, False,
                           piece=piece))
            fixed = fixed_part(plan.values[own], j, b)
            lo, hi = (0, (1 << b) - 1) if fixed is None else (fixed, fixed)
            plan.add(Value(f"{own}_p{j}", "plow", (total,), at, lo, hi, False))
            plan.add(Value(f"{own}_c{j}", "pcarry", (total,), at, 0, 1, False))


def decision_chain(plan, analysis):
    """The decision over the result's parts from the lowest up: with a score, ``score >
    0`` (a part nonzero or one below; the top part not negative); without one, the tree's
    root against the threshold that ``score > 0`` means (the plan's own bias and sign,
    not the circuit's constant), a part beyond its digit of the threshold or equal to it
    with the parts below beyond: digits compared from the top."""
    b, skew, nodes = plan.split_bits, plan.skew, analysis.nodes
    with_score = analysis.has_score or analysis.loadable
    result = nodes[analysis.score_node if with_score else analysis.tree_root]
    threshold, greater = None, True
    if not with_score:
        _, sign, extra = plan.unit_scores[0]
        threshold, greater = (-extra, True) if sign > 0 else (extra, False)
    count, below = plan.split.get(result.name, 1), None
    for j in range(count):
        at, top = plan.final_stage + j * skew, j == count - 1
        name = "decision" if count == 1 else f"decision_p{j}"
        part = result.name if count == 1 else f"{result.name}_p{j}"
        piece = {"part": part, "below": below,
                 "sign": top and plan.values[result.name].lo < 0}
        lo, hi = 0, 1
        if threshold is not None:
            limit = threshold >> (j * b)
            piece.update(limit=limit if top else limit % (1 << b), greater=greater)
            decided = decided_step(plan.values[part], piece)
            if decided is not None:     # a constant, whose flops synthesis drops
                lo = hi = decided
        plan.add(Value(name, "dstep", (), at, lo, hi, False, piece=piece))
        below = name
    plan.decision = below

def _complement(plan, name, j, top):
    """The complement of part ``j`` of value ``name``, a value of its own made where
    that part is made (``{name}_p{j}_not``, or ``_t{j}_not`` for a top part)."""
    own = f"{name}_{'t' if top else 'p'}{j}_not"
    if own not in plan.values:
        source = plan.values[name]
        made = source.stage if source.parts == 1 else \
            plan.values[f"{name}_p{min(j, source.parts - 1)}"].stage
        b = plan.split_bits
        fixed = None if top else fixed_part(source, j, b)
        if top:
            lo, hi = -(source.hi >> (j * b)) - 1, -(source.lo >> (j * b)) - 1
        elif fixed is not None:
            lo = hi = (1 << b) - 1 - fixed
        elif source.lo >= 0 and source.hi >> (j * b) < 1 << b:
            # The part of a small non-negative value: its complement's high bits are 1s.
            lo, hi = (1 << b) - 1 - (source.hi >> (j * b)), (1 << b) - 1
        else:
            lo, hi = 0, (1 << b) - 1
        plan.add(Value(own, "pnot", (name,), made, lo, hi, lo < 0,
                       piece={"node": name, "j": j, "top": top}))
    return own


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


def fixed_part(value, j, b):
    """Part ``j`` (``b`` bits from ``j * b``) of a linear value when it is the same whatever
    the inputs (every coefficient's low bits are zeros there, as in a shift-add sum of
    shifted inputs: the part is the constant's), else None."""
    if value.coeffs is None:
        return None
    numbers = [c for c in value.coeffs.values() if c]
    zeros = min(((n & -n).bit_length() - 1 for n in numbers), default=1 << 30)
    return (value.constant >> (j * b)) % (1 << b) if (j + 1) * b <= zeros else None
