"""The FuseSoC core description each build folder carries: read by FuseSoC itself, and its
``sim`` target run by ``fusesoc`` with Icarus Verilog."""

import ast
import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from helpers import require_package, require_tool
from thresh2hdl import __version__
from thresh2hdl.app import BuildOptions, build, demo_model
from thresh2hdl.emit import VERILOG_2001, VHDL_2008, HdlFile, core_file_text, core_name
from thresh2hdl.reports.record import report_record


@pytest.fixture(scope="module")
def small_folder(tmp_path_factory):
    """A demo build verified in Amaranth's simulator (no outside tool), few vectors."""
    out = tmp_path_factory.mktemp("small") / "out"
    build(demo_model(), out, BuildOptions(simulator="amaranth", vectors=100))
    return out


def demo_folder(out):
    """The demo as `thresh2hdl demo` writes it: the same 10,000 random vectors exported."""
    require_tool("iverilog", "vvp")
    build(demo_model(), out, BuildOptions(simulator="icarus", vectors=10_000))
    return out


def read_core(path):
    """The core as FuseSoC 2.4 reads it (its own parser and CAPI2 schema): a parse error
    raises here instead of the warning with which `fusesoc` skips a bad core file."""
    require_package("fusesoc")
    from fusesoc.capi2.coreparser import Core2Parser
    from fusesoc.core import Core
    return Core(parser=Core2Parser(), core_file=str(path))


def target(core, name):
    flags = {"target": name, "is_toplevel": True}
    return {"toplevel": core.get_toplevel(flags), "flow": core.get_flow(flags),
            "options": core.get_flow_options(flags),
            "files": [(f["name"], f["file_type"], f.get("copyto")) for f in core.get_files(flags)]}


def test_fusesoc_reads_the_core_with_both_languages_in_order(tmp_path):
    # Outside reference: FuseSoC 2.4.7's own CAPI2 parser and schema.
    text = core_file_text(
        "unit", version="1.2.3",
        design=[HdlFile("unit.v", VERILOG_2001), HdlFile("unit.vhd", VHDL_2008)],
        testbench=[HdlFile("unit_tb.v", VERILOG_2001)], data=["stimulus.hex", "expected.hex"],
        description='a "quoted" description: with a colon')
    assert text == core_file_text(
        "unit", version="1.2.3",
        design=[HdlFile("unit.v", VERILOG_2001), HdlFile("unit.vhd", VHDL_2008)],
        testbench=[HdlFile("unit_tb.v", VERILOG_2001)], data=["stimulus.hex", "expected.hex"],
        description='a "quoted" description: with a colon')
    (tmp_path / "unit.core").write_text(text)
    core = read_core(tmp_path / "unit.core")
    assert str(core.name) == "thresh2hdl:generated:unit:1.2.3"
    assert target(core, "default") == {
        "toplevel": "unit", "flow": None, "options": {},
        "files": [("unit.v", "verilogSource-2001", None), ("unit.vhd", "vhdlSource-2008", None)]}
    sim = target(core, "sim")
    assert sim["toplevel"] == "unit_tb" and sim["flow"] == "sim"
    assert sim["options"] == {"tool": "icarus", "iverilog_options": ["-g2001", "-Wall"]}
    assert sim["files"][2:] == [("unit_tb.v", "verilogSource-2001", None),
                                ("stimulus.hex", "user", "stimulus.hex"),
                                ("expected.hex", "user", "expected.hex")]


def test_a_module_named_as_a_yaml_word_stays_a_name(tmp_path):
    # Outside reference: FuseSoC 2.4.7's parser (YAML 1.1: a plain `on` is true, `null` None).
    for module in ("on", "null", "yes"):
        text = core_file_text(module, version="1", design=[HdlFile(f"{module}.v", VERILOG_2001)],
                              testbench=[HdlFile(f"{module}_tb.v", VERILOG_2001)], data=[])
        (tmp_path / f"{module}.core").write_text(text)
        core = read_core(tmp_path / f"{module}.core")
        assert target(core, "default")["toplevel"] == module
        assert target(core, "sim")["toplevel"] == f"{module}_tb"


