"""Finding the external programs (Yosys, nextpnr, Boolector) and reading their versions.

Each is taken from the system when installed, else from its WebAssembly build on PyPI
(``yowasp-<name>``), which installs beside this Python and may not be on PATH.
"""

import re
import shutil
import subprocess
import sys
from pathlib import Path

from .errors import ToolError

__all__ = ["find_tool", "tool_version"]


def find_tool(name, hint):
    """Path of ``name`` or ``yowasp-name``; a :class:`ToolError` ending in ``hint`` if neither."""
    beside = str(Path(sys.executable).parent)
    for candidate in (name, f"yowasp-{name}"):
        path = shutil.which(candidate) or shutil.which(candidate, path=beside)
        if path:
            return path
    raise ToolError(f"{name} was not found (neither {name} nor yowasp-{name}); {hint}")


def tool_version(path):
    """A short version string, such as ``Yosys 0.70`` or ``Boolector 3.2.3``."""
    flag = "--version" if re.search(r"nextpnr|boolector", Path(path).name) else "-V"
    result = subprocess.run([path, flag], capture_output=True, text=True)
    text = (result.stdout or result.stderr).strip()
    found = re.search(r"Version (nextpnr-\S+?)\)", text) or re.search(r"(Yosys \S+)", text)
    if found:
        return found.group(1)
    lines = [line for line in text.splitlines() if not line.startswith("Preparing")]
    if "boolector" in Path(path).name and lines:
        return f"Boolector {lines[0].strip()}"
    return lines[0] if lines else "unknown"
