"""The Amaranth component against a deliberately simple gold model, in Amaranth's simulator."""

import gc
import warnings

import numpy as np
import pytest
from amaranth.hdl import ClockDomain, Fragment, Module, UnusedElaboratable
from amaranth.sim import Simulator
from hypothesis import given, settings, strategies as st

from helpers import bank_model, make_model, check_design
from thresh2hdl.hardware import (FULL_PIPELINE, DesignPlan, ThresholdUnit, UnitConfig,
                                 make_component, plan_design)
from thresh2hdl.hardware.component import PLAN_FACTS
from thresh2hdl.errors import InputError
from thresh2hdl.model.records import PortNames
from thresh2hdl.analysis import analyse
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.verify.sim_amaranth import simulate_amaranth
from thresh2hdl.verify.stimulus import make_stimulus
from thresh2hdl.verify.vectors import make_vectors
from thresh2hdl.emit.verilog import emit_verilog


def gold(weights, bias, x):
    score = sum(w * v for w, v in zip(weights, x)) + bias
    return int(score > 0), score


def run_always_ready(dut, rows):
    """Feed one row per cycle with out_ready high; collect (y, score) as they come out."""
    results = []
    top = Module()
    top.submodules.dut = dut
    if dut.latency:
        top.domains.sync = ClockDomain("sync")

    async def testbench(ctx):
        for t in range(len(rows) + dut.latency):
            row = rows[t] if t < len(rows) else [0] * len(rows[0])
            ctx.set(dut.in_valid, int(t < len(rows)))
            ctx.set(dut.out_ready, 1)
            for port, value in zip(dut.feature_ports, row):
                ctx.set(port, int(value))
            assert ctx.get(dut.in_ready) == 1
            if ctx.get(dut.out_valid):
                results.append((ctx.get(dut.y), ctx.get(dut.score)))
            if dut.latency:
                await ctx.tick()

    sim = Simulator(top)
    if dut.latency:
        sim.add_clock(1e-6, domain="sync")
    sim.add_testbench(testbench)
    sim.run()
    return results


@pytest.mark.parametrize("pipeline", [0, 1, 2, 3, 4])
def test_matches_gold_model_through_every_pipeline_depth(pipeline):
    weights, bias = [7, -3, 0, 12, -9], -40
    model = make_model(weights, bias, bits=6, signed=True)
    dut = ThresholdUnit(UnitConfig(model, pipeline=pipeline))
    assert dut.latency == pipeline
    rng = np.random.default_rng(pipeline)
    rows = rng.integers(-32, 32, (60, 5)).tolist() + [[31, -32, 0, 31, -32], [-32, 31, 0, -32, 31]]
    assert run_always_ready(dut, rows) == [gold(weights, bias, row) for row in rows]


def test_too_many_stages_is_refused():
    model = make_model([1, 2, 3, 4])
    with pytest.raises(InputError, match="at most 4"):
        ThresholdUnit(UnitConfig(model, pipeline=5))
    with pytest.raises(InputError, match="non-negative"):
        UnitConfig(model, pipeline=-1)


def test_ports_follow_the_computed_widths():
    model = make_model([100, -100], 3, bits=8)
    dut = ThresholdUnit(UnitConfig(model, score_bits=20))
    assert len(dut.score) == 20 and dut.score.shape().signed
    assert [len(p) for p in dut.feature_ports] == [8, 8]
    assert "signed [19:0] score" in emit_verilog(dut, model)     # and the file says so


random_models = st.integers(1, 7).flatmap(lambda n: st.tuples(
    st.lists(st.integers(-300, 300), min_size=n, max_size=n),
    st.integers(-5000, 5000), st.integers(1, 12), st.booleans(), st.booleans(),
    st.integers(0, 6)))


@settings(max_examples=25, deadline=None)
@given(random_models)
def test_random_models_agree_with_reference_under_backpressure(case):
    weights, bias, bits, is_signed, with_score, pipeline_wish = case
    ports = PortNames() if with_score else PortNames(score="")
    model = make_model(weights, bias, bits=bits, signed=is_signed, ports=ports)
    most = analyse(model).final_level + 1
    result, _ = check_design(model, min(pipeline_wish, most), vectors=100)
    assert result.mismatch_count == 0
    assert result.vectors_checked >= 100


def test_checker_catches_a_wrong_reference():
    # The check must be able to fail: compare the circuit with a reference whose bias is off by one.
    model = make_model([5, -3, 2], -7, bits=4)
    dut = ThresholdUnit(UnitConfig(model, pipeline=1))
    wrong = ReferenceModel(weights=[5, -3, 2], bias=-6, feature_ranges=model.feature_ranges)
    rows = make_vectors(dut.analysis, random_count=200).array
    stimulus = make_stimulus(wrong, rows, latency=1)
    result = simulate_amaranth(dut, stimulus).check(stimulus)
    assert result.mismatch_count > 0
    assert result.mismatches[0].signal in ("score", "decision")


def test_constant_unit_when_every_weight_is_zero():
    result, _ = check_design(make_model([0, 0, 0], 9), 1)
    assert result.mismatch_count == 0