def test_a_core_without_files_or_with_an_unknown_simulator_is_refused():
    design = [HdlFile("unit.v", VERILOG_2001)]
    with pytest.raises(ValueError, match="design file"):
        core_file_text("unit", version="1", design=[], testbench=design, data=[])
    with pytest.raises(ValueError, match="simulator"):
        core_file_text("unit", version="1", design=design, testbench=design, data=[],
                       simulator="nosuch")


def test_a_mangled_core_file_is_refused_by_fusesoc(tmp_path, small_folder):
    # The check above can fail: FuseSoC's schema rejects a key CAPI2 does not have.
    text = (small_folder / "pump_fault.core").read_text()
    (tmp_path / "bad.core").write_text(text.replace("    flow: sim", "    flows: sim"))
    with pytest.raises(Exception, match="flows"):
        read_core(tmp_path / "bad.core")


def test_the_build_folder_core_lists_the_folder_files(small_folder):
    core = read_core(small_folder / "pump_fault.core")
    assert str(core.name) == core_name("pump_fault", __version__)
    sim = target(core, "sim")
    assert sim["toplevel"] == "pump_fault_tb"
    named = [name for name, _, _ in sim["files"]]
    assert named == ["pump_fault.v", "pump_fault_tb.v", "stimulus.hex", "expected.hex"]
    assert all((small_folder / name).is_file() for name in named)
    assert "/" not in (small_folder / "pump_fault.core").read_text().replace("file_type", "")


def assert_the_core_holds_what_the_cocotb_module_reads(folder, module="pump_fault"):
    """The cocotb module compiles the files of the core's design target for its language
    (`default`, or `vhdl` beside the Verilog) and reads the vector files the core copies."""
    text = (folder / f"test_{module}.py").read_text()
    sources = ast.literal_eval(re.search(r"^SOURCES = (.*)$", text, re.M).group(1))
    core = read_core(folder / f"{module}.core")
    targets = ["default", "vhdl"] if len(sources) > 1 else ["default"]
    for simulator, name in zip(sources, targets):
        assert [file for file, _, _ in target(core, name)["files"]] == sources[simulator]
    copied = {copyto for _, kind, copyto in target(core, "sim")["files"] if kind == "user"}
    assert set(re.findall(r'^\w+_FILE = HERE / "([^"]+)"$', text, re.M)) == copied
    assert copied == {"stimulus.hex", "expected.hex"}


def test_the_core_holds_what_the_cocotb_module_reads(small_folder):
    assert_the_core_holds_what_the_cocotb_module_reads(small_folder)


def test_the_report_names_the_core_and_the_cocotb_module_and_reads_them_back(small_folder):
    report = json.loads((small_folder / "report.json").read_text())
    assert report["packaging"] == {"core_file": "pump_fault.core",
                                   "core_name": core_name("pump_fault", __version__),
                                   "cocotb_test": "test_pump_fault.py"}
    assert all((small_folder / name).is_file() for name in
               (report["packaging"]["core_file"], report["packaging"]["cocotb_test"]))
    assert report_record(report).to_json() == report
    del report["packaging"]                                    # a folder of an older version
    assert report_record(report).packaging is None


def fusesoc_command():
    """The `fusesoc` of this Python's environment (the test extra installs it)."""
    beside = Path(sys.executable).with_name("fusesoc")
    return str(beside) if beside.exists() else shutil.which("fusesoc")


