"""Cost of the emitted Verilog on a real FPGA flow: Yosys synthesis, nextpnr place and route.

Cell counts come from synthesising the module alone. Its ports would need more pins than a
small FPGA has, so fmax comes from placing and routing a wrapper that feeds the inputs from a
shift register and captures every output in a register before folding them into one pin:
every path of the module is then a register-to-register path, as in the engineer's design,
and no path of the wrapper's own is longer than one LUT. The tools are Yosys and nextpnr from
the system when installed, else the WebAssembly builds from PyPI (``pip install
'thresh2hdl[synth]'``), whose first call compiles for about a minute and is cached after.
"""

import json
import re
import tempfile
from pathlib import Path

from ..errors import DoesNotFitError, InputError, ToolError
from ..tools import find_tool, run, tool_version
from .devices import choose_device

__all__ = ["TARGETS", "CELL_NAMES", "LUT4_RULES", "LOGIC_CELL_RULES", "device_name",
           "estimate_cost", "lut4_equivalents", "needs_text", "shortfall", "share_used",
           "wrapper_text"]

TARGETS = {
    # target: (Yosys synthesis command, nextpnr program, its default device's arguments;
    # the parts of each family are in devices.DEVICES)
    "ice40": ("synth_ice40", "nextpnr-ice40", ["--up5k", "--package", "sg48"]),
    "ecp5": ("synth_ecp5", "nextpnr-ecp5", ["--25k", "--package", "CABGA256"]),
}
# Whether multipliers go to DSP blocks unless asked, and the synthesis flag that changes it:
# Yosys maps to the UP5K's SB_MAC16 only with -dsp, and to ECP5's MULT18X18D unless -nodsp.
_DSP_DEFAULT = {"ice40": (False, "-dsp"), "ecp5": (True, "-nodsp")}

_FLOP = re.compile(r"^(SB_DFF|TRELLIS_FF|FD)")

# target: (LUT cell, carry cell), the raw cells the LUT4 equivalents are counted from.
CELL_NAMES = {"ice40": ("SB_LUT4", "SB_CARRY"), "ecp5": ("LUT4", "CCU2C")}
# LUT4 equivalents make the targets comparable. On iCE40 a logic cell is one LUT4 with its
# carry logic and flip-flop, and SB_CARRY sits in the cell of the LUT4 that computes the sum
# bit (iCE40 UltraPlus family data sheet, the logic cell; from memory). On ECP5 a CCU2C is a
# whole slice in ripple mode, two LUT4s and their carry (ECP5 and ECP5-5G family data sheet,
# the slice, from memory; Yosys 0.70's share/ecp5/ccu2c_sim.vh models it as LUT4 lut4_0 and
# lut4_1). PFUMX and L6MUX21 only join LUT outputs and add none.
_LUT4_PER_CARRY = {"ice40": 0, "ecp5": 2}
LUT4_RULES = {
    "ice40": "LUT4 equivalents are the SB_LUT4 cells: an SB_CARRY sits in the logic cell of "
             "the LUT4 that computes its sum bit and adds none",
    "ecp5": "LUT4 equivalents are the LUT4 cells plus two for each CCU2C: a CCU2C carry cell "
            "is a slice of two LUT4s",
}
# nextpnr's names for what a device has (its "Device utilisation" table), in plain words.
_RESOURCES = {"ICESTORM_LC": "logic cells", "ICESTORM_DSP": "DSP blocks",
              "ICESTORM_RAM": "block RAMs", "SB_IO": "I/O pins", "SB_GB": "global buffers",
              "TRELLIS_COMB": "LUT4s", "TRELLIS_FF": "flip-flops",
              "MULT18X18D": "DSP multipliers (18x18)", "ALU54B": "DSP adders (ALU54B)",
              "DP16KD": "block RAMs", "TRELLIS_IO": "I/O pins", "DCCA": "global buffers"}
