"""The documentation against the code: docstring examples and the README's Python example."""

import doctest
import re
import subprocess
import sys
from pathlib import Path

import pytest

import thresh2hdl
from thresh2hdl import reference

ROOT = Path(__file__).parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")


def code_blocks(text, language):
    return re.findall(rf"```{language}\n(.*?)```", text, re.S)


@pytest.mark.parametrize("module", [thresh2hdl, reference])
def test_docstring_examples_run(module):
    failures, tried = doctest.testmod(module)
    assert tried > 0 and failures == 0


def test_readme_python_example_runs_from_the_checkout(tmp_path):
    # The setting: `python -c` at the repository root puts the checkout first on
    # sys.path, so `thresh2hdl` is the source tree, which has no thresh2hdl/sim (the templates
    # are the top-level sim/ folder), and an installed copy stays hidden. The editable install's
    # import hook maps thresh2hdl.sim to sim/ regardless; it is taken out here, as a regular
    # install or a plain checkout has none. Only the output folder and the simulator (the
    # testbench template is read whatever the simulator) are changed.
    code = code_blocks(README, "python")[0]
    assert code.count('"build/pump"') == 1 and code.count("BuildOptions(pipeline=2)") == 1
    code = code.replace('"build/pump"', repr(str(tmp_path / "pump"))).replace(
        "BuildOptions(pipeline=2)", 'BuildOptions(pipeline=2, simulator="amaranth", vectors=200)')
    prelude = ("import sys\nsys.meta_path[:] = [f for f in sys.meta_path\n"
               "                 if 'editable' not in getattr(f, '__module__', '')]\n")
    # The Verilator harness's template too (the other template reader).
    after = ("\nfrom thresh2hdl.circuit import UnitConfig, make_component\n"
             "from thresh2hdl.verilator import harness_text\n"
             "from thresh2hdl.verilog import port_table\n"
             "component = make_component(UnitConfig(model, pipeline=2))\n"
             "print('harness', model.module in harness_text(port_table(component, model), "
             "model.module))\n"
             "print('from', thresh2hdl.__file__)\n")
    result = subprocess.run([sys.executable, "-c", prelude + code + after], cwd=ROOT,
                            capture_output=True, text=True, timeout=600)
    assert result.returncode == 0, result.stderr[-2000:]
    assert "0 mismatches" in result.stdout and "harness True" in result.stdout
    assert f"from {ROOT / 'thresh2hdl' / '__init__.py'}" in result.stdout
    assert (tmp_path / "pump" / "pump_fault_tb.v").read_text().startswith("//")
