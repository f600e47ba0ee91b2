"""The AXI4-Stream form (``--interface axi-stream``): byte lanes, refusals, every simulator,
the exported testbench, the proof, and the specification's handshake rule checked by a monitor
of its own.

Outside references: the AMBA AXI4-Stream protocol specification (ARM IHI 0051A): TDATA is an
integer number of bytes; section 2.2.1, "Handshake process": once the master asserts TVALID
it must hold it, and the data it carries, until the slave's TREADY takes the transfer (clause
numbers from memory). Verilator 5 and Icarus Verilog 11 run the file; the monitor's gold is a
plain Python sum over the bytes the source sent.
"""

import json
import re
import subprocess

import numpy as np
import pytest

from helpers import (assert_lint_clean_and_agrees, assert_one_line_error, bank_model,
                     exported_testbench, make_model, require_proof_tools, require_tool, run)
from thresh2hdl.emit.verilog import emit_verilog, port_table
from thresh2hdl.errors import InputError
from thresh2hdl.model.records import FeatureFormat, Model, Unit
from thresh2hdl.hardware import MAX_TDATA_BITS, UnitConfig, make_component, plan_design
from thresh2hdl.verify.runner import first_stimulus
from thresh2hdl.verify.sim_amaranth import simulate_amaranth
from thresh2hdl.verify.vectors import make_vectors


def test_lanes_are_whole_bytes_in_model_order():
    # Independent of the layout code: each feature takes ceil(bits / 8) bytes, in order.
    features = [FeatureFormat(f"f{i}", bits, False) for i, bits in enumerate((1, 8, 9, 17))]
    model = Model(module="dut", features=features, units=[Unit("u", (1, -2, 3, 4), 5)])
    table = port_table(plan_design(UnitConfig(model, interface="axi-stream")), model)
    offsets = [table.lanes[f"x{i}"][1].offset for i in range(4)]
    assert offsets == [0, 8, 16, 32] and table.lanes["x3"][1].lane_bits == 24
    widths = {port.name: port.width for port in table}
    assert widths["s_axis_tdata"] == 56 and widths["m_axis_tdata"] % 8 == 0
    assert [p.name for p in table][:2] == ["aclk", "aresetn"]
    assert {"s_axis_tvalid", "s_axis_tready", "m_axis_tvalid", "m_axis_tready"} <= set(widths)
    assert table.lanes["y"][1].offset == 0 and table.lanes["score"][1].offset == 8


@pytest.mark.parametrize("config, field", [
    (dict(clock_enable=True), "clock_enable"),
    (dict(reset="sync-high"), "reset"),
    (dict(pipeline=0), "interface"),
    (dict(interface="axi4"), "interface"),
])
def test_what_the_stream_form_cannot_have_is_refused(config, field):
    with pytest.raises(InputError) as error:
        UnitConfig(make_model([1, 2], 1), **{"interface": "axi-stream", **config})
    assert error.value.field == field


def test_a_tdata_past_the_limit_is_one_line_and_no_folder(tmp_path):
    count = MAX_TDATA_BITS // 8 + 1          # one byte a feature: one byte too many
    lines = ["model_format = 1", "[module]", 'name = "wide"']
    for i in range(count):
        lines += ["[[feature]]", f'name = "f{i}"', "bits = 8"]
    lines += ["[[unit]]", f"weights = [{', '.join(['1'] * count)}]", "bias = -3"]
    (tmp_path / "wide.toml").write_text("\n".join(lines) + "\n")
    result = run("build", tmp_path / "wide.toml", "--out", tmp_path / "out", "--interface",
                 "axi-stream", "--simulator", "amaranth")
    assert_one_line_error(result, contains=f"more than the {MAX_TDATA_BITS}")
    assert "--interface" in result.stderr and not (tmp_path / "out").exists()


def stream_config(seed):
    rng = np.random.default_rng(seed)
    weights = [int(w) for w in rng.integers(-50, 51, int(rng.integers(2, 5)))]
    kind = seed % 4
    if kind == 0:
        return UnitConfig(make_model(weights, 7, bits=11, signed=True), pipeline=2,
                          interface="axi-stream")
    if kind == 1:
        return UnitConfig(bank_model([weights, weights[::-1]], [2, -1]), pipeline=3,
                          arch="shiftadd", interface="axi-stream", reset="async-low")
    if kind == 2:
        return UnitConfig(make_model(weights, -9, bits=6), arch="serial",
                          interface="axi-stream")
    return UnitConfig(make_model(weights, 3, bits=5, ranges=[(1, 20)] * len(weights)),
                      pipeline=1, loadable_weights=True, interface="axi-stream")


