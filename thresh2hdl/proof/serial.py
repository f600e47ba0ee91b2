"""The serial architecture's lemmas: one multiply-accumulate shared by every beat, so the
per-value lemmas of :mod:`.lemmas` do not apply; these are stated per beat instead, over the
netlist's registers and ports only, between a state ``s0`` and the next, ``s1``.

- the handshake: ``in_ready`` is ``out_ready or not out_valid or not the last beat``;
  ``out_valid`` is loaded with the last beat's transfer when the result register is free,
  kept otherwise, cleared by the reset; the beat counter counts transfers, wraps after the
  last beat and clears on reset (and never exceeds the last beat);
- beat ``k``'s transfer loads the accumulator with ``start + w_k * x_k`` exactly, in wide
  arithmetic (``start`` the bias at beat 0, else the accumulator; ``x_k`` the sample clamped
  to feature ``k``'s declared range where the guard clamps; ``w_k`` the model's weight, or
  the weight register's value with loadable weights); the accumulator holds otherwise;
- the last beat's transfer loads the score output with that same sum, and the decision with
  ``sum > 0`` (a bank: the class output is the argmax of the held scores, ties to the lower
  index);
- the invariant they rest on: at beat ``k > 0`` the accumulator holds a value inside the exact
  range of ``b + w_0 x_0 + ... + w_{k-1} x_{k-1}``: assumed in ``s0``, a lemma in ``s1``;
- the out-of-range flag: set with the result when any beat of its input was outside its
  range.

By induction over the cycles from a reset, the beats of each input are taken in order, the
accumulator after beat ``k`` holds ``b + w_0 x_0 + ... + w_k x_k``, and the outputs, while
``out_valid`` is high, are the model's on the last input completed.
"""

from types import SimpleNamespace

from ..analysis.intervals import box_product
from ..names import GUARD_FLAG, bias_name, register_name, unit_prefix, weight_name
from .clocking import reset_clears
from .outcome import Undecided
from .query import bool_signal, bv

__all__ = ["serial_lemmas"]


class _Terms:
    """Wide SMT expressions of the netlist's signals."""

    def __init__(self, smt, width, ports):
        self.smt, self.width, self.ports = smt, width, ports

    def signal(self, name, state, signed):
        if not self.smt.has(name):
            raise Undecided(f"the netlist has no signal {name!r}; the serial method reads the "
                            f"names thresh2hdl gives")
        bits = self.smt.widths[name]
        expr = self.smt.bits(name, state)
        if bits == self.width:
            return expr
        op = "sign_extend" if signed else "zero_extend"
        return f"((_ {op} {self.width - bits}) {expr})"

    def port(self, internal, state, signed=None):
        name, port_signed = self.ports[internal]
        return self.signal(name, state, port_signed if signed is None else signed)

    def flag(self, internal, state):
        return bool_signal(self.smt, self.ports[internal][0], state)

    def within(self, expr, lo, hi):
        w = self.width
        return f"(and (bvsle {bv(lo, w)} {expr}) (bvsle {expr} {bv(hi, w)}))"


def _ranges(component, model):
    """Per unit: the exact range of the accumulator before each beat k (k >= 1)."""
    config, out = component.config, []
    ranges = model.feature_ranges
    for u, unit in enumerate(model.units):
        if config.loadable_weights:
            analysis = component.unit_analyses[u]
            terms = [box_product(r, analysis.weight_range) for r in ranges]
            lo, hi = analysis.bias_range
        else:
            terms = [(min(w * a, w * b), max(w * a, w * b))
                     for w, (a, b) in zip(unit.weights, ranges)]
            lo = hi = unit.bias
        before = [None]
        for term in terms[:-1]:
            lo, hi = lo + term[0], hi + term[1]
            before.append((lo, hi))
        out.append(before)
    return out


