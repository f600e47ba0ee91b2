"""A self-checking Verilog-2001 testbench for the emitted module, and Icarus Verilog to run it.

The testbench is filled in from the template ``sim/thresh_tb.v.in`` (shipped in the package as
``thresh2hdl/sim``). Stimulus and expectations are ``$readmemh`` files made from a
:class:`~thresh2hdl.verify.stimulus.Stimulus`, so the same cycles run here as in every other simulator.
"""

import re
import shutil
import tempfile
from pathlib import Path

import numpy as np

from ..emit import bit_range as _range
from ..errors import ToolError
from ..outdir import write_text
from ..tools import find_tool, run, tool_version
from .backend import SimulationResult, VerilogBackend
from .side import side_ports
from .stimulus import enable_column, write_columns
from .templates import template_text

__all__ = ["IcarusBackend", "TestbenchFiles", "testbench_text", "write_testbench",
           "simulate_icarus", "icarus_version", "stimulus_layout",
           "expected_layout", "read_responses"]

STIMULUS_FILE = "stimulus.hex"
EXPECTED_FILE = "expected.hex"
RESPONSES_FILE = "responses.txt"


class TestbenchFiles:
    """Names of the files a testbench reads and writes, relative to where it runs."""

    def __init__(self, module):
        self.module = module
        self.testbench = f"{module}_tb.v"
        self.stimulus = STIMULUS_FILE
        self.expected = EXPECTED_FILE
        self.responses = RESPONSES_FILE

    def run_command(self, verilog):
        return (f"iverilog -g2001 -Wall -o {self.module}_tb.vvp {self.testbench} {verilog} "
                f"&& vvp -n {self.module}_tb.vvp")


def _template():
    return template_text("thresh_tb.v.in")


def _score_ports(ports):
    return [(port.name, port.width) for port in ports if port.internal.startswith("score")]


def _write_ports(ports):
    """The weight write port (strobe, address, data), empty unless the weights are loadable."""
    order = ("weight_write", "weight_address", "weight_data")
    rows = {port.internal: (port.name, port.width) for port in ports}
    return [rows[key] for key in order if key in rows]


# The testbench's own clock and reset (``rst`` high asserts it; an active-low port is driven
# by its complement), by the port's internal name.
_CLOCKING = {"clk": "clk", "rst": "rst", "rst_n": "~rst"}


def logical_ports(ports):
    """The ports a harness drives and reads: the logical ones behind a packed interface
    (:class:`~thresh2hdl.emit.PortTable`), or the rows themselves."""
    return getattr(ports, "logical", ports)


def packed_members(declared, ports, packed):
    """The logical ports packed into the port ``packed``, with their lanes, lowest first."""
    lanes = getattr(declared, "lanes", {})
    return [(port, lanes[port.internal][1]) for port in ports
            if lanes.get(port.internal, (None,))[0] == packed]


def _packed_inputs(declared, ports, port):
    """A packed input port driven from the testbench's registers (the bits above each code
    ones, which the design must ignore); None for a port of its own."""
    members = packed_members(declared, ports, port.name)
    if port.direction != "input" or not members:
        return None
    parts = []
    for member, lane in reversed(members):
        pad = lane.lane_bits - lane.width
        parts += ([f"{{{pad}{{1'b1}}}}"] if pad else []) + [f"tb_{member.name}"]
    return "{" + ", ".join(parts) + "}"


def _unpacked_outputs(declared, ports):
    """A wire for each packed output port and the logical outputs read from its lanes."""
    lines = []
    for port in declared:
        members = packed_members(declared, ports, port.name)
        if port.direction == "output" and members:
            lines.append(f"  wire {_range(port.width)}tb_{port.name};")
            lines += [f"  assign tb_{member.name} = tb_{port.name}"
                      f"[{lane.offset + lane.width - 1}:{lane.offset}];"
                      for member, lane in members]
    return lines


def _pad(expression, width):
    return expression if width == 128 else f"{{{128 - width}'d0, {expression}}}"


def stimulus_layout(ports):
    """The stimulus word's fields, low bits first: ``(port, width)`` for each feature, in_valid,
    out_ready, then the weight write port's strobe, address and data (loadable weights), the
    side channel's inputs (:mod:`.side`: the AXI4-Lite port's, the learning ports'), then the
    clock enable (when the design has one). ``ports``: the logical ports."""
    by_role = {port.internal: port for port in logical_ports(ports)}
    fields = [(port, port.width) for port in logical_ports(ports) if port.internal.startswith("x")]
    fields += [(by_role["in_valid"], 1), (by_role["out_ready"], 1)]
    fields += [(by_role[key], by_role[key].width) for key in
               ("weight_write", "weight_address", "weight_data") if key in by_role]
    channel, side = side_ports(logical_ports(ports))
    fields += [(side[name], side[name].width) for name in channel.inputs] if channel else []
    return fields + ([(by_role["ce"], 1)] if "ce" in by_role else [])


