"""Formal proof that a Verilog file computes the integer model for every input in range.

A plain miter (the file against ``w . x + b``) does not scale past a few inputs with any open
solver. What scales is one small lemma per value of the datapath, all checked in one query in
wide (at least 64-bit) arithmetic where nothing can overflow:

- each product wire equals ``x_i * |w_i|`` (or the shifted input of a signed digit);
- each adder wire equals its two operands added or subtracted exactly, the bias node its
  operand plus the bias; each argmax step picks the larger score, the lower index on ties;
- each pipeline register, when its stage loads a valid item, takes its source's value and,
  when it holds one, keeps it; the valid bits move with the handshake and clear on reset;
- each output equals the value it is planned to carry.

Every lemma is stated over the netlist's own wires with its operands as the netlist computes
them, so by induction from the inputs every wire equals its linear form, and the score output
equals the linear form of the root. A Python check then ties that form to the model: the
weights and bias composed along the plan must be exactly the model's (:func:`_check_cover`).
The assumptions are the declared input ranges (none where the input guard clamps: then every
code the ports can carry is covered, the features taken clamped) and, for register contents,
the exact range of the value a register carries; the latter is recomputed here from the model,
not read from the range analysis. Inputs are constrained to their ranges, never truncated. The
out-of-range flag's lemmas are checked without the input ranges in any case.

A lemma that fails is not yet a counterexample: a second query searches for an input whose
outputs, after the pipeline latency with the sink ready, differ from the model's, and the
caller re-runs that input in a simulator before calling it one.

Tools: Yosys (``write_smt2``) and Boolector, the system's or the WebAssembly builds from PyPI
(``pip install 'thresh2hdl[prove]'``). The WebAssembly tools see only the working folder, so
every file is passed by a relative name.
"""

import json
import os
import re
import subprocess
import tempfile
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

from ..errors import InputError, ToolError
from ..names import (GUARD_FLAG, SCORE_CONST, argmax_names, register_name, unit_prefix,
                     valid_name)
from ..analysis import signed_bits
from ..tools import find_tool, warm_up

__all__ = ["ProofOutcome", "prove_netlist", "proof_tools", "DEFAULT_TIMEOUT_S"]

DEFAULT_TIMEOUT_S = 300
MIN_WIDTH = 64
BATCH_LEMMAS = 48


@dataclass(frozen=True)
class ProofOutcome:
    """What the solver answered.

    ``status`` is ``"proved"``, ``"failed"`` (a lemma fails; ``candidate`` is an input vector
    whose outputs the solver says differ from the model's, to be confirmed in a simulator, or
    None when none was found) or ``"undecided"`` (timeout, or a netlist the method cannot
    read; ``detail`` says which).

    ``seconds`` is the proof's time; ``warmup_seconds`` the tools' first calls before it (a
    WebAssembly build compiles on its first call on a machine: ``compiled`` names those that
    did).
    """

    status: str
    detail: str
    lemmas: int
    failing: tuple
    candidate: tuple | None
    solver: str
    yosys: str
    seconds: float
    width_bits: int
    warmup_seconds: float = 0.0
    compiled: tuple = ()


class _Undecided(Exception):
    pass


@dataclass
class _Value:
    name: str
    kind: str          # input, product, add, sub, rsub, bias, const, max, pick, decision
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


def _form_range(coeffs, constant, ranges):
    lo = hi = constant
    for feature, c in coeffs.items():
        a, b = c * ranges[feature][0], c * ranges[feature][1]
        lo, hi = lo + min(a, b), hi + max(a, b)
    return lo, hi