def serial_lemmas(component, model, smt, ports, width):
    """The lemmas (label, Bool) and the assumptions (Bool) of a serial design's proof; see
    the module's text."""
    t, w = _Terms(smt, width, ports), width
    config, guard = component.config, component.config.guard
    count = component.beats
    clocking = SimpleNamespace(reset=config.reset, clock_enable=config.clock_enable)
    clears = reset_clears(clocking, smt, ports)
    in_valid, in_ready = t.flag("in_valid", "s0"), t.flag("in_ready", "s0")
    out_ready, out_valid = t.flag("out_ready", "s0"), t.flag("out_valid", "s0")
    x = t.port("x", "s0")
    beat = t.signal("beat", "s0", False) if count > 1 else None

    def at(k, state="s0"):
        if count == 1:
            return "true"
        now = beat if state == "s0" else t.signal("beat", state, False)
        return f"(= {now} {bv(k, w)})"

    last = at(count - 1)
    transfer = f"(and {in_valid} {in_ready})"
    finish = f"(and {transfer} {last})"
    flag_only = guard.flag and not guard.clamp and guard.needed
    seen = (t.signal("outside_seen", "s0", False) if flag_only and count > 1 else None)

    def feature(k):
        """The sample as beat k's arithmetic must see it, and whether it counts (in range)."""
        lo, hi = guard.feature_ranges[k]
        if guard.needed and k in guard.tight and guard.clamp:
            return (f"(ite (bvslt {x} {bv(lo, w)}) {bv(lo, w)} (ite (bvsgt {x} {bv(hi, w)}) "
                    f"{bv(hi, w)} {x}))"), "true"
        fits = t.within(x, lo, hi) if guard.needed and k in guard.tight else "true"
        return x, fits

    # Products at the width they need (the sample's bits, one more, and the weight's), then
    # sign-extended: a 64-bit multiplier is far more work for the solver than the
    # netlist's own.
    narrow = smt.widths[ports["x"][0]] + 1 + (config.weight_bits or max(
        abs(v) for u in model.units for v in u.weights).bit_length() + 1)

    def product(weight, sample):
        if narrow >= w:
            return f"(bvmul {weight} {sample})"
        cut = f"(_ extract {narrow - 1} 0)"
        return (f"((_ sign_extend {w - narrow}) (bvmul ({cut} {weight}) "
                f"({cut} {sample})))")

    def clean(state="s0"):
        """No beat of this input so far was outside its range (flag alone, no clamp)."""
        if seen is None:
            return "true"
        now = seen if state == "s0" else t.signal("outside_seen", state, False)
        return f"(= {now} {bv(0, w)})"

    lemmas = [("in_ready", f"(= {in_ready} (or {out_ready} (not {out_valid}) (not {last})))"),
              ("out_valid", f"(= {t.flag('out_valid', 's1')} (ite {clears} false "
                            f"(ite (or {out_ready} (not {out_valid})) {finish} {out_valid})))")]
    assumptions = []
    if count > 1:
        after = t.signal("beat", "s1", False)
        step = f"(ite {last} {bv(0, w)} (bvadd {beat} {bv(1, w)}))"
        lemmas.append(("beat", f"(= {after} (ite {clears} {bv(0, w)} (ite {transfer} {step} "
                               f"{beat})))"))
        lemmas.append(("beat range", f"(bvule {after} {bv(count - 1, w)})"))
        assumptions.append(f"(bvule {beat} {bv(count - 1, w)})")
    scores = []
    for u, (unit, before) in enumerate(zip(model.units, _ranges(component, model))):
        prefix = unit_prefix(u) if model.is_bank else ""
        analysis = component.unit_analyses[u]
        if config.loadable_weights:
            weights = [t.signal(weight_name(prefix, k), "s0", True) for k in range(count)]
            bias = t.signal(bias_name(prefix), "s0", True)
        else:
            weights, bias = [bv(v, w) for v in unit.weights], bv(unit.bias, w)
        acc_signed = analysis.node("accumulator").lo < 0
        acc = t.signal(f"{prefix}accumulator", "s0", acc_signed) if count > 1 else None

        cut = _product_cut(t, component, model, prefix, u, at, feature, weights, lemmas)

        def total(k):
            sample, fits = feature(k)
            start = bias if k == 0 else acc
            term = cut(k) if cut else product(weights[k], sample)
            return f"(bvadd {start} {term})", fits

        if count > 1:
            acc_after = t.signal(f"{prefix}accumulator", "s1", acc_signed)
            for k in range(1, count):
                lo, hi = before[k]
                assumptions.append(f"(=> (and {at(k)} {clean()}) {t.within(acc, lo, hi)})")
                lemmas.append((f"{prefix}accumulator range {k}",
                               f"(=> (and {at(k, 's1')} {clean('s1')}) "
                               f"{t.within(acc_after, lo, hi)})"))
            for k in range(count - 1):
                value, fits = total(k)
                lemmas.append((f"{prefix}accumulator beat {k}",
                               f"(=> (and {transfer} {at(k)} {fits} {clean()}) "
                               f"(= {acc_after} {value}))"))
            lemmas.append((f"{prefix}accumulator held",
                           f"(=> (not (and {transfer} (not {last}))) (= {acc_after} {acc}))"))
        value, fits = total(count - 1)
        counted = f"(and {finish} {fits} {clean()})"
        if analysis.has_score:
            internal = f"score{u}" if model.is_bank else "score"
            now, after = t.port(internal, "s0", True), t.port(internal, "s1", True)
            lemmas.append((ports[internal][0], f"(and (=> {counted} (= {after} {value})) "
                                               f"(=> (not {finish}) (= {after} {now})))"))
            scores.append(now)
        if not model.is_bank:
            now, after = t.flag("y", "s0"), t.flag("y", "s1")
            lemmas.append((ports["y"][0], f"(and (=> {counted} (= {after} (bvsgt {value} "
                                          f"{bv(0, w)}))) (=> (not {finish}) (= {after} {now})))"))
    if model.is_bank:
        lemmas.append((ports["y"][0], f"(= {t.port('y', 's0', False)} {_argmax(scores, w)})"))
    if guard.flag:
        lemmas += _flag_lemmas(t, guard, count, at, clears, transfer, last, finish, x, w)
    return lemmas, assumptions


