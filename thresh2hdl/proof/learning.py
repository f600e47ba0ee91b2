"""On-chip learning in the proof: the vector's values carried beside it, and one update step.

With ``build --on-chip-learning`` the loadable registers change while vectors are in flight,
so the tree must add the bias as the vector entered (``{bias}_entered_r{k}``, as the products
take the weights when it enters). :func:`add_learning` puts into the proof's plan the values
the circuit (:mod:`thresh2hdl.hardware.learning`) carries to where a result leaves: the bias
as entered, the sample's marks (``learn_enable_s``, ``learn_target_s``), each feature's step
``eta x`` (``learn_step{i}``) and each unit's own decision (a bank's ``{score}_positive``).
They are values like any other: their pipeline registers get the usual lemmas, so "the
register at the last stage holds the leaving vector's value" is proved, not assumed.

:class:`Learning` then states the update (``OnChipRule.update`` of
:mod:`thresh2hdl.train.on_chip`): from any register contents of the declared widths, each
weight and bias register's next value is the reset's trained value, else a write's data,
else, when the leaving sample (``out_valid & out_ready``, labelled, not flagged out of range)
finds its unit's decision differing from the target bit, ``register +/- step`` clamped to the
register's signed range, else itself; and the read-back port equals the addressed register
(0 past the last). :class:`LearningQuery` gives the carried values their formulas.
"""

from dataclasses import dataclass

from ..names import (GUARD_FLAG, LEARN_ENABLE, LEARN_READ_HIGH, LEARN_TARGET, READ_GROUP,
                     bias_name, entered_name, learn_move_name, learn_read_group_name,
                     learned_name, learn_step_name, positive_name, register_name,
                     unit_prefix, weight_name, weight_registers)
from ..hardware.learning import move_stage
from .clocking import reset_clears
from .forms import Value
from .lemmas import weight_write_lemmas
from .outcome import Undecided
from .query import Query, bool_signal, bv
from .rows import add_moves, mistake_formula, move_formula

__all__ = ["add_learning", "Learning", "LearningQuery", "READ_LEMMA"]

READ_LEMMA = "learn_read_data"
# The learning's input ports each carried value is read from, by its internal name.
_PORTS = {LEARN_ENABLE: "learn_enable", LEARN_TARGET: "learn_target"}