class _Plan:
    """The values of the design, their stages and linear forms, built from the model."""

    def __init__(self, component, model):
        self.model = model
        self.latency = component.latency
        boundaries = component.register_boundaries
        self.stage_of = lambda level: sum(1 for b in boundaries if b < level)
        self.ranges = model.feature_ranges
        self.values = {}
        self.unit_scores = []     # per unit: (value name or None, sign, bias) of its score
        self.closed = set()       # values that may be cut points
        units = component.unit_analyses
        for index, analysis in enumerate(units):
            prefix = unit_prefix(index) if model.is_bank else ""
            self._unit(analysis, prefix, model.units[index] if model.is_bank else model.unit)
        self.guard = component.config.guard
        if self.guard.flag:
            # The out-of-range flag: made at the inputs (stage 0), carried with the result.
            self.add(_Value(GUARD_FLAG, "flag", (), 0, 0, 1, False))
        self.final_stage = self.stage_of(component.final_level)
        if model.is_bank:
            self.class_value = self._argmax(component.bank)
        _check_cover(self, model)

    def add(self, value):
        self.values[value.name] = value
        return value

    def linear(self, name, kind, operands, stage, coeffs, constant=0, **extra):
        coeffs = {f: c for f, c in coeffs.items() if c}
        lo, hi = _form_range(coeffs, constant, self.ranges)
        return self.add(_Value(name, kind, tuple(operands), stage, lo, hi, lo < 0, coeffs,
                               constant, **extra))

    def _unit(self, analysis, prefix, unit):
        """The unit's values; a value can be a cut point when its subtree holds every leaf of
        its features (with shift-add digits a feature has several leaves; a cut between two
        of them would free values that are tied, and fail a true lemma)."""
        nodes = analysis.nodes
        leaves, total = {}, {}
        for node in nodes:
            if node.kind == "product":
                leaves[node.index] = {node.feature: 1}
                total[node.feature] = total.get(node.feature, 0) + 1
            else:
                merged = {}
                for c in node.children:
                    for f, k in leaves[c].items():
                        merged[f] = merged.get(f, 0) + k
                leaves[node.index] = merged
        for node in nodes:
            if all(total[f] == k for f, k in leaves[node.index].items()):
                self.closed.add(prefix + node.name)
        for node in nodes:
            name = prefix + node.name
            stage = self.stage_of(node.level)
            if node.kind == "product":
                self.linear(name, "product", (), stage, {node.feature: node.magnitude},
                            feature=node.feature, magnitude=node.magnitude,
                            register_shift=node.register_shift)
                continue
            children = [self.values[prefix + nodes[c].name] for c in node.children]
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
            self.unit_scores.append((prefix + nodes[analysis.score_node].name, 1, 0))
        else:
            root = nodes[analysis.tree_root]
            self.unit_scores.append((prefix + root.name, root.sign,
                                     0 if analysis.bias_folded else analysis.bias))

    def _argmax(self, plan):
        """The argmax as the circuit plans it: a tournament, left (lower index) wins ties."""
        layer = []
        for index, (name, sign, bias) in enumerate(self.unit_scores):
            if name is None or sign != 1 or bias != 0:
                raise RuntimeError("a bank's unit scores must be values of the plan")
            layer.append((name, None, index, index))

        def merge(level, tag, left, right):
            (a, ia, first, _), (b, ib, _, last) = left, right
            stage = self.stage_of(level)
            lo = min(self.values[a].lo, self.values[b].lo)
            hi = max(self.values[a].hi, self.values[b].hi)
            score, chosen = argmax_names(tag)
            self.closed.update((score, chosen))
            self.add(_Value(score, "max", (a, b), stage, lo, hi, True, first=first, last=last))
            self.add(_Value(chosen, "pick", (a, b, ia, ib), stage, first, last,
                            False, first=first, last=last))
            return score, chosen, first, last

        return plan.tournament(layer, merge)[1]      # None for a bank of one unit: class 0


def _check_cover(plan, model):
    """The plan's score forms must be the model's weights and bias, term for term."""
    units = model.units
    for (name, sign, bias), unit in zip(plan.unit_scores, units):
        coeffs, constant = ({}, 0) if name is None else (plan.values[name].coeffs,
                                                         plan.values[name].constant)
        got = [sign * coeffs.get(i, 0) for i in range(len(model.features))]
        if got != list(unit.weights) or sign * constant + bias != unit.bias:
            raise RuntimeError(f"the adder plan of unit {unit.name} does not cover its weights "
                               f"exactly; this is a bug in thresh2hdl")


_WIRE_LINE = re.compile(r"^; yosys-smt2-(wire|input|output|register) (\S+) (\d+)$", re.M)
_ALIAS = re.compile(r"^\(define-fun \|[^|]+_n (?P<name>[^|]+)\| \(\(state \|[^|]+\|\)\) "
                    r"\(_ BitVec (?P<bits>\d+)\) \(\|(?P<id>[^|]+#\d+)\| state\)\)$")
_REFERENCE = re.compile(r"\(\|([^|]+#\d+)\| state\)")


class _Netlist:
    """The names and widths ``write_smt2 -wires`` exposes, and their SMT functions."""

    def __init__(self, text, module, ignored=frozenset()):
        self.text = text
        self.module = module
        self.widths = {}
        self.registers = set()
        self.cut_ids = {}
        for kind, name, width in _WIRE_LINE.findall(text):
            if name in ignored and kind == "wire":
                continue        # computed from its operands instead (see _Query.known)
            self.widths[name] = int(width)
            if kind == "register":
                self.registers.add(name)

    def has(self, name):
        return name in self.widths

    def cut(self, names):
        """Cut points: every reader of these wires reads a free value instead (``|id cut|``),
        while the wire itself keeps its driver, so its own lemma still sees the logic."""
        lines = self.text.split("\n")
        ids, keep = {}, set()
        for number, line in enumerate(lines):
            found = _ALIAS.match(line)
            if found and found["name"] in names and found["name"] not in self.registers:
                ids[found["id"]] = int(found["bits"])
                self.cut_ids[found["name"]] = found["id"]
                keep.add(number)

        def swap(match):
            return f"(|{match[1]} cut| state)" if match[1] in ids else match[0]

        for number, line in enumerate(lines):
            if number not in keep and "#" in line:
                lines[number] = _REFERENCE.sub(swap, line)
        sort = next(i for i, line in enumerate(lines) if line.startswith("(define-sort"))
        lines[sort + 1: sort + 1] = [f"(declare-fun |{i} cut| (|{self.module}_s|) "
                                     f"(_ BitVec {bits}))" for i, bits in sorted(ids.items())]
        self.text = "\n".join(lines)

    def cut_value(self, name, state):
        return f"(|{self.cut_ids[name]} cut| {state})"

    def raw(self, name, state):
        return f"(|{self.module}_n {name}| {state})"

    def bits(self, name, state):
        """The wire as a bit vector (``write_smt2`` gives 1-bit wires as Bool)."""
        if self.widths[name] == 1:
            return f"(ite {self.raw(name, state)} #b1 #b0)"
        return self.raw(name, state)


