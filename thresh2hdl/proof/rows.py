"""The ``dsp_products`` form in the proof: products as rows of partial products, and the
learning update built for speed.

A row (:mod:`thresh2hdl.analysis.rows`) is a feature times one bit of its weight register,
shifted by the bit's place: its form's term is ``("wbit", feature, bit)``. The adders over
rows add and subtract those terms as planned; :func:`rows_as_products` folds a product's rows
back into its term ``("w", feature)`` when they are its two's complement (every bit once,
the sign bit subtracted), so :func:`~.forms.check_cover` holds the tree to the model as for
whole products.

With on-chip learning the form carries each feature's step already signed towards the
target (``learn_move{i}``) and each unit's mistake (``learn_mistake{u}``: labelled, not
flagged, its decision not its target bit), made where the decision is: values like any other,
whose registers get the usual lemmas, so the update's lemma may read them at the last stage.
"""

from ..names import (GUARD_FLAG, LEARN_ENABLE, LEARN_TARGET, learn_mistake_name,
                     learn_move_name, learn_step_name, weight_name)
from .values import Value

__all__ = ["row_value", "row_formula", "rows_as_products", "add_moves", "move_formula",
           "mistake_formula"]


def row_value(node, name, prefix, common):
    """The proof's value of a row node: its weight register, bit and shift."""
    bit = node.magnitude.bit_length() - 1
    return Value(name, "row", (), coeffs={("wbit", node.feature, bit): 1},
                 feature=node.feature, magnitude=node.magnitude, register_shift=bit,
                 register=weight_name(prefix, node.feature), **common)


def row_formula(query, value, state):
    """``x * bit_j(w) << j`` of a row, from the feature and its weight register."""
    w = query.width
    bit = value.magnitude.bit_length() - 1
    weight = query.weight_register(value.register, state)
    chosen = f"(= ((_ extract {bit} {bit}) {weight}) #b1)"
    shifted = f"(bvshl {query.feature(value.feature, state)} (_ bv{bit} {w}))"
    return f"(ite {chosen} {shifted} (_ bv0 {w}))"


def rows_as_products(coeffs, weight_bits):
    """``coeffs`` with each product's rows replaced by its term ``("w", feature)`` where they
    add up to the weight (bits below the sign once, the sign bit's row subtracted); rows that
    do not are left as they are, so the cover fails on them."""
    rows = {}
    for key, c in coeffs.items():
        if key[0] == "wbit":
            rows.setdefault(key[1], {})[key[2]] = c
    folded = {key: c for key, c in coeffs.items() if key[0] != "wbit"}
    wanted = {bit: 1 for bit in range(weight_bits - 1)} | {weight_bits - 1: -1}
    for feature, bits in rows.items():
        if bits == wanted:
            folded[("w", feature)] = folded.get(("w", feature), 0) + 1
        else:
            folded.update({("wbit", feature, bit): c for bit, c in bits.items()})
    return folded


def add_moves(plan, rule, guard, decisions, made, signed_at=0):
    """Put the form's carried moves (signed at stage ``signed_at``: at entry from the port,
    or a stage later from the step's and the target's registers, the step then a value of
    its own) and each unit's mistake (read at stage ``made``, the decision's) into ``plan``;
    returns the mistakes' names, one per unit."""
    shift = rule.shift
    for i in range(len(plan.model.features)):
        code_lo, code_hi = (guard.feature_ranges if guard.clamp else guard.code_ranges)[i]
        lo, hi = ((code_lo << shift, code_hi << shift) if shift >= 0 else
                  (code_lo >> -shift, code_hi >> -shift))
        operands = ()
        if signed_at:
            plan.add(Value(learn_step_name(i), "step", (), 0, lo, hi, lo < 0, feature=i,
                           register_shift=max(shift, 0)))
            operands = (learn_step_name(i), LEARN_TARGET)
        lo, hi = min(lo, -hi), max(hi, -lo)     # either sign: the target is its own input
        plan.add(Value(learn_move_name(i), "move", operands, signed_at, lo, hi, True,
                       feature=i, register_shift=max(shift, 0)))
    names = []
    for unit, decision in enumerate(decisions):
        operands = (decision, LEARN_ENABLE, LEARN_TARGET) + \
            ((GUARD_FLAG,) if guard.flag else ())
        names.append(learn_mistake_name(unit))
        plan.add(Value(names[-1], "mistake", operands, made, 0, 1, False, first=unit))
    return names


def move_formula(query, value, state, step, needed=None):
    """The step ``step`` (an expression) signed towards the target's bit 0: the port's, or
    (a move made a stage after entry) its operands' as that stage sees them."""
    if value.operands:
        step = query.known(value.operands[0], value.stage, query.width, state, needed)
        target = query.known(value.operands[1], value.stage, query.width, state, needed)
    else:
        wire, signed = query.port("learn_target")
        target = query.wide(wire, state, signed)
    return f"(ite (= ((_ extract 0 0) {target}) #b1) {step} (bvneg {step}))"


def mistake_formula(query, value, state, needed):
    """1 when the sample is labelled (and not flagged) and the unit's decision is not its
    target bit, from the values as the mistake's stage sees them."""
    w = query.width
    known = [query.known(name, value.stage, w, state, needed) for name in value.operands]
    one = f"(_ bv1 {w})"
    unit = value.first
    taught = [f"(= {known[1]} {one})",
              f"(not (= (= {known[0]} {one}) (= ((_ extract {unit} {unit}) {known[2]}) #b1)))"]
    if len(known) > 3:
        taught.append(f"(not (= {known[3]} {one}))")
    return f"(ite (and {' '.join(taught)}) {one} (_ bv0 {w}))"