@pytest.mark.icarus
@pytest.mark.verilator
@pytest.mark.parametrize("seed", range(4))
def test_every_kind_of_design_is_lint_clean_and_agrees_in_every_simulator(tmp_path, seed):
    config = stream_config(seed)
    design = plan_design(config)
    rows = make_vectors(design.analysis, random_count=400, seed=seed).array
    stimulus, _ = first_stimulus(design, config.model, rows, seed=seed, reload_count=100)
    checked = simulate_amaranth(make_component(config), stimulus).check(stimulus)
    assert checked.mismatch_count == 0 and checked.vectors_checked > 0
    assert_lint_clean_and_agrees(tmp_path, config.model, make_component(config), stimulus)


MONITOR_BENCH = """`timescale 1ns/1ps
module bench;
  reg aclk = 1'b0, aresetn = 1'b0, s_tvalid = 1'b0, m_tready = 1'b0, took;
  reg [@IN_TOP@:0] s_tdata = 0;
  wire s_tready, m_tvalid;
  wire [@OUT_TOP@:0] m_tdata;
  reg prev_valid = 1'b0, prev_ready = 1'b0;
  reg [@OUT_TOP@:0] prev_data = 0;
  integer seed = @SEED@, cycle;
  dut d (.aclk(aclk), .aresetn(aresetn), .s_axis_tvalid(s_tvalid), .s_axis_tready(s_tready),
         .s_axis_tdata(s_tdata), .m_axis_tvalid(m_tvalid), .m_axis_tready(m_tready),
         .m_axis_tdata(m_tdata));
  always #5 aclk = ~aclk;
  // The monitor: values as they stand at each rising edge.
  always @(posedge aclk) if (aresetn) begin
    if (prev_valid && !prev_ready && !(m_tvalid === 1'b1 && m_tdata === prev_data))
      $display("VIOLATION cycle %0d", cycle);
    if (m_tvalid && m_tready) $display("OUT %h", m_tdata);
    if (s_tvalid && s_tready) $display("IN %h", s_tdata);
    prev_valid <= m_tvalid; prev_ready <= m_tready; prev_data <= m_tdata;
  end
  initial begin
    repeat (2) @(posedge aclk);
    #1 aresetn = 1'b1;
    for (cycle = 0; cycle < 3000; cycle = cycle + 1) begin
      @(posedge aclk);
      took = s_tvalid && s_tready;
      #1;
      // The source keeps its transfer until it is taken (the same rule, its side).
      if (!s_tvalid || took) begin
        s_tvalid = (cycle < 2900) && (($random(seed) & 3) != 0);
        s_tdata = {@WORDS@};
      end
      m_tready = ($random(seed) & 3) != 0;
    end
    $finish;
  end
endmodule
"""