def _bv(value, width):
    if value < 0:
        value += 1 << width
    return f"(_ bv{value} {width})"


class _Query:
    """One SMT-LIB query over the netlist's functions, in ``width``-bit arithmetic."""

    def __init__(self, plan, netlist, width, ports, *, pure=False):
        self.plan = plan
        self.net = netlist
        self.width = width
        self.ports = ports      # internal port name -> (Verilog name, signed)
        self.pure = pure        # every value from the inputs in state s0, wires ignored
        self.lines = []
        self.defined = {}
        self.assumptions = []

    def extend(self, expr, bits, signed):
        if bits == self.width:
            return expr
        op = "sign_extend" if signed else "zero_extend"
        return f"((_ {op} {self.width - bits}) {expr})"

    def wide(self, wire, state, signed):
        return self.extend(self.net.bits(wire, state), self.net.widths[wire], signed)

    def define(self, key, sort, expr):
        if key not in self.defined:
            name = f"|t2h {key}|"
            self.lines.append(f"(define-fun {name} () {sort} {expr})")
            self.defined[key] = name
        return self.defined[key]

    def port(self, internal):
        name, signed = self.ports[internal]
        if not self.net.has(name):
            raise _Undecided(f"the netlist has no port {name!r}")
        return name, signed

    def code(self, index, state="s0"):
        """The code on feature ``index``'s port."""
        name, signed = self.port(f"x{index}")
        return self.define(f"x{index} {state}", self._sort(),
                           self.wide(name, state, signed))

    def feature(self, index, state="s0"):
        """The feature as the arithmetic must see it: the code, clamped to its declared
        range where the input guard clamps."""
        code = self.code(index, state)
        guard = self.plan.guard
        if not guard.clamp or index not in guard.tight:
            return code
        (lo, hi), w = guard.feature_ranges[index], self.width
        return self.define(f"clamped x{index} {state}", self._sort(),
                           f"(ite (bvslt {code} {_bv(lo, w)}) {_bv(lo, w)} "
                           f"(ite (bvsgt {code} {_bv(hi, w)}) {_bv(hi, w)} {code}))")

    def outside(self, state="s0"):
        """Bool: some feature's code lies outside its declared range."""
        guard, w, tests = self.plan.guard, self.width, []
        for index in guard.tight:
            (lo, hi), (code_lo, code_hi) = guard.feature_ranges[index], guard.code_ranges[index]
            x = self.code(index, state)
            if lo > code_lo:
                tests.append(f"(bvslt {x} {_bv(lo, w)})")
            if hi < code_hi:
                tests.append(f"(bvsgt {x} {_bv(hi, w)})")
        return f"(or false {' '.join(tests)})" if tests else "false"

    def input_ranges(self, state="s0"):
        """Assumptions on the inputs: inside the declared ranges, unless the guard clamps
        (then every code the ports can carry is covered)."""
        if self.plan.guard.clamp:
            return []
        w, out = self.width, []
        for index, (lo, hi) in enumerate(self.plan.ranges):
            x = self.code(index, state)
            out += [f"(bvsle {_bv(lo, w)} {x})", f"(bvsle {x} {_bv(hi, w)})"]
        return out

    def _sort(self):
        return f"(_ BitVec {self.width})"

    def holds_exactly(self, name, wire, shift=0):
        """Whether ``wire`` is wide enough to hold every value ``name >> shift`` can take."""
        value, bits = self.plan.values[name], self.net.widths[wire]
        lo, hi = value.lo >> shift, value.hi >> shift
        if value.signed:
            return bits >= signed_bits(lo, hi)
        return bits >= max(1, hi.bit_length())

    def known(self, name, stage, modulus_bits, state="s0", needed=None):
        """An expression equal to ``name``'s true value modulo ``2**modulus_bits``, as seen by
        ``stage`` (``modulus_bits == width``: the true value itself).

        Synthesis may narrow a wire whose high bits no later step reads (Yosys computes
        ``a + b`` at the width of its consumer); such a wire still holds its value modulo
        its width, which is all that a narrower consumer needs.
        """
        value = self.plan.values[name]
        if self.pure:
            return self.formula(name, self.width, "s0")
        if stage == value.stage:
            if self.net.has(name) and (self.holds_exactly(name, name)
                                       or self.net.widths[name] >= modulus_bits):
                if name in self.net.cut_ids:
                    return self.cut(name, state)
                return self.define(f"{name} {state}", self._sort(),
                                   self.wide(name, state, value.signed))
            return self.formula(name, modulus_bits, state, needed)
        register = register_name(name, stage)
        if register not in self.net.registers:
            raise _Undecided(f"the netlist has no register {register!r}; the per-stage method "
                             f"needs the pipeline registers under the names thresh2hdl gives")
        shift = value.register_shift
        if not (self.holds_exactly(name, register, shift)
                or self.net.widths[register] + shift >= modulus_bits):
            raise _Undecided(f"register {register!r} is narrower than its consumer")
        if needed is not None:
            needed.add((name, stage))
        expr = self.wide(register, state, value.signed)
        if shift:
            expr = f"(bvshl {expr} {_bv(shift, self.width)})"
        return self.define(f"{register} {state}", self._sort(), expr)

    def cut(self, name, state):
        """A cut wire's free value, assumed inside its exact range when it can hold it."""
        key = f"cut {name} {state}"
        if key not in self.defined:
            value, bits = self.plan.values[name], self.net.widths[name]
            free = self.net.cut_value(name, state)
            expr = self.define(key, self._sort(), self.extend(free, bits, value.signed))
            if self.holds_exactly(name, name):
                self.assumptions += [f"(bvsle {_bv(value.lo, self.width)} {expr})",
                                     f"(bvsle {expr} {_bv(value.hi, self.width)})"]
            return expr
        return self.defined[key]

    def formula(self, name, modulus_bits, state="s0", needed=None):
        """``name`` computed from its operands (each known modulo ``2**modulus_bits``; the
        argmax compares, so its operands are known exactly)."""
        value = self.plan.values[name]
        stage, w = value.stage, self.width
        exact = value.kind in ("max", "pick")
        bits = w if exact else modulus_bits

        def operand(other):
            return self.known(other, stage, bits, state, needed)

        if value.kind == "product":
            expr = f"(bvmul {self.feature(value.feature, state)} {_bv(value.magnitude, w)})"
        elif value.kind == "const":
            expr = _bv(value.constant, w)
        elif value.kind == "flag":
            expr = f"(ite {self.outside(state)} {_bv(1, w)} {_bv(0, w)})"
        elif value.kind in ("add", "sub", "rsub"):
            a, b = (operand(o) for o in value.operands)
            expr = {"add": f"(bvadd {a} {b})", "sub": f"(bvsub {a} {b})",
                    "rsub": f"(bvsub {b} {a})"}[value.kind]
        elif value.kind in ("bias", "rbias"):
            a = operand(value.operands[0])
            child = self.plan.values[value.operands[0]]
            bias = value.constant - (child.constant if value.kind == "bias" else -child.constant)
            expr = f"(bvadd {a} {_bv(bias, w)})" if value.kind == "bias" \
                else f"(bvsub {_bv(bias, w)} {a})"
        elif value.kind == "max":
            a, b = (operand(o) for o in value.operands)
            expr = f"(ite (bvsge {a} {b}) {a} {b})"
        elif value.kind == "pick":
            a, b, ia, ib = value.operands
            left = operand(ia) if ia is not None else _bv(value.first, w)
            right = operand(ib) if ib is not None else _bv(value.last, w)
            expr = f"(ite (bvsge {operand(a)} {operand(b)}) {left} {right})"
        else:
            raise RuntimeError(f"value kind {value.kind} has no formula")
        return self.define(f"formula {name} {bits} {state}", self._sort(), expr)

    def low(self, expr, bits):
        """The low ``bits`` of a wide expression, shaped like a ``bits``-wide wire."""
        return f"((_ extract {bits - 1} 0) {expr})"

    def score(self, unit, stage, state="s0", needed=None):
        """Unit ``unit``'s score as seen by ``stage`` (of its planned score value)."""
        name, sign, bias = self.plan.unit_scores[unit]
        if name is None:
            return _bv(bias, self.width)
        value = self.known(name, stage, self.width, state, needed)
        if sign == 1 and bias == 0:
            return value
        signed = value if sign == 1 else f"(bvneg {value})"
        return f"(bvadd {signed} {_bv(bias, self.width)})"


