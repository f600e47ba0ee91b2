"""Threshold units as Amaranth components: parallel adder trees at exact widths.

Every node of a tree has the width the range analysis computed for it, and no more; products
are ``x * |w|`` (or shifted inputs, for the multiplier-free architecture) with the sign folded
into the consuming adder. Register stages (``pipeline``) split the levels as evenly as they go,
the last one always on the outputs, and the whole pipeline stalls together on ``out_ready``
(valid/ready handshake). A bank of units shares the inputs and decides by argmax, ties to the
lowest index. The serial architecture instead takes one feature per beat into one
multiply-accumulate per unit (:class:`SerialThreshold`).
"""

from dataclasses import dataclass, replace

from amaranth.hdl import Cat, Const, Module, Mux, Shape, Signal, signed, unsigned
from amaranth.lib import wiring
from amaranth.lib.wiring import In, Out

from ..errors import InputError
from ..model import Model
from ..analysis import ARCHITECTURES, analyse, analyse_bank, resolve_guard, signed_bits, value_bits
from ..names import GUARD_FLAG, register_name, valid_name

__all__ = ["UnitConfig", "ThresholdUnit", "ThresholdBank", "SerialThreshold",
           "make_component", "sample_shape", "weight_addresses", "FULL_PIPELINE"]

MAX_SERIAL_FEATURES = 1024    # a sequencer's channels; keeps a verification chunk's cycles bounded
# ``pipeline`` asking for a register stage after every level, whatever the depth: resolved to
# the plan's ``levels`` when the design is planned (``component.config.pipeline`` is the count).
FULL_PIPELINE = "full"


@dataclass(frozen=True)
class UnitConfig:
    """What to build: the model, register stages (or :data:`FULL_PIPELINE`), an optional
    wider score port, architecture."""

    model: Model
    pipeline: int | str = 1
    score_bits: int | None = None
    arch: str = "tree"
    loadable_weights: bool = False   # weights and biases in registers behind a write port
    weight_bits: int | None = None   # their declared signed widths (default: fewest for the
    bias_bits: int | None = None     # trained values); every width is sized for these
    split_bits: int | None = None    # adders wider than this are split into parts this wide,
                                     # each part later than the one below (shorter carry chains)
    carry_registers: int = 1         # registers on each carry from one part to the next
    clamp: bool | None = None        # the input guard (guard.py): clamp codes outside the
    range_flag: bool | None = None   # declared ranges, and/or flag them; None: the default

    def __post_init__(self):
        if not isinstance(self.model, Model):
            raise TypeError(f"model must be a Model, not {type(self.model).__name__}")
        if self.pipeline != FULL_PIPELINE and (
                not isinstance(self.pipeline, int) or isinstance(self.pipeline, bool)
                or self.pipeline < 0):
            raise InputError(f"must be a non-negative integer or {FULL_PIPELINE!r}, not "
                             f"{self.pipeline!r}", field="pipeline")
        if self.score_bits is not None and (not isinstance(self.score_bits, int)
                                            or not 1 <= self.score_bits <= 128):
            raise InputError(f"must be an integer from 1 to 128, not {self.score_bits!r}",
                             field="score_bits")
        if self.arch not in ARCHITECTURES:
            raise InputError(f"must be one of {', '.join(ARCHITECTURES)}, not {self.arch!r}",
                             field="arch")
        if not isinstance(self.loadable_weights, bool):
            raise InputError(f"must be True or False, not {self.loadable_weights!r}",
                             field="loadable_weights")
        for key, trained, most in (
                ("weight_bits", [w for u in self.model.units for w in u.weights], 32),
                ("bias_bits", [u.bias for u in self.model.units], 64)):
            value, option = getattr(self, key), f"--{key.replace('_', '-')}"
            if value is not None and not self.loadable_weights:
                raise InputError("applies only with loadable weights (--loadable-weights)",
                                 field=option)
            if not self.loadable_weights:
                continue
            needed = signed_bits(min(trained), max(trained))
            if value is None and needed > most:
                raise InputError(f"the trained values (from {min(trained)} to {max(trained)}) "
                                 f"need {needed} bits, more than the {most} a loadable register "
                                 f"may have", field=option)
            if value is None:
                value = needed
                object.__setattr__(self, key, value)
            if isinstance(value, bool) or not isinstance(value, int) or not 1 <= value <= most:
                raise InputError(f"must be an integer from 1 to {most}, not {value!r}",
                                 field=option)
            if value < needed:
                raise InputError(f"{value} bits cannot hold the trained values (from "
                                 f"{min(trained)} to {max(trained)}); the write port needs at "
                                 f"least {needed}", field=option)
        if self.loadable_weights and self.pipeline == 0:
            raise InputError("loadable weights are registers and need a clock; use 1 or more "
                             "register stages, not 0", field="pipeline")
        if self.loadable_weights and self.arch == "shiftadd":
            raise InputError("shiftadd recodes each constant weight into shifts and adds, so "
                             "its weights cannot be loaded; use --arch tree or serial",
                             field="--loadable-weights")
        if self.split_bits is not None:
            if isinstance(self.split_bits, bool) or not isinstance(self.split_bits, int) \
                    or not 2 <= self.split_bits <= 64:
                raise InputError(f"must be an integer from 2 to 64, not {self.split_bits!r}",
                                 field="--split-adders")
            refusal = ("a serial design has no adder tree" if self.arch == "serial" else
                       "a bank is not split (one unit only, for now)" if self.model.is_bank else
                       "loadable weights are not split (constant weights only, for now)"
                       if self.loadable_weights else
                       "the split needs register stages: use --pipeline 1 or more"
                       if self.pipeline == 0 else None)
            if refusal:
                raise InputError(f"cannot split the adders: {refusal}", field="--split-adders")
        if isinstance(self.carry_registers, bool) or not isinstance(self.carry_registers, int) \
                or not 1 <= self.carry_registers <= 4:
            raise InputError(f"must be an integer from 1 to 4, not {self.carry_registers!r}",
                             field="--carry-registers")
        if self.carry_registers != 1 and self.split_bits is None:
            raise InputError("applies only to split adders (--split-adders)",
                             field="--carry-registers")
        for key in ("clamp", "range_flag"):
            if getattr(self, key) is not None and not isinstance(getattr(self, key), bool):
                raise InputError(f"must be True, False or None, not {getattr(self, key)!r}",
                                 field=key)
        guard = resolve_guard(self.model, clamp=self.clamp, flag=self.range_flag,
                              code_ranges=self._code_ranges())
        object.__setattr__(self, "clamp", guard.clamp)
        object.__setattr__(self, "range_flag", guard.flag)
        self.model.check_optional_ports(
            (["out_of_range"] if self.range_flag else [])
            + (["sample"] if self.arch == "serial" else [])
            + (["weight_write", "weight_address", "weight_data"] if self.loadable_weights
               else []))
        if self.arch == "serial" and len(self.model.features) > MAX_SERIAL_FEATURES:
            raise InputError(f"the serial architecture takes at most {MAX_SERIAL_FEATURES} "
                             f"features (one valid beat each), not "
                             f"{len(self.model.features)}; use tree or shiftadd", field="arch")
        if self.arch == "serial" and self.pipeline not in (1, FULL_PIPELINE):
            raise InputError(f"the serial architecture has exactly one register stage (the "
                             f"accumulator and its result), so it must be 1, not "
                             f"{self.pipeline}", field="pipeline")


    def _code_ranges(self):
        """What the port carrying each feature can hold: its own format, or (serial) the
        one sample bus."""
        if self.arch != "serial":
            return None
        shape = sample_shape(self.model)
        lo = -(1 << (shape.width - 1)) if shape.signed else 0
        hi = (1 << (shape.width - 1)) - 1 if shape.signed else (1 << shape.width) - 1
        return ((lo, hi),) * len(self.model.features)

    @property
    def guard(self):
        """The input guard as resolved for this design (see :mod:`thresh2hdl.analysis.guard`)."""
        return resolve_guard(self.model, clamp=self.clamp, flag=self.range_flag,
                             code_ranges=self._code_ranges())