def run_fusesoc_sim(folder, work, target="sim", tool=("iverilog", "vvp")):
    """`fusesoc --cores-root FOLDER run --target sim VLNV` from an empty work folder, with
    FuseSoC's configuration and cache kept inside it."""
    require_tool(*tool)
    require_package("fusesoc")
    work.mkdir()
    env = dict(os.environ, XDG_CACHE_HOME=str(work / "cache"),
               XDG_CONFIG_HOME=str(work / "config"), XDG_DATA_HOME=str(work / "data"))
    return subprocess.run([fusesoc_command(), "--cores-root", str(folder), "run", "--target",
                           target, core_name("pump_fault", __version__)],
                          cwd=work, env=env, capture_output=True, text=True, timeout=300)


@pytest.mark.icarus
def test_fusesoc_runs_the_testbench_in_icarus_and_a_broken_expectation_fails(tmp_path):
    # Outside reference: FuseSoC 2.4.7 with Edalize 0.6's sim flow and Icarus Verilog 11 run
    # the folder's own testbench, which judges every cycle against the integer model's file.
    folder = demo_folder(tmp_path / "demo")
    cycles = len((folder / "stimulus.hex").read_text().split())
    before = sorted(path.name for path in folder.iterdir())
    passed = run_fusesoc_sim(folder, tmp_path / "good")
    assert passed.returncode == 0, passed.stdout + passed.stderr
    assert f"PASS pump_fault: {cycles} cycles, 0 mismatches" in passed.stdout
    assert sorted(path.name for path in folder.iterdir()) == before   # built elsewhere

    lines = (folder / "expected.hex").read_text().splitlines()
    cycle = next(i for i, line in enumerate(lines) if (int(line, 16) >> 1) & 1)   # out_valid
    lines[cycle] = f"{int(lines[cycle], 16) ^ 0b100:0{len(lines[cycle])}x}"          # decision
    (folder / "expected.hex").write_text("\n".join(lines) + "\n")
    failed = run_fusesoc_sim(folder, tmp_path / "broken")
    assert f"MISMATCH cycle {cycle}: decision" in failed.stdout, failed.stdout + failed.stderr
    assert f"FAIL pump_fault: {cycles} cycles, 1 mismatches" in failed.stdout


@pytest.mark.ghdl
@pytest.mark.icarus
def test_fusesoc_runs_the_vhdl_testbench_in_ghdl(tmp_path):
    # Outside reference: FuseSoC 2.4.7 / Edalize 0.6's GHDL flow runs the VHDL testbench of a
    # VHDL-only folder (its `sim` target) and of a two-language folder (`sim_vhdl`; `sim`
    # stays Icarus); a broken expectation fails.
    from helpers import run
    for hdl, targets in (("vhdl", ["sim"]), ("both", ["sim", "sim_vhdl"])):
        folder = tmp_path / hdl
        result = run("demo", "--out", folder, "--hdl", hdl, "--vectors", "300",
                     *(["--simulator", "icarus"] if hdl == "both" else []))
        assert result.returncode == 0, result.stderr
        assert_the_core_holds_what_the_cocotb_module_reads(folder)
        for target in targets:
            tool = ("ghdl",) if hdl == "vhdl" or target == "sim_vhdl" else ("iverilog", "vvp")
            passed = run_fusesoc_sim(folder, tmp_path / f"{hdl}-{target}", target, tool)
            assert "PASS pump_fault" in passed.stdout, passed.stdout + passed.stderr
    lines = (folder / "expected.hex").read_text().splitlines()
    cycle = next(i for i, line in enumerate(lines) if (int(line, 16) >> 1) & 1)
    lines[cycle] = f"{int(lines[cycle], 16) ^ 0b100:0{len(lines[cycle])}x}"
    (folder / "expected.hex").write_text("\n".join(lines) + "\n")
    failed = run_fusesoc_sim(folder, tmp_path / "broken", "sim_vhdl", ("ghdl",))
    assert f"MISMATCH cycle {cycle}: decision" in failed.stdout, failed.stdout + failed.stderr
    assert "FAIL pump_fault" in failed.stdout