def _ports(port_rows):
    return {internal: (name, signed) for internal, name, _d, _w, signed in port_rows}


def _bool(netlist, name, state):
    if netlist.widths.get(name) != 1:
        raise _Undecided(f"the netlist has no one-bit signal {name!r}")
    return netlist.raw(name, state)


def _lemmas(plan, query, model):
    """The lemmas (label, Bool) and assumptions of the whole design, per stage."""
    net, latency, w = query.net, plan.latency, query.width
    lemmas, assumptions, needed = [], [], set()
    inputs = query.input_ranges()
    for name, value in plan.values.items():
        if net.has(name) and not query.pure:
            bits = net.widths[name]
            formula = query.formula(name, bits, needed=needed)
            lemmas.append((name, f"(= {net.bits(name, 's0')} {query.low(formula, bits)})"))
    final = plan.final_stage
    if model.is_bank:
        decided = query.known(plan.class_value, final, w, needed=needed) \
            if plan.class_value else _bv(0, w)
        scores = [query.score(u, final, needed=needed) for u in range(len(model.units))]
    else:
        score = query.score(0, final, needed=needed)
        decided = f"(ite (bvsgt {score} {_bv(0, w)}) {_bv(1, w)} {_bv(0, w)})"
        scores = [score]
    outputs = [("y", decided)]
    if plan.guard.flag:
        outputs.append(("out_of_range", query.known(GUARD_FLAG, final, w, needed=needed)))
    if model.ports.has_score:
        outputs += [("score" if not model.is_bank else f"score{u}", s)
                    for u, s in enumerate(scores)]
    in_valid = _bool(net, query.ports["in_valid"][0], "s0")
    in_ready = _bool(net, query.ports["in_ready"][0], "s0")
    out_ready = _bool(net, query.ports["out_ready"][0], "s0")
    out_valid = _bool(net, query.ports["out_valid"][0], "s0")
    if latency == 0:
        lemmas.append(("in_ready", f"(= {in_ready} {out_ready})"))
        lemmas.append(("out_valid", f"(= {out_valid} {in_valid})"))
        for internal, expected in outputs:
            port, signed = query.port(internal)
            lemmas.append((port, f"(= {query.wide(port, 's0', signed)} {expected})"))
        return lemmas, assumptions + query.assumptions, inputs
    rst = _bool(net, query.ports["rst"][0], "s0")
    lemmas.append(("in_ready", f"(= {in_ready} (or {out_ready} (not {out_valid})))"))
    valid = [in_valid]
    for k in range(1, latency + 1):
        name = valid_name(k) if k < latency else query.ports["out_valid"][0]
        valid.append((name, _bool(net, name, "s0"), _bool(net, name, "s1")))
    for k in range(1, latency + 1):
        name, now, after = valid[k]
        before = valid[k - 1] if k == 1 else valid[k - 1][1]
        lemmas.append((name, f"(= {after} (ite {rst} false (ite {in_ready} {before} {now})))"))

    def register(label, before_stage, loaded, held):
        load = f"(and (not {rst}) {in_ready} {valid_now(before_stage)})"
        hold = f"(and (not {rst}) (not {in_ready}) {valid_now(before_stage + 1)})"
        lemmas.append((label, f"(and (=> {load} {loaded}) (=> {hold} {held}))"))

    def valid_now(stage):
        return valid[0] if stage == 0 else valid[stage][1]

    for internal, expected in outputs:
        port, signed = query.port(internal)
        after = query.wide(port, "s1", signed)
        register(port, latency - 1, f"(= {after} {expected})",
                 f"(= {after} {query.wide(port, 's0', signed)})")
    done = set()
    while needed - done:
        name, stage = sorted(needed - done)[0]
        done.add((name, stage))
        value = plan.values[name]
        reg, shift = register_name(name, stage), value.register_shift
        bits = net.widths[reg]
        source = query.known(name, stage - 1, bits + shift, needed=needed)
        if shift:
            source = f"(bvlshr {source} {_bv(shift, w)})"
        after = net.bits(reg, "s1")
        register(reg, stage - 1, f"(= {after} {query.low(source, bits)})",
                 f"(= {after} {net.bits(reg, 's0')})")
        if query.holds_exactly(name, reg, shift):
            # Only a register holding a valid item is known to be in range (by induction:
            # it was loaded from one); the contents of an empty stage stay unconstrained.
            now = query.known(name, stage, w)
            assumptions.append(f"(=> {valid_now(stage)} (and (bvsle {_bv(value.lo, w)} {now}) "
                               f"(bvsle {now} {_bv(value.hi, w)})))")
    return lemmas, assumptions + query.assumptions, inputs