def _declared(bits):
    return (-(1 << (bits - 1)), (1 << (bits - 1)) - 1)


def _loadable(config):
    """Keyword arguments of the range analysis for the configuration's weights."""
    if not config.loadable_weights:
        return {}
    return {"weight_range": _declared(config.weight_bits),
            "bias_range": _declared(config.bias_bits)}


class _WeightStore:
    """Weight and bias registers of every unit, reset to the trained values, written through
    ``weight_write``/``weight_address``/``weight_data``: unit ``u``'s weight ``i`` at address
    ``u * (features + 1) + i``, its bias at ``u * (features + 1) + features``. A write takes
    effect from the next clock; the data's low bits are kept."""

    def __init__(self, m, component, config):
        self.weights, self.biases = [], []
        model = config.model
        features = len(model.features)
        for u, unit in enumerate(model.units):
            prefix = f"u{u}_" if model.is_bank else ""
            row = []
            for i, value in enumerate(unit.weights):
                register = Signal(signed(config.weight_bits), name=f"{prefix}weight{i}",
                                  init=value)
                self._write(m, component, register, u * (features + 1) + i)
                row.append(register)
            bias = Signal(signed(config.bias_bits), name=f"{prefix}bias", init=unit.bias)
            self._write(m, component, bias, u * (features + 1) + features)
            self.weights.append(row)
            self.biases.append(bias)

    @staticmethod
    def _write(m, component, register, address):
        with m.If(component.weight_write & (component.weight_address == address)):
            m.d.sync += register.eq(component.weight_data[:len(register)])


def weight_addresses(model):
    """How many addresses the write port has: every unit's weights, then its bias."""
    return len(model.units) * (len(model.features) + 1)


def _write_members(config):
    if not config.loadable_weights:
        return {}
    return {"weight_write": In(1),
            "weight_address": In(range(weight_addresses(config.model))),
            "weight_data": In(signed(max(config.weight_bits, config.bias_bits)))}


def _shape(node):
    return signed(node.bits) if node.is_signed else unsigned(node.bits)