_FAMILY = {"ice40": "iCE40", "ecp5": "ECP5"}
_DSP_RESOURCES = {"ICESTORM_DSP", "MULT18X18D", "ALU54B"}
_LOGIC_RESOURCES = {"ICESTORM_LC", "TRELLIS_COMB", "TRELLIS_FF"}
# Logic cells as nextpnr counts them when it places the module in its measuring wrapper (the
# wrapper's shift chain and output registers included, so a little above the module's own):
# on iCE40 the ICESTORM_LC cells, each a LUT4 with its carry and flip-flop (a LUT4 and a
# flip-flop pack into one cell when the LUT feeds the flip-flop alone); on ECP5 the
# TRELLIS_COMB cells, each one LUT4 of a slice (a CCU2C carry cell is two of them).
_LOGIC_CELL = {"ice40": "ICESTORM_LC", "ecp5": "TRELLIS_COMB"}
LOGIC_CELL_RULES = {
    "ice40": "logic cells are nextpnr's ICESTORM_LC cells (a LUT4 with its carry and "
             "flip-flop) of the module placed in its measuring wrapper",
    "ecp5": "logic cells are nextpnr's TRELLIS_COMB cells (one LUT4 of a slice; a CCU2C is "
            "two) of the module placed in its measuring wrapper",
}
_RAM_CELLS = ("SB_RAM40_4K", "DP16KD")
_USE = re.compile(r"^Info:\s+(\w+):\s+(\d+)/\s*(\d+)\s+\d+%\s*$", re.MULTILINE)


def lut4_equivalents(target, luts, carries):
    """Logic in LUT4s, comparable across targets (see LUT4_RULES)."""
    return luts + _LUT4_PER_CARRY.get(target, 0) * carries


def device_name(target, device):
    """The part a target's nextpnr arguments select: ``--up5k`` is the UP5K, ``--25k`` the
    LFE5U-25F (``--um-25k`` LFE5UM-25F, ``--um5g-25k`` LFE5UM5G-25F)."""
    flag = next((a[2:] for a in device if a.startswith("--") and a != "--package"), "")
    if target == "ecp5":
        found = re.fullmatch(r"(?:(um5g|um)-)?(\d+)k", flag)
        if found:
            return f"LFE5{(found.group(1) or 'u').upper()}-{found.group(2)}F"
    return flag.upper()


def shortfall(log):
    """What a design needs beyond the device, from nextpnr's "Device utilisation" table: a
    list of {resource, cell, needed, available}, empty when everything fits."""
    return [{"resource": _RESOURCES.get(cell, f"{cell} cells"), "cell": cell,
             "needed": int(used), "available": int(have)}
            for cell, used, have in _USE.findall(log) if int(used) > int(have)]


def needs_text(name, missing):
    """A shortfall in words: "needs 10 DSP blocks, the UP5K has 8 (2 too many)"."""
    return "; ".join(f"needs {m['needed']:,} {m['resource']}, the {name} has "
                     f"{m['available']:,} ({m['needed'] - m['available']:,} too many)"
                     for m in missing)


def share_used(used, capacity):
    """Each resource's share of the device, ``used / capacity`` to four places, for the
    resources the device has."""
    return {key: round(used[key] / have, 4) for key, have in capacity.items()
            if have and used.get(key) is not None}


def _logic_cells(target, log):
    """nextpnr's count of the logic cells it placed (or would have), None without its table."""
    return next((int(used) for cell, used, _ in _USE.findall(log)
                 if cell == _LOGIC_CELL.get(target)), None)


def _not_fit_message(target, name, missing):
    needs = needs_text(name, missing)
    cells = {m["cell"] for m in missing}
    if cells <= _DSP_RESOURCES:
        hint = "estimate with --no-dsp to build the multipliers from LUTs"
    else:
        hint = "make the design smaller (fewer units or features, narrower weights, " \
               "--arch serial) or estimate on a larger --device"
    # The placed design is the module in the wrapper that measures fmax: its logic counts too.
    what = "the module in its measuring wrapper" if cells & _LOGIC_RESOURCES else "the module"
    return f"{what} does not fit the {_FAMILY.get(target, target)} {name}: {needs}; {hint}"


