"""The walk over a netlist that every HDL writer shares: one named wire per cell, the bits each
wire owns, and each operand as runs of wire bits and constants.

The Verilog and VHDL writers print the same walk, so the two files name the same wires in the
same order and differ only in the language: what one file computes, the other does too.
"""

import re

from ..errors import ToolError
from .flops import FLOPS, param as cell_param

__all__ = ["FLOPS", "NetlistWalk", "cell_param", "natural_key"]


def natural_key(text):
    return [int(part) if part.isdigit() else part for part in re.split(r"(\d+)", text)]


class NetlistWalk:
    """A netlist module (the parsed JSON of Yosys ``write_json``) as named wires and cells.

    Subclasses print it: ``name_key`` says when two names clash (VHDL ignores case) and
    ``reserved`` lists names no wire may take."""

    reserved = frozenset()

    def __init__(self, module, name, port_names, port_order):
        self.module = module
        self.name = name
        self.ports = module["ports"]
        self.port_names = port_names
        self.port_order = [p for p in port_order if p in self.ports]
        self.widths = {}          # wire name -> width
        self.owner = {}           # bit -> (wire name, offset)
        self.taken = {self.name_key(word) for word in self.reserved}
        self.taken |= {self.name_key(port_names.get(p, p)) for p in self.ports}
        self.used_bits = set()
        self.counter = 0

    @staticmethod
    def name_key(name):
        return name

    def port_name(self, port):
        return self.port_names.get(port, port)

    # --- naming -----------------------------------------------------------------------------
    def fresh(self, wanted):
        name = wanted
        serial = 1
        while self.name_key(name) in self.taken:
            name = f"{wanted}_{serial}"
            serial += 1
        self.taken.add(self.name_key(name))
        return name

    def own(self, name, bits):
        self.widths[name] = len(bits)
        for offset, bit in enumerate(bits):
            self.owner[bit] = (name, offset)

    # --- operands ---------------------------------------------------------------------------
    def runs(self, bits):
        """``bits`` (LSB first) as runs, LSB first: ``("const", [bits])``, ``("wire", name, lo,
        hi)`` or ``("rep", name, offset, count)`` (one bit repeated, a sign extension)."""
        parts = []
        for bit in bits:
            if isinstance(bit, str):
                if parts and parts[-1][0] == "const":
                    parts[-1][1].append(bit)
                else:
                    parts.append(("const", [bit]))
                continue
            self.used_bits.add(bit)
            name, offset = self.owner[bit]
            last = parts[-1] if parts else None
            if last and last[0] == "wire" and last[1] == name and last[3] + 1 == offset:
                parts[-1] = ("wire", name, last[2], offset)
            elif last and last[0] in ("wire", "rep") and last[1] == name and last[2] == offset \
                    and (last[0] == "rep" or last[3] == offset):
                count = last[3] + 1 if last[0] == "rep" else 2
                parts[-1] = ("rep", name, offset, count)
            else:
                parts.append(("wire", name, offset, offset))
        return parts

    @staticmethod
    def extend(bits, is_signed, width):
        bits = list(bits)
        if len(bits) >= width:
            return bits[:width]
        fill = bits[-1] if (is_signed and bits) else "0"
        return bits + [fill] * (width - len(bits))

    def operand_bits(self, cell, port, width):
        """A cell's operand sign- or zero-extended (or truncated) to ``width`` bits."""
        signed_key = f"{port}_SIGNED"
        is_signed = signed_key in cell["parameters"] and cell_param(cell, signed_key)
        return self.extend(cell["connections"][port], is_signed, width)

    # --- wires ------------------------------------------------------------------------------
    def net_names(self):
        """The design's own name of each group of bits (the tree's nodes)."""
        ports, cells, netnames = self.ports, self.module["cells"], self.module["netnames"]
        driven = {bit for cell in cells.values() for key in ("Q", "Y")
                  for bit in cell["connections"].get(key, ())}
        named, extended = {}, {}
        for net, info in sorted(netnames.items()):
            if not info.get("hide_name") and net not in ports:
                bits = info["bits"]
                named.setdefault(tuple(bits), net)
                # A net whose top bits ``wreduce`` cut off as unused (left undriven), or found
                # to be copies of the sign or zeros: the cell driving its low bits keeps the
                # net's name.
                k = len(bits) - 1
                while k > 0 and (bits[k] == bits[k - 1] or bits[k] == "0"
                                 or bits[k] not in driven):
                    extended.setdefault(tuple(bits[:k]), net)
                    k -= 1
        for bits, net in extended.items():
            named.setdefault(bits, net)
        return named

    def drives_port(self, port, cell):
        """Whether ``cell`` may drive output ``port`` directly (not through a wire)."""
        return True

    def wires(self):
        """A wire (or output port) for every cell: ``(port kinds, kept wires, items)``, where a
        port's kind is ``reg`` or ``wire`` when a cell drives it directly and ``items`` lists
        ``(wire name, cell)`` in a stable order."""
        for name, port in self.ports.items():
            if port["direction"] == "input":
                self.own(self.port_name(name), port["bits"])
        named = self.net_names()
        cells = self.module["cells"]
        out_bits = {tuple(p["bits"]): name for name, p in self.ports.items()
                    if p["direction"] == "output"}
        port_kind = {}
        kept = set()              # wires named in the design: the tree's nodes
        items = []
        for cell_name in sorted(cells, key=natural_key):
            cell = cells[cell_name]
            output = "Q" if cell["type"] in FLOPS else "Y"
            if output not in cell["connections"]:
                raise ToolError(f"internal: cell {cell['type']} has no output {output}")
            bits = tuple(cell["connections"][output])
            port = out_bits.get(bits)
            if port is not None and port not in port_kind and self.drives_port(port, cell):
                wire = self.port_name(port)
                port_kind[port] = "reg" if output == "Q" else "wire"
            else:
                wire = self.fresh(self.legal(named.get(bits, f"n{self.counter}")))
                if bits in named:
                    kept.add(wire)
                self.counter += 1
            self.own(wire, bits)
            items.append((wire, cell))
        for wire, cell in self.split_registers(kept):
            kept.add(wire)
            items.append((wire, cell))
        return port_kind, kept, items

    def split_registers(self, kept):
        """A register of the design whose flip-flops synthesis split into groups (an AXI4-Lite
        register written byte by byte, one enable per byte) has no cell of its own, so no
        wire would carry its name: ``(wire, cell)`` of a wire of that name joining the groups
        (a ``$pos`` of their bits), so that the proof and a reader find the register."""
        flops = {bit for cell in self.module["cells"].values() if cell["type"] in FLOPS
                 for bit in cell["connections"]["Q"]}
        named_wires = kept | {self.port_name(p) for p in self.ports}
        found = []
        for net, info in sorted(self.module["netnames"].items()):
            bits = info["bits"]
            if info.get("hide_name") or net in self.ports or \
                    not all(isinstance(b, int) and b in flops for b in bits):
                continue
            owners = {self.owner[b][0] for b in bits}
            if len(owners) < 2 or owners & named_wires:
                continue
            width = format(len(bits), "032b")
            wire = self.fresh(self.legal(net))
            # Bits of its own, numbered below Yosys's (which are positive).
            alias = [-len(self.owner) - 1 - k for k in range(len(bits))]
            self.own(wire, alias)
            found.append((wire, {"type": "$pos", "parameters": {
                "A_SIGNED": "0" * 32, "A_WIDTH": width, "Y_WIDTH": width},
                "connections": {"A": bits, "Y": alias}}))
        return found

    @staticmethod
    def legal(name):
        """A design name as this language can spell it."""
        return name

    def unused_groups(self):
        """Bits of inputs and internal wires that nothing reads, as one bit list per wire."""
        outputs = {self.port_name(p) for p, info in self.ports.items()
                   if info["direction"] == "output"}
        unused = {}
        for bit, (owner, offset) in self.owner.items():
            if bit not in self.used_bits and owner not in outputs:
                unused.setdefault(owner, []).append((offset, bit))
        return [[bit for _, bit in sorted(pairs)] for pairs in unused.values()]
