"""One SMT-LIB query over the exported netlist's functions: its values known from wires,
registers or their operands, in arithmetic wide enough that nothing overflows."""

from ..analysis import signed_bits, value_bits
from ..names import clamped_name, register_name
from .outcome import Undecided
from .rows import row_formula
from .split import range_test

__all__ = ["Query", "bv", "port_names", "bool_signal"]


def bv(value, width):
    if value < 0:
        value += 1 << width
    return f"(_ bv{value} {width})"


class Query:
    """One SMT-LIB query over the netlist's functions, in ``width``-bit arithmetic."""

    def __init__(self, plan, smt, width, ports, *, pure=False):
        self.plan = plan
        self.smt = smt
        self.width = width
        self.ports = ports      # internal port name -> (Verilog name, signed)
        self.pure = pure        # every value from the inputs in state s0, wires ignored
        self.lines = []
        self.defined = {}
        self.assumptions = []
        self.constant_values = {}   # split values read as constants (registers dropped)
        self.clamp_lemmas = {}      # (clamped wire, state) -> its lemma (see feature)

    def extend(self, expr, bits, signed):
        if bits == self.width:
            return expr
        op = "sign_extend" if signed else "zero_extend"
        return f"((_ {op} {self.width - bits}) {expr})"

    def wide(self, wire, state, signed):
        return self.extend(self.smt.bits(wire, state), self.smt.widths[wire], signed)

    def define(self, key, sort, expr):
        if key not in self.defined:
            name = f"|t2h {key}|"
            self.lines.append(f"(define-fun {name} () {sort} {expr})")
            self.defined[key] = name
        return self.defined[key]

    def port(self, internal):
        name, signed = self.ports[internal]
        if not self.smt.has(name):
            raise Undecided(f"the netlist has no port {name!r}")
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
        clamped = f"(ite (bvslt {code} {bv(lo, w)}) {bv(lo, w)} " \
                  f"(ite (bvsgt {code} {bv(hi, w)}) {bv(hi, w)} {code}))"
        wire = clamped_name(self.plan.model.features[index].name)
        if self.pure or not self.smt.has(wire) or wire in self.smt.registers or \
                self.smt.widths[wire] != value_bits(lo, hi)[0]:
            return self.define(f"clamped x{index} {state}", self._sort(), clamped)
        # The netlist's own clamped wire (as wide as the range, as the circuit makes it),
        # on a lemma that it is the clamp of the code: a product then multiplies the same
        # term on both sides, where a multiplier of the formula's multiplexer against one of
        # the netlist's is a hard question for the solver.
        bits = self.smt.widths[wire]
        self.clamp_lemmas[(wire, state)] = \
            f"(= {self.smt.bits(wire, state)} {self.low(clamped, bits)})"
        return self.define(f"{wire} {state}", self._sort(), self.wide(wire, state, lo < 0))

    def outside(self, state="s0", features=None):
        """Bool: some feature's code (of ``features``, else of all) lies outside its declared
        range."""
        guard, w, tests = self.plan.guard, self.width, []
        for index in guard.tight if features is None else features:
            (lo, hi), (code_lo, code_hi) = guard.feature_ranges[index], guard.code_ranges[index]
            x = self.code(index, state)
            if lo > code_lo:
                tests.append(f"(bvslt {x} {bv(lo, w)})")
            if hi < code_hi:
                tests.append(f"(bvsgt {x} {bv(hi, w)})")
        return f"(or false {' '.join(tests)})" if tests else "false"

    def input_ranges(self, state="s0"):
        """Assumptions on the inputs: inside the declared ranges, unless the guard clamps
        (then every code the ports can carry is covered)."""
        if self.plan.guard.clamp:
            return []
        w, out = self.width, []
        for index, (lo, hi) in enumerate(self.plan.ranges):
            x = self.code(index, state)
            out += [f"(bvsle {bv(lo, w)} {x})", f"(bvsle {x} {bv(hi, w)})"]
        return out

    def _sort(self):
        return f"(_ BitVec {self.width})"

    def holds_exactly(self, name, wire, shift=0):
        """Whether ``wire`` is wide enough to hold every value ``name >> shift`` can take."""
        value, bits = self.plan.values[name], self.smt.widths[wire]
        lo, hi = value.lo >> shift, value.hi >> shift
        if value.signed:
            return bits >= signed_bits(lo, hi)
        return bits >= max(1, hi.bit_length())

    def constant_prefix(self, name, register):
        """For a register too narrow for a value of one sign (an argmax class between two
        indices, a split adder's complemented part), the high bits every value shares, which
        synthesis keeps as constants rather than flip-flops: the register holds the low bits,
        all those where the values differ. None when that does not explain its width. (Were
        it wrong, the register's own lemma would fail: the proof does not rest on it.)"""
        value = self.plan.values[name]
        if (value.lo < 0 <= value.hi) or (value.signed and value.kind != "pnot") or \
                value.register_shift or self.holds_exactly(name, register):
            return None
        kept = self.smt.widths[register]
        if kept < (value.lo ^ value.hi).bit_length():
            return None
        return value.lo >> kept << kept

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
        if value.parts > 1:
            return self._joined(name, value, stage, modulus_bits, state, needed)
        if value.kind == "scaled":
            # Wiring: its child shifted, read where the child is (its wire or registers).
            child = self.known(value.operands[0], stage, modulus_bits, state, needed)
            return self._shifted(child, value.magnitude)
        if stage == value.stage:
            if self.smt.has(name) and (self.holds_exactly(name, name)
                                       or self.smt.widths[name] >= modulus_bits):
                if name in self.smt.cut_ids:
                    return self.cut(name, state)
                return self.define(f"{name} {state}", self._sort(),
                                   self.wide(name, state, value.signed))
            return self.formula(name, modulus_bits, state, needed)
        register = register_name(name, stage)
        if register not in self.smt.registers and (value.kind == "pcarry" or
                                                   value.lo == value.hi):
            # A value that is always the same (a carry out of a part whose operands' low
            # bits are zeros, a part its form makes 0, a decision step decided by ranges):
            # synthesis wires the constant and drops the flops. Read as that constant (a
            # carry: 0), on a lemma that its formula is it for every input
            # (:func:`~.lemmas.lemmas_of`); if the netlist wired anything else, its reader's
            # lemma fails.
            self.constant_values[name] = value.lo if value.lo == value.hi else 0
            return bv(self.constant_values[name], self.width)
        if register not in self.smt.registers:
            raise Undecided(f"the netlist has no register {register!r}; the per-stage method "
                             f"needs the pipeline registers under the names thresh2hdl gives")
        shift = value.register_shift
        prefix = self.constant_prefix(name, register)
        if prefix is None and not (self.holds_exactly(name, register, shift)
                                   or self.smt.widths[register] + shift >= modulus_bits):
            raise Undecided(f"register {register!r} is narrower than its consumer")
        if needed is not None:
            needed.add((name, stage))
        expr = self.wide(register, state, value.signed)
        if prefix:
            expr = f"(bvor {expr} {bv(prefix, self.width)})"
        if shift:
            expr = f"(bvshl {expr} {bv(shift, self.width)})"
        return self.define(f"{register} {state}", self._sort(), expr)

    def cut(self, name, state):
        """A cut wire's free value, assumed inside its exact range when it can hold it."""
        key = f"cut {name} {state}"
        if key not in self.defined:
            value, bits = self.plan.values[name], self.smt.widths[name]
            free = self.smt.cut_value(name, state)
            expr = self.define(key, self._sort(), self.extend(free, bits, value.signed))
            if self.holds_exactly(name, name):
                self.assumptions += [f"(bvsle {bv(value.lo, self.width)} {expr})",
                                     f"(bvsle {expr} {bv(value.hi, self.width)})"]
            return expr
        return self.defined[key]

    def formula(self, name, modulus_bits, state="s0", needed=None):
        """``name`` computed from its operands (each known modulo ``2**modulus_bits``; the
        argmax compares, so its operands are known exactly)."""
        value = self.plan.values[name]
        stage, w = value.stage, self.width
        # (A top part and a complement are read modulo their consumer's width, as the
        # netlist computes them; a low part's sum must be exact for its carry.)
        exact = value.kind in ("compare", "max", "pick", "plow", "pcarry", "psum", "dstep")
        bits = w if exact else modulus_bits

        def operand(other):
            return self.known(other, stage, bits, state, needed)

        if value.piece is not None:
            expr = self._piece(value, state, needed, bits)
        elif value.kind == "plow":
            expr = f"(bvand {operand(value.operands[0])} {bv((1 << self.plan.split_bits) - 1, w)})"
        elif value.kind == "pcarry":
            expr = f"(bvlshr {operand(value.operands[0])} {bv(self.plan.split_bits, w)})"
        elif value.kind == "product":
            expr = f"(bvmul {self.feature(value.feature, state)} {bv(value.magnitude, w)})"
        elif value.kind == "mul":
            expr = f"(bvmul {self.feature(value.feature, state)} " \
                   f"{self.weight_register(value.register, state)})"
        elif value.kind == "row":
            expr = row_formula(self, value, state)
        elif value.kind == "addreg":
            expr = f"(bvadd {operand(value.operands[0])} " \
                   f"{self.weight_register(value.register, state)})"
        elif value.kind == "scaled":
            expr = self._shifted(operand(value.operands[0]), value.magnitude)
        elif value.kind == "whole":         # a split score joined from its parts
            expr = operand(value.operands[0])
        elif value.kind == "const":
            expr = bv(value.constant, w)
        elif value.kind == "flag" and value.operands:      # an OR of flags below
            anyone = " ".join(f"(= {operand(o)} {bv(1, w)})" for o in value.operands)
            expr = f"(ite (or false {anyone}) {bv(1, w)} {bv(0, w)})"
        elif value.kind == "flag":
            expr = f"(ite {self.outside(state, value.features)} {bv(1, w)} {bv(0, w)})"
        elif value.kind in ("add", "sub", "rsub"):
            a, b = (operand(o) for o in value.operands)
            expr = {"add": f"(bvadd {a} {b})", "sub": f"(bvsub {a} {b})",
                    "rsub": f"(bvsub {b} {a})"}[value.kind]
        elif value.kind in ("bias", "rbias"):
            a = operand(value.operands[0])
            child = self.plan.values[value.operands[0]]
            bias = value.constant - (child.constant if value.kind == "bias" else -child.constant)
            expr = f"(bvadd {a} {bv(bias, w)})" if value.kind == "bias" \
                else f"(bvsub {bv(bias, w)} {a})"
        elif value.kind == "compare":
            a, b = (operand(o) for o in value.operands)
            expr = f"(ite (bvsge {a} {b}) {bv(1, w)} {bv(0, w)})"
        elif value.kind == "max":
            wins, a, b = (operand(o) for o in value.operands)
            expr = f"(ite (= {wins} {bv(1, w)}) {a} {b})"
        elif value.kind == "pick":
            wins, a, b, ia, ib = value.operands
            left = operand(ia) if ia is not None else bv(value.first, w)
            right = operand(ib) if ib is not None else bv(value.last, w)
            expr = f"(ite (= {operand(wins)} {bv(1, w)}) {left} {right})"
        else:
            raise RuntimeError(f"value kind {value.kind} has no formula")
        return self.define(f"formula {name} {bits} {state}", self._sort(), expr)

    def _joined(self, name, value, stage, modulus_bits, state, needed):
        """A split adder's value from its parts as ``stage`` sees them: the low parts' bits,
        then the top part shifted; only the parts below ``modulus_bits`` when a consumer
        needs no more (an adder no wider than a part reads part 0 alone)."""
        b, w = self.plan.split_bits, self.width
        used = min(value.parts, -(-modulus_bits // b))
        terms = []
        for j in range(used):
            part = self.known(f"{name}_p{j}", stage, w, state, needed)
            terms.append(f"(bvshl {part} {bv(j * b, w)})" if j else part)
        total = terms[0]
        for term in terms[1:]:
            total = f"(bvadd {total} {term})"
        return self.define(f"joined {name} {used} {stage} {state}", self._sort(), total)

    def _slice(self, name, j, top, stage, state, needed, modulus_bits=None):
        """Part ``j`` of value ``name`` as a part-``j`` adder reads it (``trees.Parts``): the
        bits from ``j * b`` up, whole (``top``) or ``b`` of them; of a split value, its own
        part ``j`` (past its top part, that part's extension)."""
        b, w = self.plan.split_bits, self.width
        value = self.plan.values[name]
        if value.lo >= 0 and value.hi >> (j * b) == 0:
            # Past a non-negative value's bits: zeros, which the circuit wires as constants.
            return bv(0, w)
        # A top slice modulo ``modulus_bits`` needs its source modulo that many bits more
        # than the shift; a middle one, ``b`` bits above it.
        if value.parts > 1:
            own = min(j, value.parts - 1)
            shift = (j - own) * b
        else:
            shift = j * b
        need = min(w, shift + (modulus_bits or w)) if top else min(w, shift + b)
        if value.parts > 1:
            source = self.known(f"{name}_p{own}", stage, need, state, needed)
        else:
            source = self.known(name, stage, need, state, needed)
        shifted = f"(bvashr {source} {bv(shift, w)})" if shift else source
        return shifted if top else f"(bvand {shifted} {bv((1 << b) - 1, w)})"

    def _piece(self, value, state, needed, modulus_bits):
        """A split adder's piece from what it reads (see :mod:`.split`), modulo
        ``modulus_bits`` (exact for a low part's sum)."""
        w, b, piece, stage = self.width, self.plan.split_bits, value.piece, value.stage
        if value.kind == "pnot":
            part = self._slice(piece["node"], piece["j"], piece["top"], stage, state, needed,
                               modulus_bits)
            return f"(bvnot {part})" if piece["top"] else \
                f"(bvsub {bv((1 << b) - 1, w)} {part})"
        if value.kind == "dstep":
            return self._decision_step(value, piece, stage, state, needed)
        terms = []
        for kind, item in piece["operands"] + [piece["carry"]]:
            if kind == "const":
                terms.append(bv(item, w))
            elif kind == "value":
                terms.append(self.known(item, stage, modulus_bits, state, needed))
            else:
                terms.append(self._slice(item, piece["j"], piece["top"], stage, state,
                                         needed, modulus_bits))
        total = terms[0]
        for term in terms[1:]:
            total = f"(bvadd {total} {term})"
        return total

    def _decision_step(self, value, piece, stage, state, needed):
        """One step of a split result's decision (see :func:`.split.decision_chain`)."""
        w = self.width

        def part():
            return self.known(piece["part"], stage, w, state, needed)

        def below():
            return f"(= {self.known(piece['below'], stage, w, state, needed)} {bv(1, w)})"

        if "limit" in piece:
            # Against the threshold's digit. Decided by the part's range alone where it can
            # be, as the circuit decides it (then no part is read: a constant).
            held, number = self.plan.values[piece["part"]], piece["limit"]
            limit, greater = bv(number, w), piece["greater"]
            decided = range_test(held, number, greater)
            test = f"({'bvsgt' if greater else 'bvslt'} {part()} {limit})" \
                if decided is None else str(decided).lower()
            if piece["below"] is not None and held.lo <= number <= held.hi:
                test = f"(or {test} (and (= {part()} {limit}) {below()}))"
        else:                       # score > 0: nonzero, and the top part not negative
            test = f"(not (= {part()} {bv(0, w)}))"
            if piece["below"] is not None:
                test = f"(or {test} {below()})"
            if piece["sign"]:
                test = f"(and (bvsge {part()} {bv(0, w)}) {test})"
        return f"(ite {test} {bv(1, w)} {bv(0, w)})"

    def weight_register(self, name, state="s0"):
        """A loadable weight or bias register's value (signed), whatever it holds: the
        register, or (an asynchronous reset, which the export makes a synchronous register
        behind a multiplexer) the wire of its name."""
        if name not in self.smt.registers and not self.smt.has(name):
            raise Undecided(f"the netlist has no register {name!r} of the loadable weights")
        return self.define(f"{name} {state}", self._sort(), self.wide(name, state, True))

    def _shifted(self, expr, magnitude):
        shift = magnitude.bit_length() - 1
        return f"(bvshl {expr} {bv(shift, self.width)})" if shift else expr

    def low(self, expr, bits):
        """The low ``bits`` of a wide expression, shaped like a ``bits``-wide wire."""
        return f"((_ extract {bits - 1} 0) {expr})"

    def score(self, unit, stage, state="s0", needed=None):
        """Unit ``unit``'s score as seen by ``stage`` (of its planned score value)."""
        name, sign, bias = self.plan.unit_scores[unit]
        if name is None:
            return bv(bias, self.width)
        value = self.known(name, stage, self.width, state, needed)
        if sign == 1 and bias == 0:
            return value
        signed = value if sign == 1 else f"(bvneg {value})"
        return f"(bvadd {signed} {bv(bias, self.width)})"


def port_names(port_rows):
    """Internal port name -> (its name in the netlist, whether it is signed)."""
    return {internal: (name, signed) for internal, name, _d, _w, signed in port_rows}


def bool_signal(smt, name, state):
    """One-bit signal ``name`` as a Bool (a missing one: undecided)."""
    if smt.widths.get(name) != 1:
        raise Undecided(f"the netlist has no one-bit signal {name!r}")
    return smt.raw(name, state)
