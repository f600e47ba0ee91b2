"""Banks of units sharing the inputs, decided by argmax with ties to the lowest index."""

import itertools
import random
import re

import numpy as np
import pytest
from amaranth.hdl import ClockDomain, Module
from amaranth.sim import Simulator
from hypothesis import HealthCheck, given, settings, strategies as st

from helpers import require_tool, assert_lint_clean_and_agrees, bank_model
from thresh2hdl.hardware import (FULL_PIPELINE, ThresholdBank, UnitConfig, make_component,
                                  plan_design)
from thresh2hdl.errors import InputError
from thresh2hdl.app import BuildOptions
from thresh2hdl.verify.sim_amaranth import AmaranthBackend
from thresh2hdl.model.records import FeatureFormat, Model, PortNames, Unit
from thresh2hdl.analysis import analyse_bank
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.reports.tables import argmax_report, node_table
from thresh2hdl.verify.stimulus import make_stimulus
from thresh2hdl.verify.vectors import make_vectors
from thresh2hdl.emit.verilog import emit_verilog


def gold(weights, biases, x):
    """Argmax as written: the first index among the largest scores."""
    scores = [sum(w * v for w, v in zip(row, x)) + b for row, b in zip(weights, biases)]
    best = max(scores)
    return scores.index(best), scores


def test_argmax_ties_go_to_the_lowest_index():
    # Units 1 and 2 are identical, so they always tie; unit 0 never wins on these inputs.
    weights = [[-1, -1], [2, 1], [2, 1]]
    biases = [-40, 0, 0]
    model = bank_model(weights, biases)
    dut = ThresholdBank(UnitConfig(model, pipeline=2))
    rows = [list(x) for x in itertools.product(range(16), repeat=2)]
    top = Module()
    top.submodules.dut = dut
    top.domains.sync = ClockDomain("sync")
    seen = []

    async def testbench(ctx):
        for t in range(len(rows) + dut.latency):
            ctx.set(dut.in_valid, int(t < len(rows)))
            ctx.set(dut.out_ready, 1)
            for port, value in zip(dut.feature_ports, rows[min(t, len(rows) - 1)]):
                ctx.set(port, value)
            if ctx.get(dut.out_valid):
                seen.append((ctx.get(dut.y), [ctx.get(p) for p in dut.score_ports]))
            await ctx.tick()

    sim = Simulator(top)
    sim.add_clock(1e-6, domain="sync")
    sim.add_testbench(testbench)
    sim.run()
    assert seen == [gold(weights, biases, x) for x in rows]
    assert {y for y, _ in seen} <= {0, 1}


def test_bank_reference_matches_gold():
    weights, biases = [[3, -1, 2], [0, 4, -2], [1, 1, 1], [3, -1, 2]], [5, 0, -3, 5]
    model = bank_model(weights, biases)
    x = np.array(list(itertools.product(range(0, 16, 3), repeat=3)))
    ref = ReferenceModel.from_model(model)
    assert ref.decisions(x).tolist() == [gold(weights, biases, row)[0] for row in x]


banks = st.tuples(st.integers(2, 6), st.integers(1, 5)).flatmap(lambda shape: st.tuples(
    st.lists(st.lists(st.integers(-200, 200), min_size=shape[1], max_size=shape[1]),
             min_size=shape[0], max_size=shape[0]),
    st.lists(st.integers(-2000, 2000), min_size=shape[0], max_size=shape[0]),
    st.integers(1, 10), st.booleans(), st.booleans(), st.integers(0, 8),
    st.sampled_from(["tree", "shiftadd"]), st.one_of(st.none(), st.integers(2, 12)),
    st.integers(1, 3)))


def prepared(case, vectors=150):
    weights, biases, bits, is_signed, with_score, pipeline, arch, split, carry = case
    ports = PortNames() if with_score else PortNames(score="")
    model = bank_model(weights, biases, bits=bits, is_signed=is_signed, ports=ports)
    pipeline = min(pipeline, analyse_bank(model, arch=arch).final_level + 1)
    # Split adders need a register stage; carry registers apply only to split adders.
    split_options = {} if split is None else {"split_bits": split, "carry_registers": carry}
    dut = make_component(UnitConfig(model, pipeline=max(pipeline, int(split is not None)),
                                    arch=arch, **split_options))
    rows = make_vectors(dut.analysis, random_count=vectors,
                        others=dut.unit_analyses[1:]).array
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency,
                             valid_probability=0.8, ready_probability=0.7)
    return model, dut, stimulus


