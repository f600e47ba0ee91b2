"""The emitted Verilog file itself, run in Icarus Verilog (an independent simulator)."""

import re
import subprocess

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from helpers import require_tool, make_model, assert_lint_clean_and_agrees
from thresh2hdl.hardware import ThresholdUnit, UnitConfig
from thresh2hdl.app import demo_model
from thresh2hdl.model.records import PortNames
from thresh2hdl.analysis import analyse
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.verify.stimulus import make_stimulus
from thresh2hdl.verify.sim_icarus import simulate_icarus
from thresh2hdl.verify.vectors import make_vectors
from thresh2hdl.emit.verilog import emit_verilog, port_table

pytestmark = pytest.mark.icarus


def prepare(model, pipeline, folder, *, vectors=500, seed=0, arch="tree"):
    dut = ThresholdUnit(UnitConfig(model, pipeline=pipeline, arch=arch))
    path = folder / f"{model.module}.v"
    path.write_text(emit_verilog(dut, model))
    rows = make_vectors(dut.analysis, random_count=vectors, seed=seed).array
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency,
                             seed=seed, valid_probability=0.8, ready_probability=0.7)
    return dut, path, stimulus


@pytest.mark.parametrize("pipeline", [0, 1, 3])
def test_demo_verilog_matches_reference_in_icarus(tmp_path, pipeline):
    # Outside reference: Icarus Verilog (11.0 here, Debian package), an independent simulator
    # of the emitted file, judged cycle by cycle against the integer model.
    require_tool("iverilog", "vvp")
    model = demo_model()
    dut, path, stimulus = prepare(model, pipeline, tmp_path, vectors=2000)
    result, printed = simulate_icarus(path, port_table(dut, model), model.module, stimulus,
                                      tmp_path / "run")
    checked = result.check(stimulus)
    assert checked.mismatch_count == 0, checked.mismatches
    assert checked.vectors_checked == len(stimulus.vectors)
    assert f"PASS {model.module}" in printed


cases = st.integers(1, 8).flatmap(lambda n: st.tuples(
    st.lists(st.integers(-(1 << 10), 1 << 10), min_size=n, max_size=n),
    st.integers(-(1 << 16), 1 << 16), st.integers(1, 14), st.booleans(), st.booleans(),
    st.integers(0, 5), st.sampled_from(["tree", "shiftadd"])))


@pytest.mark.verilator
@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=cases)
def test_random_models_lint_clean_and_match_reference_in_icarus_and_verilator(
        tmp_path_factory, case):
    # Independent simulators of the emitted file: Icarus Verilog 11 and Verilator 5, both
    # judged cycle by cycle against the integer model (Amaranth: test_circuit, test_shiftadd).
    weights, bias, bits, is_signed, with_score, pipeline, arch = case
    ports = PortNames() if with_score else PortNames(score="")
    model = make_model(weights, bias, bits=bits, signed=is_signed, ports=ports)
    pipeline = min(pipeline, analyse(model, arch=arch).final_level + 1)
    folder = tmp_path_factory.mktemp("random")
    dut, _, stimulus = prepare(model, pipeline, folder, vectors=200, arch=arch)
    assert_lint_clean_and_agrees(folder, model, dut, stimulus)


def test_testbench_fails_on_a_corrupted_expectation(tmp_path):
    require_tool("iverilog", "vvp")
    model = demo_model()
    dut, path, stimulus = prepare(model, 1, tmp_path, vectors=50)
    result, printed = simulate_icarus(path, port_table(dut, model), model.module, stimulus,
                                      tmp_path / "run")
    assert "PASS" in printed
    run = tmp_path / "run"
    lines = (run / "expected.hex").read_text().splitlines()
    # Flip the lowest score bit of the first cycle with a valid output. The expected word
    # holds, from bit 0: in_ready, out_valid, the decision (1 bit here), then the score.
    width = len(lines[0])
    for i, line in enumerate(lines):
        value = int(line, 16)
        if (value >> 1) & 1:                       # out_valid expected
            lines[i] = f"{value ^ (1 << 3):0{width}x}"
            break
    (run / "expected.hex").write_text("\n".join(lines) + "\n")
    subprocess.run(["vvp", "-n", f"{model.module}_tb.vvp"], cwd=run, check=True,
                   capture_output=True, text=True)
    output = subprocess.run(["vvp", "-n", f"{model.module}_tb.vvp"], cwd=run,
                            capture_output=True, text=True).stdout
    assert "FAIL" in output and "MISMATCH" in output and "score" in output


def test_a_changed_constant_in_the_verilog_is_caught(tmp_path):
    require_tool("iverilog", "vvp")
    model = demo_model()
    dut, path, stimulus = prepare(model, 1, tmp_path, vectors=500)
    text = path.read_text()
    mutated, count = re.subn(r"\* (\d+)'d11\b", r"* \1'd13", text, count=1)
    assert count == 1, "the demo's weight 11 product was not found"
    path.write_text(mutated)
    result, printed = simulate_icarus(path, port_table(dut, model), model.module, stimulus,
                                      tmp_path / "run")
    checked = result.check(stimulus)
    assert checked.mismatch_count > 0
    assert "FAIL" in printed
