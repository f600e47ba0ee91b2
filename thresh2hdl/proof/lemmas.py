"""The lemmas of a design: one per datapath value, valid bit, register and output, each stated
over the netlist's own wires with its operands as the netlist computes them (see
:mod:`thresh2hdl.proof.prover` for why that proves the whole)."""

from ..names import (GUARD_FLAG, HELD_WRITE_DATA, held_data_name, register_name, valid_name,
                     weight_registers, written_name)
from .clocking import reset_asserted, reset_clears
from .outcome import Undecided
from .query import bool_signal, bv

__all__ = ["lemmas_of", "weight_write_lemmas"]

_HANDSHAKE = ("in_valid", "in_ready", "out_ready", "out_valid")


def lemmas_of(plan, query, model, held=None):
    """The lemmas (label, Bool) of the whole design, per stage; the assumptions they are
    stated under; and the input ranges, assumptions too except for the out-of-range flag's
    lemmas. ``held``: flops that only ever load a constant (name -> constant,
    :func:`.structure.constant_loads`), each stated to hold it while an item is in the
    pipeline."""
    needed = set()
    inputs = query.input_ranges()
    lemmas = _value_lemmas(plan, query, needed)
    outputs = _outputs(plan, query, model, needed)
    handshake = [bool_signal(query.smt, query.ports[port][0], "s0") for port in _HANDSHAKE]
    if plan.latency == 0:
        in_valid, in_ready, out_ready, out_valid = handshake
        lemmas.append(("in_ready", f"(= {in_ready} {out_ready})"))
        lemmas.append(("out_valid", f"(= {out_valid} {in_valid})"))
        for internal, expected in outputs:
            port, signed = query.port(internal)
            lemmas.append((port, f"(= {query.wide(port, 's0', signed)} {expected})"))
        return lemmas + _clamps(query), list(query.assumptions), inputs
    if plan.decision is not None and model.ports.has_score:
        # A split score's port joins the parts registered up to the last stage (no register
        # of its own).
        port, signed = query.port("score")
        lemmas.append((port, f"(= {query.wide(port, 's0', signed)} "
                             f"{query.score(0, plan.latency, needed=needed)})"))
    pipeline = _Pipeline(plan, query, handshake, needed)
    # A value a later stage computes from its registers is read only while that stage holds
    # a valid item (its registers load from it only then): stated then, when the registers
    # are known in range, not for contents only an empty stage holds (a register narrowed
    # to the bits where an argmax class varies reads otherwise there).
    lemmas = [(label, pipeline.while_valid(plan.values[label].stage, body))
              if label in plan.values else (label, body) for label, body in lemmas]
    pipeline.outputs(outputs)
    learning = getattr(plan, "learning", None)
    if learning is not None:
        # (before the registers: the values it reads where a result leaves are carried)
        lemmas += learning.lemmas(query, model, needed)
    pipeline.registers()
    pipeline.held_constants(held or {})
    if plan.loadable and "weight_write" in query.ports and learning is None:
        lemmas += weight_write_lemmas(plan, query, model)
    lemmas += [(f"{name} is {value}", f"(= {query.formula(name, query.width)} "
                                      f"{bv(value, query.width)})")
               for name, value in sorted(query.constant_values.items())]
    lemmas += _clamps(query)
    return lemmas + pipeline.lemmas, pipeline.assumptions + query.assumptions, inputs


def _clamps(query):
    """The lemmas of the clamped wires the formulas read (Query.feature)."""
    return [(wire, lemma) for (wire, _), lemma in sorted(query.clamp_lemmas.items())]


