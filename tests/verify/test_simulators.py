"""The emitted Verilog in Verilator and Icarus, `check`, and the exported testbench."""

import json
import os
import re
import subprocess

import numpy as np
import pytest

from helpers import require_tool, make_model, run, assert_one_line_error, exported_testbench
from thresh2hdl.hardware import ThresholdUnit, UnitConfig
from thresh2hdl.verify.runner import make_backend, verify
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.verify.stimulus import make_stimulus
from thresh2hdl.verify.vectors import make_vectors
from thresh2hdl.emit.verilog import emit_verilog, port_table


@pytest.mark.verilator
def test_demo_in_verilator_over_a_million_vectors(tmp_path):
    require_tool("verilator", "g++")
    out = tmp_path / "v"
    result = run("demo", "--out", out, "--simulator", "verilator")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["verification"]["simulator"] == "verilator"
    assert report["verification"]["simulator_version"].startswith("Verilator")
    assert report["mismatches"] == 0 and report["vectors_checked"] >= 1_000_000


@pytest.mark.icarus
def test_demo_in_icarus_over_ten_thousand_vectors(tmp_path):
    require_tool("iverilog", "vvp")
    out = tmp_path / "i"
    result = run("demo", "--out", out, "--simulator", "icarus", "--pipeline", "2")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["verification"]["simulator_version"].startswith("Icarus Verilog")
    assert report["mismatches"] == 0 and report["vectors_checked"] >= 10_000


DEMO_DESIGNS = {
    "shiftadd": ("--arch", "shiftadd", "--pipeline", "3"),
    "split": ("--arch", "shiftadd", "--pipeline", "4", "--split-adders", "6",
              "--carry-registers", "2"),
    "loadable-tree": ("--loadable-weights", "--pipeline", "2", "--weight-bits", "10"),
    "loadable-serial": ("--arch", "serial", "--loadable-weights"),
}


@pytest.mark.verilator
@pytest.mark.icarus
@pytest.mark.parametrize("design", sorted(DEMO_DESIGNS))
@pytest.mark.parametrize("simulator", ["amaranth", "verilator", "icarus"])
def test_demo_of_every_design_verifies_in_every_simulator(tmp_path, design, simulator):
    # Verilator 5 and Icarus Verilog 11 run the emitted file, Amaranth's simulator the design;
    # each is judged cycle by cycle against the integer model (the tree and serial demos:
    # the tests above and test_serial).
    require_tool("verilator", "g++", "iverilog", "vvp")
    out = tmp_path / design
    result = run("demo", "--out", out, "--simulator", simulator, "--vectors", "3000",
                 *DEMO_DESIGNS[design])
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["verification"]["simulator"] == simulator
    assert report["mismatches"] == 0 and report["vectors_checked"] >= 3000


@pytest.mark.verilator
@pytest.mark.icarus
@pytest.mark.parametrize("pipeline", [0, 2])
def test_three_simulators_give_identical_outputs(pipeline):
    # Cross-check: the same cycles in Amaranth's simulator (the design), and in Verilator 5 and
    # Icarus Verilog 11 (the emitted file) give the same outputs on every cycle with a result.
    require_tool("verilator", "g++", "iverilog", "vvp")
    model = make_model([37, -5, 100, 0, -64, 3], -17, bits=10, signed=True)
    dut = ThresholdUnit(UnitConfig(model, pipeline=pipeline))
    text = emit_verilog(dut, model)
    rows = make_vectors(dut.analysis, random_count=1500).array
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency,
                             valid_probability=0.8, ready_probability=0.7)
    ports = port_table(dut, model)
    results = {name: make_backend(name, component=dut, verilog_text=text, ports=ports,
                                  module=model.module).run(stimulus)
               for name in ("amaranth", "verilator", "icarus")}
    shown = stimulus.expect_out_valid
    first = results["amaranth"]
    for name, result in results.items():
        assert result.check(stimulus).mismatch_count == 0, name
        assert np.array_equal(result.in_ready, first.in_ready)
        assert np.array_equal(result.out_valid, first.out_valid)
        assert np.array_equal(result.decisions[shown], first.decisions[shown])
        assert list(result.scores[shown]) == list(first.scores[shown])