def proof_tools():
    """Paths of Yosys and Boolector; a :class:`ToolError` naming what to install if missing."""
    hint = "install the proof tools with pip install 'thresh2hdl[prove]'"
    return find_tool("yosys", hint), find_tool("boolector", hint)


def _run(command, cwd, timeout):
    try:
        return subprocess.run(command, cwd=cwd, capture_output=True, text=True, timeout=timeout)
    except subprocess.TimeoutExpired:
        return None


def _netlist_smt2(yosys, verilog_text, module, folder):
    (folder / "design.v").write_text(verilog_text, encoding="utf-8")
    # setundef -anyseq: an x bit becomes a free value in every cycle (a synthesis tool may
    # resolve it either way), never a constant.
    (folder / "prove.ys").write_text(
        "read_verilog -noautowire design.v\n"
        f"hierarchy -check -top {module}\n"
        "proc\nflatten\nsetundef -anyseq\nopt_clean\n"
        "write_json design.json\n"
        "write_smt2 -wires -stbv design.smt2\n", encoding="utf-8")
    result = subprocess.run([yosys, "-q", "prove.ys"], cwd=folder, capture_output=True,
                            text=True)
    if result.returncode != 0:
        lines = [l for l in (result.stderr + result.stdout).splitlines() if "ERROR" in l]
        raise ToolError(f"Yosys could not read the netlist: "
                        f"{lines[0].strip() if lines else 'exit ' + str(result.returncode)}")
    document = json.loads((folder / "design.json").read_text(encoding="utf-8"))
    return (folder / "design.smt2").read_text(encoding="utf-8"), document["modules"][module]