@dataclass
class Learning:
    """What the update lemmas need of the design: the rule, the latency, and per unit the
    names of its registers, its decision's value, and the port that may hold that decision at
    the last stage (a unit's ``y``, which synthesis merges with the carried decision)."""

    rule: object
    latency: int
    features: int
    flagged: bool              # the out-of-range flag stops a flagged sample's update
    units: tuple               # (weight names, bias name, decision value, its port or None)
    mistakes: tuple = ()       # the dsp_products form: each unit's carried mistake (rows.py)
    lag: int = 0               # the update's copies, followed a cycle later (learning_lag)
    read_latency: int = 0      # cycles from the read-back's address to its data
    write_latency: int = 0     # cycles a write is held before it lands (0 or 1)

    def lemmas(self, query, model, needed):
        """Each register's next value (the write port's lemma with the update in place of
        "keeps its value"), and the read-back port's. With a lag, those are the update's
        copies, and each register the datapath reads takes its copy (a reset, its trained
        value)."""
        update = self._update(query, needed)
        lemmas = weight_write_lemmas(query.plan, query, model, otherwise=update, own=self.own,
                                     held=bool(self.write_latency))
        if self.lag:
            clears = reset_clears(query.plan, query.smt, query.ports)
            limits = self._limits(model)
            for name, trained in weight_registers(model):
                bits = query.smt.widths[name]
                now = _clamp(query.weight_register(self.own(name)), *limits[name], query.width)
                lemmas.append((name, f"(= {query.smt.bits(name, 's1')} (ite {clears} "
                                     f"{query.low(bv(trained, query.width), bits)} "
                                     f"{query.low(now, bits)}))"))
        return lemmas + self._read_back(query, model)

    def own(self, name):
        """The register the update moves and the port writes for ``name``."""
        return learned_name(name) if self.lag else name

    def _leaving(self, query, name, port, needed):
        """Value ``name`` as the last stage holds it (wide): its register there, or the
        output port synthesis merged it into (the same source, loaded on the same
        condition: the port's own lemma states it)."""
        if port is None or register_name(name, self.latency) in query.smt.registers:
            return query.known(name, self.latency, query.width, needed=needed)
        wire, signed = query.port(port)
        return query.wide(wire, "s0", signed)

    def _update(self, query, needed):
        """``otherwise(name, bits)`` for :func:`~.lemmas.weight_write_lemmas`: the register
        after the rule's step, when its unit is taught, else itself."""
        smt, w, rule = query.smt, query.width, self.rule
        one = bv(1, w)
        fire = [bool_signal(smt, query.ports["out_valid"][0], "s0"),
                bool_signal(smt, query.ports["out_ready"][0], "s0")]
        if not self.mistakes:
            fire.append(f"(= {self._leaving(query, LEARN_ENABLE, None, needed)} {one})")
        if self.flagged and not self.mistakes:
            fire.append(f"(not (= {self._leaving(query, GUARD_FLAG, 'out_of_range', needed)} "
                        f"{one}))")
        target = self._leaving(query, LEARN_TARGET, None, needed)
        carried = learn_move_name if self.mistakes else learn_step_name
        steps = [query.known(carried(i), self.latency, w, needed=needed)
                 for i in range(self.features)]
        moves = {}
        for unit, (weights, bias, decision, port) in enumerate(self.units):
            up = f"(= ((_ extract {unit} {unit}) {target}) #b1)"
            if self.mistakes:       # carried from the decision's stage, labelled and all
                mistake = query.known(self.mistakes[unit], self.latency, w, needed=needed)
                taught = f"(and {' '.join(fire)} (= {mistake} {one}))"
            else:
                decided = f"(= {self._leaving(query, decision, port, needed)} {one})"
                taught = f"(and {' '.join(fire)} (not (= {decided} {up})))"
            for name, step in zip(weights, steps):
                moves[name] = (taught, up if not self.mistakes else "true", step,
                               rule.weight_range)
            moves[bias] = (taught, up, bv(rule.bias_step, w), rule.bias_range)

        def otherwise(name, bits):
            taught, up, step, (lo, hi) = moves[name]
            name = self.own(name)
            now = query.weight_register(name)
            if self.lag:
                # The copy holds the sum before its clamp: its value is the sum clamped (the
                # register that follows it takes that), and it takes the next sum unclamped.
                now = _clamp(now, lo, hi, w)
            moved = f"(ite {up} (bvadd {now} {step}) (bvsub {now} {step}))"
            after = moved if self.lag else _clamp(moved, lo, hi, w)
            return f"(ite {taught} {query.low(after, bits)} {smt.bits(name, 's0')})"

        return otherwise

    def _limits(self, model):
        """Each weight and bias register's (lo, hi), by name."""
        limits = {}
        for weights, bias, _, _ in self.units:
            limits.update({name: self.rule.weight_range for name in weights})
            limits[bias] = self.rule.bias_range
        return limits

    def _read_back(self, query, model):
        """``learn_read_data`` is the register at ``learn_read_address`` (sign-extended; the
        one the datapath reads), 0 past the last, within the cycle; with a read latency, step
        by step: each group's
        register takes its register at the address's low bits (0 past the last), the high
        bits are registered, and the port takes the group's register they name (a reset:
        0)."""
        w, smt = query.width, query.smt
        address = query.wide(query.port("learn_read_address")[0], "s0", False)
        names = [name for name, _ in weight_registers(model)]    # the datapath's registers
        port, signed = query.port("learn_read_data")
        if not self.read_latency:
            chosen = _chosen([query.weight_register(n) for n in names], address, w)
            return [(READ_LEMMA, f"(= {query.wide(port, 's0', signed)} {chosen})")]
        clears = reset_clears(query.plan, smt, query.ports)
        low_bits = (READ_GROUP - 1).bit_length()
        low = f"(bvand {address} {bv(READ_GROUP - 1, w)})"
        lemmas, groups = [], []
        for start in range(0, len(names), READ_GROUP):
            group = learn_read_group_name(len(groups))
            if not smt.has(group):
                raise Undecided(f"the netlist has no register {group!r} of the read-back")
            chosen = _chosen([query.weight_register(n) for n in names[start:start + READ_GROUP]],
                             low, w)
            lemmas.append((group, _registered(query, group, clears, chosen)))
            groups.append(query.wide(group, "s0", True))
        if len(groups) == 1:
            chosen = groups[0]
        else:
            lemmas.append((LEARN_READ_HIGH, _registered(
                query, LEARN_READ_HIGH, clears, f"(bvlshr {address} {bv(low_bits, w)})")))
            chosen = _chosen(groups, query.wide(LEARN_READ_HIGH, "s0", False), w)
        lemmas.append((READ_LEMMA, f"(= {query.wide(port, 's1', signed)} "
                                   f"(ite {clears} {bv(0, w)} {chosen}))"))
        return lemmas


def _clamp(value, lo, hi, w):
    """A wide signed ``value`` clamped to [lo, hi]."""
    return (f"(ite (bvsgt {value} {bv(hi, w)}) {bv(hi, w)} "
            f"(ite (bvslt {value} {bv(lo, w)}) {bv(lo, w)} {value}))")


def _chosen(values, index, w):
    """``values[index]`` (wide expressions), 0 past the last."""
    expected = bv(0, w)
    for k in reversed(range(len(values))):
        expected = f"(ite (= {index} {bv(k, w)}) {values[k]} {expected})"
    return expected


def _registered(query, name, clears, value):
    """Register ``name`` takes the low bits of ``value`` from the next clock (a reset: 0)."""
    smt = query.smt
    bits = smt.widths[name]
    return f"(= {smt.bits(name, 's1')} (ite {clears} {bv(0, bits)} {query.low(value, bits)}))"