@settings(max_examples=20, deadline=None)
@given(banks)
def test_random_banks_agree_with_reference_in_amaranth(case):
    model, dut, stimulus = prepared(case)
    result = AmaranthBackend(dut).run(stimulus)
    assert result.check(stimulus).mismatch_count == 0


@pytest.mark.verilator
@pytest.mark.icarus
@settings(max_examples=4, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=banks)
def test_random_banks_lint_clean_and_agree_in_icarus_and_verilator(tmp_path_factory, case):
    # Independent simulators: Icarus Verilog 11 and Verilator 5.006 run the emitted file,
    # split adders among the options drawn.
    require_tool("verilator", "g++", "iverilog", "vvp")
    model, dut, stimulus = prepared(case)
    assert_lint_clean_and_agrees(tmp_path_factory.mktemp("bank"), model, dut, stimulus)


def test_bank_score_port_names_must_not_clash():
    with pytest.raises(ValueError, match="clashes"):
        Model(module="m", features=[FeatureFormat("score_a", 4)],
              units=[Unit("a", (1,), 0), Unit("b", (2,), 0)])


def test_report_names_every_node_where_the_verilog_holds_it():
    # Random units and banks of every architecture and option (seeded): each node's place in
    # the report is a wire the emitted Verilog declares, read with a pattern written here
    # (Verilog-2001 declarations, IEEE 1364-2005 12.3.3), or an input port shifted, or
    # explained (a constant, an unread value); a bank's nodes carry their unit's prefix.
    declaration = re.compile(r"^\s*(?:\(\*[^*]*\*\)\s*)?(?:input|output|wire|reg)\s+"
                             r"(?:wire\s+|reg\s+)?(?:signed\s+)?(?:\[\d+:\d+\]\s*)?(\w+)", re.M)
    rng = random.Random(7)
    designs = 0
    while designs < 14:
        features, units = rng.randint(1, 5), rng.choice([1, 2, 3])
        weights = [[rng.choice([0, 1, -1, 2, -4, 3, -5, 7, 12]) for _ in range(features)]
                   for _ in range(units)]
        names = [rng.choice([f"f{i}", f"p{i}", f"s1_{i}"]) for i in range(features)]
        options = {"arch": rng.choice(["tree", "shiftadd", "serial"])}
        if options["arch"] != "serial":
            options["pipeline"] = rng.choice([0, 1, 2, FULL_PIPELINE])
            if options["pipeline"] != 0 and rng.random() < 0.3:
                options["split_bits"] = rng.randint(3, 6)
        if options["arch"] != "shiftadd" and not options.get("split_bits") and rng.random() < 0.2:
            options.update(loadable_weights=True, pipeline=1)
        try:
            model = Model(module="m", features=[FeatureFormat(n, rng.randint(2, 8)) for n in names],
                          units=[Unit(f"c{k}", tuple(w), rng.choice([0, 3, -7])) for k, w in
                                 enumerate(weights)],
                          ports=PortNames() if rng.random() < 0.7 else PortNames(score=""))
            dut = make_component(UnitConfig(model, **options))
        except (ValueError, InputError):
            continue                 # a clash of names, or an option this design refuses
        designs += 1
        text = emit_verilog(dut, model)
        declared = set(declaration.findall(text))
        for node in node_table(dut, model, text):
            if model.is_bank:
                unit = [u.name for u in model.units].index(node["unit"])
                assert node["name"].startswith(f"u{unit}_")
            place = node["verilog"]
            if place.startswith(("none: ", "the constant ")):
                continue
            wires = re.findall(r"(?<![\w\[:])[A-Za-z_]\w*", place)
            assert wires and set(wires) <= declared, (options, node)
            # (The serial sample is read clamped when the input guard clamps it.)
            if node["kind"] not in ("product", "sample") and not options.get("split_bits") \
                    and node["name"] not in {n for n in names} and dut.latency:
                assert place == node["name"], (options, node)
            if node["kind"] == "sample":
                clamped = dut.config.clamp and dut.config.guard.needed
                assert place == ("sample_clamped" if clamped else "sample"), (options, node)
        for comparison in argmax_report(dut, model)[:-1]:
            assert set(comparison["verilog"].split(", ")) <= declared