_SYNC_FLOPS = {"$dff", "$dffe", "$sdff", "$sdffe", "$sdffce"}
_FINE_SYNC_FLOPS = {"$_DFF_P_", "$_DFFE_PP_", "$_DFFE_PN_"}
_FINE_SYNC_RESET_FLOP = re.compile(r"^\$_SDFFC?E?_P")


def _check_structure(module, port_rows):
    """What the SMT export cannot show: the netlist's ports are the model's, exactly; its
    inputs are free (nothing inside drives them); every register is clocked by the rising
    edge of the clock port (the export steps every register on one global clock, whatever its
    clock). Raises :class:`InputError` for other ports, :class:`_Undecided` for clocking the
    method does not cover."""
    ports = module["ports"]
    wanted = {name: (direction, width) for _, name, direction, width, _ in port_rows}
    for name, (direction, width) in wanted.items():
        got = ports.get(name)
        if got is None or got["direction"] != direction or len(got["bits"]) != width:
            found = "is missing" if got is None else \
                f"is {got['direction']} of {len(got['bits'])} bits"
            raise InputError(f"the netlist's port {name!r} {found}; the model needs "
                             f"{direction} [{width - 1}:0]")
    extra = sorted(set(ports) - set(wanted))
    if extra:
        raise InputError(f"the netlist has a port {extra[0]!r} that the model does not")
    driven = set()
    for cell in module["cells"].values():
        for port, direction in cell.get("port_directions", {}).items():
            if direction == "output":
                driven.update(b for b in cell["connections"][port] if isinstance(b, int))
    seen = set()
    for name, port in ports.items():
        if port["direction"] != "input":
            continue
        bits = port["bits"]
        if any(not isinstance(b, int) for b in bits) or driven & set(bits) or seen & set(bits):
            raise InputError(f"input {name!r} is driven inside the netlist (or tied to "
                             f"another input); an input must be free")
        seen.update(bits)
    clock = next((name for internal, name, *_ in port_rows if internal == "clk"), None)
    clock_bits = ports[clock]["bits"] if clock else None
    for cell in module["cells"].values():
        kind = cell["type"]
        lowered = kind.lower()
        if not any(word in lowered for word in ("dff", "latch", "$ff", "$sr", "$mem",
                                                 "$_ff", "$_sr", "aldff")):
            continue
        if kind in _SYNC_FLOPS:
            rising = str(cell["parameters"].get("CLK_POLARITY", "1")).lstrip("0") == "1"
        else:
            rising = kind in _FINE_SYNC_FLOPS or bool(_FINE_SYNC_RESET_FLOP.match(kind))
        if not rising or cell["connections"].get("C", cell["connections"].get("CLK")) \
                != clock_bits:
            raise _Undecided(f"a register ({kind}) is not clocked by the rising edge of "
                             f"{clock or 'a clock port'} alone; the method covers only that")


def _solve(boolector, text, folder, name, timeout_s, values=()):
    """'unsat', 'sat' with the values asked for, or 'unknown' (timeout)."""
    body = ["(set-option :produce-models true)", "(set-logic QF_UFBV)", text, "(check-sat)"]
    if values:
        body.append("(get-value (" + " ".join(values) + "))")
    (folder / name).write_text("\n".join(body) + "\n", encoding="utf-8")
    result = _run([boolector, "--smt2", f"--time={max(1, int(timeout_s))}", name], folder,
                  timeout_s + 10)
    if result is None:
        return "unknown", {}
    out = result.stdout
    first = out.split(None, 1)[0] if out.strip() else ""
    if first not in ("sat", "unsat", "unknown"):
        error = (result.stderr or out).strip().splitlines()
        raise ToolError(f"Boolector failed: {error[0] if error else 'exit ' + str(result.returncode)}")
    found = {}
    for key, val in re.findall(r"\((\|[^|]*\||\S+)\s+(#b[01]+|true|false)\)", out):
        found[key] = val
    return first, found


def _solve_batches(boolector, common, lemmas, folder, deadline):
    """Check the lemmas in batches, in parallel: after the cuts each lemma reads only free
    values, so the conjunction holds exactly when every batch does, and small queries are far
    cheaper for the solver than one large one. Returns ('unsat' | 'sat' | 'unknown', the
    labels of failing lemmas)."""
    batches = [lemmas[i:i + BATCH_LEMMAS] for i in range(0, len(lemmas), BATCH_LEMMAS)]

    def solve(number):
        batch = batches[number]
        labels = [f"|t2h ok {i}|" for i in range(len(batch))]
        text = [common] + [f"(define-fun {label} () Bool {body})"
                           for label, (_, body) in zip(labels, batch)]
        text.append("(assert (not (and " + " ".join(labels) + " true)))")
        left = deadline - time.perf_counter()
        if left <= 0:
            return "unknown", []
        answer, values = _solve(boolector, "\n".join(text), folder, f"lemmas{number}.smt2",
                                left, labels)
        return answer, [lemma for (lemma, _), label in zip(batch, labels)
                        if values.get(label) == "false"]

    workers = max(1, min(len(batches), os.cpu_count() or 1))
    with ThreadPoolExecutor(max_workers=workers) as pool:
        answers = list(pool.map(solve, range(len(batches))))
    failing = [lemma for _, found in answers for lemma in found]
    kinds = {answer for answer, _ in answers}
    if "sat" in kinds:
        return "sat", failing
    return ("unknown" if "unknown" in kinds else "unsat"), failing


