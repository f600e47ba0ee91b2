"""The plan of a design, apart from its hardware: one :class:`DesignPlan` for every kind (one
unit, a bank with its argmax, the serial architecture), with the same attributes.

Whatever only reads facts about a design (its latency, levels, register stages, ports, the
ranges of its values) reads them here, from :func:`plan_design`, without building an Amaranth
component; the components build theirs from it (``component.design``).
"""

from collections.abc import Mapping
from dataclasses import dataclass, replace
from types import MappingProxyType

from amaranth.hdl import signed, unsigned
from amaranth.lib import wiring
from amaranth.lib.wiring import In, Out

from ..errors import InputError
from ..analysis import analyse, analyse_bank
from .config import FULL_PIPELINE, UnitConfig, sample_shape
from .weights import write_members

__all__ = ["DesignPlan", "plan_design", "design_kind", "register_boundaries", "adder_parts",
           "result_node"]


@dataclass(frozen=True, eq=False)
class DesignPlan:
    """What a design is before it is hardware; the same attributes for every kind."""

    kind: str                    # "unit", "bank" (units and an argmax) or "serial"
    config: UnitConfig           # as built: ``pipeline`` is a count (FULL_PIPELINE resolved)
    unit_analyses: tuple         # every unit's Analysis, in unit order (one for a single unit)
    bank: object                 # the bank's BankPlan (scores and argmax), None for one unit
    levels: int                  # Analysis.levels / BankPlan.levels: the most register stages
    register_boundaries: tuple   # levels after which a register stage sits (level 0: products)
    split_parts: Mapping         # part count of every split adder, by node name ({}: none)
    result_parts: int            # parts of the result the decision reads (1: whole)
    latency: int                 # cycles from an accepted input to its result (0: combinational)
    beats: int                   # valid beats per result (serial: one per feature)
    decision_bits: int           # width of ``y``: 1, or a bank's class index
    score_outputs: tuple         # (signature member, bits) of every score output
    signature: wiring.Signature  # the ports, as the component has them

    @property
    def analysis(self):
        """The first unit's analysis (every unit's: :attr:`unit_analyses`)."""
        return self.unit_analyses[0]

    @property
    def final_level(self):
        """The last level: the decision's, a bank's last argmax level's, serial's only one."""
        return self.levels - 1

    @property
    def feature_count(self):
        return len(self.config.model.features)

    @property
    def score_port_count(self):
        return len(self.score_outputs)

    def level_stage(self, level):
        """The register stage (from 1) that ``level``'s values go through first; None when
        there is none (combinational)."""
        return next((k + 1 for k, boundary in enumerate(self.register_boundaries)
                     if level <= boundary), None)

    @property
    def stage_levels(self):
        """For each register stage, the first and last level it follows."""
        starts = (0,) + tuple(boundary + 1 for boundary in self.register_boundaries)
        return tuple(zip(starts, self.register_boundaries))


def design_kind(config):
    """Which component builds ``config``: ``serial``, ``bank`` or ``unit``."""
    return "serial" if config.arch == "serial" else "bank" if config.model.is_bank else "unit"


def plan_design(config):
    """The :class:`DesignPlan` of ``config``; refuses (InputError) what cannot be built, such
    as more register stages than the design has levels."""
    if not isinstance(config, UnitConfig):
        raise TypeError(f"config must be a UnitConfig, not {type(config).__name__}")
    model = config.model
    options = dict(score_bits=config.score_bits, arch=config.arch, **_loadable(config))
    bank = analyse_bank(model, share_terms=config.share_terms, **options) \
        if model.is_bank else None
    analyses = tuple(bank.units) if bank is not None else (analyse(model, **options),)
    levels = bank.levels if bank is not None else analyses[0].levels
    if config.pipeline == FULL_PIPELINE:
        config = replace(config, pipeline=levels)
    _check_pipeline(config, levels)
    parts = {} if config.split_bits is None else adder_parts(analyses[0], config.split_bits)
    result = result_node(analyses[0]) if parts else None
    result_parts = 1 if result is None else parts.get(result.name, 1)
    names = ["score"] if bank is None else [f"score{i}" for i in range(len(analyses))]
    scores = tuple((name, unit.score_bits) for name, unit in zip(names, analyses)) \
        if model.ports.has_score else ()
    decision_bits = 1 if bank is None else bank.class_bits
    return DesignPlan(
        kind=design_kind(config), config=config, unit_analyses=analyses, bank=bank,
        levels=levels, register_boundaries=register_boundaries(levels - 1, config.pipeline),
        split_parts=MappingProxyType(parts), result_parts=result_parts,
        latency=config.pipeline + (result_parts - 1) * config.carry_registers,
        beats=len(model.features) if config.arch == "serial" else 1,
        decision_bits=decision_bits, score_outputs=scores,
        signature=_signature(config, decision_bits, scores))


def _declared(bits):
    return (-(1 << (bits - 1)), (1 << (bits - 1)) - 1)


def _loadable(config):
    """Keyword arguments of the range analysis for the configuration's weights."""
    if not config.loadable_weights:
        return {}
    return {"weight_range": _declared(config.weight_bits),
            "bias_range": _declared(config.bias_bits)}


def _check_pipeline(config, levels):
    if config.pipeline > levels:
        argmax = ", the argmax" if config.model.is_bank else ""
        raise InputError(f"{config.pipeline} register stages requested, but this design has "
                         f"{levels} levels (0 the products, then the adders, the bias and "
                         f"decision{argmax}), so at most {levels}: use {levels} or fewer, or "
                         f"{FULL_PIPELINE!r} for one after every level", field="pipeline")


def register_boundaries(final_level, pipeline):
    """Levels after which a register stage sits, as evenly as they go; the last is always the
    final level."""
    levels = final_level + 1
    return tuple(-(-(j * levels) // pipeline) - 1 for j in range(1, pipeline + 1))


def adder_parts(analysis, split_bits):
    """How many ``split_bits``-wide parts each split adder has: an adder wider than
    ``split_bits`` is cut into ``ceil(bits / split_bits)`` parts, the top one possibly
    narrower. Products and narrower adders are whole (fed by split adders, they are computed
    from their operands' low parts: their value fits, so arithmetic modulo the part is exact).
    """
    return {node.name: -(-node.bits // split_bits) for node in analysis.nodes
            if node.kind != "product" and node.bits > split_bits}


def result_node(analysis):
    """The node a unit's decision reads: the score (also with loadable weights, whose bias is
    not a constant to compare with), else the tree's root; None when every weight is 0."""
    if analysis.score_node is None:
        return None
    if analysis.has_score or analysis.loadable:
        return analysis.nodes[analysis.score_node]
    return analysis.nodes[analysis.tree_root]


def _signature(config, decision_bits, scores):
    """The ports: handshake, the weight write port when the weights are loadable, one input
    per feature at its format (serial: the one sample bus), the decision, the out-of-range
    flag when the guard has one, the scores."""
    model = config.model
    members = {"in_valid": In(1), "in_ready": Out(1), **write_members(config)}
    if config.arch == "serial":
        members["x"] = In(sample_shape(model))
    else:
        members.update({f"x{index}": In(signed(f.bits) if f.signed else unsigned(f.bits))
                        for index, f in enumerate(model.features)})
    members.update({"out_valid": Out(1), "out_ready": In(1), "y": Out(decision_bits)})
    if config.range_flag:
        members["out_of_range"] = Out(1)
    members.update({name: Out(signed(bits)) for name, bits in scores})
    return wiring.Signature(members)
