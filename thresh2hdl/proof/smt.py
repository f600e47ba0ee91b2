"""The netlist as SMT-LIB functions: Yosys reads the Verilog and writes it with
``write_smt2 -wires`` (and its structure with ``write_json``); :class:`SmtExport` knows the
names, widths and functions of that export and cuts it at chosen wires.

The WebAssembly Yosys sees only the working folder, so every file is passed by a relative name.
"""

import json
import re

from ..tools import run

__all__ = ["SmtExport", "export_smt2", "wire_widths"]

_WIRE_LINE = re.compile(r"^; yosys-smt2-(wire|input|output|register) (\S+) (\d+)$", re.M)
_ALIAS = re.compile(r"^\(define-fun \|[^|]+_n (?P<name>[^|]+)\| \(\(state \|[^|]+\|\)\) "
                    r"\(_ BitVec (?P<bits>\d+)\) \(\|(?P<id>[^|]+#\d+)\| state\)\)$")
# Any wire whose value is one state element (a vector, or a one-bit wire's Bool of it).
_ALIASES = re.compile(r"^\(define-fun \|[^|]+_n (?P<name>[^|]+)\| \(\(state \|[^|]+\|\)\) "
                      r"(?:\(_ BitVec \d+\) \(|Bool \(= \(\(_ extract 0 0\) \()"
                      r"\|(?P<id>[^|]+#\d+)\| state\)(?:\) #b1\))?\)$", re.M)
_REFERENCE = re.compile(r"\(\|([^|]+#\d+)\| state\)")


class SmtExport:
    """The names and widths ``write_smt2 -wires`` exposes, and their SMT functions."""

    def __init__(self, text, module, ignored=frozenset()):
        self.text = text
        self.module = module
        self.widths = {}
        self.registers = set()
        self.cut_ids = {}
        self.slices = {}       # name -> (packed port, first bit): a member of a packed port
        for kind, name, width in _WIRE_LINE.findall(text):
            if name in ignored and kind == "wire":
                continue        # computed from its operands instead (see Query.known)
            self.widths[name] = int(width)
            if kind == "register":
                self.registers.add(name)
        # A wire that only renames a register is that register under the design's name: a
        # netlist may name the flop itself otherwise (GHDL's synthesis calls it ``n313_q`` and
        # assigns it to the VHDL signal).
        aliases = {found["name"]: found["id"] for found in _ALIASES.finditer(text)}
        held = {aliases[name] for name in self.registers if name in aliases}
        self.registers |= {name for name, ident in aliases.items()
                           if ident in held and name in self.widths}

    def has(self, name):
        return name in self.widths

    def cut(self, names):
        """Cut points: every reader of these wires reads a free value instead (``|id cut|``),
        while the wire itself keeps its driver, so its own lemma still sees the logic."""
        lines = self.text.split("\n")
        ids, keep = {}, set()
        for number, line in enumerate(lines):
            found = _ALIAS.match(line)
            if found and found["name"] in names and found["name"] not in self.registers:
                ids[found["id"]] = int(found["bits"])
                self.cut_ids[found["name"]] = found["id"]
                keep.add(number)

        def swap(match):
            return f"(|{match[1]} cut| state)" if match[1] in ids else match[0]

        for number, line in enumerate(lines):
            if number not in keep and "#" in line:
                lines[number] = _REFERENCE.sub(swap, line)
        sort = next(i for i, line in enumerate(lines) if line.startswith("(define-sort"))
        lines[sort + 1: sort + 1] = [f"(declare-fun |{i} cut| (|{self.module}_s|) "
                                     f"(_ BitVec {bits}))" for i, bits in sorted(ids.items())]
        self.text = "\n".join(lines)

    def add_slice(self, name, port, offset, width):
        """``name`` read as ``width`` bits of the packed port ``port`` from bit ``offset``
        (the AXI4-Stream form's TDATA lanes), so that the query reads it by name."""
        self.slices[name] = (port, offset)
        self.widths[name] = width

    def steps(self, states):
        """Declarations of ``states``, each the transition of the one before."""
        m = self.module
        lines = [f"(declare-fun {s} () |{m}_s|)" for s in states]
        lines += [f"(assert (|{m}_t| {a} {b}))" for a, b in zip(states, states[1:])]
        return lines

    def cut_value(self, name, state):
        return f"(|{self.cut_ids[name]} cut| {state})"

    def raw(self, name, state):
        if name in self.slices:
            port, offset = self.slices[name]
            width = self.widths[name]
            bits = f"((_ extract {offset + width - 1} {offset}) {self.raw(port, state)})"
            return f"(= {bits} #b1)" if width == 1 else bits    # one bit: a Bool, as a wire
        return f"(|{self.module}_n {name}| {state})"

    def bits(self, name, state):
        """The wire as a bit vector (``write_smt2`` gives 1-bit wires as Bool)."""
        if self.widths[name] == 1:
            return f"(ite {self.raw(name, state)} #b1 #b0)"
        return self.raw(name, state)


def wire_widths(text):
    """The widths of every wire, input, output and register of an export."""
    return [int(width) for _, _, width in _WIRE_LINE.findall(text)]


def export_smt2(yosys, verilog_text, module, folder):
    """The SMT-LIB export of ``module`` in ``verilog_text`` and its ``write_json`` record,
    made in ``folder``."""
    (folder / "design.v").write_text(verilog_text, encoding="utf-8")
    # setundef -anyseq: an x bit becomes a free value in every cycle (a synthesis tool may
    # resolve it either way), never a constant.
    (folder / "prove.ys").write_text(
        "read_verilog -noautowire design.v\n"
        f"hierarchy -check -top {module}\n"
        "proc\nflatten\nsetundef -anyseq\nopt_clean\n"
        "write_json design.json\n"
        # An asynchronous reset's flops as synchronous ones whose output reads the reset
        # value while it is asserted (the export has one global clock); none otherwise.
        "async2sync\ndffunmap\n"
        "write_smt2 -wires -stbv design.smt2\n", encoding="utf-8")
    run([yosys, "-q", "prove.ys"], folder, failure="Yosys could not read the netlist")
    document = json.loads((folder / "design.json").read_text(encoding="utf-8"))
    return (folder / "design.smt2").read_text(encoding="utf-8"), document["modules"][module]
