"""The threshold unit as an Amaranth component: a parallel adder tree at exact widths.

Every node of the tree has the width the range analysis computed for it, and no more; products
are ``x * |w|`` with the sign folded into the consuming adder. Register stages (``pipeline``)
split the tree's levels as evenly as they go, the last one always on the outputs, and the whole
pipeline stalls together on ``out_ready`` (valid/ready handshake).
"""

from dataclasses import dataclass

from amaranth.hdl import Const, Module, Signal, signed, unsigned
from amaranth.lib import wiring
from amaranth.lib.wiring import In, Out

from .errors import InputError
from .model import Model
from .ranges import analyse

__all__ = ["UnitConfig", "ThresholdUnit", "MAX_PIPELINE_NOTE"]

MAX_PIPELINE_NOTE = "one register stage per tree level, plus one on the products and one on " \
                    "the outputs"


@dataclass(frozen=True)
class UnitConfig:
    """What to build: the model, register stages, and an optional wider score port."""

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


def _shape(node):
    return signed(node.bits) if node.is_signed else unsigned(node.bits)


class ThresholdUnit(wiring.Component):
    """One threshold unit, ``y = (w . x + b > 0)``, with a valid/ready handshake.

    Ports (internal names; :mod:`thresh2hdl.verilog` gives them the model's names):
    ``in_valid``, ``in_ready``, ``x0`` .. ``x{N-1}`` (each at its input format),
    ``out_valid``, ``out_ready``, ``y`` and, unless omitted, ``score`` (signed).
    """

    def __init__(self, config):
        if not isinstance(config, UnitConfig):
            raise TypeError(f"config must be a UnitConfig, not {type(config).__name__}")
        self._config = config
        self._analysis = analyse(config.model, score_bits=config.score_bits, arch=config.arch)
        most = self._analysis.final_level + 1
        if config.pipeline > most:
            self._MustUse__silence = True   # refused before use: no "never elaborated" warning
            raise InputError(f"{config.pipeline} register stages requested, but this unit has "
                             f"{most - 1} combinational levels after the products, so at most "
                             f"{most} ({MAX_PIPELINE_NOTE})", field="pipeline")
        # Register boundary after each of these levels; the last is always the final level.
        levels = self._analysis.final_level + 1
        self._boundaries = tuple(-(-(j * levels) // config.pipeline) - 1
                                 for j in range(1, config.pipeline + 1))
        members = {"in_valid": In(1), "in_ready": Out(1)}
        for index, feature in enumerate(config.model.features):
            members[f"x{index}"] = In(signed(feature.bits) if feature.signed
                                      else unsigned(feature.bits))
        members.update({"out_valid": Out(1), "out_ready": In(1), "y": Out(1)})
        if self._analysis.has_score:
            members["score"] = Out(signed(self._analysis.score_bits))
        super().__init__(wiring.Signature(members))

    @property
    def config(self):
        return self._config

    @property
    def analysis(self):
        return self._analysis

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

    def _stage_of(self, level):
        return sum(1 for boundary in self._boundaries if boundary < level)

    def elaborate(self, platform):
        m = Module()
        analysis = self._analysis
        latency = self.latency
        advance = Signal()

        if latency == 0:
            m.d.comb += [self.in_ready.eq(self.out_ready), self.out_valid.eq(self.in_valid)]
        else:
            valid = [Signal(name=f"valid_s{k + 1}") for k in range(latency)]
            m.d.comb += [advance.eq(self.out_ready | ~valid[-1]), self.in_ready.eq(advance),
                         self.out_valid.eq(valid[-1])]
            with m.If(advance):
                m.d.sync += valid[0].eq(self.in_valid)
                m.d.sync += [valid[k].eq(valid[k - 1]) for k in range(1, latency)]

        staged = {}   # (name, stage) -> value

        def delayed(name, value, shape, stage, wanted):
            """``value`` produced in ``stage``, carried through registers to ``wanted``."""
            staged[(name, stage)] = value
            for k in range(stage + 1, wanted + 1):
                if (name, k) not in staged:
                    register = Signal(shape, name=f"{name}_r{k}", reset_less=True)
                    with m.If(advance):
                        m.d.sync += register.eq(staged[(name, k - 1)])
                    staged[(name, k)] = register
            return staged[(name, wanted)]

        stage_of_node = {}

        def node_at(index, stage):
            node = analysis.nodes[index]
            return delayed(node.name, staged[(node.name, stage_of_node[index])], _shape(node),
                           stage_of_node[index], stage)

        features = self.feature_ports
        for node in analysis.nodes:
            stage = self._stage_of(node.level)
            stage_of_node[node.index] = stage
            value = Signal(_shape(node), name=node.name)
            if node.kind == "product":
                x = features[node.feature]
                magnitude = node.magnitude
                if magnitude & (magnitude - 1) == 0:
                    expr = x << (magnitude.bit_length() - 1)
                else:
                    expr = x * Const(magnitude)
            else:
                operands = [node_at(child, stage) for child in node.children]
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
            staged[(node.name, stage)] = value

        final_stage = self._stage_of(analysis.final_level)
        decision = Signal(name="decision")
        if analysis.score_node is None:
            # Every weight is zero: the outputs are constants, valid whenever a result is.
            m.d.comb += self.y.eq(analysis.bias > 0)
            if analysis.has_score:
                m.d.comb += self.score.eq(analysis.bias)
            return m
        if analysis.has_score:
            score = node_at(analysis.score_node, final_stage)
            if analysis.nodes[analysis.score_node].is_signed:
                m.d.comb += decision.eq(~score[-1] & score.any())
            else:
                m.d.comb += decision.eq(score.any())
        else:
            root = node_at(analysis.tree_root, final_stage)
            if analysis.nodes[analysis.tree_root].sign > 0:
                m.d.comb += decision.eq(root > analysis.threshold)
            else:
                m.d.comb += decision.eq(root < analysis.threshold)
        m.d.comb += self.y.eq(delayed("decision", decision, 1, final_stage, latency))

        if analysis.has_score:
            m.d.comb += self.score.eq(node_at(analysis.score_node, latency))
        return m