def expected_layout(ports, flag_checked):
    """The expected word's fields, low bits first: ``(label, port, width)`` for in_ready,
    out_valid, the decision, the out-of-range flag (``flag_checked``), each score, then the
    side channel's outputs (:mod:`.side`). When each counts:
    :func:`field_conditions`."""
    ports = logical_ports(ports)
    by_role = {port.internal: port for port in ports}
    scores = [port for port in ports if port.internal.startswith("score")]
    fields = [("in_ready", by_role["in_ready"], 1), ("out_valid", by_role["out_valid"], 1),
              ("decision", by_role["y"], by_role["y"].width)]
    if flag_checked:
        fields.append(("range flag", by_role["out_of_range"], 1))
    fields += [(f"score {port.name}" if len(scores) > 1 else "score", port, port.width)
               for port in scores]
    channel, side = side_ports(ports)
    return fields + ([(f"{channel.label} {name}", side[name], side[name].width)
                      for name in channel.outputs] if channel else [])


def field_conditions(layout, flag_masks_results):
    """For each expected field, the label of the field whose expected 1 it counts under
    (None: every cycle): the results under out_valid (and, when a flag masks them, under the
    flag expected low: ``"!range flag"``), a side channel's output as the channel says (an
    AXI4-Lite response's payload under its VALID)."""
    channel, _ = side_ports([port for _, port, _ in layout])
    conditions = []
    for position, (label, port, _) in enumerate(layout):
        if channel and port.internal.startswith(channel.prefix):
            when = channel.checked_while.get(port.internal[len(channel.prefix):])
            conditions.append(None if when is None else (f"{channel.label} {when}",))
        elif position < 2:
            conditions.append(None)
        elif flag_masks_results and label not in ("range flag",):
            conditions.append(("out_valid", "!range flag"))
        else:
            conditions.append(("out_valid",))
    return conditions


def testbench_text(ports, module, cycles, files, verilog_name, *, flag_checked=False,
                   flag_masks_results=False):
    """Testbench source for a module with ``ports`` (from :func:`thresh2hdl.emit.verilog.port_table`).
    ``flag_checked``: the expectations hold the out-of-range flag; ``flag_masks_results``: the
    decision and scores of a flagged result are not specified (a flag without a clamp), so
    they are compared only where the flag is low."""
    declared, ports = ports, logical_ports(ports)
    input_regs = [f"  reg {_range(port.width)}tb_{port.name};" for port in ports
                  if port.direction == "input" and port.internal not in _CLOCKING]
    output_wires = [f"  wire {_range(port.width)}tb_{port.name};" for port in ports
                    if port.direction == "output"]
    output_wires += _unpacked_outputs(declared, ports)
    connections = []
    for port in declared:
        signal = _CLOCKING.get(port.internal, f"tb_{port.name}")
        connections.append(f"    .{port.name}({_packed_inputs(declared, ports, port) or signal})")
    stimulus = stimulus_layout(ports)
    stim_concat = ", ".join(f"tb_{port.name}" for port, _ in reversed(stimulus))
    stim_bits = sum(width for _, width in stimulus)
    layout = expected_layout(ports, flag_checked)
    fields = [(label, f"tb_{port.name}", width) for label, port, width in layout]
    offsets = dict(zip((label for label, _, _ in layout),
                       np.cumsum([0] + [width for _, _, width in layout]).tolist()))
    checks, offset = [], 0
    for (label, signal, width), when in zip(fields, field_conditions(layout,
                                                                     flag_masks_results)):
        want = f"want[{offset + width - 1}:{offset}]" if width > 1 else f"want[{offset}]"
        test = (f"if ({signal} !== {want})\n"
                f"  report_mismatch(\"{label[:10]}\", {_pad(signal, width)}, {_pad(want, width)});")
        if when:
            bits = [f"!want[{offsets[w[1:]]}]" if w.startswith("!") else f"want[{offsets[w]}]"
                    for w in when]
            test = f"if ({' && '.join(bits)}) " + test.replace("\n", "\n  ")
        checks += ["      " + line for line in test.splitlines()]
        offset += width
    response_format = " ".join(["%b", "%b", "%h"] + ["%b"] * flag_checked
                               + ["%h"] * (len(fields) - 3 - flag_checked))
    response_fields = ", ".join(signal for _, signal, _ in fields)
    values = {
        "MODULE": module, "TB_MODULE": f"{module}_tb", "CYCLES": str(cycles),
        "STIM_BITS": str(stim_bits), "EXPECT_BITS": str(offset),
        "INPUT_REGS": "\n".join(input_regs), "OUTPUT_WIRES": "\n".join(output_wires),
        "CONNECTIONS": ",\n".join(connections), "STIM_CONCAT": stim_concat,
        "CHECKS": "\n".join(checks), "RESPONSE_FORMAT": response_format,
        "RESPONSE_FIELDS": response_fields,
        "STIMULUS": files.stimulus, "EXPECTED": files.expected, "RESPONSES": files.responses,
        "RUN_COMMAND": files.run_command(verilog_name),
    }
    text = _template()
    for key, value in values.items():
        text = text.replace(f"@{key}@", value)
    if any(port.internal == "ce" for port in ports):
        # The clock enable is the stimulus word's top bit (a design without one: as it was).
        text = text.replace("stimulus per cycle : {", "stimulus per cycle : {clock enable, ", 1)
    return text


