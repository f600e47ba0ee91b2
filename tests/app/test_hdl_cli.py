"""``--hdl verilog|vhdl|both`` from the command line: the folder's files, the report, check and
prove on VHDL folders, and names VHDL cannot take refused in one line.

Outside references: GHDL 2.0 (Debian 2.0.0, an IEEE 1076-2008 implementation) analyses,
simulates and synthesises the VHDL; Icarus Verilog 11 runs the Verilog; the reserved words are
IEEE 1076-2008's list (from memory)."""

import json
import subprocess
import sys

import pytest

from helpers import assert_one_line_error, make_model, require_proof_tools, require_tool, run
from thresh2hdl.model import model_to_toml

pytestmark = [pytest.mark.ghdl]


@pytest.mark.prove
def test_both_languages_are_verified_and_proved(tmp_path):
    require_tool("ghdl", "iverilog", "vvp")
    require_proof_tools()
    out = tmp_path / "both"
    result = run("demo", "--out", out, "--hdl", "both", "--simulator", "icarus", "--prove",
                 "--pipeline", "2")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["hdl"] == "both" and report["verilog"] == "pump_fault.v"
    vhdl = report["vhdl"]
    assert vhdl["file"] == "pump_fault.vhd" and vhdl["mismatches"] == 0
    assert vhdl["vectors_checked"] >= 10_000 and vhdl["simulator_version"].startswith("GHDL")
    assert vhdl["lint"].endswith("no warning")
    assert report["proof"]["status"] == "proved"
    assert report["netlist_proofs"]["pump_fault.vhd"]["status"] == "proved"
    for name in ("pump_fault.v", "pump_fault_tb.v", "pump_fault_instance.vh", "pump_fault.vhd",
                 "pump_fault_pkg.vhd", "pump_fault_tb.vhd"):
        assert (out / name).is_file(), name
    assert "pump_fault.vhd" in result.stdout and "GHDL's reading): proved" in result.stdout


@pytest.mark.prove
def test_a_vhdl_folder_checks_proves_and_catches_a_wrong_file(tmp_path):
    require_tool("ghdl")
    require_proof_tools()
    out = tmp_path / "vhdl"
    result = run("demo", "--out", out, "--hdl", "vhdl", "--arch", "shiftadd", "--pipeline", "3",
                 "--vectors", "2000")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert "verilog" not in report and report["hdl"] == "vhdl"
    assert report["verification"]["simulator"] == "ghdl"
    assert not list(out.glob("*.v")) and not list(out.glob("*.vh"))
    checked = run("check", out, "--vectors", "1000")
    assert checked.returncode == 0 and "pump_fault.vhd" in checked.stdout, checked.stderr
    proved = run("prove", out)
    assert proved.returncode == 0 and "proved" in proved.stdout, proved.stderr
    # A wrong VHDL file (one adder made a subtractor): check and prove both say so.
    text = (out / "pump_fault.vhd").read_text()
    line = next(line for line in text.splitlines() if " + unsigned(" in line)
    wrong = tmp_path / "wrong" / "pump_fault.vhd"
    wrong.parent.mkdir()
    wrong.write_text(text.replace(line, line.replace(" + unsigned(", " - unsigned(")))
    assert run("check", out, "--netlist", wrong, "--vectors", "1000").returncode == 1
    disproved = run("prove", out, "--netlist", wrong)
    assert disproved.returncode == 1, disproved.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["netlist_proofs"]["pump_fault.vhd"]["status"] == "counterexample"


@pytest.mark.parametrize("names, field", [
    (["signal", "b"], "'signal' is reserved in VHDL"),
    (["a__b", "c"], "two '_' in a row"),
    (["Rate", "rate"], "VHDL ignores case"),
])
def test_names_vhdl_cannot_take_are_refused_in_one_line(tmp_path, names, field):
    require_tool("ghdl", "iverilog", "vvp")
    model = make_model([3, -2], 1, bits=6)
    text = model_to_toml(model).replace('name = "f0"', f'name = "{names[0]}"').replace(
        'name = "f1"', f'name = "{names[1]}"')
    path = tmp_path / "m.toml"
    path.write_text(text)
    result = run("build", path, "--out", tmp_path / "out", "--hdl", "vhdl")
    assert_one_line_error(result, 2, field)
    assert not (tmp_path / "out").exists()
    fine = run("build", path, "--out", tmp_path / "v", "--hdl", "verilog", "--simulator",
               "icarus", "--vectors", "200")
    assert fine.returncode == 0, fine.stderr


def test_a_language_we_do_not_write_and_a_verilog_simulator_for_vhdl_are_refused(tmp_path):
    result = run("demo", "--out", tmp_path / "a", "--hdl", "systemc")
    assert result.returncode == 2 and "--hdl" in result.stderr
    assert "Traceback" not in result.stderr
    result = run("demo", "--out", tmp_path / "b", "--hdl", "vhdl", "--simulator", "icarus")
    assert_one_line_error(result, 2, "--hdl vhdl writes none")
    assert not (tmp_path / "b").exists()


def test_without_ghdl_a_vhdl_build_says_what_to_install(tmp_path, monkeypatch):
    # A machine without GHDL: the one line names the tool and the way out.
    bare = tmp_path / "bin"
    bare.mkdir()
    monkeypatch.setenv("PATH", str(bare))
    result = subprocess.run([sys.executable, "-P", "-m", "thresh2hdl", "demo", "--out",
                             tmp_path / "c", "--hdl", "vhdl"], capture_output=True, text=True)
    assert result.returncode != 0 and "GHDL was not found" in result.stderr
    assert "--hdl verilog" in result.stderr and "Traceback" not in result.stderr
    assert not (tmp_path / "c").exists()
