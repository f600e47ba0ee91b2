"""The cocotb test module each build folder carries: it unpacks the vector files as the Verilog
testbench does (the AXI4-Stream form's lanes too), and run by cocotb's own runner in Icarus, or
in GHDL for the VHDL, it passes, or fails on a wrong word."""

import ast
import importlib.util
import json
import os
import re
import subprocess
import sys

import pytest

from helpers import bank_model, require_package, require_tool
from thresh2hdl.app import BuildOptions, build, demo_model

FORMS = {   # name: (model, build options): each branch of the layout and the timing
    "demo": (demo_model, {}),
    "loadable": (demo_model, {"loadable_weights": True}),
    "flag-only-combinational": (demo_model, {"clamp": False, "pipeline": 0}),
    "serial": (demo_model, {"arch": "serial"}),
    "bank": (lambda: bank_model([[3, -2, 5], [-4, 1, 2], [1, 1, -6]], [2, -3, 0], bits=6,
                                is_signed=True), {"pipeline": 2}),
    "async-low-enable": (demo_model, {"pipeline": 2, "reset": "async-low",
                                      "clock_enable": True}),
    "stream": (demo_model, {"interface": "axi-stream"}),
    "axi4-lite": (demo_model, {"loadable_weights": True, "weight_port": "axi4-lite"}),
    "learning": (demo_model, {"on_chip_learning": True, "learning_rate": "1/64",
                              "weight_bits": 6, "bias_bits": 20, "pipeline": 2}),
}
PLAIN_FORMS = sorted(set(FORMS) - {"stream"})


def built(form, out, **options):
    make, chosen = FORMS[form]
    model = make()
    build(model, out, BuildOptions(**{"simulator": "amaranth", "vectors": 100, **chosen,
                                      **options}))
    return out, model.module


def literals(text):
    """The module-level constants of the generated module, read without importing cocotb."""
    found = {}
    for node in ast.parse(text).body:
        if isinstance(node, ast.Assign) and isinstance(node.targets[0], ast.Name):
            try:
                found[node.targets[0].id] = ast.literal_eval(node.value)
            except ValueError:
                pass
    return found


def stimulus_layout(text):
    """(name, width) of the Verilog testbench's stimulus concatenation, low bits first."""
    widths = {name: int(hi) + 1 if hi else 1 for hi, name in
              re.findall(r"reg (?:\[(\d+):0\] )?tb_(\w+);", text)}
    concat = re.search(r"\{(tb_[^}]*)\} = stimulus\[t\];", text).group(1)
    names = [name.strip()[3:] for name in concat.split(",")]
    return [(name, widths[name]) for name in reversed(names)]


@pytest.mark.parametrize("form", PLAIN_FORMS)
def test_the_module_unpacks_the_words_as_the_verilog_testbench(tmp_path, form):
    folder, module = built(form, tmp_path / "out")
    text = (folder / f"test_{module}.py").read_text()
    compile(text, f"test_{module}.py", "exec")
    values = literals(text)
    verilog = (folder / f"{module}_tb.v").read_text()
    assert [row[:2] for row in values["STIMULUS_FIELDS"]] == stimulus_layout(verilog)
    # The plain interface: every field a port of its own, driven and read whole.
    assert all(row[2:] == (row[0], 0, 0) for row in values["STIMULUS_FIELDS"])
    assert all(row[3:] == (row[0], 0) for row in values["EXPECTED_FIELDS"])
    expected_bits = int(re.search(r"EXPECT_BITS = (\d+);", verilog).group(1))
    assert sum(row[1] for row in values["EXPECTED_FIELDS"]) == expected_bits
    assert values["CYCLES"] == len((folder / "stimulus.hex").read_text().split())
    assert (values["CLOCK"] is None) == (form == "flag-only-combinational")
    assert values["SOURCES"] == {"icarus": [f"{module}.v"]}


def load_module(path):
    """The generated module imported as Python (cocotb imports outside a simulator)."""
    require_package("cocotb")
    spec = importlib.util.spec_from_file_location(path.stem, path)
    generated = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(generated)
    return generated


def verilog_tdata(text, values, widths):
    """The Verilog testbench's s_axis_tdata concatenation evaluated on field ``values``:
    its parts, most significant first, are `{N{1'b1}}` (N ones) or `tb_<field>`."""
    concat = re.search(r"\.s_axis_tdata\(\{(.*)\}\)", text).group(1)
    word = 0
    for part in re.findall(r"\{\d+\{1'b1\}\}|tb_\w+", concat):
        ones = re.fullmatch(r"\{(\d+)\{1'b1\}\}", part)
        width = int(ones.group(1)) if ones else widths[part[3:]]
        word = word << width | ((1 << width) - 1 if ones else values[part[3:]])
    return word


