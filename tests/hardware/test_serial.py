"""The serial architecture: one multiply-accumulate per clock, one feature per valid beat."""

import itertools
import json

import numpy as np
import pytest
from amaranth.hdl import ClockDomain, Module
from amaranth.sim import Simulator
from hypothesis import HealthCheck, given, settings, strategies as st

from helpers import (IN_CI, require_tool, make_model, assert_agrees_in_amaranth, run,
                     assert_one_line_error, assert_lint_clean_and_agrees)
from thresh2hdl.hardware import SerialThreshold, UnitConfig, make_component, sample_shape
from thresh2hdl.errors import InputError
from thresh2hdl.verify.sim_amaranth import AmaranthBackend
from thresh2hdl.model.records import FeatureFormat, Model, PortNames, Unit
from thresh2hdl.analysis import analyse, bit_growth_bound, prefix_ranges
from thresh2hdl.verify.reference import ReferenceModel, cycle_model
from thresh2hdl.verify.stimulus import make_stimulus
from thresh2hdl.verify.vectors import make_vectors


def gold_score(weights, bias, x):
    """The score as written: a plain Python sum."""
    return sum(w * v for w, v in zip(weights, x)) + bias


def test_beats_are_summed_one_by_one_with_a_stalled_sink():
    # A deliberately simple gold testbench, independent of the cycle model: send every
    # feature of a vector on its own beat, hold out_ready low for a while, and read the result.
    weights, bias = (7, -3, 0, 12), -40
    model = make_model(list(weights), bias, bits=6, signed=True)
    dut = SerialThreshold(UnitConfig(model, arch="serial"))
    rows = [(31, -32, 5, 17), (-32, 31, 0, -32), (0, 0, 0, 0), (3, 9, -1, 2)]
    seen, stalled_last_beat = [], []

    async def testbench(ctx):
        ctx.set(dut.out_ready, 1)
        for row in rows:
            for k, value in enumerate(row):
                ctx.set(dut.x, value)
                ctx.set(dut.in_valid, 1)
                while not ctx.get(dut.in_ready):
                    stalled_last_beat.append(k)
                    await ctx.tick()
                await ctx.tick()
            ctx.set(dut.in_valid, 0)
            ctx.set(dut.out_ready, 0)       # the result waits in its register
            await ctx.tick().repeat(3)
            assert ctx.get(dut.out_valid)
            seen.append((ctx.get(dut.y), ctx.get(dut.score)))
            ctx.set(dut.out_ready, 1)
            await ctx.tick()
            assert not ctx.get(dut.out_valid)

    top = Module()
    top.submodules.dut = dut
    top.domains.sync = ClockDomain("sync")
    sim = Simulator(top)
    sim.add_clock(1e-6)
    sim.add_testbench(testbench)
    sim.run()
    assert seen == [(int(gold_score(weights, bias, r) > 0), gold_score(weights, bias, r))
                    for r in rows]
    assert stalled_last_beat == []


def test_first_beats_of_the_next_vector_enter_while_a_result_waits():
    # With out_ready low the unit takes beats 0..N-2 of the next vector and holds the last.
    trace = cycle_model(1, 2, offer=lambda t: True, accept=lambda t: t >= 9, beats=3)
    # Cycles 0-2 take vector 0; 3-4 take beats 0-1 of vector 1; its last beat waits until the
    # sink reads vector 0 (cycle 9), and vector 1 comes out on the cycle after.
    assert trace["in_ready"][:6].tolist() == [True, True, True, True, True, False]
    assert trace["out_index"][3:11].tolist() == [0] * 7 + [1]
    assert trace["in_index"][:6].tolist() == [0, 1, 2, 3, 4, 5]


@settings(max_examples=60, deadline=None)
@given(st.integers(1, 6), st.integers(1, 12),
       st.lists(st.tuples(st.booleans(), st.booleans()), min_size=1, max_size=40))