def add_learning(plan, component):
    """Put the carried values into ``plan`` and attach its :class:`Learning` (``plan.learning``,
    which :func:`~.lemmas.lemmas_of` reads); nothing without on-chip learning."""
    config = component.config
    if not config.on_chip_learning:
        return plan
    rule, model, guard = config.learning_rule, plan.model, config.guard
    lo, hi = rule.bias_range
    units = []
    for index, (score, _, _) in enumerate(plan.unit_scores):
        prefix = unit_prefix(index) if model.is_bank else ""
        bias = bias_name(prefix)
        # The form built for speed carries it less one (the score adds the one back).
        less = -1 if config.learning_lag else 0
        plan.add(Value(entered_name(bias), "entered", (), 0, lo + less, hi + less, True,
                       register=bias, constant=less))
        if model.is_bank:
            decision, port = positive_name(score), None
            stage = plan.values[score].stage
        else:
            decision, port, stage = "decision", "y", plan.final_stage
        plan.add(Value(decision, "positive", (score,), stage, 0, 1, False))
        units.append(([weight_name(prefix, i) for i in range(len(model.features))], bias,
                      decision, port))
    plan.add(Value(LEARN_ENABLE, "port", (), 0, 0, 1, False))
    plan.add(Value(LEARN_TARGET, "port", (), 0, 0, (1 << len(units)) - 1, False))
    shift = rule.shift
    if config.dsp_products is not None:
        mistakes = add_moves(plan, rule, guard, [u[2] for u in units], plan.final_stage,
                             move_stage(config, plan.latency))
        plan.learning = Learning(rule, plan.latency, len(model.features), guard.flag,
                                 tuple(units), tuple(mistakes), config.learning_lag,
                                 config.learning_read_latency, config.learning_write_latency)
        return plan
    for i in range(len(model.features)):
        # The step of every code the arithmetic can see: clamped, or whatever the port
        # carries (a flagged sample's step is carried too, though it teaches nothing).
        code_lo, code_hi = (guard.feature_ranges if guard.clamp else guard.code_ranges)[i]
        lo, hi = ((code_lo << shift, code_hi << shift) if shift >= 0 else
                  (code_lo >> -shift, code_hi >> -shift))
        plan.add(Value(learn_step_name(i), "step", (), 0, lo, hi, lo < 0, feature=i,
                       register_shift=max(shift, 0)))
    plan.learning = Learning(rule, plan.latency, len(model.features), guard.flag, tuple(units))
    return plan


class LearningQuery(Query):
    """A query that knows the carried values' formulas, and adds the bias as entered."""

    def formula(self, name, modulus_bits, state="s0", needed=None):
        value, w = self.plan.values[name], self.width
        if value.kind == "addreg":
            entered = entered_name(value.register)
            expr = (f"(bvadd {self.known(value.operands[0], value.stage, modulus_bits, state, needed)} "
                    f"{self.known(entered, value.stage, modulus_bits, state, needed)})")
            less = self.plan.values[entered].constant
            if less:
                expr = f"(bvsub {expr} {bv(less, w)})"
        elif value.kind == "entered":
            expr = self.weight_register(value.register, state)
            if value.constant:
                expr = f"(bvadd {expr} {bv(value.constant, w)})"
        elif value.kind == "port":
            port, signed = self.port(_PORTS[name])
            expr = self.wide(port, state, signed)
        elif value.kind == "step":
            x, shift = self.feature(value.feature, state), self.plan.learning.rule.shift
            expr = f"(bvshl {x} {bv(shift, w)})" if shift >= 0 else \
                f"(bvashr {x} {bv(-shift, w)})"
        elif value.kind == "move":
            x, shift = self.feature(value.feature, state), self.plan.learning.rule.shift
            step = f"(bvshl {x} {bv(shift, w)})" if shift >= 0 else \
                f"(bvashr {x} {bv(-shift, w)})"
            expr = move_formula(self, value, state, step, needed)
        elif value.kind == "mistake":
            expr = mistake_formula(self, value, state, needed)
        elif value.kind == "positive":
            score = self.known(value.operands[0], value.stage, w, state, needed)
            if self._carried_less_one(value.operands[0]):
                # Its own sum of the score's operands (the bias entered less one), read
                # from them exactly: the score's wire holds its value only in range.
                score = self.formula(value.operands[0], w, state, needed)
            expr = f"(ite (bvsgt {score} {bv(0, w)}) {bv(1, w)} {bv(0, w)})"
        else:
            return super().formula(name, modulus_bits, state, needed)
        return self.define(f"formula {name} {modulus_bits} {state}", self._sort(), expr)

    def _carried_less_one(self, name):
        """Whether score ``name`` adds a bias entered less one (the form built for speed)."""
        value = self.plan.values[name]
        return value.kind == "addreg" and \
            bool(self.plan.values[entered_name(value.register)].constant)
