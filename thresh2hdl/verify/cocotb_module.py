"""A cocotb 2.x test module for the emitted Verilog: the exported testbench in Python.

Filled in from the template ``sim/thresh_cocotb.py.in``. It replays the folder's own vector
files (written by :func:`~thresh2hdl.verify.sim_icarus.write_testbench`), so the fields it
unpacks are laid out here exactly as that function packs them, and a Python user runs the same
cycles with the same expectations as the Verilog testbench.
"""

import json

from .sim_icarus import _score_ports, logical_ports, stimulus_layout
from .templates import template_text

__all__ = ["CYCLES_VARIABLE", "cocotb_file_name", "cocotb_test_text", "stimulus_fields",
           "expected_fields"]

CYCLES_VARIABLE = "THRESH2HDL_CYCLES"   # replay only the first N cycles (default all)


def cocotb_file_name(module):
    return f"test_{module}.py"


def stimulus_fields(ports):
    """(port, width) of each stimulus word, low bits first: the features in model order,
    in_valid, out_ready, then the weight write port (strobe, address, data) and the clock
    enable when present (:func:`~thresh2hdl.verify.sim_icarus.stimulus_layout`)."""
    return [(port.name, width) for port, width in stimulus_layout(ports)]


def expected_fields(ports, *, flag_checked, flag_masks_results):
    """(port, width, when compared) of each expected word, low bits first: in_ready,
    out_valid, the decision, the out-of-range flag (when checked), each score."""
    ports = logical_ports(ports)
    by_role = {port.internal: port for port in ports}
    results = "valid unflagged" if flag_masks_results else "valid"
    fields = [(by_role["in_ready"].name, 1, "always"), (by_role["out_valid"].name, 1, "always"),
              (by_role["y"].name, by_role["y"].width, results)]
    if flag_checked:
        fields.append((by_role["out_of_range"].name, 1, "valid"))
    return fields + [(name, width, results) for name, width in _score_ports(ports)]


def _python(value):
    """A Python literal of a name, a number, None or a tuple of them (names in double quotes,
    as JSON writes them: our names are plain identifiers)."""
    if isinstance(value, tuple):
        return f"({', '.join(_python(item) for item in value)})"
    return "None" if value is None else json.dumps(value)


def _rows(rows):
    return "\n".join(f"    {_python(tuple(row))}," for row in rows)


def cocotb_test_text(ports, module, cycles, files, verilog_name, *, flag_checked=False,
                     flag_masks_results=False):
    """The module's text, for a design with ``ports`` (:func:`~thresh2hdl.emit.port_table`)
    replaying ``cycles`` cycles of the vector files named by ``files``
    (:class:`~thresh2hdl.verify.sim_icarus.TestbenchFiles`)."""
    if getattr(ports, "lanes", None):
        raise ValueError("the cocotb module drives a design's own ports, not packed streams")
    by_role = {port.internal: port.name for port in ports}
    expected = expected_fields(ports, flag_checked=flag_checked,
                               flag_masks_results=flag_masks_results)
    flag_bit = 2 + expected[2][1] if flag_checked else None
    values = {
        "MODULE": module, "VERILOG": verilog_name, "CYCLES": str(cycles),
        "CYCLES_VARIABLE": CYCLES_VARIABLE, "FILE_NAME": cocotb_file_name(module),
        "STIMULUS": files.stimulus, "EXPECTED": files.expected, "TESTBENCH": files.testbench,
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