def test_the_stream_module_packs_and_unpacks_the_lanes_as_the_verilog_testbench(tmp_path):
    # Outside reference: the Verilog testbench's own packing (run in Icarus Verilog 11 against
    # the integer model by the build's tests), read from its text: the same TDATA words, the
    # bits above each code ones, and the same result lanes.
    folder, module = built("stream", tmp_path / "out")
    generated = load_module(folder / f"test_{module}.py")
    report = json.loads((folder / "report.json").read_text())
    assert report["packaging"]["cocotb_test"] == f"test_{module}.py"
    verilog = (folder / f"{module}_tb.v").read_text()
    layout = stimulus_layout(verilog)
    widths = dict(layout)
    for line in (folder / "stimulus.hex").read_text().split()[:50]:
        word, fields = int(line, 16), {}
        for name, width in layout:
            fields[name], word = word & ((1 << width) - 1), word >> width
        driven = generated.port_words(int(line, 16))
        assert driven["s_axis_tdata"] == verilog_tdata(verilog, fields, widths)
        assert driven["s_axis_tvalid"] == fields["s_axis_tvalid"]
        assert driven["m_axis_tready"] == fields["m_axis_tready"]
    lanes = {name: (port, int(lo), int(hi) - int(lo) + 1) for name, port, hi, lo in
             re.findall(r"assign tb_(\w+) = tb_(\w+)\[(\d+):(\d+)\];", verilog)}
    assert lanes and all(lanes.get(name, (port, 0, width)) == (port, offset, width)
                         for name, width, _, port, offset in generated.EXPECTED_FIELDS)
    assert {row[3] for row in generated.EXPECTED_FIELDS} == \
        {"s_axis_tready", "m_axis_tvalid", "m_axis_tdata"}
    # A field is read from its own bits: an unknown bit elsewhere in the port does not hide it.
    assert generated.field_value("x1010x", 1, 3) == 0b010        # bits 3..1
    assert generated.field_value("x1010x", 3, 3) is None         # bits 5..3: an x


def run_module(folder, module, build_dir, *arguments, tools=("iverilog", "vvp"), env=None):
    """`python test_{module}.py` as a user runs it, outside this pytest run."""
    require_tool(*tools)
    require_package("cocotb")
    env = {**{key: value for key, value in os.environ.items()
              if key != "PYTEST_CURRENT_TEST"}, **(env or {})}
    return subprocess.run([sys.executable, str(folder / f"test_{module}.py"), "--build-dir",
                           str(build_dir), *arguments], cwd=folder, env=env,
                          capture_output=True, text=True, timeout=600)


def corrupt_first_result(folder, bit):
    """Flip bit ``bit`` of the first expected word with out_valid high; returns its cycle."""
    lines = (folder / "expected.hex").read_text().splitlines()
    cycle = next(i for i, line in enumerate(lines) if (int(line, 16) >> 1) & 1)   # out_valid
    lines[cycle] = f"{int(lines[cycle], 16) ^ (1 << bit):0{len(lines[cycle])}x}"
    (folder / "expected.hex").write_text("\n".join(lines) + "\n")
    return cycle


def assert_fails_at(result, module, cycle, count, field):
    """The run failed on one mismatch: ``field`` at ``cycle``, of ``count`` cycles run."""
    output = result.stdout + result.stderr
    assert result.returncode == 1, output[-3000:]
    assert f"MISMATCH cycle {cycle}: {field}" in output
    assert f"FAIL {module}: {count} cycles, 1 mismatches" in output


@pytest.mark.icarus
def test_the_demo_folder_passes_in_cocotb_and_a_corrupted_word_fails(tmp_path):
    # Outside reference: cocotb 2.1 driving Icarus Verilog 11 through its own runner
    # (cocotb_tools.runner), judged against the integer model's expected.hex.
    require_tool("iverilog", "vvp")
    folder, module = built("demo", tmp_path / "out", simulator="icarus", vectors=10_000)
    cycles = len((folder / "stimulus.hex").read_text().split())
    before = sorted(path.name for path in folder.iterdir())
    passed = run_module(folder, module, tmp_path / "good")
    output = passed.stdout + passed.stderr
    assert passed.returncode == 0, output[-3000:]
    assert f"PASS {module}: {cycles} cycles, 0 mismatches" in output
    assert sorted(path.name for path in folder.iterdir() if path.name != "__pycache__") == before

    cycle = corrupt_first_result(folder, 4)                             # score bit 0
    failed = run_module(folder, module, tmp_path / "broken", "--cycles", str(cycle + 10))
    assert_fails_at(failed, module, cycle, cycle + 10, "score")


@pytest.mark.icarus
@pytest.mark.parametrize("form", ["loadable", "flag-only-combinational", "serial", "bank",
                                  "async-low-enable", "learning"])
def test_every_design_form_passes_in_cocotb(tmp_path, form):
    # Outside reference: cocotb 2.1 and Icarus Verilog 11, as above; these forms add the
    # weight write port, a design without clock or reset, beats, several scores, and the
    # learning ports (labelled inputs, every register read back every cycle).
    folder, module = built(form, tmp_path / "out", vectors=300)
    result = run_module(folder, module, tmp_path / "run")
    output = result.stdout + result.stderr
    assert result.returncode == 0, output[-3000:]
    assert re.search(rf"PASS {module}: \d+ cycles, 0 mismatches", output)