def _header(query, states):
    m = query.net.module
    lines = [f"(declare-fun {s} () |{m}_s|)" for s in states]
    lines += [f"(assert (|{m}_t| {a} {b}))" for a, b in zip(states, states[1:])]
    return lines


def prove_netlist(verilog_text, component, model, port_rows, *, timeout_s=DEFAULT_TIMEOUT_S,
                  progress=None):
    """Prove that ``verilog_text`` computes ``model`` exactly, or find where it does not.

    ``component``: the design's plan (:func:`~thresh2hdl.hardware.plan_design`) or its
    component, whose values and stages the lemmas follow; ``port_rows`` is
    :func:`thresh2hdl.emit.verilog.port_table` of it. Returns a :class:`ProofOutcome`.
    """
    yosys, boolector = proof_tools()
    # Each tool's first call, for its version, before the clock starts: a WebAssembly build
    # compiles then on a new machine (a minute or so), which is neither the proof's time nor
    # part of its timeout.
    warm = time.perf_counter()
    (yosys_version, yosys_new), (solver_version, solver_new) = \
        warm_up(yosys, progress), warm_up(boolector, progress)
    versions = yosys_version, solver_version
    tools = {"warmup_seconds": time.perf_counter() - warm,
             "compiled": tuple(name for name, new in (("Yosys", yosys_new),
                                                      ("Boolector", solver_new)) if new)}
    started = time.perf_counter()
    uncovered = None
    if component.config.arch == "serial":
        # Its values are shared by every beat: a proof needs per-beat invariants of the
        # accumulator, which these per-value lemmas do not state.
        uncovered = "the serial architecture is not covered by the proof"
    elif component.split_parts:
        uncovered = "split adders are not covered by the proof (their parts have no " \
                    "registers of the plan's values)"
    elif component.config.loadable_weights:
        uncovered = "loadable weights are not covered by the proof (it states the trained " \
                    "constants)"
    if uncovered is not None:
        return ProofOutcome("undecided", f"{uncovered}; the design is verified cycle by cycle "
                            f"in simulation", 0, (), None, versions[1], versions[0],
                            time.perf_counter() - started, 0, **tools)
    plan = _Plan(component, model)
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-prove-") as name:
        folder = Path(name)
        if progress is not None:
            progress("reading the netlist with Yosys")
        smt2, structure = _netlist_smt2(yosys, verilog_text, model.module, folder)
        widest = max([signed_bits(v.lo, v.hi) for v in plan.values.values()]
                     + [int(w) for _, _, w in _WIRE_LINE.findall(smt2)] + [1])
        width = max(MIN_WIDTH, widest + 2)
        ports = _ports(port_rows)
        port_names = {name for name, _ in ports.values()}

        def outcome(status, detail, lemmas=0, failing=(), candidate=None):
            return ProofOutcome(status, detail, lemmas, tuple(failing), candidate,
                                versions[1], versions[0], time.perf_counter() - started, width,
                                **tools)

        try:
            _check_structure(structure, port_rows)
        except _Undecided as why:
            return outcome("undecided", str(why))
        ignored = set()
        while True:
            netlist = _Netlist(smt2, model.module, frozenset(ignored))
            query = _Query(plan, netlist, width, ports)
            # A cut wire must hold its whole range, so that its free value can be assumed
            # in it.
            netlist.cut({name for name in plan.closed
                         if netlist.has(name) and query.holds_exactly(name, name)})
            try:
                lemmas, assumptions, inputs = _lemmas(plan, query, model)
            except _Undecided as why:
                return outcome("undecided", str(why))
            states = ["s0", "s1"] if plan.latency else ["s0"]
            common = [netlist.text, *_header(query, states), *query.lines]
            common += [f"(assert {a})" for a in assumptions]
            # With the flag alone (no clamp), results are stated for inputs in range only,
            # but the flag for every code: its lemmas are checked without the input ranges.
            flag_labels = {GUARD_FLAG, ports["out_of_range"][0]} if "out_of_range" in ports \
                else set()
            flag_labels |= {register_name(GUARD_FLAG, k) for k in range(1, plan.latency + 1)}
            free = [l for l in lemmas if l[0] in flag_labels]
            groups = [("\n".join(common + [f"(assert {a})" for a in inputs]),
                       [l for l in lemmas if l not in free]), ("\n".join(common), free)]
            common += [f"(assert {a})" for a in inputs]
            if not ignored:
                # A proof under assumptions that nothing satisfies would prove anything.
                alone, _ = _solve(boolector, "\n".join(common), folder, "assumptions.smt2",
                                  max(1, started + timeout_s - time.perf_counter()))
                if alone != "sat":
                    return outcome("undecided", "the assumptions (inputs in their ranges) "
                                   "cannot all hold on this netlist" if alone == "unsat"
                                   else f"no answer within {timeout_s} s")
            if progress is not None:
                progress(f"solving {len(lemmas)} lemmas with Boolector")
            answers = [_solve_batches(boolector, text, group, folder, started + timeout_s)
                       for text, group in groups if group]
            failing = [lemma for _, found in answers for lemma in found]
            kinds = {answer for answer, _ in answers}
            answer = "sat" if "sat" in kinds else "unknown" if "unknown" in kinds else "unsat"
            skipped = (f"; {len(ignored)} inner wire(s) that do not follow the plan, such as "
                       f"{', '.join(sorted(ignored)[:3])}, were computed from their operands "
                       f"instead") if ignored else ""
            if answer == "unsat":
                covered = "every code the input ports can carry" if plan.guard.clamp else \
                    "every input in the declared ranges"
                return outcome("proved", f"all {len(lemmas)} lemmas hold for {covered}"
                               f"{skipped}", len(lemmas))
            if answer == "unknown":
                return outcome("undecided", f"no answer within {timeout_s} s{skipped}",
                               len(lemmas), failing)
            inner = {lemma for lemma in failing if netlist.has(lemma)
                     and lemma not in port_names and lemma not in netlist.registers}
            if not inner:
                break
            # Inner wires that fail may just mean something else (a netlist written
            # back by synthesis keeps some of the names, partly driven). Compute them from
            # their operands instead and try again; the wires that hold stay cut points.
            ignored |= inner
            if progress is not None:
                progress(f"{len(inner)} inner wire(s) do not follow the plan; trying without")
        left = started + timeout_s - time.perf_counter()
        candidate = _search(plan, _Netlist(smt2, model.module), width, ports, model,
                            folder, boolector, max(5, left))
        return outcome("failed", "lemma(s) fail: " + ", ".join(failing[:5]) + skipped,
                       len(lemmas), failing, candidate)