def test_serial_cycle_model_delivers_every_input_once_in_order(beats, count, pattern):
    trace = cycle_model(1, count, offer=lambda t: pattern[t % len(pattern)][0] or t > 400,
                        accept=lambda t: pattern[t % len(pattern)][1] or t > 400, beats=beats)
    taken = trace["in_valid"] & trace["in_ready"]
    assert np.count_nonzero(taken) == beats * count
    assert trace["in_index"][taken].tolist() == list(range(beats * count))
    out = trace["out_index"][trace["out_valid"] & trace["out_ready"]]
    assert out.tolist() == list(range(count))
    # Only a last beat can be refused, and only while a result waits unread.
    refused = ~trace["in_ready"]
    assert (trace["in_index"][refused] % beats == beats - 1).all()
    assert (trace["out_valid"][refused] & ~trace["out_ready"][refused]).all()


def test_free_flowing_segment_equals_the_full_model():
    model = make_model([3, -2, 5], 1, bits=4)
    reference = ReferenceModel.from_model(model)
    rows = make_vectors(analyse(model), random_count=300).array
    fast = make_stimulus(reference, rows, latency=1, beats=3, stall_vectors=0, seed=4)
    trace = cycle_model(1, len(rows), offer=lambda t: bool(fast.in_valid[t]) if
                        t < fast.cycles else False, accept=lambda t: True, beats=3)
    assert np.array_equal(trace["in_ready"], fast.expect_in_ready)
    assert np.array_equal(trace["out_index"], fast.expect_out_index)
    assert np.array_equal(trace["in_index"], fast.in_index)


def test_accumulator_is_exact_by_exhaustion():
    # Checked by exhaustion over every input of a small model: each datapath value's range
    # is the union over beats of the values it takes, and every bound is reached.
    weights, bias = (5, -7, 3), 4
    model = make_model(list(weights), bias, bits=3, signed=True)
    analysis = analyse(model, arch="serial")
    inputs = list(itertools.product(range(-4, 4), repeat=3))
    partials = [[bias + sum(w * v for w, v in zip(weights[:k], x)) for x in inputs]
                for k in range(4)]
    held = [p for k in range(3) for p in partials[k]]
    sums = [p for k in range(1, 4) for p in partials[k]]
    products = [abs(w) * v for w in weights for v in range(-4, 4)]
    assert (analysis.node("accumulator").lo, analysis.node("accumulator").hi) == \
        (min(held), max(held))
    assert (analysis.node("sum").lo, analysis.node("sum").hi) == (min(sums), max(sums))
    assert (analysis.node("product").lo, analysis.node("product").hi) == \
        (min(products), max(products))
    assert analysis.score_range == (min(partials[3]), max(partials[3]))


@settings(max_examples=100, deadline=None)
@given(st.lists(st.tuples(st.integers(-128, 127), st.integers(1, 16), st.booleans()),
                min_size=1, max_size=24), st.integers(-5000, 5000))
def test_accumulator_never_exceeds_the_textbook_bit_growth(terms, bias):
    weights = [w for w, _, _ in terms]
    features = [FeatureFormat(f"f{i}", bits, signed) for i, (_, bits, signed) in
                enumerate(terms)]
    model = Model(module="m", features=features, units=[Unit("u", tuple(weights), bias)])
    analysis = analyse(model, arch="serial")
    widest_input = max(bits + (not signed) for _, bits, signed in terms)
    # Common practice: N products of a-bit and b-bit two's complement numbers need at most
    # a + b + ceil(log2 N) bits (here b = 8: weights in [-128, 127]).
    # The bias adds at most one bit more than its own width.
    bound = max(bit_growth_bound(widest_input, 8, len(terms)), abs(bias).bit_length() + 1) + 1
    assert analysis.node("sum").bits <= bound and analysis.node("accumulator").bits <= bound
    # The shared sum holds the final score (the last prefix) and the held sum every other.
    prefixes = prefix_ranges(weights, bias, model.feature_ranges)
    total = analysis.node("sum")
    assert total.lo <= prefixes[-1][0] and prefixes[-1][1] <= total.hi
    held = analysis.node("accumulator")
    assert all(held.lo <= lo and hi <= held.hi for lo, hi in prefixes[:-1])