def planned(model, **options):
    """A design planned, no component built."""
    return plan_design(UnitConfig(model, **options))


def test_full_pipeline_is_resolved_when_the_design_is_planned():
    model = bank_model([[1, 2, 3], [3, -2, 1], [0, 1, 1]], [0, 5, -5])
    dut = planned(model, pipeline=FULL_PIPELINE)
    plan = analyse_bank(model)
    assert dut.config.pipeline == dut.latency == dut.levels == plan.levels
    assert dut.stage_levels == tuple((k, k) for k in range(plan.levels))
    # The deepest count is accepted, one more is refused in the same count.
    assert planned(model, pipeline=plan.levels).latency == plan.levels
    with pytest.raises(InputError, match=f"has {plan.levels} levels .* at most {plan.levels}"):
        planned(model, pipeline=plan.levels + 1)
    serial = planned(model, arch="serial", pipeline=FULL_PIPELINE)
    assert serial.config.pipeline == serial.latency == serial.levels == 1
    assert BuildOptions(pipeline=BuildOptions.FULL_PIPELINE).pipeline == FULL_PIPELINE
    with pytest.raises(InputError, match="non-negative integer or 'full'"):
        UnitConfig(model, pipeline="every")        # the design's fields are UnitConfig's to judge


def test_register_stages_weigh_argmax_levels_and_are_the_best_spread():
    # Exhaustive check (every placement of the stages, enumerated here, a reference written
    # apart from the package's search): the slowest stage is as light as any placement can
    # make it, counting an argmax comparison as two adder levels.
    from thresh2hdl.hardware.plan import ARGMAX_LEVEL_WEIGHT, level_weights, register_boundaries

    def heaviest(weights, boundaries):
        start, most = 0, 0
        for end in boundaries:
            most, start = max(most, sum(weights[start:end + 1])), end + 1
        return most

    rng = random.Random(3)
    for _ in range(200):
        adders, rounds = rng.randint(1, 7), rng.randint(1, 3)
        weights = [1] * adders + [ARGMAX_LEVEL_WEIGHT, 1] * rounds
        last = len(weights) - 1
        for pipeline in range(1, len(weights) + 1):
            got = register_boundaries(last, pipeline, weights)
            assert len(got) == pipeline and got[-1] == last and list(got) == sorted(set(got))
            best = min(heaviest(weights, list(cut) + [last])
                       for cut in itertools.combinations(range(last), pipeline - 1))
            assert heaviest(weights, got) == best, (weights, pipeline, got)
    # One weight a level: as evenly as the count goes, the spread every unit has.
    for levels in range(1, 16):
        for pipeline in range(1, levels + 1):
            assert register_boundaries(levels - 1, pipeline) == tuple(
                -(-(j * levels) // pipeline) - 1 for j in range(1, pipeline + 1))
    # A bank's plan: a round of the argmax is a comparison (weighing two) then a selection
    # (one); with stages enough for no stage to weigh more than two, each comparison has a
    # stage of its own, apart from its selection.
    model = bank_model([[3, -1, 2, 5], [0, 4, -2, 1], [1, 1, 1, -3], [2, -5, 1, 1]],
                       [5, 0, -3, 2])
    plan = analyse_bank(model, arch="shiftadd")
    weights = level_weights(plan.levels, plan)
    assert weights[plan.score_level + 1:] == [ARGMAX_LEVEL_WEIGHT, 1] * (plan.argmax_levels // 2)
    pipeline = next(p for p in range(1, plan.levels + 1)
                    if heaviest(weights, register_boundaries(plan.levels - 1, p, weights)) <= 2)
    design = planned(model, arch="shiftadd", pipeline=pipeline)
    stages = [design.level_stage(level)
              for level in range(plan.score_level + 1, plan.final_level + 1)]
    assert len(set(stages)) == len(stages) == plan.argmax_levels