def wrapper_text(module, ports):
    """A top level with one data pin in, one out: inputs from a shift chain, every output
    captured in a register and folded to the pin through a tree of registered XORs."""
    # Every input but the clock (reset included) takes its own bits of the chain, so that no
    # two inputs are tied and synthesis cannot simplify the handshake away. The outputs are
    # registered before they are folded, and the fold takes at most four bits per register,
    # so that no path of the wrapper's own is longer than one LUT: fmax is the module's.
    inputs = [(name, width) for internal, name, d, width, _ in ports
              if d == "input" and internal != "clk"]
    total_in = sum(w for _, w in inputs)
    lines = ["module thresh_estimate_top (input wire clk, input wire din, output reg dout);",
             f"  reg [{total_in - 1}:0] chain;",
             f"  always @(posedge clk) chain <= {{chain[{total_in - 2}:0], din}};"
             if total_in > 1 else "  always @(posedge clk) chain <= din;"]
    offset = 0
    connections = []
    captured = []
    for internal, name, direction, width, _ in ports:
        if internal == "clk":
            connections.append(f"    .{name}(clk)")
        elif direction == "input":
            connections.append(f"    .{name}(chain[{offset + width - 1}:{offset}])")
            offset += width
        else:
            lines.append(f"  wire [{width - 1}:0] o_{name};")
            connections.append(f"    .{name}(o_{name})")
            captured += [f"o_{name}[{bit}]" for bit in range(width)]
    lines.append(f"  {module} dut (\n" + ",\n".join(connections) + "\n  );")
    level, bits = 0, captured
    lines.append(f"  reg [{len(bits) - 1}:0] fold0;")
    lines.append(f"  always @(posedge clk) fold0 <= {{{', '.join(reversed(bits))}}};")
    width = len(bits)
    while width > 1:
        level += 1
        groups = [list(range(k, min(k + 4, width))) for k in range(0, width, 4)]
        terms = [" ^ ".join(f"fold{level - 1}[{b}]" for b in group) for group in groups]
        lines.append(f"  reg [{len(groups) - 1}:0] fold{level};")
        lines.append(f"  always @(posedge clk) fold{level} <= "
                     f"{{{', '.join(reversed(terms))}}};")
        width = len(groups)
    lines.append(f"  always @(posedge clk) dout <= fold{level}[0];")
    lines.append("endmodule")
    return "\n".join(lines) + "\n"


def _synthesised_cells(yosys, synth, work, module):
    """Yosys's cell counts of ``work/dut.v``'s module alone."""
    run([yosys, "-q", "-p", f"read_verilog dut.v; {synth} -top {module}; "
         f"tee -q -o stat.json stat -json"], work, failure="Yosys synthesis failed")
    stats = json.loads((work / "stat.json").read_text())
    return next(iter(stats["modules"].values()))["num_cells_by_type"]


def _synth_command(target, dsp):
    synth, _, _ = TARGETS[target]
    default, flag = _DSP_DEFAULT[target]
    use_dsp = default if dsp is None else bool(dsp)
    return (f"{synth} {flag}" if use_dsp != default else synth), use_dsp


def synthesis_figures(verilog_text, module, *, target="ice40", dsp=None):
    """LUT4 equivalents, LUTs, carries and flip-flops of the module, from synthesis alone (no
    placement): to set two variants of one design side by side in seconds."""
    if target not in TARGETS:
        raise ToolError(f"unknown target {target!r}; choose one of {', '.join(TARGETS)}")
    synth, _ = _synth_command(target, dsp)
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-synth-") as folder:
        work = Path(folder)
        (work / "dut.v").write_text(verilog_text, encoding="utf-8")
        cells = _synthesised_cells(find_tool("yosys"), synth, work, module)
    luts = sum(n for cell, n in cells.items() if cell.startswith(("SB_LUT4", "LUT4")))
    carries = sum(n for cell, n in cells.items() if cell.startswith(("SB_CARRY", "CCU2C")))
    return {"lut4_equivalents": lut4_equivalents(target, luts, carries), "luts": luts,
            "carries": carries,
            "flip_flops": sum(n for cell, n in cells.items() if _FLOP.match(cell))}


