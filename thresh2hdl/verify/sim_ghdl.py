"""A self-checking VHDL-2008 testbench for the emitted entity, and GHDL to run it.

The testbench (template ``sim/thresh_tb.vhd.in``) reads the same vector files as the Verilog
testbench (:func:`~thresh2hdl.verify.sim_icarus.write_testbench` writes them) and writes the
same response lines, so a VHDL file is judged cycle by cycle exactly as the Verilog is.
"""

import itertools
import tempfile
from pathlib import Path

from ..errors import ToolError
from ..outdir import write_text
from ..tools import find_tool, run, tool_version
from .backend import SimulatorBackend
from .sim_icarus import (EXPECTED_FILE, RESPONSES_FILE, STIMULUS_FILE, expected_layout,
                         field_conditions, logical_ports, packed_members, read_responses,
                         stimulus_layout, write_testbench)
from .templates import template_text

__all__ = ["GhdlBackend", "VHDL_STANDARD", "LINT_WARNINGS", "vhdl_run_command", "ghdl_version", "ghdl_lint", "vhdl_testbench_name",
           "vhdl_testbench_text", "write_vhdl_testbench", "simulate_ghdl", "ghdl_reading"]

VHDL_STANDARD = "--std=08"
# Every warning GHDL 2.0 can give on analysis (``ghdl opts-help``), so that "no warning" means
# something.
# numeric_std warns of the registers' unknown values at time 0, before the reset edge.
RUN_OPTIONS = "--ieee-asserts=disable-at-0"
LINT_WARNINGS = ("-Wbinding", "-Wreserved", "-Wlibrary", "-Wbody", "-Wspecs", "-Wunused")


def vhdl_testbench_name(module):
    return f"{module}_tb.vhd"


def vhdl_run_command(module, vhdl_name):
    """How to run the VHDL testbench in GHDL, from the folder."""
    return (f"ghdl -a {VHDL_STANDARD} {vhdl_name} {vhdl_testbench_name(module)} && "
            f"ghdl --elab-run {VHDL_STANDARD} {module}_tb {RUN_OPTIONS}")


def _signal(port):
    kind = "std_logic" if port.width == 1 else f"std_logic_vector({port.width - 1} downto 0)"
    start = "" if port.direction == "output" else \
        (" := '0'" if port.width == 1 else " := (others => '0')")
    return f"  signal tb_{port.name} : {kind}{start};"


def _as_vector(port):
    return f"std_logic_vector'(0 => tb_{port.name})" if port.width == 1 else f"tb_{port.name}"


# The testbench's own clock and reset (``rst`` high asserts it); an active-low reset port is
# driven by a signal of the complement.
_CLOCKING = {"clk": "clk", "rst": "rst", "rst_n": "tb_rst_n"}


def _packing(declared, ports):
    """Concurrent statements that fill each packed input port from the logical inputs (the
    bits above each code ones, which the design must ignore) and read the logical outputs
    from each packed output port's lanes."""
    lines = []
    for port in declared:
        members = packed_members(declared, ports, port.name)
        if not members:
            continue
        if port.direction == "input":
            parts = []
            for member, lane in reversed(members):
                pad = lane.lane_bits - lane.width
                parts += ([f"std_logic_vector'({pad - 1} downto 0 => '1')"] if pad else []) \
                    + [_as_vector(member)]
            lines.append(f"  tb_{port.name} <= {' & '.join(parts)};")
        else:
            for member, lane in members:
                select = f"{lane.offset}" if member.width == 1 else \
                    f"{lane.offset + lane.width - 1} downto {lane.offset}"
                lines.append(f"  tb_{member.name} <= tb_{port.name}({select});")
    return lines