def _product_cut(t, component, model, prefix, u, at, feature, weights, lemmas):
    """The multiplier proved on its own, so that the beat lemmas read its ``product`` wire
    instead of multiplying again (two multipliers of different widths are hard for a solver
    to equate; an adder is not): at beat ``k`` the ``weight`` wire carries the weight
    register's value (loadable weights) or the ``magnitude`` and ``subtract`` wires carry
    ``|w_k|`` and its sign (constant weights), the sample wire the clamped sample, and
    ``product`` is their product at its width, wide enough for every weight and code (checked
    here). Returns the term of beat ``k`` (a function), or None (multiply in the lemmas) for
    a netlist without those wires."""
    smt, guard, w = t.smt, component.config.guard, t.width
    loadable = component.config.loadable_weights
    factor = f"{prefix}weight" if loadable else f"{prefix}magnitude"
    product, subtract = f"{prefix}product", f"{prefix}subtract"
    clamped = guard.needed and guard.clamp
    sample = "sample_clamped" if clamped else t.ports["x"][0]
    wanted = (factor, product, sample) + (() if loadable else (subtract,))
    if not all(smt.has(name) for name in wanted):
        return None
    bits = smt.widths[product]
    analysis = component.unit_analyses[u]
    product_signed = analysis.node("product").lo < 0
    lowest = -(1 << (bits - 1)) if product_signed else 0
    highest = (1 << (bits - 1)) - 1 if product_signed else (1 << bits) - 1
    ranges = guard.feature_ranges if clamped else model.feature_ranges
    unit = model.units[u]
    for k, (lo, hi) in enumerate(ranges):
        each = analysis.weight_range if loadable else (abs(unit.weights[k]),) * 2
        lo_p, hi_p = box_product((lo, hi), each)
        if not lowest <= lo_p <= hi_p <= highest:
            raise Undecided(f"the wire {product!r} cannot hold every product of beat {k}")
    factor_now = t.signal(factor, "s0", loadable)
    sample_now = t.signal(sample, "s0", t.ports["x"][1])
    for k in range(component.beats):
        wanted_factor = weights[k] if loadable else bv(abs(unit.weights[k]), w)
        lemmas.append((f"{factor} beat {k}", f"(=> {at(k)} (= {factor_now} {wanted_factor}))"))
        if not loadable:
            negative = "true" if unit.weights[k] < 0 else "false"
            lemmas.append((f"{subtract} beat {k}",
                           f"(=> {at(k)} (= {bool_signal(smt, subtract, 's0')} {negative}))"))
        if clamped and u == 0:
            lemmas.append((f"{sample} beat {k}",
                           f"(=> {at(k)} (= {sample_now} {feature(k)[0]}))"))
    low = f"(_ extract {bits - 1} 0)"
    lemmas.append((product, f"(= {smt.bits(product, 's0')} (bvmul ({low} {factor_now}) "
                            f"({low} {sample_now})))"))
    value = t.signal(product, "s0", product_signed)
    if loadable:
        return lambda k: value
    return lambda k: f"(bvneg {value})" if unit.weights[k] < 0 else value


def _argmax(scores, w):
    """The index of the first largest score."""
    best, index = scores[0], bv(0, w)
    for k, score in enumerate(scores[1:], start=1):
        wins = f"(bvsgt {score} {best})"
        best, index = f"(ite {wins} {score} {best})", f"(ite {wins} {bv(k, w)} {index})"
    return index


def _flag_lemmas(t, guard, count, at, clears, transfer, last, finish, x, w):
    """The out-of-range flag: what each beat's code adds to it, carried to the result."""
    outside = []
    for k in range(count):
        lo, hi = guard.feature_ranges[k]
        if k in guard.tight:
            outside.append(f"(and {at(k)} (not {t.within(x, lo, hi)}))")
    # (No range tighter than its port: the flag is 0, its memory of earlier beats dropped.)
    now = f"(or false {' '.join(outside)})" if outside else "false"
    if count > 1 and outside:
        seen = f"(= {t.signal('outside_seen', 's0', False)} {bv(1, w)})"
        now = f"(or {now} (and {seen} (not {at(0)})))"
        seen_after = f"(= {t.signal('outside_seen', 's1', False)} {bv(1, w)})"
        lemmas = [("outside_seen", f"(= {seen_after} (ite {clears} false (ite (and {transfer} "
                                   f"(not {last})) {now} {seen})))")]
    else:
        lemmas = []
    flag, after = t.flag("out_of_range", "s0"), t.flag("out_of_range", "s1")
    lemmas.append((register_name(GUARD_FLAG, 1),
                   f"(= {after} (ite {finish} {now} {flag}))"))
    return lemmas
