"""Threshold units as Amaranth components: parallel adder trees at exact widths.

Every node of a tree has the width the range analysis computed for it, and no more; products
are ``x * |w|`` (or shifted inputs, for the multiplier-free architecture) with the sign folded
into the consuming adder. Register stages (``pipeline``) split the levels as evenly as they go,
the last one always on the outputs, and the whole pipeline stalls together on ``out_ready``
(valid/ready handshake). A bank of units shares the inputs and decides by argmax, ties to the
lowest index.
"""

from dataclasses import dataclass

from amaranth.hdl import Const, Module, Mux, Shape, Signal, signed, unsigned
from amaranth.lib import wiring
from amaranth.lib.wiring import In, Out

from .errors import InputError
from .model import Model
from .ranges import ARCHITECTURES, analyse, analyse_bank

__all__ = ["UnitConfig", "ThresholdUnit", "ThresholdBank", "make_component"]

MAX_PIPELINE_NOTE = "one register stage per level, the products' included, plus one on the " \
                    "outputs"


@dataclass(frozen=True)
class UnitConfig:
    """What to build: the model, register stages, an optional wider score port, architecture."""

    model: Model
    pipeline: int = 1
    score_bits: int | None = None
    arch: str = "tree"

    def __post_init__(self):
        if not isinstance(self.model, Model):
            raise TypeError(f"model must be a Model, not {type(self.model).__name__}")
        if (not isinstance(self.pipeline, int) or isinstance(self.pipeline, bool)
                or self.pipeline < 0):
            raise InputError(f"must be a non-negative integer, not {self.pipeline!r}",
                             field="pipeline")
        if self.score_bits is not None and (not isinstance(self.score_bits, int)
                                            or not 1 <= self.score_bits <= 128):
            raise InputError(f"must be an integer from 1 to 128, not {self.score_bits!r}",
                             field="score_bits")
        if self.arch not in ARCHITECTURES:
            raise InputError(f"must be one of {', '.join(ARCHITECTURES)}, not {self.arch!r}",
                             field="arch")


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
        registers leave out: they carry ``value >> shift`` under the name ``{name}_r{k}``
        (otherwise Yosys drops the constant flops and, with them, the register's name)."""
        self.values[(name, stage)] = value
        self.produced[name] = (stage, value.shape(), shift)

    def at(self, name, stage):
        first, shape, shift = self.produced[name]
        carried = self.values[(name, first)][shift:] if shift else None
        for k in range(first + 1, stage + 1):
            if (name, k) not in self.values:
                register = Signal(Shape(shape.width - shift, shape.signed), name=f"{name}_r{k}",
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
    valid = [Signal(name=f"valid_s{k + 1}") for k in range(latency)]
    m.d.comb += [advance.eq(component.out_ready | ~valid[-1]), component.in_ready.eq(advance),
                 component.out_valid.eq(valid[-1])]
    with m.If(advance):
        m.d.sync += valid[0].eq(component.in_valid)
        m.d.sync += [valid[k].eq(valid[k - 1]) for k in range(1, latency)]
    return advance


def _build_tree(m, stages, analysis, features, prefix=""):
    """Every node of one unit's plan, each in the stage of its level. Returns the stage map."""
    for node in analysis.nodes:
        stage = stages.stage_of(node.level)
        value = Signal(_shape(node), name=prefix + node.name)
        if node.kind == "product":
            x = features[node.feature]
            magnitude = node.magnitude
            if magnitude & (magnitude - 1) == 0:
                expr = x << (magnitude.bit_length() - 1)
            else:
                expr = x * Const(magnitude)
        else:
            operands = [stages.at(prefix + analysis.nodes[c].name, stage) for c in node.children]
            if node.kind == "add":
                expr = operands[0] + operands[1]
            elif node.kind == "sub":
                expr = operands[0] - operands[1]
            elif node.kind == "rsub":
                expr = operands[1] - operands[0]
            else:  # bias
                child = analysis.nodes[node.children[0]]
                bias = Const(node.constant)
                expr = operands[0] + bias if child.sign > 0 else bias - operands[0]
        m.d.comb += value.eq(expr)
        stages.put(prefix + node.name, value, stage, node.register_shift)


def _check_pipeline(component, pipeline, final_level):
    most = final_level + 1
    if pipeline > most:
        component._MustUse__silence = True   # refused before use: no "never elaborated" warning
        raise InputError(f"{pipeline} register stages requested, but this design has "
                         f"{most - 1} combinational levels after the products, so at most "
                         f"{most} ({MAX_PIPELINE_NOTE})", field="pipeline")


def _members(model, decision_bits, scores):
    """The ports: handshake, one input per feature at its format, the decision, the scores."""
    members = {"in_valid": In(1), "in_ready": Out(1)}
    members.update({f"x{index}": In(signed(f.bits) if f.signed else unsigned(f.bits))
                    for index, f in enumerate(model.features)})
    members.update({"out_valid": Out(1), "out_ready": In(1), "y": Out(decision_bits)})
    members.update({name: Out(signed(bits)) for name, bits in scores})
    return members


class _Common:
    def _setup(self, config, plan_of, final_level_of):
        """Validate and store the configuration, plan the design and its register stages."""
        if not isinstance(config, UnitConfig):
            raise TypeError(f"config must be a UnitConfig, not {type(config).__name__}")
        self._config = config
        plan = plan_of(config.model, score_bits=config.score_bits, arch=config.arch)
        _check_pipeline(self, config.pipeline, final_level_of(plan))
        self._boundaries = _boundaries(final_level_of(plan), config.pipeline)
        return plan

    @property
    def config(self):
        return self._config

    @property
    def latency(self):
        """Cycles from an accepted input to its result on the outputs (0: combinational)."""
        return self._config.pipeline

    @property
    def register_boundaries(self):
        """Levels after which a register stage sits (level 0 = products)."""
        return self._boundaries

    @property
    def feature_ports(self):
        return [getattr(self, f"x{i}") for i in range(len(self._config.model.features))]


class ThresholdUnit(_Common, wiring.Component):
    """One threshold unit, ``y = (w . x + b > 0)``, with a valid/ready handshake.

    Ports (internal names; :mod:`thresh2hdl.verilog` gives them the model's names):
    ``in_valid``, ``in_ready``, ``x0`` .. ``x{N-1}`` (each at its input format),
    ``out_valid``, ``out_ready``, ``y`` and, unless omitted, ``score`` (signed).
    """

    def __init__(self, config):
        self._analysis = self._setup(config, analyse, lambda plan: plan.final_level)
        scores = [("score", self._analysis.score_bits)] if self._analysis.has_score else []
        super().__init__(wiring.Signature(_members(config.model, 1, scores)))

    @property
    def analysis(self):
        return self._analysis

    @property
    def score_ports(self):
        return [self.score] if self._analysis.has_score else []

    def elaborate(self, platform):
        m = Module()
        analysis = self._analysis
        advance = _handshake(m, self, self.latency)
        stages = _Stages(m, advance, self._boundaries)
        if analysis.score_node is None:
            # Every weight is zero: the outputs are constants, valid whenever a result is.
            m.d.comb += self.y.eq(analysis.bias > 0)
            if analysis.has_score:
                m.d.comb += self.score.eq(analysis.bias)
            return m
        _build_tree(m, stages, analysis, self.feature_ports)
        final_stage = stages.stage_of(analysis.final_level)
        decision = Signal(name="decision")
        if analysis.has_score:
            score_node = analysis.nodes[analysis.score_node]
            score = stages.at(score_node.name, final_stage)
            if score_node.is_signed:
                m.d.comb += decision.eq(~score[-1] & score.any())
            else:
                m.d.comb += decision.eq(score.any())
        else:
            root = analysis.nodes[analysis.tree_root]
            value = stages.at(root.name, final_stage)
            if root.sign > 0:
                m.d.comb += decision.eq(value > analysis.threshold)
            else:
                m.d.comb += decision.eq(value < analysis.threshold)
        stages.put("decision", decision, final_stage)
        m.d.comb += self.y.eq(stages.at("decision", self.latency))
        if analysis.has_score:
            m.d.comb += self.score.eq(stages.at(analysis.nodes[analysis.score_node].name,
                                                self.latency))
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
        super().__init__(wiring.Signature(_members(config.model, self._plan.class_bits, scores)))

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
        scores = []
        for index, analysis in enumerate(plan.units):
            prefix = f"u{index}_"
            if analysis.score_node is None:
                value = Signal(signed(analysis.score_bits), name=f"{prefix}score_const")
                m.d.comb += value.eq(analysis.bias)
                stages.put(value.name, value, 0)
                scores.append(value.name)
                continue
            _build_tree(m, stages, analysis, self.feature_ports, prefix)
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


def make_component(config):
    """The component for a model: one unit, or a bank of units with an argmax."""
    if config.model.is_bank:
        return ThresholdBank(config)
    return ThresholdUnit(config)
