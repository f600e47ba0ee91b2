"""The cocotb test module each build folder carries: it unpacks the vector files as the Verilog
testbench does, and run by cocotb's own runner in Icarus it passes, or fails on a wrong word."""

import ast
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
}


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


@pytest.mark.parametrize("form", sorted(FORMS))
def test_the_module_unpacks_the_words_as_the_verilog_testbench(tmp_path, form):
    folder, module = built(form, tmp_path / "out")
    text = (folder / f"test_{module}.py").read_text()
    compile(text, f"test_{module}.py", "exec")
    values = literals(text)
    verilog = (folder / f"{module}_tb.v").read_text()
    assert values["STIMULUS_FIELDS"] == stimulus_layout(verilog)
    expected_bits = int(re.search(r"EXPECT_BITS = (\d+);", verilog).group(1))
    assert sum(width for _, width, _ in values["EXPECTED_FIELDS"]) == expected_bits
    assert values["CYCLES"] == len((folder / "stimulus.hex").read_text().split())
    assert (values["CLOCK"] is None) == (form == "flag-only-combinational")


def run_module(folder, module, build_dir, *arguments):
    """`python test_{module}.py` as a user runs it, outside this pytest run."""
    require_tool("iverilog", "vvp")
    require_package("cocotb")
    env = {key: value for key, value in os.environ.items() if key != "PYTEST_CURRENT_TEST"}
    return subprocess.run([sys.executable, str(folder / f"test_{module}.py"), "--build-dir",
                           str(build_dir), *arguments], cwd=folder, env=env,
                          capture_output=True, text=True, timeout=600)


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

    lines = (folder / "expected.hex").read_text().splitlines()
    cycle = next(i for i, line in enumerate(lines) if (int(line, 16) >> 1) & 1)   # out_valid
    lines[cycle] = f"{int(lines[cycle], 16) ^ (1 << 4):0{len(lines[cycle])}x}"     # score bit 0
    (folder / "expected.hex").write_text("\n".join(lines) + "\n")
    failed = run_module(folder, module, tmp_path / "broken", "--cycles", str(cycle + 10))
    output = failed.stdout + failed.stderr
    assert failed.returncode == 1, output[-3000:]
    assert f"MISMATCH cycle {cycle}: score" in output
    assert f"FAIL {module}: {cycle + 10} cycles, 1 mismatches" in output


@pytest.mark.icarus
@pytest.mark.parametrize("form", ["loadable", "flag-only-combinational", "serial", "bank",
                                  "async-low-enable"])
def test_every_design_form_passes_in_cocotb(tmp_path, form):
    # Outside reference: cocotb 2.1 and Icarus Verilog 11, as above; these forms add the
    # weight write port, a design without clock or reset, beats, and several scores.
    folder, module = built(form, tmp_path / "out", vectors=300)
    result = run_module(folder, module, tmp_path / "run")
    output = result.stdout + result.stderr
    assert result.returncode == 0, output[-3000:]
    assert re.search(rf"PASS {module}: \d+ cycles, 0 mismatches", output)
