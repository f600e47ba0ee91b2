"""Finding the external programs (Yosys, nextpnr, Boolector) and reading their versions.

Each is taken from the system when installed, else from its WebAssembly build on PyPI
(``yowasp-<name>``), which installs beside this Python and may not be on PATH. A WebAssembly
build compiles to machine code on its first call on a machine (a minute or so; cached after)
and says so on stderr before it starts: :func:`warm_up` passes that on to the user and lets a
caller keep the compile out of the time it measures.
"""

import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from .errors import ToolError

__all__ = ["find_tool", "tool_version", "warm_up"]

# What a WebAssembly build (yowasp-runtime) prints on stderr before it compiles.
_COMPILING = "Preparing to run"


def find_tool(name, hint):
    """Path of ``name`` or ``yowasp-name``; a :class:`ToolError` ending in ``hint`` if neither."""
    beside = str(Path(sys.executable).parent)
    for candidate in (name, f"yowasp-{name}"):
        path = shutil.which(candidate) or shutil.which(candidate, path=beside)
        if path:
            return path
    raise ToolError(f"{name} was not found (neither {name} nor yowasp-{name}); {hint}")


def warm_up(path, progress=None):
    """Run the tool once, for its version; returns ``(version, whether it compiled first)``.

    Its stderr is read as it comes, so that ``progress`` hears of a first-use compile when it
    starts, not a minute later.
    """
    name = Path(path).name.removeprefix("yowasp-")
    flag = "--version" if re.search(r"nextpnr|boolector", name) else "-V"
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


def tool_version(path):
    """A short version string, such as ``Yosys 0.70`` or ``Boolector 3.2.3``."""
    return warm_up(path)[0]


def _version(name, text):
    found = re.search(r"Version (nextpnr-\S+?)\)", text) or re.search(r"(Yosys \S+)", text)
    if found:
        return found.group(1)
    lines = [line for line in text.splitlines() if not line.startswith(_COMPILING)]
    if "boolector" in name and lines:
        return f"Boolector {lines[0].strip()}"
    return lines[0] if lines else "unknown"