def weight_write_lemmas(plan, query, model, otherwise=None, own=None, held=False):
    """The plain write port: a register takes the data's low bits, from the next clock, when
    the strobe is high at its address; it keeps its value otherwise (``otherwise(name,
    bits)``: what it takes instead, on-chip learning's update); a reset restores the trained
    value. ``own(name)``: the register the port writes for weight or bias ``name`` (on-chip
    learning's copy; default the register itself). ``held``: the port is registered first
    (on-chip learning's form built for speed): each register's "written" flip-flop and the
    held data take the port's strobe at its address and data, and the register takes the
    held data when its flip-flop is set. (The AXI4-Lite slave's writes have no lemma:
    simulation covers them.)"""
    own = own or (lambda name: name)
    smt, w = query.smt, query.width
    strobe = bool_signal(smt, query.ports["weight_write"][0], "s0")
    address = query.wide(query.ports["weight_address"][0], "s0", False)
    data = query.ports["weight_data"][0]
    clears = reset_clears(plan, smt, query.ports)
    lemmas = []
    port_data = smt.bits(data, "s0")
    if held:
        lemmas.append(_held(query, HELD_WRITE_DATA, clears, port_data))
    row = len(model.features) + 1
    for index, (name, trained) in enumerate(weight_registers(model)):
        register = own(name)
        query.weight_register(register)          # undecided when the netlist lacks it
        bits = smt.widths[register]
        written = f"(and {strobe} (= {address} {bv(index, w)}))"
        if held:
            flag = written_name(register)
            lemmas.append(_held(query, flag, clears, f"(ite {written} #b1 #b0)"))
            written = bool_signal(smt, flag, "s0")
            data = HELD_WRITE_DATA
            if index % row == row - 1:          # a bias: its own held data
                data = held_data_name(register)
                lemmas.append(_held(query, data, clears, port_data))
        kept = smt.bits(register, "s0") if otherwise is None else otherwise(name, bits)
        after = smt.bits(register, "s1")
        # The data's low bits as wide as the register it stands for (a learning copy wider
        # than that, for its sum before the clamp, takes them sign-extended).
        declared = smt.widths.get(name, bits)
        data_bits = f"((_ extract {declared - 1} 0) {smt.bits(data, 's0')})"
        if bits > declared:
            data_bits = f"((_ sign_extend {bits - declared}) {data_bits})"
        lemmas.append((register, f"(= {after} (ite {clears} {query.low(bv(trained, w), bits)} "
                             f"(ite {written} {data_bits} {kept})))"))
    return lemmas


def _held(query, name, clears, value):
    """Register ``name`` takes ``value``'s low bits (synthesis may drop the high bits no
    one reads) from the next clock (a reset: 0)."""
    smt = query.smt
    if not smt.has(name):
        raise Undecided(f"the netlist has no register {name!r} of the held write")
    bits = smt.widths[name]
    return (name, f"(= {smt.bits(name, 's1')} (ite {clears} {bv(0, bits)} "
                  f"((_ extract {bits - 1} 0) {value})))")


def _value_lemmas(plan, query, needed):
    """Each wire of a planned value equals its formula over its operands, modulo its width."""
    smt, lemmas = query.smt, []
    for name in plan.values:
        if smt.has(name) and not query.pure:
            bits = smt.widths[name]
            formula = query.formula(name, bits, needed=needed)
            lemmas.append((name, f"(= {smt.bits(name, 's0')} {query.low(formula, bits)})"))
    return lemmas


def _outputs(plan, query, model, needed):
    """(internal port, the value it must carry) for the decision, the flag and the scores."""
    final, w = plan.final_stage, query.width
    if plan.decision is not None:
        # The decision chain's last step and the flag, registered into the outputs; the
        # score port is stated apart (lemmas_of).
        last = plan.latency - 1
        outputs = [("y", query.known(plan.decision, last, w, needed=needed))]
        if plan.guard.flag:
            outputs.append(("out_of_range", query.known(GUARD_FLAG, last, w, needed=needed)))
        return outputs
    if model.is_bank:
        decided = query.known(plan.class_value, final, w, needed=needed) \
            if plan.class_value else bv(0, w)
        # (A bank without score ports carries no score to the last stage: none is asked.)
        scores = [query.score(u, final, needed=needed) for u in range(len(model.units))] \
            if model.ports.has_score else []
    else:
        score = query.score(0, final, needed=needed)
        decided = f"(ite (bvsgt {score} {bv(0, w)}) {bv(1, w)} {bv(0, w)})"
        learning = getattr(plan, "learning", None)
        if learning is not None and learning.lag:
            # The decision is a sum of its own (the bias carried less one), proved by its
            # lemma from the score's operands: the output is that value.
            decided = query.known(learning.units[0][2], final, w, needed=needed)
        scores = [score]
    outputs = [("y", decided)]
    if plan.guard.flag:
        outputs.append(("out_of_range", query.known(GUARD_FLAG, final, w, needed=needed)))
    if model.ports.has_score:
        outputs += [("score" if not model.is_bank else f"score{u}", s)
                    for u, s in enumerate(scores)]
    return outputs


