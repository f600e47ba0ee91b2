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
from ..names import unit_prefix
from ..analysis import analyse, analyse_bank
from .config import FULL_PIPELINE, UnitConfig, sample_shape
from .stream import stream_layout
from .learning import learning_members
from .weights import weight_addresses, write_members

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
    split_parts: Mapping         # part count of every split adder, by node name as built
                                 # (a bank's with its unit prefix; {}: none)
    result_parts: int            # parts of the result the decision reads (1: whole; a bank:
                                 # the most of any unit's score, which the argmax waits for)
    latency: int                 # cycles from an accepted input to its result (0: combinational)
    beats: int                   # valid beats per result (serial: one per feature)
    decision_bits: int           # width of ``y``: 1, or a bank's class index
    score_outputs: tuple         # (signature member, bits) of every score output
    signature: wiring.Signature  # the ports, as the component has them
    stream: object = None        # the AXI4-Stream form's StreamLayout (None: plain ports)

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
    prefixes = [""] if bank is None else [unit_prefix(i) for i in range(len(analyses))]
    parts, result_parts = {}, 1
    if config.split_bits is not None:
        for prefix, unit in zip(prefixes, analyses):
            own = adder_parts(unit, config.split_bits)
            parts.update({prefix + name: count for name, count in own.items()})
            result = result_node(unit)
            if result is not None:
                result_parts = max(result_parts, own.get(result.name, 1))
    names = ["score"] if bank is None else [f"score{i}" for i in range(len(analyses))]
    scores = tuple((name, unit.score_bits) for name, unit in zip(names, analyses)) \
        if model.ports.has_score else ()
    decision_bits = 1 if bank is None else bank.class_bits
    signature = _signature(config, decision_bits, scores)
    return DesignPlan(
        kind=design_kind(config), config=config, unit_analyses=analyses, bank=bank,
        levels=levels, register_boundaries=register_boundaries(levels - 1, config.pipeline,
                                                    level_weights(levels, bank, _guarded(config),
                                                                  config.dsp_products is not None)),
        split_parts=MappingProxyType(parts), result_parts=result_parts,
        latency=config.pipeline + (result_parts - 1) * config.carry_registers,
        beats=len(model.features) if config.arch == "serial" else 1,
        decision_bits=decision_bits, score_outputs=scores, signature=signature,
        stream=stream_layout(signature) if config.interface == "axi-stream" else None)


def _guarded(config):
    """Whether the input guard puts logic at level 0 of a parallel datapath."""
    guard = config.guard
    return config.arch != "serial" and guard.needed and (guard.clamp or guard.flag)


def _declared(bits):
    return (-(1 << (bits - 1)), (1 << (bits - 1)) - 1)


def _loadable(config):
    """Keyword arguments of the range analysis for the configuration's weights."""
    if not config.loadable_weights:
        return {}
    rows = {} if config.dsp_products is None else {"dsp_products": config.dsp_products}
    return {"weight_range": _declared(config.weight_bits),
            "bias_range": _declared(config.bias_bits), **rows}


def _check_pipeline(config, levels):
    if config.pipeline > levels:
        argmax = ", the argmax" if config.model.is_bank else ""
        raise InputError(f"{config.pipeline} register stages requested, but this design has "
                         f"{levels} levels (0 the products, then the adders, the bias and "
                         f"decision{argmax}), so at most {levels}: use {levels} or fewer, or "
                         f"{FULL_PIPELINE!r} for one after every level", field="pipeline")


# The delay of an argmax comparison against an adder level's, as the register stages are
# spread: a carry chain across the score's width and the route of its result to every
# multiplexer of the selection. Measured here (Yosys 0.70, nextpnr 0.11, iCE40 UP5K, 64-input
# shift-add banks): a comparison and its selection in one stage took 13 to 18.6 ns, an adder
# level 6 to 8 ns.
ARGMAX_LEVEL_WEIGHT = 2
# And of the input guard at level 0 (the comparisons with a feature's bounds, the clamp's
# multiplexer, the flag's first OR): a clamp and one adder level after it took 20.4 ns in one
# stage on the same bank, where an adder level takes 6 to 8 ns.
GUARD_LEVEL_WEIGHT = 2