@pytest.mark.parametrize("pipeline", [0, 1, 3])
def test_free_flowing_segment_matches_the_design(pipeline):
    # Past the stalled segment the stimulus is computed as a delay line; it must still agree
    # with the design cycle for cycle, and a wrong latency in it must be caught.
    model = make_model([9, -4, 6, 1], -20, bits=5)
    dut = ThresholdUnit(UnitConfig(model, pipeline=pipeline))
    reference = ReferenceModel.from_model(model)
    rows = make_vectors(dut.analysis, random_count=400).array
    stimulus = make_stimulus(reference, rows, latency=dut.latency, stall_vectors=50,
                             valid_probability=0.7)
    assert stimulus.out_ready[-100:].all()
    result = simulate_amaranth(dut, stimulus)
    checked = result.check(stimulus)
    assert checked.mismatch_count == 0 and checked.vectors_checked == len(rows)
    wrong = make_stimulus(reference, rows, latency=dut.latency + 1, stall_vectors=50,
                          valid_probability=0.7)
    assert simulate_amaranth(ThresholdUnit(UnitConfig(model, pipeline=pipeline)),
                             wrong).check(wrong).mismatch_count > 0


def test_verification_in_chunks_covers_every_vector_and_catches_late_errors(monkeypatch):
    import thresh2hdl.verify.runner as runner
    from thresh2hdl.verify.sim_amaranth import AmaranthBackend
    monkeypatch.setattr(runner, "CHUNK_VECTORS", 300)
    model = make_model([5, -3, 2, 7], -11, bits=6)
    dut = ThresholdUnit(UnitConfig(model, pipeline=2))
    verified = runner.verify(AmaranthBackend(dut), dut, model, count=1000)
    assert verified.mismatches == 0
    corners = sum(n for name, n in verified.vector_groups if not name.startswith("random"))
    assert verified.vectors_checked == 1000 + corners
    assert dict(verified.vector_groups)["random within the declared ranges"] == 1000
    # Judged against a model whose bias is one off, the run must fail and say where.
    wrong = make_model([5, -3, 2, 7], -10, bits=6)
    verified = runner.verify(AmaranthBackend(dut), dut, wrong, count=1000)
    assert verified.mismatches > 0 and verified.first_mismatches


def _unused_components(caught):
    return [w for w in caught if issubclass(w.category, UnusedElaboratable)]


def test_every_kind_of_design_is_planned_alike_without_a_component():
    # One plan for a unit, a bank and a serial design, with the same attributes, and the same
    # answers as the component built from it. Planning makes no Amaranth elaboratable, so
    # nothing is left "created but never used" (Amaranth 0.5 warns of those when collected).
    unit = make_model([7, -3, 12, 5], -40, bits=6, signed=True)
    bank = bank_model([[1, 2, 3], [3, -2, 1], [0, 1, 1]], [0, 5, -5])
    configs = {"unit": UnitConfig(unit, pipeline=2),
               "split": UnitConfig(unit, pipeline=2, split_bits=3, carry_registers=2),
               "bank": UnitConfig(bank, pipeline=FULL_PIPELINE),
               "serial": UnitConfig(unit, arch="serial"),
               "serial bank": UnitConfig(bank, arch="serial", loadable_weights=True)}
    gc.collect()          # what earlier tests left is not counted here
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        plans = {name: plan_design(config) for name, config in configs.items()}
        gc.collect()
    assert not _unused_components(caught)
    kinds = {"unit": "unit", "split": "unit", "bank": "bank", "serial": "serial",
             "serial bank": "serial"}
    for name, plan in plans.items():
        assert isinstance(plan, DesignPlan) and plan.kind == kinds[name]
        component = make_component(configs[name])
        Fragment.get(component, None)        # elaborated, so used
        assert component.design.kind == plan.kind
        for fact in set(PLAN_FACTS) - {"level_stage"}:
            assert getattr(component, fact) == getattr(plan, fact), (name, fact)
        assert [plan.level_stage(level) for level in range(plan.levels)] == \
            [component.level_stage(level) for level in range(plan.levels)]
        assert list(plan.signature.members) == list(component.signature.members)
        assert plan.analysis is plan.unit_analyses[0]
        assert (plan.bank is not None) == plan.config.model.is_bank
        assert plan.feature_count == len(plan.config.model.features)
        assert plan.score_port_count == len(component.score_ports)
        assert plan.decision_bits == len(component.y)
    unit_plan, split, bank_plan = plans["unit"], plans["split"], plans["bank"]
    assert unit_plan.split_parts == {} and unit_plan.result_parts == 1
    assert unit_plan.latency == 2 and unit_plan.beats == 1
    assert split.split_parts and split.result_parts > 1
    nodes = {node.name: node for node in split.analysis.nodes}
    assert all(nodes[name].bits > 3 and parts == -(-nodes[name].bits // 3)
               for name, parts in split.split_parts.items())
    assert split.latency == 2 + (split.result_parts - 1) * 2
    assert bank_plan.latency == bank_plan.levels == bank_plan.bank.levels
    assert len(bank_plan.unit_analyses) == 3 and bank_plan.result_parts == 1
    assert plans["serial"].beats == 4 and plans["serial bank"].beats == 3
    assert plans["serial"].stage_levels == ((0, 0),) and plans["serial bank"].latency == 1


def test_a_refused_component_leaves_nothing_unused():
    unit = make_model([7, -3], 1, bits=4)
    bank = bank_model([[1, 2], [3, -2]], [0, 5])
    gc.collect()          # what earlier tests left is not counted here
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        with pytest.raises(InputError, match="at most"):
            ThresholdUnit(UnitConfig(unit, pipeline=99))
        with pytest.raises(ValueError, match="make_component"):
            ThresholdUnit(UnitConfig(bank))
        gc.collect()
    assert not _unused_components(caught)
