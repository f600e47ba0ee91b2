"""A self-checking Verilog-2001 testbench for the emitted module, and Icarus Verilog to run it.

The testbench is filled in from the template ``sim/thresh_tb.v.in`` (shipped in the package as
``thresh2hdl/sim``). Stimulus and expectations are ``$readmemh`` files made from a
:class:`~thresh2hdl.stimulus.Stimulus`, so the same cycles run here as in every other simulator.
"""

import shutil
import subprocess
from importlib import resources
from pathlib import Path

import numpy as np

from .errors import ToolError
from .outdir import write_text
from .simulate import SimulationResult

__all__ = ["TestbenchFiles", "testbench_text", "write_testbench", "simulate_icarus",
           "icarus_version"]

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
    return resources.files("thresh2hdl.sim").joinpath("thresh_tb.v.in").read_text("utf-8")


def _range(width):
    return "" if width == 1 else f"[{width - 1}:0] "


def testbench_text(ports, module, cycles, files, verilog_name):
    """Testbench source for a module with ``ports`` (from :func:`thresh2hdl.verilog.port_table`)."""
    by_role = {internal: (name, width, signed) for internal, name, _, width, signed in ports}
    features = [(name, width) for internal, name, _, width, _ in ports if internal.startswith("x")]
    tb = lambda role: f"tb_{by_role[role][0]}"
    input_regs = [f"  reg {_range(w)}tb_{n};" for i, n, d, w, s in ports
                  if d == "input" and i not in ("clk", "rst")]
    output_wires = [f"  wire {_range(w)}tb_{n};" for i, n, d, w, s in ports if d == "output"]
    connections = []
    for internal, name, direction, width, signed in ports:
        signal = {"clk": "clk", "rst": "rst"}.get(internal, f"tb_{name}")
        connections.append(f"    .{name}({signal})")
    stim_concat = ", ".join([tb("out_ready"), tb("in_valid")]
                            + [f"tb_{n}" for n, _ in reversed(features)])
    stim_bits = 2 + sum(w for _, w in features)
    has_score = "score" in by_role
    score_bits = by_role["score"][1] if has_score else 1
    score_check = ""
    if has_score:
        score_check = (f"        if ({tb('score')} !== want[SCORE_BITS-1:0])\n"
                       f"          report_mismatch(\"score\", {{{{{128 - score_bits}{{1'b0}}}}, "
                       f"{tb('score')}}}, {{{{{128 - score_bits}{{1'b0}}}}, "
                       f"want[SCORE_BITS-1:0]}});")
    values = {
        "MODULE": module, "TB_MODULE": f"{module}_tb", "CYCLES": str(cycles),
        "STIM_BITS": str(stim_bits), "EXPECT_BITS": str(3 + score_bits),
        "SCORE_BITS": str(score_bits), "INPUT_REGS": "\n".join(input_regs),
        "OUTPUT_WIRES": "\n".join(output_wires), "CONNECTIONS": ",\n".join(connections),
        "STIM_CONCAT": stim_concat, "IN_READY": tb("in_ready"), "OUT_VALID": tb("out_valid"),
        "DECISION": tb("y"), "SCORE_CHECK": score_check,
        "RESPONSE_FIELDS": ", ".join([tb("in_ready"), tb("out_valid"), tb("y"),
                                      tb("score") if has_score else "1'b0"]),
        "STIMULUS": files.stimulus, "EXPECTED": files.expected, "RESPONSES": files.responses,
        "RUN_COMMAND": files.run_command(verilog_name),
    }
    text = _template()
    for key, value in values.items():
        text = text.replace(f"@{key}@", value)
    return text


def _hex_lines(columns, widths):
    """One hex word per row: the columns packed with the first column in the low bits."""
    total = sum(widths)
    digits = max(1, -(-total // 4))
    rows = []
    shifts = np.cumsum([0] + list(widths[:-1])).tolist()
    for row in zip(*columns):
        value = 0
        for item, shift, width in zip(row, shifts, widths):
            value |= (int(item) & ((1 << width) - 1)) << shift
        rows.append(f"{value:0{digits}x}")
    return "\n".join(rows) + "\n"


def write_testbench(folder, ports, module, stimulus, verilog_name):
    """Write the testbench and its two vector files into ``folder``; returns the file names."""
    folder = Path(folder)
    files = TestbenchFiles(module)
    features = [w for internal, _, _, w, _ in ports if internal.startswith("x")]
    inputs = stimulus.inputs
    columns = [inputs[:, i] for i in range(inputs.shape[1])]
    columns += [stimulus.in_valid.astype(np.int64), stimulus.out_ready.astype(np.int64)]
    write_text(folder / files.stimulus, _hex_lines(columns, features + [1, 1]))
    score_port = [w for internal, _, _, w, _ in ports if internal == "score"]
    score_bits = score_port[0] if score_port else 1
    index = np.maximum(stimulus.expect_out_index, 0)
    valid = stimulus.expect_out_valid
    scores = np.where(valid, stimulus.expect_scores[index], 0) if score_port else \
        np.zeros(stimulus.cycles, dtype=np.int64)
    decisions = np.where(valid, stimulus.expect_decisions[index], 0)
    columns = [scores, decisions, valid.astype(np.int64),
               stimulus.expect_in_ready.astype(np.int64)]
    write_text(folder / files.expected, _hex_lines(columns, [score_bits, 1, 1, 1]))
    write_text(folder / files.testbench,
               testbench_text(ports, module, stimulus.cycles, files, verilog_name))
    return files


def _tool(name):
    path = shutil.which(name)
    if path is None:
        raise ToolError(f"{name} (Icarus Verilog) was not found on PATH; install it (Debian: "
                        f"apt-get install iverilog) or choose another simulator")
    return path


def icarus_version():
    result = subprocess.run([_tool("iverilog"), "-V"], capture_output=True, text=True)
    return result.stdout.splitlines()[0].strip() if result.stdout else "unknown"


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
    steps = [[_tool("iverilog"), "-g2001", "-Wall", "-o", compiled.name, files.testbench,
              verilog_path.name], [_tool("vvp"), "-n", compiled.name]]
    outputs = []
    for command in steps:
        result = subprocess.run(command, cwd=workdir, capture_output=True, text=True)
        if result.returncode != 0 or result.stderr.strip():
            message = (result.stderr or result.stdout).strip().splitlines()
            raise ToolError(f"{Path(command[0]).name} failed: "
                            f"{message[0] if message else result.returncode}")
        outputs.append(result.stdout)
    score_bits = next((w for i, _, _, w, _ in ports if i == "score"), None)
    rows = (workdir / files.responses).read_text().split("\n")
    rows = [row.split() for row in rows if row]
    in_ready = np.array([row[0] == "1" for row in rows])
    out_valid = np.array([row[1] == "1" for row in rows])
    decisions = np.array([1 if row[2] == "1" else (0 if row[2] == "0" else -1) for row in rows])
    scores = None
    if score_bits:
        scores = np.array([_decode(row[3], score_bits) for row in rows], dtype=object)
    result = SimulationResult("icarus", in_ready, out_valid, decisions, scores)
    return result, outputs[-1]