def register_boundaries(final_level, pipeline, weights=None):
    """Levels after which a register stage sits, the last always the final level.

    With one weight a level (None), as evenly as the count goes. With ``weights`` (the
    levels' delays) that differ, the slowest stage is made as fast as it can be (the least
    largest sum of a stage's weights) and, within that, the stages as even as they can be
    (the least sum of squares)."""
    levels = final_level + 1
    if pipeline == 0 or weights is None or len(set(weights)) == 1:
        return tuple(-(-(j * levels) // pipeline) - 1 for j in range(1, pipeline + 1))
    ends = [0]
    for weight in weights:
        ends.append(ends[-1] + weight)
    bound = next(b for b in range(max(weights), ends[-1] + 1)
                 if _stages_needed(weights, b) <= pipeline)
    # best[k][i]: (sum of squares, last boundary) of the first i levels in k stages.
    best = [{0: (0, None)}]
    for k in range(1, pipeline + 1):
        row = {}
        for i in range(k, levels + 1):
            options = [(cost + (ends[i] - ends[start]) ** 2, start)
                       for start, (cost, _) in best[k - 1].items()
                       if start < i and ends[i] - ends[start] <= bound]
            if options:
                row[i] = min(options)
        best.append(row)
    boundaries, i = [], levels
    for k in range(pipeline, 0, -1):
        boundaries.append(i - 1)
        i = best[k][i][1]
    return tuple(reversed(boundaries))


def _stages_needed(weights, bound):
    """The fewest stages, none heavier than ``bound``, that the levels fit in."""
    count, load = 1, 0
    for weight in weights:
        if load + weight > bound:
            count, load = count + 1, 0
        load += weight
    return count


# Products as rows (``dsp_products``): level 0 weighs two, so that a register stage always
# follows it (a row's AND then becomes its flip-flop's synchronous reset, no LUT of its own),
# and so does the last level, the bias adder of the full score width and the decision over
# it (19.9 ns alone on the UP5K, where a level of the rows' adders took 7 to 8 ns: measured
# with benchmarks/learning_cost.py's unit, Yosys 0.70, nextpnr 0.11.1).
ROWS_END_LEVEL_WEIGHT = 2


def level_weights(levels, bank, guarded=False, rows=False):
    """The delay weight of each level: an argmax comparison :data:`ARGMAX_LEVEL_WEIGHT`, and
    so level 0 when the input guard has logic there (``guarded``); with products as
    ``rows``, the first and last levels :data:`ROWS_END_LEVEL_WEIGHT`; any other level (an
    adder, an argmax selection) one."""
    first_argmax = levels if bank is None or levels == 1 else bank.score_level + 1
    weights = [ARGMAX_LEVEL_WEIGHT if level >= first_argmax and (level - first_argmax) % 2 == 0
               else 1 for level in range(levels)]
    if guarded and levels > 1:
        weights[0] = GUARD_LEVEL_WEIGHT
    if rows and levels > 1:
        weights[0] = max(weights[0], ROWS_END_LEVEL_WEIGHT)
        weights[-1] = ROWS_END_LEVEL_WEIGHT
    return weights


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
    members = {"ce": In(1)} if config.clock_enable else {}
    members.update({"in_valid": In(1), "in_ready": Out(1), **write_members(config)})
    if config.arch == "serial":
        members["x"] = In(sample_shape(model))
    else:
        members.update({f"x{index}": In(signed(f.bits) if f.signed else unsigned(f.bits))
                        for index, f in enumerate(model.features)})
    members.update({"out_valid": Out(1), "out_ready": In(1), "y": Out(decision_bits)})
    if config.range_flag:
        members["out_of_range"] = Out(1)
    members.update({name: Out(signed(bits)) for name, bits in scores})
    members.update(learning_members(config, weight_addresses(model)))
    return wiring.Signature(members)