class _Pipeline:
    """The lemmas of a pipelined design: the valid bits move with the handshake and clear on
    reset; each register, when its stage loads a valid item, takes its source's value and,
    when it holds one, keeps it."""

    def __init__(self, plan, query, handshake, needed):
        smt, latency = query.smt, plan.latency
        self.plan, self.query, self.needed = plan, query, needed
        self.assumptions = []
        in_valid, self.in_ready, out_ready, out_valid = handshake
        self.rst = reset_asserted(smt, query.ports, "s0")
        clears = reset_clears(plan, smt, query.ports)
        self.lemmas = [("in_ready", f"(= {self.in_ready} (or {out_ready} (not {out_valid})))")]
        self.valid = [in_valid]
        for k in range(1, latency + 1):
            name = valid_name(k) if k < latency else query.ports["out_valid"][0]
            self.valid.append((name, bool_signal(smt, name, "s0"), bool_signal(smt, name, "s1")))
        for k in range(1, latency + 1):
            name, now, after = self.valid[k]
            before = self.valid[k - 1] if k == 1 else self.valid[k - 1][1]
            self.lemmas.append((name, f"(= {after} (ite {clears} false "
                                      f"(ite {self.in_ready} {before} {now})))"))

    def held_constants(self, held):
        """A flop that only ever loads one constant holds it whenever some stage holds a
        valid item (it loads whenever the pipeline moves, and an item entered with such a
        move): assumed in ``s0``, a lemma in ``s1``. Synthesis merges a register that carries
        a constant into such flops; were one loaded otherwise, its lemma would fail."""
        smt, w = self.query.smt, self.query.width
        if not held:
            return
        any_now = f"(or false {' '.join(now for _, now, _ in self.valid[1:])})"
        any_after = f"(or false {' '.join(after for _, _, after in self.valid[1:])})"
        for name, constant in sorted(held.items()):
            if name not in smt.registers:
                continue
            bits = smt.widths[name]
            value = self.query.low(bv(constant, w), bits)
            self.assumptions.append(f"(=> {any_now} (= {smt.bits(name, 's0')} {value}))")
            self.lemmas.append((f"{name} holds {constant}",
                                f"(=> {any_after} (= {smt.bits(name, 's1')} {value}))"))

    def while_valid(self, stage, body):
        """``body`` stated while stage ``stage`` (1 or later) holds a valid item."""
        if stage < 1 or stage > self.plan.latency:
            return body
        return f"(=> {self.valid_now(stage)} {body})"

    def valid_now(self, stage):
        return self.valid[0] if stage == 0 else self.valid[stage][1]

    def register(self, label, before_stage, loaded, held):
        rst, in_ready = self.rst, self.in_ready
        load = f"(and (not {rst}) {in_ready} {self.valid_now(before_stage)})"
        hold = f"(and (not {rst}) (not {in_ready}) {self.valid_now(before_stage + 1)})"
        self.lemmas.append((label, f"(and (=> {load} {loaded}) (=> {hold} {held}))"))

    def outputs(self, outputs):
        """The output ports are registers of the last stage."""
        query, latency = self.query, self.plan.latency
        for internal, expected in outputs:
            port, signed = query.port(internal)
            after = query.wide(port, "s1", signed)
            self.register(port, latency - 1, f"(= {after} {expected})",
                          f"(= {after} {query.wide(port, 's0', signed)})")

    def registers(self):
        """Every pipeline register a lemma reads, and those its source reads in turn."""
        query, needed, w = self.query, self.needed, self.query.width
        smt, done = query.smt, set()
        while needed - done:
            name, stage = sorted(needed - done)[0]
            done.add((name, stage))
            value = self.plan.values[name]
            reg, shift = register_name(name, stage), value.register_shift
            bits = smt.widths[reg]
            source = query.known(name, stage - 1, bits + shift, needed=needed)
            if shift:
                source = f"(bvlshr {source} {bv(shift, w)})"
            after = smt.bits(reg, "s1")
            self.register(reg, stage - 1, f"(= {after} {query.low(source, bits)})",
                          f"(= {after} {smt.bits(reg, 's0')})")
            if query.holds_exactly(name, reg, shift) or \
                    query.constant_prefix(name, reg) is not None:
                # Only a register holding a valid item is known to be in range (by induction:
                # it was loaded from one); the contents of an empty stage stay unconstrained.
                now = query.known(name, stage, w)
                self.assumptions.append(
                    f"(=> {self.valid_now(stage)} (and (bvsle {bv(value.lo, w)} {now}) "
                    f"(bvsle {now} {bv(value.hi, w)})))")