def test_sample_port_carries_every_feature_format():
    features = [FeatureFormat("a", 12), FeatureFormat("b", 8, True), FeatureFormat("c", 3)]
    model = Model(module="m", features=features, units=[Unit("u", (1, 1, 1), 0)])
    shape = sample_shape(model)
    assert shape.signed and shape.width == 13
    unsigned_model = make_model([1, 2], bits=10)
    assert not sample_shape(unsigned_model).signed and sample_shape(unsigned_model).width == 10


feature_lists = st.lists(st.tuples(st.integers(1, 12), st.booleans(), st.integers(-300, 300)),
                         min_size=1, max_size=9)
serial_cases = st.tuples(
    st.lists(feature_lists, min_size=1, max_size=1).map(lambda v: v[0]),
    st.integers(1, 3), st.lists(st.integers(-3000, 3000), min_size=3, max_size=3),
    st.booleans())


def serial_prepared(case, vectors=120):
    features, units, biases, with_score = case
    formats = [FeatureFormat(f"f{i}", bits, signed) for i, (bits, signed, _) in
               enumerate(features)]
    rng = np.random.default_rng(len(features) * 7 + units)
    unit_list = [Unit("u0", tuple(w for _, _, w in features), biases[0])]
    for k in range(1, units):
        unit_list.append(Unit(f"u{k}", tuple(int(v) for v in
                                             rng.integers(-300, 301, len(features))),
                              biases[k]))
    ports = PortNames() if with_score else PortNames(score="")
    model = Model(module="ser", features=formats, units=unit_list, ports=ports)
    dut = make_component(UnitConfig(model, arch="serial"))
    others = dut.unit_analyses[1:]
    rows = make_vectors(dut.analysis, random_count=vectors, others=others).array
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency,
                             beats=dut.beats, valid_probability=0.8, ready_probability=0.6)
    return model, dut, stimulus


@settings(max_examples=25, deadline=None)
@given(serial_cases)
def test_random_serial_models_agree_with_reference_in_amaranth(case):
    model, dut, stimulus = serial_prepared(case)
    assert_agrees_in_amaranth(model, dut, stimulus)


@pytest.mark.verilator
@pytest.mark.icarus
@settings(max_examples=4, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=serial_cases)
def test_random_serial_models_lint_clean_and_agree_in_icarus_and_verilator(tmp_path_factory,
                                                                           case):
    # Independent simulators: Verilator 5 and Icarus Verilog 11 run the emitted file.
    require_tool("verilator", "g++", "iverilog", "vvp")
    model, dut, stimulus = serial_prepared(case)
    assert_lint_clean_and_agrees(tmp_path_factory.mktemp("serial"), model, dut, stimulus)


def test_a_wrong_beat_count_is_caught():
    # The check can fail: judged as if each vector took one beat fewer, the design disagrees.
    model = make_model([3, -2, 5, 1], 1, bits=4)
    dut = make_component(UnitConfig(model, arch="serial"))
    rows = make_vectors(dut.analysis, random_count=50).array
    reference = ReferenceModel.from_model(model)
    right = make_stimulus(reference, rows, latency=1, beats=4, stall_vectors=50)
    shorter = ReferenceModel.from_model(make_model([3, -2, 5], 1, bits=4))
    wrong = make_stimulus(shorter, rows[:, :3], latency=1, beats=3, stall_vectors=50)
    backend = AmaranthBackend(dut)
    assert backend.run(right).check(right).mismatch_count == 0
    assert backend.run(wrong).check(wrong).mismatch_count > 0