def estimate_cost(verilog_text, module, ports, *, target=None, device=None, progress=None,
                  seed=None, dsp=None):
    """LUT4 equivalents, LUTs, carries, flip-flops, DSPs, logic cells and fmax of the module
    on a part, with the part's capacity and the share of it used.

    ``device``: a name of :data:`~thresh2hdl.cost.devices.DEVICES` (``up5k``, ``ecp5-45``...);
    ``target``: a family, alone its default part (``ice40``: the UP5K, ``ecp5``: the
    LFE5U-25F), with ``device`` a check that the part is of that family.
    ``dsp``: whether synthesis may put multipliers into DSP blocks (None: the family's
    custom, without on iCE40, with on ECP5), for a design that has them to spare.
    A design larger than the device raises :class:`DoesNotFitError` with the synthesis
    figures (``placed`` false, no fmax) and what it needs beyond the device.
    """
    part = choose_device(device, target)
    target = part.family
    _, pnr, _ = TARGETS[target]
    synth, use_dsp = _synth_command(target, dsp)
    if use_dsp and not part.dsps and dsp:
        raise InputError(f"the {part.name} has no DSP blocks; estimate with --no-dsp or on "
                         f"another --device", field="dsp")
    yosys, nextpnr = find_tool("yosys"), find_tool(pnr)
    if progress:
        progress("synthesising with Yosys (the first WebAssembly call takes about a minute)")
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-estimate-") as folder:
        work = Path(folder)
        (work / "dut.v").write_text(verilog_text, encoding="utf-8")
        (work / "top.v").write_text(wrapper_text(module, ports), encoding="utf-8")
        # The WebAssembly tools see only the working folder: relative paths throughout.
        cells = _synthesised_cells(yosys, synth, work, module)
        run([yosys, "-q", "-p", f"read_verilog dut.v top.v; {synth} -top "
             f"thresh_estimate_top -json top.json"], work,
            failure="Yosys synthesis of the wrapper failed")
        if progress:
            progress(f"placing and routing with nextpnr on the {part.name}")
        placement = [] if seed is None else ["--seed", str(int(seed))]
        try:
            run([nextpnr, *part.arguments, "--json", "top.json", "--freq", "12",
                 "--timing-allow-fail", *placement, "--log", "pnr.log"], work,
                failure="nextpnr place and route failed")
            missing = []
        except ToolError:
            log_file = work / "pnr.log"
            missing = shortfall(log_file.read_text() if log_file.exists() else "")
            if not missing:
                raise
        log_file = work / "pnr.log"
        log = log_file.read_text() if log_file.exists() else ""

    def count(prefixes):
        return sum(n for cell, n in cells.items() if cell.startswith(prefixes))

    luts, carries = count(("SB_LUT4", "LUT4")), count(("SB_CARRY", "CCU2C"))
    used = {"logic_cells": _logic_cells(target, log),
            "flip_flops": sum(n for cell, n in cells.items() if _FLOP.match(cell)),
            "dsps": count(("SB_MAC16", "MULT18X18D")), "ram_blocks": count(_RAM_CELLS)}
    figures = {
        "target": target, "device": " ".join(part.arguments), "device_id": part.key,
        "device_name": part.name,
        "lut4_equivalents": lut4_equivalents(target, luts, carries),
        "lut4_rule": LUT4_RULES.get(target, ""),
        "logic_cells": used["logic_cells"], "logic_cell_rule": LOGIC_CELL_RULES[target],
        "luts": luts, "carries": carries, "flip_flops": used["flip_flops"],
        "dsps": used["dsps"], "ram_blocks": used["ram_blocks"],
        "capacity": part.capacity, "share_used": share_used(used, part.capacity),
        "dsp_inference": use_dsp,
        "placed": not missing,
        "fmax_mhz": None,
        "cells": dict(sorted(cells.items())),
        "tool_versions": {"yosys": tool_version(yosys), "nextpnr": tool_version(nextpnr)},
        "method": "cells: the module alone; logic cells and fmax: the module between "
                  "registers in a wrapper, placed by nextpnr",
    }
    if missing:
        figures["does_not_fit"] = missing
        raise DoesNotFitError(_not_fit_message(target, part.name, missing),
                              figures=figures)
    found = re.findall(r"Max frequency for clock\s+'[^']*':\s+([0-9.]+)\s+MHz", log)
    if not found:
        raise ToolError("nextpnr reported no clock frequency")
    figures["fmax_mhz"] = float(found[-1])
    return figures
