"""On-chip learning from the command line: a demo build, its exported testbench, the host's
prediction with ``fit --in-fabric``, and bad input in one line."""

import json
import re

import pytest

from helpers import assert_one_line_error, exported_testbench, require_tool, run, write_csv
from thresh2hdl.model import load_model

LEARNING = ("--on-chip-learning", "--learning-rate", "1/64", "--weight-bits", "6",
            "--bias-bits", "20")


@pytest.fixture(scope="module")
def learning_folder(tmp_path_factory):
    out = tmp_path_factory.mktemp("learning") / "out"
    result = run("demo", "--out", out, "--simulator", "icarus", "--vectors", "300",
                 "--pipeline", "2", *LEARNING)
    assert result.returncode == 0, result.stderr
    return out


@pytest.mark.icarus
def test_the_demo_builds_with_learning_and_its_testbench_checks_the_read_back(learning_folder,
                                                                             tmp_path):
    # Outside reference: Icarus Verilog (11 here) runs the exported testbench and its files.
    require_tool("iverilog", "vvp")
    report = json.loads((learning_folder / "report.json").read_text())
    assert report["mismatches"] == 0 and report["on_chip_learning"]["delay_cycles"] == 2
    assert report["on_chip_learning"]["learning_rate"] == "1/64"
    assert "learning_rate" in json.loads((learning_folder / "build_settings.json").read_text())
    folder, run_testbench = exported_testbench(learning_folder, tmp_path)
    assert "PASS" in run_testbench().stdout
    # A mutant: the update never clamps at the top (the high limit compared with a bound
    # no sum reaches), so a weight pushed past 31 wraps; the testbench's read-back sees it.
    path = folder / "pump_fault.v"
    text = path.read_text()
    assert text.count("> $signed(8'd31)") >= 5       # the top limit of the 6-bit weights
    path.write_text(text.replace("> $signed(8'd31)", "> $signed(8'd63)"))
    assert "FAIL" in run_testbench().stdout


def test_fit_in_fabric_predicts_the_registers_and_refuses_a_label_the_model_lacks(tmp_path):
    rows = [[a, b] for a in range(0, 16, 3) for b in range(0, 16, 5)]
    data = tmp_path / "rows.csv"
    write_csv(data, ["f0", "f1", "label"], [[a, b, int(a > b)] for a, b in rows])
    start = tmp_path / "start.toml"
    start.write_text('model_format = 1\n[module]\nname = "u"\n[[feature]]\nname = "f0"\n'
                     'bits = 4\n[[feature]]\nname = "f1"\nbits = 4\n[[unit]]\nname = "u"\n'
                     'weights = [0, 0]\nbias = 0\n')
    out = tmp_path / "learned.toml"
    result = run("fit", data, "--out", out, "--in-fabric", start, "--learning-rate", "2",
                 "--weight-bits", "8", "--bias-bits", "8", "--bias-step", "2", "--latency",
                 "0", "--epochs", "50")
    assert result.returncode == 0, result.stderr
    learned = load_model(out).unit
    # The rule by hand (Rosenblatt 1958, from memory): w += 2 (t - y) x, b += 2 (t - y),
    # rows in file order, each register clamped to 8 bits.
    w, b = [0, 0], 0
    for _ in range(json.loads((tmp_path / "learned.fit.json").read_text())["epochs_run"][0]):
        for (a, c) in rows:
            y, t = int(w[0] * a + w[1] * c + b > 0), int(a > c)
            w = [max(-128, min(127, w[0] + 2 * (t - y) * a)),
                 max(-128, min(127, w[1] + 2 * (t - y) * c))]
            b = max(-128, min(127, b + 2 * (t - y)))
    assert list(learned.weights) == w and learned.bias == b
    write_csv(data, ["f0", "f1", "label"], [[1, 2, 0], [3, 4, 2]])
    assert_one_line_error(run("fit", data, "--out", tmp_path / "x.toml", "--in-fabric", start),
                          contains="label 2")


@pytest.mark.parametrize("args, contains", [
    (("--on-chip-learning", "--learning-rate", "3"), "--learning-rate"),
    (("--on-chip-learning", "--learning-rate", "1/3"), "power of two"),
    (("--on-chip-learning", "--weight-bits", "3"), "--weight-bits"),
    (("--on-chip-learning", "--arch", "serial"), "--on-chip-learning"),
    (("--learning-rate", "1/2"), "--learning-rate"),
    (("--on-chip-learning", "--bias-step", "0"), "--bias-step"),
    (("--dsp-products", "2"), "--dsp-products: cannot write products as rows"),
    (("--on-chip-learning", "--dsp-products", "-1"), "--dsp-products"),
    (("--on-chip-learning", "--dsp-products", "many"), "--dsp-products"),
])
def test_bad_learning_requests_fail_in_one_line(tmp_path, args, contains):
    result = run("demo", "--out", tmp_path / "out", "--simulator", "amaranth", "--vectors",
                 "100", *args)
    assert_one_line_error(result, contains=contains)
    assert not (tmp_path / "out").exists()


@pytest.mark.icarus
def test_the_demo_learns_with_rows_and_its_folder_rebuilds(tmp_path):
    # The dsp_products form from the command line: built and verified, recorded in the
    # folder's settings, and the folder's file re-verified by Icarus Verilog (11 here) from
    # that record.
    require_tool("iverilog", "vvp")
    out = tmp_path / "rows"
    built = run("demo", "--out", out, "--simulator", "amaranth", "--vectors", "300",
                "--pipeline", "full", "--dsp-products", "4", *LEARNING)
    assert built.returncode == 0, built.stderr
    assert json.loads((out / "build_settings.json").read_text())["dsp_products"] == 4
    report = json.loads((out / "report.json").read_text())
    # The update's copies: a cycle more before entering vectors see an update.
    assert report["on_chip_learning"]["delay_cycles"] == report["latency_cycles"] + 1
    text = (out / "pump_fault.v").read_text()
    assert text.count(" * ") == 4 and "p9_b5" in text
    # The report's step width is the carried moves' (signed towards the target), as emitted.
    moves = [int(bits) + 1 for bits in re.findall(r"wire \[(\d+):0\] learn_move\d+;", text)]
    assert moves and report["on_chip_learning"]["step_bits"] == max(moves)
    # Its adders' widths are the copies' (each holds its sum before the clamp), as emitted.
    copies = [int(b) + 1 for b in re.findall(r"reg  \[(\d+):0\] weight\d+_learned;", text)]
    assert copies and report["on_chip_learning"]["weight_sum_bits"] == max(copies)
    # The bias's adder starts above the step's low zero bits (no carry crosses them).
    bias_copy = re.search(r"reg  \[(\d+):0\] bias_learned;", text)
    step = report["on_chip_learning"]["bias_step"]
    zeros = (step & -step).bit_length() - 1
    assert report["on_chip_learning"]["bias_sum_bits"] == int(bias_copy.group(1)) + 1 - zeros
    checked = run("check", out, "--simulator", "icarus", "--vectors", "300")
    assert checked.returncode == 0, checked.stderr