def test_serial_refuses_other_register_stages():
    model = make_model([1, 2], bits=4)
    for pipeline in (0, 2):
        with pytest.raises(InputError, match="exactly one register stage"):
            UnitConfig(model, pipeline=pipeline, arch="serial")


def test_cli_refuses_serial_with_a_pipeline_in_one_line(tmp_path):
    out = tmp_path / "o"
    result = run("demo", "--out", out, "--arch", "serial", "--pipeline", "3")
    assert_one_line_error(result, contains="pipeline")
    assert not out.exists()


@pytest.mark.parametrize("simulator", ["amaranth", "verilator", "icarus"])
def test_serial_demo_verifies_in_every_simulator(tmp_path, simulator):
    if simulator == "verilator":
        require_tool("verilator", "g++")
    elif simulator == "icarus":
        require_tool("iverilog", "vvp")
    out = tmp_path / simulator
    result = run("demo", "--out", out, "--arch", "serial", "--simulator", simulator,
                 "--vectors", "3000")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["tree"]["arch"] == "serial" and report["beats_per_result"] == 10
    assert report["mismatches"] == 0 and report["vectors_checked"] >= 3000
    text = (out / "pump_fault.v").read_text()
    assert "input  wire [11:0] sample" in text
    assert "serial multiply-accumulate: 10 beats per result" in result.stdout


@pytest.mark.icarus
def test_exported_serial_testbench_passes_in_icarus(tmp_path):
    require_tool("iverilog", "vvp")
    import subprocess
    out = tmp_path / "tb"
    assert run("demo", "--out", out, "--arch", "serial", "--simulator", "amaranth",
               "--vectors", "500").returncode == 0
    report = json.loads((out / "report.json").read_text())
    done = subprocess.run(report["testbench"]["command"], shell=True, cwd=out,
                          capture_output=True, text=True)
    assert done.returncode == 0 and "PASS" in done.stdout, done.stdout + done.stderr


def test_prove_proves_the_serial_demo(tmp_path):
    # Boolector 3.2.3 on Yosys 0.70's export, lemma by lemma and beat by beat (see
    # tests/proof/test_prove_serial.py for the mutants).
    from thresh2hdl.proof.prover import proof_tools
    try:
        proof_tools()
    except Exception as error:   # the prove extra is optional outside CI
        if IN_CI:
            raise
        pytest.skip(str(error))
    out = tmp_path / "s"
    assert run("demo", "--out", out, "--arch", "serial", "--simulator", "amaranth",
               "--vectors", "200").returncode == 0
    result = run("prove", out)
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["proof"]["status"] == "proved"
    assert "beat by beat" in report["proof"]["detail"]


@pytest.mark.verilator
@pytest.mark.icarus
def test_a_33_bit_sample_keeps_its_sign_in_every_simulator(tmp_path):
    # A 32-bit unsigned feature and a signed one share a 33-bit sample port.
    model = Model(module="wide", features=[FeatureFormat("a", 32), FeatureFormat("b", 8, True)],
                  units=[Unit("u", (2, -3), 1)])
    dut = make_component(UnitConfig(model, arch="serial"))
    assert len(dut.x) == 33
    rows = make_vectors(dut.analysis, random_count=300).array
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=1, beats=2)
    assert_lint_clean_and_agrees(tmp_path, model, dut, stimulus)


def test_a_feature_may_be_called_sample_unless_the_design_is_serial():
    model = Model(module="m", features=[FeatureFormat("sample", 4)], units=[Unit("u", (1,), 0)])
    make_component(UnitConfig(model))          # no sample port: no clash
    with pytest.raises(InputError, match="module.ports.sample"):
        UnitConfig(model, arch="serial")


def test_serial_refuses_more_features_than_a_sequencer_has():
    model = make_model([1] * 1025, bits=4)
    with pytest.raises(InputError, match="at most 1024 features"):
        UnitConfig(model, arch="serial")