@pytest.mark.icarus
@pytest.mark.parametrize("seed", [1, 2])
def test_the_master_stream_keeps_tvalid_and_tdata_until_taken(tmp_path, seed):
    require_tool("iverilog", "vvp")
    rng = np.random.default_rng(seed)
    weights = [int(w) for w in rng.integers(-90, 91, 3)]
    bias = int(rng.integers(-500, 501))
    model = make_model(weights, bias, bits=6)           # one byte a feature, 2 bits ignored
    config = UnitConfig(model, pipeline=2, interface="axi-stream")
    (tmp_path / "dut.v").write_text(emit_verilog(make_component(config), model))
    widths = {port.name: port.width for port in port_table(plan_design(config), model)}
    bench = MONITOR_BENCH.replace("@IN_TOP@", str(widths["s_axis_tdata"] - 1)) \
        .replace("@OUT_TOP@", str(widths["m_axis_tdata"] - 1)).replace("@SEED@", str(seed)) \
        .replace("@WORDS@", ", ".join(["$random(seed)"] * -(-widths["s_axis_tdata"] // 32)))
    (tmp_path / "bench.v").write_text(bench)
    subprocess.run(["iverilog", "-g2001", "-o", "b.vvp", "bench.v", "dut.v"], cwd=tmp_path,
                   check=True)
    output = subprocess.run(["vvp", "-n", "b.vvp"], cwd=tmp_path, capture_output=True,
                            text=True).stdout
    assert "VIOLATION" not in output
    sent = [int(v, 16) for v in re.findall(r"^IN ([0-9a-f]+)$", output, re.M)]
    results = [int(v, 16) for v in re.findall(r"^OUT ([0-9a-f]+)$", output, re.M)]
    assert len(sent) > 1000 and len(results) == len(sent)
    out_bits = widths["m_axis_tdata"]
    for word, result in zip(sent, results):
        codes = [(word >> (8 * i)) & 0x3F for i in range(3)]
        score = sum(w * x for w, x in zip(weights, codes)) + bias
        lane = result >> 8                       # the score, sign-extended to its bytes
        if lane >> (out_bits - 9):
            lane -= 1 << (out_bits - 8)
        assert (result & 0xFF, lane) == (int(score > 0), score)


def test_the_monitor_sees_a_master_that_drops_tvalid(tmp_path):
    # The monitor itself can fail: a design whose TVALID ignores TREADY (a mutant) is seen.
    require_tool("iverilog", "vvp")
    model = make_model([5, -3, 2], -40, bits=6)
    config = UnitConfig(model, pipeline=2, interface="axi-stream")
    text = emit_verilog(make_component(config), model)
    # The flop of m_axis_tvalid loads in every cycle, a stall too (its enable made 1).
    lines = text.splitlines()
    at = next(i for i, line in enumerate(lines) if "m_axis_tvalid <= " in line)
    guard = next(i for i in range(at, 0, -1) if lines[i].strip().startswith("if ("))
    lines[guard] = re.sub(r"if \(.*\)$", "if (1'b1)", lines[guard])
    mutant = "\n".join(lines) + "\n"
    assert mutant != text
    (tmp_path / "dut.v").write_text(mutant)
    bench = MONITOR_BENCH.replace("@IN_TOP@", "23").replace("@OUT_TOP@", "23") \
        .replace("@SEED@", "3").replace("@WORDS@", "$random(seed)")
    (tmp_path / "bench.v").write_text(bench)
    subprocess.run(["iverilog", "-g2001", "-o", "b.vvp", "bench.v", "dut.v"], cwd=tmp_path,
                   check=True)
    output = subprocess.run(["vvp", "-n", "b.vvp"], cwd=tmp_path, capture_output=True,
                            text=True).stdout
    assert "VIOLATION" in output


@pytest.fixture(scope="module")
def stream_folder(tmp_path_factory):
    out = tmp_path_factory.mktemp("stream") / "build"
    result = run("demo", "--out", out, "--simulator", "icarus", "--vectors", "2000",
                 "--pipeline", "2", "--interface", "axi-stream")
    assert result.returncode == 0, result.stderr
    return out


@pytest.mark.icarus
@pytest.mark.verilator
def test_the_demo_stream_folder_records_checks_and_its_testbench_passes(tmp_path,
                                                                         stream_folder):
    out = stream_folder
    report = json.loads((out / "report.json").read_text())
    assert report["mismatches"] == 0 and report["stream"]["interface"] == "axi-stream"
    assert {"port": "s_axis_tdata", "name": "rms_axial", "bits": [0, 15]} in \
        report["stream"]["lanes"]
    assert report["clocking"]["reset_port"] == "aresetn"
    settings = json.loads((out / "build_settings.json").read_text())
    assert (settings["interface"], settings["reset"]) == ("axi-stream", "sync-low")
    assert "s_axis_tdata: rms_axial [15:0]" in (out / "report.md").read_text()
    assert "m_axis_tdata[39:16]: score" in (out / "pump_fault.v").read_text()
    assert "s_axis_tdata[15:0]: rms_axial" in (out / "pump_fault_instance.vh").read_text()
    assert "AXI4-Stream; s_axis_tdata: rms_axial [15:0]" in (out / "report.html").read_text()
    _, run_testbench = exported_testbench(out, tmp_path)
    assert "PASS" in run_testbench().stdout
    for simulator in ("icarus", "verilator"):
        result = run("check", out, "--simulator", simulator, "--vectors", "3000")
        assert result.returncode == 0, result.stderr


@pytest.mark.icarus
@pytest.mark.prove
def test_the_stream_form_is_proved_and_a_swapped_lane_is_not(tmp_path, stream_folder):
    require_proof_tools()
    result = run("prove", stream_folder)
    assert result.returncode == 0, result.stderr
    text = (stream_folder / "pump_fault.v").read_text()
    assign = next(line for line in text.splitlines()
                  if line.startswith("  assign m_axis_tdata = "))
    swapped = assign.replace("7'd0, guard_flag_r2, 7'd0, decision_r2",
                             "7'd0, decision_r2, 7'd0, guard_flag_r2")
    assert swapped != assign
    (tmp_path / "swapped.v").write_text(text.replace(assign, swapped))
    result = run("check", stream_folder, "--netlist", tmp_path / "swapped.v", "--simulator",
                 "icarus", "--vectors", "2000")
    assert result.returncode == 1, result.stderr
    copy, _ = exported_testbench(stream_folder, tmp_path)
    result = run("prove", copy, "--netlist", tmp_path / "swapped.v")
    assert result.returncode in (1, 3), result.stderr