_HEX_DIGITS = np.frombuffer(b"0123456789abcdef", dtype=np.uint8)
_HEX_ROWS = 2048      # rows packed at a time: bounded memory for designs of thousands of inputs


def _hex_lines(columns, widths):
    """One hex word per row: the columns packed with the first column in the low bits."""
    total = sum(widths)
    digits = max(1, -(-total // 4))
    arrays = [np.asarray(column) for column in columns]
    if any(a.dtype == object for a in arrays) or max(widths, default=1) > 62:
        return _hex_lines_wide(arrays, widths, digits)
    rows = len(arrays[0]) if arrays else 0
    out = []
    for start in range(0, rows, _HEX_ROWS):
        # Every column's bits (two's complement, LSB first) side by side, then read as
        # nibbles, most significant first: the same words as packing each row into an int.
        bits = np.concatenate(
            [((a[start:start + _HEX_ROWS, None].astype(np.int64) >> np.arange(w)) & 1)
             .astype(np.uint8) for a, w in zip(arrays, widths)]
            + [np.zeros((min(_HEX_ROWS, rows - start), digits * 4 - total), dtype=np.uint8)],
            axis=1)
        nibbles = bits.reshape(len(bits), digits, 4) @ np.array([1, 2, 4, 8], dtype=np.uint8)
        text = _HEX_DIGITS[nibbles[:, ::-1]]
        newline = np.full((len(text), 1), ord("\n"), dtype=np.uint8)
        out.append(np.concatenate([text, newline], axis=1).tobytes().decode("ascii"))
    return "".join(out) if rows else "\n"


def _hex_lines_wide(arrays, widths, digits):
    """As :func:`_hex_lines`, in Python integers (columns wider than int64 holds)."""
    rows = []
    shifts = np.cumsum([0] + list(widths[:-1])).tolist()
    for row in zip(*arrays):
        value = 0
        for item, shift, width in zip(row, shifts, widths):
            value |= (int(item) & ((1 << width) - 1)) << shift
        rows.append(f"{value:0{digits}x}")
    return "\n".join(rows) + "\n"


def write_testbench(folder, ports, module, stimulus, verilog_name):
    """Write the testbench and its two vector files into ``folder``; returns the file names.
    ``verilog_name`` None: the vector files alone (a VHDL-only folder's testbench reads them)."""
    folder = Path(folder)
    files = TestbenchFiles(module)
    declared, ports = ports, logical_ports(ports)
    features = [port.width for port in ports if port.internal.startswith("x")]
    inputs = stimulus.inputs
    columns = [inputs[:, i] for i in range(inputs.shape[1])]
    columns += [stimulus.in_valid.astype(np.int64), stimulus.out_ready.astype(np.int64)]
    writes = _write_ports(ports)
    if writes:
        columns += list(write_columns(stimulus))
    channel, side = side_ports(ports)
    if channel:
        columns += stimulus.bus.rows(channel.inputs)
    enable = [1] if any(port.internal == "ce" for port in ports) else []
    if enable:
        columns.append(enable_column(stimulus).astype(np.int64))
    write_text(folder / files.stimulus,
               _hex_lines(columns, features + [1, 1] + [w for _, w in writes]
                          + [side[name].width for name in (channel.inputs if channel else ())]
                          + enable))
    scores = _score_ports(ports)
    decision_bits = next(port.width for port in ports if port.internal == "y")
    index = np.maximum(stimulus.expect_out_index, 0)
    valid = stimulus.expect_out_valid
    decisions = np.where(valid, stimulus.expect_decisions[index], 0)
    columns = [stimulus.expect_in_ready.astype(np.int64), valid.astype(np.int64), decisions]
    widths = [1, 1, decision_bits]
    if stimulus.expect_flags is not None:
        columns.append(np.where(valid, stimulus.expect_flags[index], 0).astype(np.int64))
        widths.append(1)
    expect = stimulus.expect_scores.reshape(len(stimulus.expect_scores), -1)
    for unit, (_, width) in enumerate(scores):
        columns.append(np.where(valid, expect[index, unit], 0))
        widths.append(width)
    if channel:
        columns += stimulus.bus.shown(channel.outputs)
        widths += [side[name].width for name in channel.outputs]
    write_text(folder / files.expected, _hex_lines(columns, widths))
    if verilog_name is not None:
        write_text(folder / files.testbench,
                   testbench_text(declared, module, stimulus.cycles, files, verilog_name,
                                  flag_checked=stimulus.expect_flags is not None,
                                  flag_masks_results=stimulus.flag_masks_results))
    return files


def icarus_version():
    return tool_version(find_tool("iverilog"))


def _decode(text, width):
    if any(c in text for c in "xXzZ"):
        return None
    value = int(text, 16)
    if value >> (width - 1):
        value -= 1 << width
    return value


def simulate_icarus(verilog_path, ports, module, stimulus, workdir):
    """Compile and run the emitted Verilog with its testbench in Icarus; record every cycle."""
    workdir = Path(workdir)
    workdir.mkdir(parents=True, exist_ok=True)
    verilog_path = Path(verilog_path).resolve()
    files = write_testbench(workdir, ports, module, stimulus, verilog_path.name)
    shutil.copyfile(verilog_path, workdir / verilog_path.name)
    compiled = workdir / f"{module}_tb.vvp"
    # A netlist with its cell library (more than one module) leaves cell inputs it does not
    # use unconnected (ECP5's TRELLIS_FF M), which -Wall reports as port binding warnings.
    lenient = ["-Wno-portbind"] if len(re.findall(r"^\s*module\b", verilog_path.read_text(
        encoding="utf-8"), re.M)) > 1 else []
    steps = [[find_tool("iverilog"), "-g2001", "-Wall", *lenient, "-o", compiled.name,
              files.testbench, verilog_path.name], [find_tool("vvp"), "-n", compiled.name]]
    outputs = []
    for command in steps:
        result = run(command, cwd=workdir)
        if result.returncode != 0 or result.stderr.strip():
            message = (result.stderr or result.stdout).strip().splitlines()
            raise ToolError(f"{Path(command[0]).name} failed: "
                            f"{message[0] if message else result.returncode}")
        outputs.append(result.stdout)
    result = read_responses(workdir / files.responses, ports, stimulus, "icarus")
    return result, outputs[-1]


def read_responses(path, ports, stimulus, simulator):
    """The outputs a testbench wrote, one line per cycle, as a :class:`SimulationResult`."""
    ports = logical_ports(ports)
    scores_ports = _score_ports(ports)
    rows = Path(path).read_text().split("\n")
    rows = [row.split() for row in rows if row]
    in_ready = np.array([row[0] == "1" for row in rows])
    out_valid = np.array([row[1] == "1" for row in rows])
    decisions = np.array([-1 if any(c in row[2] for c in "xXzZ") else int(row[2], 16)
                          for row in rows])
    has_flag = stimulus.expect_flags is not None
    # An unknown (x or z) flag is -1, never a 0 that would pass where 0 is expected.
    flags = np.array([1 if row[3] == "1" else 0 if row[3] == "0" else -1 for row in rows]) \
        if has_flag else None
    first_score = 3 + has_flag
    scores = None
    if scores_ports:
        scores = np.array([[_decode(row[first_score + k], width) for k, (_, width) in
                            enumerate(scores_ports)] for row in rows], dtype=object)
        if len(scores_ports) == 1 and not any(port.internal.startswith("score0")
                                              for port in ports):
            scores = scores[:, 0]
    channel, _ = side_ports(ports)
    first = first_score + len(scores_ports)
    # An unknown bit makes the value None (never a match).
    bus = {name: np.array([_decode_unsigned(row[first + k]) for row in rows], dtype=object)
           for k, name in enumerate(channel.outputs)} if channel else None
    return SimulationResult(simulator, in_ready, out_valid, decisions, scores, flags=flags,
                            bus=bus)


def _decode_unsigned(text):
    return None if any(c in text for c in "xXzZ") else int(text, 16)


class IcarusBackend(VerilogBackend):
    """Icarus Verilog, which runs the Verilog text with the self-checking testbench."""

    name = "icarus"

    def version(self):
        return icarus_version()

    def run(self, stimulus, progress=None):
        with tempfile.TemporaryDirectory(prefix="thresh2hdl-icarus-") as folder:
            path = Path(folder) / f"{self.module}.v"
            path.write_text(self.verilog_text, encoding="utf-8")
            result, _ = simulate_icarus(path, self.ports, self.module, stimulus,
                                        Path(folder) / "run")
        return result