def _vector(values, keys, width):
    """The input vector of a solver model, or None if a value is missing."""
    vector = []
    for key in keys:
        bits = values.get(key)
        if bits is None:
            return None
        number = int(bits[2:], 2)
        vector.append(number - (1 << width) if number >= 1 << (width - 1) else number)
    return tuple(vector)


def _search(plan, netlist, width, ports, model, folder, boolector, timeout_s):
    """An input whose outputs, after the latency with the sink ready, differ from the model's."""
    latency = plan.latency
    states = [f"s{k}" for k in range(latency + 1)]
    query = _Query(plan, netlist, width, ports, pure=True)
    w = width
    lines = []
    try:
        xs = [query.code(i, "s0") for i in range(len(model.features))]
        ranges = query.input_ranges()
        in_range = f"(and true {' '.join(ranges)})" if ranges else "true"
        lines.append(f"(assert {_bool(netlist, ports['in_valid'][0], 's0')})")
        for s in states:
            lines.append(f"(assert {_bool(netlist, ports['out_ready'][0], s)})")
            if latency:
                lines.append(f"(assert (not {_bool(netlist, ports['rst'][0], s)}))")
        last = states[-1]
        # The reference bracketed like the plan: equal to w . x + b (see _check_cover), and
        # far easier for the solver to match against the netlist than a plain sum.
        scores = [query.score(u, 0) for u in range(len(model.units))]
        if model.is_bank:
            best_index = query.known(plan.class_value, 0, w) if plan.class_value \
                else _bv(0, w)
            expected = [("y", best_index)]
        else:
            expected = [("y", f"(ite (bvsgt {scores[0]} {_bv(0, w)}) {_bv(1, w)} {_bv(0, w)})")]
        if model.ports.has_score:
            expected += [("score" if not model.is_bank else f"score{u}", s)
                         for u, s in enumerate(scores)]
        differs = []
        for internal, value in expected:
            port, signed = query.port(internal)
            differs.append(f"(distinct {query.wide(port, last, signed)} {value})")
        # The results are stated for inputs in range (every code, with the clamp); the
        # out-of-range flag for every code.
        wrong = f"(and {in_range} (or false {' '.join(differs)}))"
        if plan.guard.flag:
            port, _ = query.port("out_of_range")
            flag = f"(ite {query.outside('s0')} #b1 #b0)"
            wrong = f"(or {wrong} (distinct {netlist.bits(port, last)} {flag}))"
        valid = _bool(netlist, ports["out_valid"][0], last)
        lines.append(f"(assert (and {valid} {wrong}))")
    except _Undecided:
        return None
    text = [netlist.text, *_header(query, states), *query.lines, *lines]
    answer, values = _solve(boolector, "\n".join(text), folder, "search.smt2", timeout_s, xs)
    return _vector(values, xs, w) if answer == "sat" else None