def _boundaries(final_level, pipeline):
    """Levels after which a register stage sits; the last is always the final level."""
    levels = final_level + 1
    return tuple(-(-(j * levels) // pipeline) - 1 for j in range(1, pipeline + 1))


class _Stages:
    """Values by (name, stage), with the registers that carry them to later stages."""

    def __init__(self, m, advance, boundaries):
        self.m = m
        self.advance = advance
        self.boundaries = boundaries
        self.values = {}
        self.produced = {}
        self.registers = {}

    def stage_of(self, level):
        return sum(1 for boundary in self.boundaries if boundary < level)

    def put(self, name, value, stage, shift=0):
        """``shift``: the value's low bits are known zeros (a shifted input), which its
        registers leave out: they carry ``value >> shift``, named by
        :func:`~thresh2hdl.names.register_name` (otherwise Yosys drops the constant flops and,
        with them, the register's name)."""
        self.values[(name, stage)] = value
        self.produced[name] = (stage, value.shape(), shift)

    def at(self, name, stage):
        first, shape, shift = self.produced[name]
        carried = self.values[(name, first)][shift:] if shift else None
        for k in range(first + 1, stage + 1):
            if (name, k) not in self.values:
                register = Signal(Shape(shape.width - shift, shape.signed),
                                  name=register_name(name, k),
                                  reset_less=True)
                source = carried if shift else self.values[(name, k - 1)]
                with self.m.If(self.advance):
                    self.m.d.sync += register.eq(source)
                self.values[(name, k)] = (register << shift) if shift else register
                self.registers[(name, k)] = register
            carried = self.registers.get((name, k))
        return self.values[(name, stage)]


def _handshake(m, component, latency):
    advance = Signal()
    if latency == 0:
        m.d.comb += [component.in_ready.eq(component.out_ready),
                     component.out_valid.eq(component.in_valid)]
        return advance
    valid = [Signal(name=valid_name(k + 1)) for k in range(latency)]
    m.d.comb += [advance.eq(component.out_ready | ~valid[-1]), component.in_ready.eq(advance),
                 component.out_valid.eq(valid[-1])]
    with m.If(advance):
        m.d.sync += valid[0].eq(component.in_valid)
        m.d.sync += [valid[k].eq(valid[k - 1]) for k in range(1, latency)]
    return advance


def _build_tree(m, stages, analysis, features, prefix="", weights=None, bias=None):
    """Every node of one unit's plan, each in the stage of its level. Returns the stage map.
    ``weights`` and ``bias``: the registers of loadable weights (else the plan's constants)."""
    for node in analysis.nodes:
        stage = stages.stage_of(node.level)
        value = Signal(_shape(node), name=prefix + node.name)
        if weights is not None and node.kind == "product":
            expr = features[node.feature] * weights[node.feature]
        elif weights is not None and node.kind == "bias":
            expr = stages.at(prefix + analysis.nodes[node.children[0]].name, stage) + bias
        elif node.kind == "product":
            expr = _constant_product(node, features)
        else:
            operands = [stages.at(prefix + analysis.nodes[c].name, stage) for c in node.children]
            expr = _combine(node, analysis, operands)
        m.d.comb += value.eq(expr)
        stages.put(prefix + node.name, value, stage, node.register_shift)


def _split_parts(analysis, split_bits):
    """How many ``split_bits``-wide parts each split adder has: an adder wider than
    ``split_bits`` is cut into ``ceil(bits / split_bits)`` parts, the top one possibly
    narrower. Products and narrower adders are whole (fed by split adders, they are computed
    from their operands' low parts: their value fits, so arithmetic modulo the part is exact).
    """
    return {node.name: -(-node.bits // split_bits) for node in analysis.nodes
            if node.kind != "product" and node.bits > split_bits}


class _Parts:
    """Part ``j`` of a value: its bits ``[j * bits, (j + 1) * bits)``, as an operand of part
    ``j`` of a wider adder. Middle parts are unsigned ``bits`` wide; a top part is the rest of
    the value, as signed as the value (beyond its width, the value's extension)."""

    def __init__(self, m, stages, analysis, parts, bits):
        self.m, self.stages, self.analysis = m, stages, analysis
        self.parts, self.bits = parts, bits

    def count(self, index):
        return self.parts.get(self.analysis.nodes[index].name, 1)

    def _raw(self, index, j, stage):
        """``(value, is_top, beyond)``: part ``j`` as it is held (a split value's own part, a
        whole value's bits from ``j * bits`` up), whether it is the value's top part, and
        whether ``j`` lies beyond the value, where only its extension is left."""
        node = self.analysis.nodes[index]
        count = self.count(index)
        if count > 1:
            own = min(j, count - 1)
            return self.stages.at(f"{node.name}_p{own}", stage), own == count - 1, own < j
        value = self.stages.at(node.name, stage)
        low = j * self.bits
        if low >= len(value):
            return value, True, True
        high = value[low:]
        return (high.as_signed() if value.shape().signed else high), True, False

    @staticmethod
    def _fill(value):
        """The bit that extends ``value``: its sign, or 0."""
        return value[-1] if value.shape().signed else Const(0, 1)

    def middle(self, index, j, stage):
        """Part ``j`` as ``bits`` unsigned bits, for the part ``j`` of a wider adder."""
        value, is_top, beyond = self._raw(index, j, stage)
        if beyond:
            return Cat(*([self._fill(value)] * self.bits))
        if not is_top or len(value) >= self.bits:
            return value[:self.bits]
        return Cat(value, *([self._fill(value)] * (self.bits - len(value))))

    def top(self, index, j, stage):
        """The value from bit ``j * bits`` up, for the top part of an adder (exact as a signed
        number where the value is held whole; a middle part is exact modulo its width, which
        is all a narrower top part needs)."""
        value, _, beyond = self._raw(index, j, stage)
        if beyond:
            return self._fill(value).as_signed() if value.shape().signed else Const(0, 1)
        return value

    def complement(self, index, j, stage, top):
        """``~`` part ``j`` of a subtrahend, made where the part is made: its registers carry
        the complement, so no inverter LUT sits before the subtractor's carry chain."""
        node = self.analysis.nodes[index]
        name = f"{node.name}_{'t' if top else 'p'}{j}_not"
        if name not in self.stages.produced:
            count = self.count(index)
            source = f"{node.name}_p{min(j, count - 1)}" if count > 1 else node.name
            made = self.stages.produced[source][0]
            if top:
                part = self.top(index, j, made)
                part = part if part.shape().signed else Cat(part, Const(0, 1)).as_signed()
                value = Signal(signed(len(part)), name=name)
            else:
                part = self.middle(index, j, made)
                value = Signal(self.bits, name=name)
            self.m.d.comb += value.eq(~part)
            self.stages.put(name, value, made)
        return self.stages.at(name, stage)


def _build_split_tree(m, stages, analysis, features, parts, split_bits, skew):
    """As :func:`_build_tree`, but an adder wider than ``split_bits`` is a row of adders,
    one per ``split_bits``-wide part: part ``j`` adds the operands' parts ``j`` and the carry
    of part ``j - 1``, ``skew`` register stages after it (the carry crosses ``skew``
    registers, so that the placer can keep each piece of its route short). Part ``j`` of the
    whole tree runs ``j * skew`` stages behind part 0, so no carry chain is longer than
    ``split_bits``.
    ``parts``: the part counts (:func:`_split_parts`)."""
    view = _Parts(m, stages, analysis, parts, split_bits)
    for node in analysis.nodes:
        stage = stages.stage_of(node.level)
        if node.kind == "product":
            value = Signal(_shape(node), name=node.name)
            m.d.comb += value.eq(_constant_product(node, features))
            stages.put(node.name, value, stage, node.register_shift)
            continue
        count = parts.get(node.name, 1)
        if count == 1:
            operands = [view.top(c, 0, stage) for c in node.children]
            value = Signal(_shape(node), name=node.name)
            m.d.comb += value.eq(_combine(node, analysis, operands))
            stages.put(node.name, value, stage)
            continue
        constant = None
        if node.kind in ("offset", "bias"):
            constant = node.constant
            child = analysis.nodes[node.children[0]]
            kind = "rsub" if node.kind == "bias" and child.sign < 0 else "add"
        else:
            kind = node.kind
        # a - b = a + ~b + 1: the carry into part 0 is 1, and a carry out of a part is 1
        # when nothing is borrowed. (sub: left minus right; rsub: right minus left, the
        # right possibly the bias constant.)
        minuend, subtrahend = (0, 1) if kind in ("add", "sub") else (1, 0)
        carry = Const(int(kind != "add"), 1)

        def operand(position, j, at, is_top):
            child = node.children[position]
            if kind != "add" and position == subtrahend:
                return view.complement(child, j, at, is_top)
            return view.top(child, j, at) if is_top else view.middle(child, j, at)

        for j in range(count):
            at = stage + j * skew
            is_top = j == count - 1
            shift = j * split_bits
            left = operand(0, j, at, is_top)
            if constant is None:
                right = operand(1, j, at, is_top)
            elif is_top:
                right = Const(constant >> shift)
            else:
                right = Const((constant >> shift) % (1 << split_bits), split_bits)
            operands = [left, right]
            total = operands[minuend] + operands[subtrahend] + carry
            if is_top:
                width = node.bits - shift
                part = Signal(signed(width) if node.is_signed else unsigned(width),
                              name=f"{node.name}_p{j}")
                m.d.comb += part.eq(total)
                stages.put(part.name, part, at)
                continue
            wide = Signal(split_bits + 1, name=f"{node.name}_p{j}_sum")
            part = Signal(split_bits, name=f"{node.name}_p{j}")
            carried = Signal(name=f"{node.name}_c{j}")
            m.d.comb += [wide.eq(total), part.eq(wide[:split_bits]),
                         carried.eq(wide[split_bits])]
            stages.put(part.name, part, at)
            stages.put(carried.name, carried, at)
            carry = stages.at(carried.name, at + skew)


def _beyond(value, limit, greater, lo, hi):
    """``value > limit`` (``greater``) or ``value < limit``, for a value in ``[lo, hi]``: a
    constant where the range decides it (a comparison that cannot change is a lint warning)."""
    if greater:
        decided = 1 if lo > limit else 0 if hi <= limit else None
    else:
        decided = 1 if hi < limit else 0 if lo >= limit else None
    if decided is not None:
        return Const(decided, 1)
    return value > limit if greater else value < limit


def _constant_product(node, features):
    """``x * |w|``: a shift when ``|w|`` is a power of two (every shift-add leaf)."""
    x, magnitude = features[node.feature], node.magnitude
    if magnitude & (magnitude - 1) == 0:
        return x << (magnitude.bit_length() - 1)
    return x * Const(magnitude)


def _combine(node, analysis, operands):
    """An adder node's value from its operands (``offset``: the bias folded into a sum)."""
    if node.kind == "add":
        return operands[0] + operands[1]
    if node.kind == "sub":
        return operands[0] - operands[1]
    if node.kind == "rsub":
        return operands[1] - operands[0]
    if node.kind == "offset":
        return operands[0] + Const(node.constant)
    child = analysis.nodes[node.children[0]]
    bias = Const(node.constant)
    return operands[0] + bias if child.sign > 0 else bias - operands[0]


def _check_pipeline(component, pipeline, levels):
    if pipeline > levels:
        component._MustUse__silence = True   # refused before use: no "never elaborated" warning
        argmax = ", the argmax" if component._config.model.is_bank else ""
        raise InputError(f"{pipeline} register stages requested, but this design has "
                         f"{levels} levels (0 the products, then the adders, the bias and "
                         f"decision{argmax}), so at most {levels}: use {levels} or fewer, or "
                         f"{FULL_PIPELINE!r} for one after every level", field="pipeline")


def _members(model, decision_bits, scores, config):
    """The ports: handshake, one input per feature at its format, the decision, the scores,
    and the weight write port when the weights are loadable."""
    members = {"in_valid": In(1), "in_ready": Out(1), **_write_members(config)}
    members.update({f"x{index}": In(signed(f.bits) if f.signed else unsigned(f.bits))
                    for index, f in enumerate(model.features)})
    members.update({"out_valid": Out(1), "out_ready": In(1), "y": Out(decision_bits)})
    members.update(_flag_member(config))
    members.update({name: Out(signed(bits)) for name, bits in scores})
    return members


def _flag_member(config):
    return {"out_of_range": Out(1)} if config.range_flag else {}


def _guard_inputs(m, stages, features, config):
    """The features as the arithmetic sees them (clamped to the declared ranges where the
    guard clamps) and the out-of-range flag put into ``stages`` as ``guard_flag`` (stage 0),
    when the design has one."""
    guard = config.guard
    if not (guard.clamp or guard.flag):
        return list(features)
    guarded, outside = [], []
    for index, (port, feature) in enumerate(zip(features, config.model.features)):
        (lo, hi), (code_lo, code_hi) = guard.feature_ranges[index], guard.code_ranges[index]
        below = above = None
        if lo > code_lo:
            below = Signal(name=f"{feature.name}_below")
            m.d.comb += below.eq(port < lo)
        if hi < code_hi:
            above = Signal(name=f"{feature.name}_above")
            m.d.comb += above.eq(port > hi)
        outside += [test for test in (below, above) if test is not None]
        if not guard.clamp or (below is None and above is None):
            guarded.append(port)
            continue
        bits, is_signed = value_bits(lo, hi)
        value = Signal(signed(bits) if is_signed else unsigned(bits),
                       name=f"{feature.name}_clamped")
        clamped = port
        if above is not None:
            clamped = Mux(above, hi, clamped)
        if below is not None:
            clamped = Mux(below, lo, clamped)
        m.d.comb += value.eq(clamped)
        guarded.append(value)
    if config.range_flag:
        flag = Signal(name=GUARD_FLAG)
        m.d.comb += flag.eq(Cat(*outside).any() if outside else 0)
        stages.put(flag.name, flag, 0)
    return guarded


class _Common:
    def _setup(self, config, plan_of, final_level_of):
        """Validate and store the configuration, plan the design and its register stages."""
        if not isinstance(config, UnitConfig):
            raise TypeError(f"config must be a UnitConfig, not {type(config).__name__}")
        self._config = config
        plan = plan_of(config.model, score_bits=config.score_bits, arch=config.arch,
                       **_loadable(config))
        if config.pipeline == FULL_PIPELINE:
            self._config = config = replace(config, pipeline=plan.levels)
        self._levels = plan.levels
        _check_pipeline(self, config.pipeline, plan.levels)
        self._boundaries = _boundaries(final_level_of(plan), config.pipeline)
        return plan

    @property
    def config(self):
        return self._config

    @property
    def unit_analyses(self):
        """The analysis of every unit, in unit order (one for a single unit)."""
        plan = getattr(self, "plan", None)
        return plan.units if plan is not None else (self.analysis,)

    @property
    def latency(self):
        """Cycles from an accepted input to its result on the outputs (0: combinational)."""
        return self._config.pipeline

    @property
    def beats(self):
        """Valid beats per result: every feature arrives at once."""
        return 1

    @property
    def register_boundaries(self):
        """Levels after which a register stage sits (level 0 = products)."""
        return self._boundaries

    @property
    def levels(self):
        """How many levels the datapath has (:attr:`~thresh2hdl.analysis.ranges.Analysis.levels`,
        numbered from 0): the most register stages it takes."""
        return self._levels

    def level_stage(self, level):
        """The register stage (from 1) that ``level``'s values go through first; None when
        there is none (combinational)."""
        return next((k + 1 for k, boundary in enumerate(self._boundaries) if level <= boundary),
                    None)

    @property
    def stage_levels(self):
        """For each register stage, the first and last level it follows."""
        starts = (0,) + tuple(boundary + 1 for boundary in self._boundaries)
        return tuple(zip(starts, self._boundaries))

    @property
    def feature_ports(self):
        return [getattr(self, f"x{i}") for i in range(len(self._config.model.features))]


class ThresholdUnit(_Common, wiring.Component):
    """One threshold unit, ``y = (w . x + b > 0)``, with a valid/ready handshake.

    Ports (internal names; :mod:`thresh2hdl.emit.verilog` gives them the model's names):
    ``in_valid``, ``in_ready``, ``x0`` .. ``x{N-1}`` (each at its input format),
    ``out_valid``, ``out_ready``, ``y`` and, unless omitted, ``score`` (signed).
    """

    def __init__(self, config):
        self._analysis = self._setup(config, analyse, lambda plan: plan.final_level)
        bits = config.split_bits
        self._split_parts = {} if bits is None else _split_parts(self._analysis, bits)
        scores = [("score", self._analysis.score_bits)] if self._analysis.has_score else []
        super().__init__(wiring.Signature(_members(config.model, 1, scores, config)))

    @property
    def analysis(self):
        return self._analysis

    @property
    def score_ports(self):
        return [self.score] if self._analysis.has_score else []

    @property
    def split_parts(self):
        """With split adders, the part count of every split adder (empty: nothing split)."""
        return dict(self._split_parts)

    @property
    def _result(self):
        """The node the decision reads: the score (also with loadable weights, whose bias is
        not a constant to compare with), else the tree's root; None when every weight is 0."""
        analysis = self._analysis
        if analysis.score_node is None:
            return None
        if analysis.has_score or analysis.loadable:
            return analysis.nodes[analysis.score_node]
        return analysis.nodes[analysis.tree_root]

    @property
    def result_parts(self):
        """Parts of the result (the score, else the tree's root): the outputs come
        ``carry_registers`` stages later for each part past the first."""
        result = self._result
        return 1 if result is None else self._split_parts.get(result.name, 1)

    @property
    def latency(self):
        return self._config.pipeline + (self.result_parts - 1) * self._config.carry_registers

    def elaborate(self, platform):
        m = Module()
        analysis, config = self._analysis, self._config
        advance = _handshake(m, self, self.latency)
        stages = _Stages(m, advance, self._boundaries)
        features = _guard_inputs(m, stages, self.feature_ports, config)
        if config.range_flag:
            m.d.comb += self.out_of_range.eq(stages.at(GUARD_FLAG, self.latency))
        node = self._result
        if node is None:
            # Every weight is zero: the outputs are constants, valid whenever a result is.
            m.d.comb += self.y.eq(analysis.bias > 0)
            if analysis.has_score:
                m.d.comb += self.score.eq(analysis.bias)
            return m
        bits, skew = config.split_bits or 0, config.carry_registers   # 0: nothing split
        if self._split_parts:
            _build_split_tree(m, stages, analysis, features, self._split_parts, bits, skew)
        else:
            store = _WeightStore(m, self, config) if analysis.loadable else None
            _build_tree(m, stages, analysis, features,
                        weights=store and store.weights[0], bias=store and store.biases[0])
        view = _Parts(m, stages, analysis, self._split_parts, bits)
        final_stage = stages.stage_of(analysis.final_level)
        count = self.result_parts
        tests_score = analysis.has_score or analysis.loadable
        # The decision from the result's parts as they arrive, each compared (or tested for
        # zero) in its own stage, the parts below deciding only where it is equal.
        below = None      # the decision of the parts below, registered up to this stage
        for j in range(count):
            at = final_stage + j * skew
            is_top = j == count - 1
            part = view.top(node.index, j, at) if is_top else view.middle(node.index, j, at)
            step = Signal(name="decision" if count == 1 else f"decision_p{j}")
            if tests_score:
                # the score is positive: nonzero and, at the top, not negative
                nonzero = part.any() if below is None else below | part.any()
                m.d.comb += step.eq(~part[-1] & nonzero if is_top and node.is_signed
                                    else nonzero)
            else:
                # root > threshold (or <), from the top: the highest part that differs decides
                if is_top:
                    limit = analysis.threshold >> (j * bits)
                    lo, hi = node.lo >> (j * bits), node.hi >> (j * bits)
                else:
                    limit, lo, hi = ((analysis.threshold >> (j * bits)) % (1 << bits), 0,
                                     (1 << bits) - 1)
                beyond = _beyond(part, limit, node.sign > 0, lo, hi)
                if below is not None and lo <= limit <= hi:
                    beyond = beyond | ((part == limit) & below)
                m.d.comb += step.eq(beyond)
            stages.put(step.name, step, at)
            if not is_top:
                below = stages.at(step.name, at + skew)
        m.d.comb += self.y.eq(stages.at(step.name, self.latency))
        if analysis.has_score and count == 1:
            m.d.comb += self.score.eq(stages.at(node.name, self.latency))
        elif analysis.has_score:
            whole = Cat(*[view.middle(node.index, j, self.latency) for j in range(count - 1)],
                        view.top(node.index, count - 1, self.latency))
            score = Signal(signed(analysis.score_bits), name="score_split")
            m.d.comb += score.eq(whole.as_signed() if node.is_signed else whole)
            m.d.comb += self.score.eq(score)
        return m


class ThresholdBank(_Common, wiring.Component):
    """Units sharing the inputs; ``y`` is the index of the largest score (ties: lowest index).

    Ports as :class:`ThresholdUnit`, with ``y`` the class index and, unless the score port is
    omitted, ``score0`` .. ``score{U-1}`` (signed), one per unit.
    """

    def __init__(self, config):
        self._plan = self._setup(config, analyse_bank, lambda plan: plan.final_level)
        self._has_score_ports = config.model.ports.has_score
        scores = [(f"score{index}", unit.score_bits) for index, unit in
                  enumerate(self._plan.units)] if self._has_score_ports else []
        super().__init__(wiring.Signature(_members(config.model, self._plan.class_bits, scores,
                                                   config)))

    @property
    def plan(self):
        return self._plan

    @property
    def analysis(self):
        """The first unit's analysis (ranges per unit are in :attr:`plan`)."""
        return self._plan.units[0]

    @property
    def score_ports(self):
        if not self._has_score_ports:
            return []
        return [getattr(self, f"score{i}") for i in range(len(self._plan.units))]

    def elaborate(self, platform):
        m = Module()
        plan = self._plan
        advance = _handshake(m, self, self.latency)
        stages = _Stages(m, advance, self._boundaries)
        features = _guard_inputs(m, stages, self.feature_ports, self._config)
        if self._config.range_flag:
            m.d.comb += self.out_of_range.eq(stages.at(GUARD_FLAG, self.latency))
        scores = []
        store = _WeightStore(m, self, self._config) if self._config.loadable_weights else None
        for index, analysis in enumerate(plan.units):
            prefix = f"u{index}_"
            if store is not None:
                _build_tree(m, stages, analysis, features, prefix,
                            store.weights[index], store.biases[index])
                scores.append(prefix + analysis.nodes[analysis.score_node].name)
                continue
            if analysis.score_node is None:
                value = Signal(signed(analysis.score_bits), name=f"{prefix}score_const")
                m.d.comb += value.eq(analysis.bias)
                stages.put(value.name, value, 0)
                scores.append(value.name)
                continue
            _build_tree(m, stages, analysis, features, prefix)
            scores.append(prefix + analysis.nodes[analysis.score_node].name)
        # Argmax: a tree of comparisons; the left (lower index) wins ties.
        def merge(level, name, left_entry, right_entry):
            (_, left, left_index), (_, right, right_index) = left_entry, right_entry
            stage = stages.stage_of(level)
            a, b = stages.at(left, stage), stages.at(right, stage)
            width = max(len(a) + (not a.shape().signed), len(b) + (not b.shape().signed))
            score = Signal(signed(width), name=f"{name}_score")
            index = Signal(plan.class_bits, name=f"{name}_class")
            take_left = a >= b
            li = left_index if isinstance(left_index, Const) else stages.at(left_index, stage)
            ri = right_index if isinstance(right_index, Const) else stages.at(right_index, stage)
            m.d.comb += [score.eq(Mux(take_left, a, b)), index.eq(Mux(take_left, li, ri))]
            stages.put(score.name, score, stage)
            stages.put(index.name, index, stage)
            return name, score.name, index.name

        _, _, best = plan.tournament(
            [(f"class{i}", name, Const(i, plan.class_bits)) for i, name in enumerate(scores)],
            merge)
        if isinstance(best, Const):
            m.d.comb += self.y.eq(best)
        else:
            m.d.comb += self.y.eq(stages.at(best, self.latency))
        for port, name in zip(self.score_ports, scores):
            m.d.comb += port.eq(stages.at(name, self.latency))
        return m


def sample_shape(model):
    """The serial input's format: one bus that carries every feature's declared format."""
    unsigned_widths = [f.bits for f in model.features if not f.signed]
    signed_widths = [f.bits for f in model.features if f.signed]
    if not signed_widths:
        return unsigned(max(unsigned_widths))
    return signed(max(signed_widths + [w + 1 for w in unsigned_widths]))


class SerialThreshold(_Common, wiring.Component):
    """One multiply-accumulate per unit and clock: features arrive one per valid beat, in the
    model's order, and the result follows the last beat by one cycle.

    Ports: ``in_valid``, ``in_ready``, ``x`` (every feature in turn, at :func:`sample_shape`),
    ``out_valid``, ``out_ready``, ``y`` (decision, or class index for a bank) and the scores
    as in :class:`ThresholdUnit` / :class:`ThresholdBank`. The beat count restarts at reset.
    Beats before the last are taken even while a result waits on ``out_ready``; the last beat
    waits until the result register is free.
    """

    def __init__(self, config):
        if not isinstance(config, UnitConfig):
            raise TypeError(f"config must be a UnitConfig, not {type(config).__name__}")
        self._config = config
        model = config.model
        if model.is_bank:
            self._plan = analyse_bank(model, score_bits=config.score_bits, arch="serial",
                                      **_loadable(config))
            units = self._plan.units
            decision_bits = self._plan.class_bits
        else:
            self._plan = None
            units = (analyse(model, score_bits=config.score_bits, arch="serial",
                             **_loadable(config)),)
            decision_bits = 1
        self._units = units
        self._boundaries = (0,)
        self._levels = 1
        if config.pipeline == FULL_PIPELINE:
            self._config = replace(config, pipeline=1)
        if model.ports.has_score:
            names = ["score"] if not model.is_bank else \
                [f"score{i}" for i in range(len(units))]
            scores = [(name, unit.score_bits) for name, unit in zip(names, units)]
        else:
            scores = []
        members = {"in_valid": In(1), "in_ready": Out(1), **_write_members(config),
                   "x": In(sample_shape(model)),
                   "out_valid": Out(1), "out_ready": In(1), "y": Out(decision_bits)}
        members.update(_flag_member(config))
        members.update({name: Out(signed(bits)) for name, bits in scores})
        super().__init__(wiring.Signature(members))

    @property
    def plan(self):
        """The bank's plan (None for one unit)."""
        return self._plan

    @property
    def analysis(self):
        return self._units[0]

    @property
    def beats(self):
        """Valid beats (features) per result."""
        return len(self._config.model.features)

    @property
    def feature_ports(self):
        return [self.x]

    @property
    def score_ports(self):
        if not self._config.model.ports.has_score:
            return []
        if self._plan is None:
            return [self.score]
        return [getattr(self, f"score{i}") for i in range(len(self._units))]

    def _guard_sample(self, m, beat, first, last, finish, transfer):
        """The sample as the arithmetic sees it (clamped to this beat's feature's declared
        range where the guard clamps) and the flag of the result: set when any beat of the
        input was outside its range, registered with the result."""
        guard, count = self._config.guard, self.beats
        if not guard.needed:
            if self._config.range_flag:
                m.d.comb += self.out_of_range.eq(0)
            return self.x

        def by_beat(values):
            chosen = Const(values[-1], self.x.shape())
            for k in range(count - 2, -1, -1):
                chosen = Mux(beat == k, values[k], chosen)
            return chosen

        los = [lo for lo, _ in guard.feature_ranges]
        his = [hi for _, hi in guard.feature_ranges]
        lo_now, hi_now = Signal(self.x.shape(), name="range_lo"), \
            Signal(self.x.shape(), name="range_hi")
        m.d.comb += [lo_now.eq(by_beat(los)), hi_now.eq(by_beat(his))]
        below, above = Signal(name="below_range"), Signal(name="above_range")
        m.d.comb += [below.eq(self.x < lo_now), above.eq(self.x > hi_now)]
        sample = self.x
        if guard.clamp:
            sample = Signal(self.x.shape(), name="sample_clamped")
            m.d.comb += sample.eq(Mux(below, lo_now, Mux(above, hi_now, self.x)))
        if self._config.range_flag:
            seen = Signal(name="outside_seen") if count > 1 else None
            now = Signal(name="outside_now")
            if count > 1:
                m.d.comb += now.eq(below | above | (seen & ~first))
                with m.If(transfer & ~last):
                    m.d.sync += seen.eq(now)
            else:
                m.d.comb += now.eq(below | above)
            flag = Signal(name=register_name(GUARD_FLAG, 1), reset_less=True)
            with m.If(finish):
                m.d.sync += flag.eq(now)
            m.d.comb += self.out_of_range.eq(flag)
        return sample

    def _constant_mac(self, m, analysis, prefix, beat, start, total, sample):
        """``total = start + w[beat] * x`` for the trained weights."""
        node, count = analysis.node, self.beats
        # The weight's magnitude multiplies, its sign picks add or subtract: a
        # ``start + ~p + 1`` on the carry chain costs no more than ``start + p``. Measured once
        # while developing it (Yosys 0.70, iCE40, the unit of benchmarks/cost.py): 284 LUT4
        # against 310 with a signed multiplier.
        magnitudes = [abs(w) for w in analysis.weights]
        negative = [int(w < 0) for w in analysis.weights]
        magnitude = Signal(_shape(node("magnitude")), name=prefix + "magnitude")
        subtract = Signal(name=prefix + "subtract")
        if count > 1:
            magnitude_of = Const(magnitudes[-1], magnitude.shape())
            subtract_of = Const(negative[-1], 1)
            for k in range(count - 2, -1, -1):
                magnitude_of = Mux(beat == k, magnitudes[k], magnitude_of)
                subtract_of = Mux(beat == k, negative[k], subtract_of)
        else:
            magnitude_of, subtract_of = magnitudes[0], negative[0]
        product = Signal(_shape(node("product")), name=prefix + "product")
        extended = product if product.shape().signed else \
            Cat(product, Const(0, 1)).as_signed()
        m.d.comb += [magnitude.eq(magnitude_of), subtract.eq(subtract_of),
                     product.eq(sample * magnitude),
                     total.eq(start + Mux(subtract, ~extended, extended) + subtract)]

    def elaborate(self, platform):
        m = Module()
        count = self.beats
        out_valid = Signal(name=valid_name(1))
        advance = Signal()
        transfer = Signal()
        if count > 1:
            beat = Signal(range(count), name="beat")
            first, last = Signal(name="first_beat"), Signal(name="last_beat")
            m.d.comb += [first.eq(beat == 0), last.eq(beat == count - 1)]
            with m.If(transfer):
                m.d.sync += beat.eq(Mux(last, 0, beat + 1))
        else:
            beat, first, last = None, Const(1), Const(1)
        m.d.comb += [advance.eq(self.out_ready | ~out_valid),
                     self.in_ready.eq(advance | ~last), transfer.eq(self.in_valid & self.in_ready),
                     self.out_valid.eq(out_valid)]
        finish = Signal(name="finish")
        m.d.comb += finish.eq(transfer & last)
        with m.If(advance):
            m.d.sync += out_valid.eq(finish)
        sample = self._guard_sample(m, beat, first, last, finish, transfer)
        scores = []
        store = _WeightStore(m, self, self._config) if self._config.loadable_weights else None
        for index, analysis in enumerate(self._units):
            prefix = "" if self._plan is None else f"u{index}_"
            node = analysis.node
            start = Signal(_shape(node("accumulator")), name=prefix + "accumulator_in")
            total = Signal(_shape(node("sum")), name=prefix + "sum")
            if store is not None:
                # Loaded weights: the register of this beat's feature times the sample.
                registers = store.weights[index]
                weight = Signal(_shape(node("weight")), name=prefix + "weight")
                choice = registers[-1]
                for k in range(count - 2, -1, -1):
                    choice = Mux(beat == k, registers[k], choice)
                product = Signal(_shape(node("product")), name=prefix + "product")
                m.d.comb += [weight.eq(choice), product.eq(sample * weight),
                             total.eq(start + product)]
                bias = store.biases[index]
            else:
                bias = analysis.bias
                self._constant_mac(m, analysis, prefix, beat, start, total, sample)
            if count > 1:
                held = Signal(_shape(node("accumulator")), name=prefix + "accumulator",
                              reset_less=True)
                with m.If(transfer & ~last):   # the last beat's sum goes to the result
                    m.d.sync += held.eq(total)
                m.d.comb += start.eq(Mux(first, bias, held))
            else:
                m.d.comb += start.eq(bias)
            if analysis.has_score:
                score = Signal(signed(analysis.score_bits), name=prefix + "score_r1",
                               reset_less=True)
                with m.If(finish):
                    m.d.sync += score.eq(total)
                scores.append(score)
            if self._plan is None:
                decision = Signal(name="decision_r1", reset_less=True)
                with m.If(finish):
                    m.d.sync += decision.eq(total > 0)
                m.d.comb += self.y.eq(decision)
        for port, score in zip(self.score_ports, scores):
            m.d.comb += port.eq(score)
        if self._plan is not None:
            # Argmax of the held scores, as planned (the lower index wins ties).
            def merge(level, name, left_entry, right_entry):
                (_, a, left_index), (_, b, right_index) = left_entry, right_entry
                width = max(len(a) + (not a.shape().signed), len(b) + (not b.shape().signed))
                best = Signal(signed(width), name=f"{name}_score")
                best_class = Signal(self._plan.class_bits, name=f"{name}_class")
                take_left = a >= b
                m.d.comb += [best.eq(Mux(take_left, a, b)),
                             best_class.eq(Mux(take_left, left_index, right_index))]
                return name, best, best_class

            _, _, best = self._plan.tournament(
                [(f"class{i}", score, Const(i, self._plan.class_bits))
                 for i, score in enumerate(scores)], merge)
            m.d.comb += self.y.eq(best)
        return m


def make_component(config):
    """The component for a model: one unit, or a bank of units with an argmax; the serial
    architecture (either) is a :class:`SerialThreshold`."""
    if config.arch == "serial":
        return SerialThreshold(config)
    if config.model.is_bank:
        return ThresholdBank(config)
    return ThresholdUnit(config)