def vhdl_testbench_text(ports, module, cycles, vhdl_name, *, flag_checked=False,
                        flag_masks_results=False):
    """Testbench source for the entity ``module`` with ``ports`` (from
    :func:`~thresh2hdl.emit.verilog.port_table`); the flags as for
    :func:`~thresh2hdl.verify.sim_icarus.testbench_text`."""
    declared, ports = ports, logical_ports(ports)
    logical = {port.name for port in ports}
    signals = [_signal(port) for port in ports if port.internal not in _CLOCKING]
    signals += [_signal(port) for port in declared
                if port.name not in logical and port.internal not in _CLOCKING]
    if any(port.internal == "rst_n" for port in declared):
        signals.append("  signal tb_rst_n : std_logic;")
    connections = [f"      {port.name} => {_CLOCKING.get(port.internal, 'tb_' + port.name)}"
                   for port in declared]
    unpack, offset = [], 0
    for port, width in stimulus_layout(ports):
        select = f"{offset}" if width == 1 else f"{offset + width - 1} downto {offset}"
        unpack.append(f"  tb_{port.name} <= stimulus({select});")
        offset += width
    stim_bits = offset
    layout = expected_layout(ports, flag_checked)
    offsets = dict(zip((label for label, _, _ in layout),
                       itertools.accumulate((width for _, _, width in layout), initial=0)))
    checks, responses, offset = [], [], 0
    conditions = field_conditions(layout, flag_masks_results)
    for position, ((label, port, width), when) in enumerate(zip(layout, conditions)):
        want = f"want({offset + width - 1} downto {offset})" if width > 1 else \
            f"want({offset} downto {offset})"
        test = f'check("{label}", {_as_vector(port)}, {want});'
        if when:
            bits = [f"want({offsets[w[1:]]}) = '0'" if w.startswith("!")
                    else f"want({offsets[w]}) = '1'" for w in when]
            test = f"if {' and '.join(bits)} then\n  {test}\nend if;"
        checks += ["      " + line for line in test.splitlines()]
        binary = position < 2 or label == "range flag"
        responses.append(f"to_string(tb_{port.name})" if binary and width == 1
                         else f"to_hstring({_as_vector(port)})")
        offset += width
    values = {
        "MODULE": module, "TB_MODULE": f"{module}_tb", "CYCLES": str(cycles),
        "STIM_TOP": str(4 * -(-stim_bits // 4) - 1), "EXPECT_TOP": str(4 * -(-offset // 4) - 1),
        "SIGNALS": "\n".join(signals), "CONNECTIONS": ",\n".join(connections),
        "UNPACK": "\n".join(unpack + _packing(declared, ports)
                             + (["  tb_rst_n <= not rst;"] if "tb_rst_n" in
                                "".join(connections) else [])),
        "CHECKS": "\n".join(checks),
        "RESPONSE_FIELDS": ' & " " & '.join(responses),
        "STIMULUS": STIMULUS_FILE, "EXPECTED": EXPECTED_FILE, "RESPONSES": RESPONSES_FILE,
        "RUN_COMMAND": vhdl_run_command(module, vhdl_name),
    }
    text = template_text("thresh_tb.vhd.in")
    for key, value in values.items():
        text = text.replace(f"@{key}@", value)
    return text


def write_vhdl_testbench(folder, ports, module, stimulus, vhdl_name):
    """Write the VHDL testbench beside the vector files that
    :func:`~thresh2hdl.verify.sim_icarus.write_testbench` writes; returns its file name."""
    name = vhdl_testbench_name(module)
    write_text(Path(folder) / name, vhdl_testbench_text(
        ports, module, stimulus.cycles, vhdl_name,
        flag_checked=stimulus.expect_flags is not None,
        flag_masks_results=stimulus.flag_masks_results))
    return name


def _ghdl():
    return find_tool("ghdl")


def ghdl_version():
    return tool_version(_ghdl())


def _checked(command, workdir):
    result = run(command, cwd=workdir)
    if result.returncode != 0 or result.stderr.strip():
        message = (result.stderr or result.stdout).strip().splitlines()
        raise ToolError(f"ghdl failed: {message[0] if message else result.returncode}")
    return result.stdout


def ghdl_lint(vhdl_path):
    """Analyse a VHDL file with every GHDL warning on; raises ToolError on any warning."""
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-ghdl-lint-") as folder:
        _checked([_ghdl(), "-a", VHDL_STANDARD, *LINT_WARNINGS,
                  str(Path(vhdl_path).resolve())], folder)


def ghdl_reading(vhdl_text, module):
    """The VHDL as GHDL's own synthesis reads it, written out as Verilog (``ghdl --synth
    --out=verilog``): an independent tool's reading of the file, for the proof and the
    estimate to take."""
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-ghdl-synth-") as folder:
        path = Path(folder) / f"{module}.vhd"
        path.write_text(vhdl_text, encoding="utf-8")
        result = run([_ghdl(), "--synth", VHDL_STANDARD, "--out=verilog", path.name, "-e",
                      module], cwd=folder)
    if result.returncode != 0 or not result.stdout.strip():
        message = (result.stderr or result.stdout).strip().splitlines()
        raise ToolError(f"GHDL could not synthesise the VHDL: "
                        f"{message[0] if message else result.returncode}")
    return result.stdout


def simulate_ghdl(vhdl_path, ports, module, stimulus, workdir):
    """Analyse and run the VHDL file with its testbench in GHDL; record every cycle."""
    workdir = Path(workdir)
    workdir.mkdir(parents=True, exist_ok=True)
    vhdl_path = Path(vhdl_path)
    write_testbench(workdir, ports, module, stimulus, None)     # the vector files alone
    bench = write_vhdl_testbench(workdir, ports, module, stimulus, vhdl_path.name)
    (workdir / vhdl_path.name).write_text(vhdl_path.read_text(encoding="utf-8"),
                                          encoding="utf-8")
    _checked([_ghdl(), "-a", VHDL_STANDARD, vhdl_path.name, bench], workdir)
    output = _checked([_ghdl(), "--elab-run", VHDL_STANDARD, f"{module}_tb", RUN_OPTIONS],
                      workdir)
    return read_responses(workdir / RESPONSES_FILE, ports, stimulus, "ghdl"), output


class GhdlBackend(SimulatorBackend):
    """GHDL, which runs the VHDL text with the self-checking VHDL testbench."""

    name = "ghdl"

    def __init__(self, vhdl_text, ports, module):
        self.vhdl_text, self.ports, self.module = vhdl_text, ports, module

    def version(self):
        return ghdl_version()

    def run(self, stimulus, progress=None):
        with tempfile.TemporaryDirectory(prefix="thresh2hdl-ghdl-") as folder:
            path = Path(folder) / f"{self.module}.vhd"
            path.write_text(self.vhdl_text, encoding="utf-8")
            result, _ = simulate_ghdl(path, self.ports, self.module, stimulus,
                                      Path(folder) / "run")
        return result
