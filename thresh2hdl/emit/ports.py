"""The ports a Verilog file declares, and a user's netlist checked against the model's ports."""

import re
from pathlib import Path
from typing import NamedTuple

from ..errors import InputError

__all__ = ["Port", "PortTable", "verilog_ports", "read_netlist", "check_ports"]


class Port(NamedTuple):
    """One port of a design: the component's member name (``internal``: ``x0``, ``y``,
    ``score``, ``clk``...), the name the Verilog gives it, direction, width and signedness."""

    internal: str
    name: str
    direction: str       # "input" or "output"
    width: int
    signed: bool


class PortTable(tuple):
    """The ports a module declares, in order (:class:`Port` rows), and the logical ports
    behind them: ``logical``, the rows of the component's members (each feature, the decision,
    the scores... as the plain interface declares them) and ``lanes``, for a member packed
    into a wider port (the AXI4-Stream form's TDATA), ``(that port's Verilog name,
    hardware.Lane)``. With the plain interface the two sets of rows are the same and no
    member is packed. Every harness drives and reads the logical ports; the file declares
    these rows."""

    def __new__(cls, rows, logical=None, lanes=None):
        table = super().__new__(cls, rows)
        table.logical = table if logical is None else tuple(logical)
        table.lanes = dict(lanes or {})
        return table


_PORT_DECLARATION = re.compile(
    r"\b(input|output)\s+(?:wire\s+|reg\s+)?(signed\s+)?"
    r"(?:\[\s*(\d{1,9})\s*:\s*(\d{1,9})\s*\]\s*)?"   # wider than 9 digits: no port of ours
    r"([A-Za-z_][A-Za-z0-9_$]*)")


def verilog_ports(text, module):
    """Port names, directions and widths declared by ``module`` in Verilog ``text``."""
    start = re.search(rf"\bmodule\s+{re.escape(module)}\b", text)
    if start is None:
        return None
    end = text.find("endmodule", start.end())
    body = text[start.end(): end if end >= 0 else len(text)]
    body = re.sub(r"//[^\n]*|/\*.*?\*/", "", body, flags=re.S)
    ports = {}
    for direction, _signed, hi, lo, name in _PORT_DECLARATION.findall(body):
        width = abs(int(hi) - int(lo)) + 1 if hi else 1
        ports[name] = (direction, width)
    return ports


def read_netlist(path, model, ports):
    """The text of a Verilog file whose module ``model.module`` has exactly ``ports``."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as error:
        raise InputError(f"cannot read the Verilog file ({error})", source=path) from None
    return check_ports(text, model, ports, path)


def check_ports(text, model, ports, path):
    """``text`` if its module ``model.module`` has exactly ``ports`` (``path`` names it in
    errors); else one InputError."""
    declared = verilog_ports(text, model.module)
    if declared is None:
        raise InputError(f"has no module {model.module!r}", source=path)
    wanted = {port.name: (port.direction, port.width) for port in ports}
    for name, (direction, width) in wanted.items():
        if declared.get(name) != (direction, width):
            got = declared.get(name)
            raise InputError(f"port {name!r} should be {direction} [{width - 1}:0], "
                             f"{'is missing' if got is None else f'is {got[0]} of {got[1]} bits'}",
                             source=path)
    extra = sorted(set(declared) - set(wanted))
    if extra:
        raise InputError(f"has a port {extra[0]!r} that the model does not", source=path)
    return text