def test_each_simulator_back_end_is_made_from_what_it_runs():
    # Amaranth's simulator runs the component, Verilator and Icarus the Verilog text: asked
    # for a simulator without what it runs, the factory says what is missing.
    model = make_model([3, -2, 5], 1, bits=4)
    dut = ThresholdUnit(UnitConfig(model, pipeline=1))
    text = emit_verilog(dut, model)
    ports = port_table(dut, model)
    with pytest.raises(ValueError, match="component"):
        make_backend("amaranth", verilog_text=text, ports=ports, module=model.module)
    for name in ("verilator", "icarus"):
        with pytest.raises(ValueError, match="Verilog"):
            make_backend(name, component=dut)
        backend = make_backend(name, component=dut, verilog_text=text, ports=ports,
                               module=model.module)
        assert backend.name == name and not backend.in_process
    with pytest.raises(ValueError, match="no simulator"):
        make_backend("spice", component=dut)
    # The chunk runner reports the back end it was given.
    backend = make_backend("amaranth", component=dut)
    verified = verify(backend, dut, model, count=200)
    assert verified.simulator == "amaranth" and verified.mismatches == 0
    assert verified.simulator_version == backend.version()


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    out = tmp_path_factory.mktemp("built") / "demo"
    result = run("demo", "--out", out, "--simulator", "amaranth", "--vectors", "3000")
    assert result.returncode == 0, result.stderr
    return out


@pytest.mark.parametrize("simulator", ["verilator", "icarus"])
def test_check_passes_the_built_file_and_catches_a_changed_constant(built, tmp_path, simulator):
    require_tool(*(("verilator", "g++") if simulator == "verilator" else ("iverilog", "vvp")))
    result = run("check", built, "--simulator", simulator, "--vectors", "20000")
    assert result.returncode == 0, result.stderr
    assert "0 mismatches" in result.stdout
    text = (built / "pump_fault.v").read_text()
    mutated, count = re.subn(r"\* (\d+)'d11\b", r"* \1'd13", text, count=1)
    assert count == 1
    bad = tmp_path / "edited.v"
    bad.write_text(mutated)
    result = run("check", built, "--netlist", bad, "--simulator", simulator, "--vectors", "20000")
    assert_one_line_error(result, 1, "mismatch", after_progress=True)
    assert "band_bearing=" in result.stderr      # the failing vector is shown


def test_check_refuses_a_file_with_other_ports(built, tmp_path):
    text = (built / "pump_fault.v").read_text()
    bad = tmp_path / "renamed.v"
    bad.write_text(text.replace("rms_axial", "rms_axial_x"))
    assert_one_line_error(run("check", built, "--netlist", bad), 2, "port 'rms_axial'")
    narrow = tmp_path / "narrow.v"
    narrow.write_text(text.replace("input  wire [11:0] rms_axial", "input  wire [10:0] rms_axial"))
    assert_one_line_error(run("check", built, "--netlist", narrow), 2, "is input of 11 bits")
    assert_one_line_error(run("check", tmp_path / "none"), 2, "not a build folder")


def test_missing_simulator_is_one_line(built, tmp_path):
    env = dict(os.environ, PATH="/nonexistent")
    import sys
    result = subprocess.run([sys.executable, "-P", "-m", "thresh2hdl", "check", str(built),
                             "--simulator", "icarus"], capture_output=True, text=True, env=env)
    assert_one_line_error(result, 2, "iverilog")
    result = subprocess.run([sys.executable, "-P", "-m", "thresh2hdl", "demo", "--out",
                             str(tmp_path / "x"), "--simulator", "verilator"],
                            capture_output=True, text=True, env=env)
    assert_one_line_error(result, 2, "Verilator was not found")
    assert not (tmp_path / "x").exists()


@pytest.mark.icarus
def test_exported_testbench_passes_and_fails_on_a_corrupted_expectation(built, tmp_path):
    require_tool("iverilog", "vvp")
    folder, run_testbench = exported_testbench(built, tmp_path)
    result = run_testbench()
    assert result.returncode == 0 and "PASS pump_fault" in result.stdout, result.stdout
    lines = (folder / "expected.hex").read_text().splitlines()
    # Bits from 0: in_ready, out_valid, decision, the out-of-range flag (the demo has one),
    # score. Flip a score bit where valid.
    index = next(i for i, line in enumerate(lines) if (int(line, 16) >> 1) & 1)
    lines[index] = f"{int(lines[index], 16) ^ (1 << 4):0{len(lines[0])}x}"
    (folder / "expected.hex").write_text("\n".join(lines) + "\n")
    result = run_testbench()
    assert "FAIL pump_fault" in result.stdout and "MISMATCH" in result.stdout