@pytest.mark.icarus
def test_the_stream_folder_passes_in_cocotb_and_a_corrupted_lane_fails(tmp_path):
    # Outside reference: cocotb 2.1 driving Icarus Verilog 11 (cocotb_tools.runner), judged
    # against the integer model's expected.hex; the features go in as s_axis_tdata lanes
    # (the bits above each code ones) and the results come out of m_axis_tdata's lanes.
    folder, module = built("stream", tmp_path / "out", vectors=300)
    passed = run_module(folder, module, tmp_path / "good")
    output = passed.stdout + passed.stderr
    assert passed.returncode == 0, output[-3000:]
    assert re.search(rf"PASS {module}: \d+ cycles, 0 mismatches", output)
    # Expected word: in_ready, out_valid, fault, out_of_range, then the score (bit 4 on), read
    # from m_axis_tdata[33:16].
    cycle = corrupt_first_result(folder, 4)
    failed = run_module(folder, module, tmp_path / "broken", "--cycles", str(cycle + 10))
    assert_fails_at(failed, module, cycle, cycle + 10, "score")


@pytest.mark.ghdl
@pytest.mark.parametrize("form, hdl", [("demo", "vhdl"), ("stream", "vhdl"), ("demo", "both")])
def test_the_vhdl_runs_in_ghdl_through_cocotb(tmp_path, form, hdl):
    # Outside reference: cocotb 2.1 driving GHDL 2.0 (mcode) through its VPI and
    # cocotb_tools.runner, judged against the integer model's expected.hex; a VHDL-only folder
    # runs in GHDL by default, a folder with both languages when told to.
    require_tool("ghdl")
    # A VHDL-only build is verified by GHDL itself (simulator "auto").
    folder, module = built(form, tmp_path / "out", hdl=hdl,
                           **({"simulator": "auto"} if hdl == "vhdl" else {}))
    values = literals((folder / f"test_{module}.py").read_text())
    report = json.loads((folder / "report.json").read_text())
    assert report["packaging"]["cocotb_test"] == f"test_{module}.py"
    assert values["SOURCES"] == {**({"icarus": [f"{module}.v"]} if hdl == "both" else {}),
                                 "ghdl": [f"{module}.vhd"]}
    choose = ["--simulator", "ghdl"] if hdl == "both" else []
    cycles = "300"
    passed = run_module(folder, module, tmp_path / "good", *choose, tools=("ghdl",),
                        env={"THRESH2HDL_CYCLES": cycles})
    output = passed.stdout + passed.stderr
    assert passed.returncode == 0, output[-3000:]
    assert f"PASS {module}: {cycles} cycles, 0 mismatches" in output
    assert "Running on GHDL" in output
    if form == "demo" and hdl == "vhdl":
        cycle = corrupt_first_result(folder, 2)                          # the decision
        failed = run_module(folder, module, tmp_path / "broken", tools=("ghdl",),
                            env={"THRESH2HDL_CYCLES": str(cycle + 10)})
        assert_fails_at(failed, module, cycle, cycle + 10, "fault")


@pytest.mark.icarus
@pytest.mark.ghdl
def test_the_axi4_lite_folder_passes_in_icarus_and_ghdl_and_a_wrong_read_fails(tmp_path):
    # Outside reference: cocotb 2.1 driving Icarus Verilog 11 and GHDL 2.0 (cocotb_tools.runner),
    # judged against expected.hex; the AXI4-Lite read data counts while RVALID is expected high.
    require_tool("ghdl")
    folder, module = built("axi4-lite", tmp_path / "out", vectors=100, hdl="both")
    for simulator, tools in (("icarus", ("iverilog", "vvp")), ("ghdl", ("ghdl",))):
        passed = run_module(folder, module, tmp_path / simulator, "--simulator", simulator,
                            tools=tools)
        output = passed.stdout + passed.stderr
        assert passed.returncode == 0, output[-3000:]
        assert re.search(rf"PASS {module}: \d+ cycles, 0 mismatches", output)
    fields = literals((folder / f"test_{module}.py").read_text())["EXPECTED_FIELDS"]
    offsets, bit = {}, 0
    for name, width, *_ in fields:
        offsets[name] = bit
        bit += width
    lines = (folder / "expected.hex").read_text().splitlines()
    cycle = next(i for i, line in enumerate(lines)
                 if (int(line, 16) >> offsets["s_axi_rvalid"]) & 1)
    lines[cycle] = f"{int(lines[cycle], 16) ^ (1 << offsets['s_axi_rdata']):0{len(lines[cycle])}x}"
    (folder / "expected.hex").write_text("\n".join(lines) + "\n")
    failed = run_module(folder, module, tmp_path / "broken", "--simulator", "icarus",
                        "--cycles", str(cycle + 10))
    assert_fails_at(failed, module, cycle, cycle + 10, "s_axi_rdata")
