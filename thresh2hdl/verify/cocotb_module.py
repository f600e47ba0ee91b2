"""A cocotb 2.x test module for the emitted design: the exported testbench in Python.

Filled in from the template ``sim/thresh_cocotb.py.in``. It replays the folder's own vector
files (written by :func:`~thresh2hdl.verify.sim_icarus.write_testbench`), so the fields it
unpacks are laid out here exactly as that function packs them, and a Python user runs the same
cycles with the same expectations as the Verilog and VHDL testbenches. Each field names the
declared port that carries it and its first bit there: a port of its own at bit 0, or a lane
of a packed port (the AXI4-Stream form's TDATA), as the Verilog testbench packs and unpacks
them (``sim_icarus.packed_members``).
"""

import json

from .side import side_ports
from .sim_icarus import _score_ports, logical_ports, stimulus_layout
from .templates import template_text

__all__ = ["CYCLES_VARIABLE", "COCOTB_SIMULATORS", "cocotb_file_name", "cocotb_test_text",
           "stimulus_fields", "expected_fields"]

CYCLES_VARIABLE = "THRESH2HDL_CYCLES"   # replay only the first N cycles (default all)

# The simulators the module runs through cocotb's runner, by the language each reads.
COCOTB_SIMULATORS = {"verilog": "icarus", "vhdl": "ghdl"}


def cocotb_file_name(module):
    return f"test_{module}.py"


def _carriers(ports):
    """Each logical port's carrier by its name: (declared port, first bit, lane bits)."""
    lanes = getattr(ports, "lanes", {})
    carriers = {}
    for port in logical_ports(ports):
        if port.internal in lanes:
            packed, lane = lanes[port.internal]
            carriers[port.name] = (packed, lane.offset, lane.lane_bits)
        else:
            carriers[port.name] = (port.name, 0, port.width)
    return carriers


def stimulus_fields(ports):
    """(name, width, port, offset, pad) of each stimulus word's field, low bits first: the
    features in model order, in_valid, out_ready, then the weight write port (strobe,
    address, data) and the clock enable when present
    (:func:`~thresh2hdl.verify.sim_icarus.stimulus_layout`); each driven on ``port`` from bit
    ``offset``, with ``pad`` ones above it (the rest of a packed lane, which the design
    ignores)."""
    carriers = _carriers(ports)
    fields = []
    for port, width in stimulus_layout(ports):
        packed, offset, lane_bits = carriers[port.name]
        fields.append((port.name, width, packed, offset, lane_bits - width))
    return fields


def expected_fields(ports, *, flag_checked, flag_masks_results):
    """(name, width, when compared, port, offset) of each expected word's field, low bits
    first: in_ready, out_valid, the decision, the out-of-range flag (when checked), each
    score, then the side channel's outputs (an AXI4-Lite response's payload compared
    ``while`` its VALID is expected high); each read from bit ``offset`` of ``port``."""
    carriers = _carriers(ports)
    logical = logical_ports(ports)
    by_role = {port.internal: port for port in logical}
    results = "valid unflagged" if flag_masks_results else "valid"
    fields = [(by_role["in_ready"].name, 1, "always"), (by_role["out_valid"].name, 1, "always"),
              (by_role["y"].name, by_role["y"].width, results)]
    if flag_checked:
        fields.append((by_role["out_of_range"].name, 1, "valid"))
    fields += [(name, width, results) for name, width in _score_ports(logical)]
    channel, side = side_ports(logical)
    fields += [(side[name].name, side[name].width,
                f"while {side[channel.checked_while[name]].name}"
                if name in channel.checked_while else "always")
               for name in channel.outputs] if channel else []
    return [(name, width, when, *carriers[name][:2]) for name, width, when in fields]


def _python(value):
    """A Python literal of a name, a number, None or a tuple or dict of them (names in double
    quotes, as JSON writes them: our names are plain identifiers)."""
    if isinstance(value, tuple):
        return f"({', '.join(_python(item) for item in value)})"
    if isinstance(value, list):
        return f"[{', '.join(_python(item) for item in value)}]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{_python(k)}: {_python(v)}" for k, v in value.items()) + "}"
    return "None" if value is None else json.dumps(value)


def _rows(rows):
    return "\n".join(f"    {_python(tuple(row))}," for row in rows)


_RUN_WITH = {
    "icarus": "Icarus Verilog (11 or later) reads the Verilog",
    "ghdl": "GHDL (2.0 or later, VHDL-2008) reads the VHDL",
}


def cocotb_test_text(ports, module, cycles, files, sources, *, flag_checked=False,
                     flag_masks_results=False):
    """The module's text, for a design with ``ports`` (:func:`~thresh2hdl.emit.port_table`)
    replaying ``cycles`` cycles of the vector files named by ``files``
    (:class:`~thresh2hdl.verify.sim_icarus.TestbenchFiles`). ``sources``: the design's files
    for each simulator that can run it (a key of :data:`COCOTB_SIMULATORS`' values), the default
    first."""
    unknown = set(sources) - set(COCOTB_SIMULATORS.values())
    if not sources or unknown:
        raise ValueError(f"the cocotb module runs in {', '.join(COCOTB_SIMULATORS.values())}; "
                         f"got {sorted(sources)}")
    by_role = {port.internal: port.name for port in ports}
    expected = expected_fields(ports, flag_checked=flag_checked,
                               flag_masks_results=flag_masks_results)
    flag_bit = 2 + expected[2][1] if flag_checked else None
    simulators = list(sources)
    values = {
        "MODULE": module, "CYCLES": str(cycles), "DESIGN": " or ".join(
            name for simulator in simulators for name in sources[simulator]),
        "RUN_WITH": "; ".join(_RUN_WITH[simulator] for simulator in simulators),
        "SIMULATOR_CHOICE": " [--simulator {" + ",".join(simulators) + "}]"
        if len(simulators) > 1 else "",
        "CYCLES_VARIABLE": CYCLES_VARIABLE, "FILE_NAME": cocotb_file_name(module),
        "STIMULUS": files.stimulus, "EXPECTED": files.expected,
        "SOURCES": _python({simulator: list(sources[simulator]) for simulator in simulators}),
        "CLOCK": _python(by_role.get("clk")),
        "RESET": _python(by_role.get("rst", by_role.get("rst_n"))),
        "RESET_ACTIVE": "0" if "rst_n" in by_role else "1",
        "FLAG_BIT": _python(flag_bit),
        "STIMULUS_FIELDS": _rows(stimulus_fields(ports)), "EXPECTED_FIELDS": _rows(expected),
    }
    text = template_text("thresh_cocotb.py.in")
    for key, value in values.items():
        text = text.replace(f"@{key}@", value)
    return text
