"""VHDL-2008 out of the design's netlist: the same wires, cells and order as the Verilog file.

Written from the netlist that :mod:`thresh2hdl.emit.verilog` prints, cell for cell, so that
the two files are two spellings of one circuit. Every signal inside is a ``std_logic_vector``
with its width explicit; arithmetic goes through ``ieee.numeric_std`` on operands already
extended to the result's width (so signed and unsigned arithmetic give the same bits, as in
the netlist); ports are ``std_logic`` (one bit) or ``std_logic_vector``, scores in two's
complement. Wires the design names carry the ``keep`` attribute, as ``(* keep *)`` in the
Verilog.
"""

import re

from ..errors import InputError, ToolError
from ..names import VHDL_RESERVED, vhdl_name_problem
from .cells import FLOPS, NetlistWalk, cell_param
from .netlist import netlist_of
from .verilog import port_table

__all__ = ["write_vhdl", "emit_vhdl", "vhdl_type", "check_vhdl_names", "vhdl_comments",
           "component_package"]

_ARITHMETIC = {"$add": "+", "$sub": "-"}
_LOGIC = {"$and": "and", "$or": "or", "$xor": "xor", "$xnor": "xnor"}
_REDUCE = {"$reduce_and": "and", "$reduce_or": "or", "$reduce_bool": "or", "$reduce_xor": "xor",
           "$reduce_xnor": "xnor"}
_COMPARE = {"$eq": "=", "$ne": "/=", "$lt": "<", "$le": "<=", "$gt": ">", "$ge": ">="}


def vhdl_type(width):
    """A port's or signal's type: ``std_logic`` for one bit of a port, else a vector."""
    return "std_logic" if width == 1 else f"std_logic_vector({width - 1} downto 0)"


def _bits_literal(bits):
    """Constant bits (LSB first) as a VHDL string literal, MSB first."""
    return '"' + "".join("1" if b == "1" else "0" if b == "0" else "X"
                         for b in reversed(bits)) + '"'


class _VhdlWriter(NetlistWalk):
    reserved = VHDL_RESERVED

    def __init__(self, module, name, port_names, port_order):
        super().__init__(module, name, port_names, port_order)
        self.taken.add(self.name_key(name))
        self.scalars = {self.port_name(p) for p, info in self.ports.items()
                        if len(info["bits"]) == 1}

    @staticmethod
    def name_key(name):
        return name.lower()

    @staticmethod
    def legal(name):
        name = re.sub(r"_+", "_", re.sub(r"[^A-Za-z0-9_]", "_", name)).strip("_")
        return name if name[:1].isalpha() else f"n{name}"

    def drives_port(self, port, cell):
        # A one-bit port is a std_logic: a flop writes it directly, any other cell a wire.
        return len(self.ports[port]["bits"]) > 1 or cell["type"] in FLOPS

    # --- expressions ------------------------------------------------------------------------
    def element(self, name, offset):
        return name if name in self.scalars else f"{name}({offset})"

    def scalar(self, bits):
        """One bit as a ``std_logic`` expression."""
        (bit,) = bits
        if isinstance(bit, str):
            return "'1'" if bit == "1" else "'0'" if bit == "0" else "'X'"
        (part,) = self.runs([bit])
        return self.element(part[1], part[2])

    def vector(self, bits):
        """Bits (LSB first) as a ``std_logic_vector`` expression whose type needs no context."""
        texts = []
        for part in reversed(self.runs(bits)):
            if part[0] == "const":
                texts.append(("literal", _bits_literal(part[1])))
            elif part[0] == "rep":
                texts.append(("aggregate",
                              f"({part[3] - 1} downto 0 => {self.element(part[1], part[2])})"))
            elif part[1] in self.scalars:
                texts.append(("bit", part[1]))
            elif part[2] == 0 and part[3] == self.widths[part[1]] - 1:
                texts.append(("vector", part[1]))
            elif part[2] == part[3]:
                texts.append(("bit", self.element(part[1], part[2])))
            else:
                texts.append(("vector", f"{part[1]}({part[3]} downto {part[2]})"))
        if len(texts) == 1:
            kind, text = texts[0]
            if kind == "vector":
                return text
            return f"std_logic_vector'({'0 => ' + text if kind == 'bit' else text})"
        items = [f"std_logic_vector'{text}" if kind == "aggregate" else text
                 for kind, text in texts]
        return f"std_logic_vector'({' & '.join(items)})"

    def operand(self, cell, port, width):
        return self.vector(self.operand_bits(cell, port, width))

    def assignment(self, wire, cell):
        """The concurrent statement that gives ``wire`` the cell's value."""
        kind = cell["type"]
        width = cell_param(cell, "Y_WIDTH") if "Y_WIDTH" in cell["parameters"] else None
        c = cell["connections"]
        if kind in _ARITHMETIC:
            a, b = self.operand(cell, "A", width), self.operand(cell, "B", width)
            return f"{wire} <= std_logic_vector(unsigned({a}) {_ARITHMETIC[kind]} unsigned({b}));"
        if kind == "$mul":
            a, b = self.operand(cell, "A", width), self.operand(cell, "B", width)
            return (f"{wire} <= std_logic_vector(resize(unsigned({a}) * unsigned({b}), "
                    f"{width}));")
        if kind in _LOGIC:
            return (f"{wire} <= {self.operand(cell, 'A', width)} {_LOGIC[kind]} "
                    f"{self.operand(cell, 'B', width)};")
        if kind == "$neg":
            return f"{wire} <= std_logic_vector(-signed({self.operand(cell, 'A', width)}));"
        if kind == "$not":
            return f"{wire} <= not {self.operand(cell, 'A', width)};"
        if kind == "$pos":
            return f"{wire} <= {self.operand(cell, 'A', width)};"
        if kind in _REDUCE:
            return self.bit_result(wire, width, f"{_REDUCE[kind]} {self.vector(c['A'])}")
        if kind == "$logic_not":
            return self.bit_result(wire, width, f"not (or {self.vector(c['A'])})")
        if kind in ("$logic_and", "$logic_or"):
            op = "and" if kind == "$logic_and" else "or"
            return self.bit_result(wire, width, f"(or {self.vector(c['A'])}) {op} "
                                                f"(or {self.vector(c['B'])})")
        if kind in _COMPARE:
            common = max(cell_param(cell, "A_WIDTH"), cell_param(cell, "B_WIDTH"))
            a, b = self.operand(cell, "A", common), self.operand(cell, "B", common)
            if kind in ("$eq", "$ne"):
                condition = f"{a} {_COMPARE[kind]} {b}"
            else:
                cast = "signed" if cell_param(cell, "A_SIGNED") and cell_param(cell, "B_SIGNED") \
                    else "unsigned"
                condition = f"{cast}({a}) {_COMPARE[kind]} {cast}({b})"
            one, zero = _bits_literal(["1"] + ["0"] * (width - 1)), _bits_literal(["0"] * width)
            return f"{wire} <= {one} when {condition} else {zero};"
        if kind == "$mux":
            return (f"{wire} <= {self.vector(c['B'])} when {self.scalar(c['S'])} = '1' else "
                    f"{self.vector(c['A'])};")
        raise ToolError(f"internal: the VHDL writer has no rule for cell {kind}; "
                        f"please report this with the model file")

    @staticmethod
    def bit_result(wire, width, bit):
        high = f"{width - 1} downto 1 => '0', " if width > 1 else ""
        return f"{wire} <= ({high}0 => ({bit}));"

    def constant(self, cell, key, is_scalar):
        value = cell["parameters"][key]
        bits = list(reversed(value)) if isinstance(value, str) else \
            [str((int(value) >> i) & 1) for i in range(cell_param(cell, "WIDTH"))]
        return self.scalar(bits) if is_scalar else _bits_literal(bits)

    def flop(self, cell, q):
        c = cell["connections"]
        if not cell_param(cell, "CLK_POLARITY"):
            raise ToolError("internal: negative-edge flop in the netlist")
        kind = cell["type"]
        is_scalar = q in self.scalars
        data = self.scalar(c["D"]) if is_scalar else self.vector(c["D"])
        clock = self.scalar(c["CLK"])
        if kind in ("$adff", "$adffe"):
            # An asynchronous reset: in the sensitivity list, tested before the clock edge.
            reset = self.scalar(c["ARST"])
            load = [f"{q} <= {data};"]
            if kind == "$adffe":
                enable = f"{self.scalar(c['EN'])} = '{cell_param(cell, 'EN_POLARITY')}'"
                load = [f"if {enable} then", f"  {q} <= {data};", "end if;"]
            return ([f"process ({clock}, {reset})", "begin",
                     f"  if {reset} = '{cell_param(cell, 'ARST_POLARITY')}' then",
                     f"    {q} <= {self.constant(cell, 'ARST_VALUE', is_scalar)};",
                     f"  elsif rising_edge({clock}) then"]
                    + [f"    {line}" for line in load] + ["  end if;", "end process;"])
        body = [f"{q} <= {data};"]
        if kind in ("$dffe", "$sdffe", "$sdffce"):
            enable = f"{self.scalar(c['EN'])} = '{cell_param(cell, 'EN_POLARITY')}'"
        if kind in ("$sdff", "$sdffe", "$sdffce"):
            reset = f"{self.scalar(c['SRST'])} = '{cell_param(cell, 'SRST_POLARITY')}'"
            value = self.constant(cell, "SRST_VALUE", is_scalar)
        if kind == "$dffe":
            body = [f"if {enable} then", f"  {q} <= {data};", "end if;"]
        elif kind == "$sdff":
            body = [f"if {reset} then", f"  {q} <= {value};", "else", f"  {q} <= {data};",
                    "end if;"]
        elif kind == "$sdffe":
            body = [f"if {reset} then", f"  {q} <= {value};", f"elsif {enable} then",
                    f"  {q} <= {data};", "end if;"]
        elif kind == "$sdffce":
            body = [f"if {enable} then", f"  if {reset} then", f"    {q} <= {value};",
                    "  else", f"    {q} <= {data};", "  end if;", "end if;"]
        return ([f"process ({clock})", "begin", f"  if rising_edge({clock}) then"]
                + [f"    {line}" for line in body] + ["  end if;", "end process;"])

    # --- design unit ------------------------------------------------------------------------
    def write(self, header):
        port_kind, kept, items = self.wires()
        declarations, body = [], []
        for wire, cell in items:
            is_flop = cell["type"] in FLOPS
            if wire not in (self.port_name(p) for p in port_kind):
                declarations.append(f"  signal {wire} : "
                                    f"std_logic_vector({self.widths[wire] - 1} downto 0);")
            if is_flop:
                body += ["  " + line for line in self.flop(cell, wire)]
            else:
                body.append(f"  {self.assignment(wire, cell)}")
        for name in self.port_order:
            port = self.ports[name]
            if port["direction"] == "output" and name not in port_kind:
                bits = port["bits"]
                value = self.scalar(bits) if len(bits) == 1 else self.vector(bits)
                body.append(f"  {self.port_name(name)} <= {value};")
        kept_names = [wire for wire, cell in items if wire in kept and cell["type"] not in FLOPS]
        if kept_names:
            declarations += ["", "  attribute keep : boolean;"]
            declarations += [f"  attribute keep of {wire} : signal is true;"
                             for wire in kept_names]
        port_lines = []
        for name in self.port_order:
            port = self.ports[name]
            mode = "in " if port["direction"] == "input" else "out"
            port_lines.append(f"    {self.port_name(name)} : {mode} "
                              f"{vhdl_type(len(port['bits']))}")
        lines = list(header)
        lines += ["library ieee;", "use ieee.std_logic_1164.all;", "use ieee.numeric_std.all;",
                  "", f"entity {self.name} is", "  port ("]
        lines += [line + (";" if i + 1 < len(port_lines) else "")
                  for i, line in enumerate(port_lines)]
        lines += ["  );", f"end entity {self.name};", "",
                  f"architecture netlist of {self.name} is"]
        lines += declarations
        lines += ["begin"] + body + ["end architecture netlist;", ""]
        return "\n".join(lines)


def write_vhdl(module, name, *, port_names, port_order, header=()):
    """VHDL-2008 text for one netlist module (the parsed JSON of Yosys ``write_json``); the
    arguments are those of :func:`~thresh2hdl.emit.verilog.write_verilog`."""
    return _VhdlWriter(module, name, dict(port_names), list(port_order)).write(header)


def emit_vhdl(component, model, *, header=(), netlist=None):
    """The component as VHDL-2008 text, with the model's entity and port names. ``netlist``:
    the component's netlist when the caller has it already (the Verilog was written from it)."""
    if netlist is None:
        netlist = netlist_of(component, model.module)
    table = port_table(component, model)
    return write_vhdl(netlist, model.module,
                      port_names={port.internal: port.name for port in table},
                      port_order=[port.internal for port in table], header=header)


def check_vhdl_names(table, module, source=None):
    """Refuse a module or port name that VHDL cannot take (a reserved word, ``__``, a trailing
    ``_``) or two names VHDL would read as one (it ignores case): one InputError."""
    seen = {}
    for what, name in [("module name", module)] + [(f"port name {port.name!r}", port.name)
                                                    for port in table]:
        problem = vhdl_name_problem(name)
        if problem is not None:
            raise InputError(f"{what}: {problem}; rename it in the model file or build with "
                             f"--hdl verilog", source=source)
        other = seen.setdefault(name.lower(), name)
        if other != name:
            raise InputError(f"{what}: VHDL ignores case, so {name!r} and {other!r} are one "
                             f"name; rename one in the model file or build with --hdl verilog",
                             source=source)


def vhdl_comments(lines):
    """Comment lines written for Verilog (``//``) as VHDL comments (``--``)."""
    return [f"--{line[2:]}" if line.startswith("//") else line for line in lines]


def component_package(table, module, *, header=()):
    """A package declaring the entity as a component, with an instantiation in a comment: the
    VHDL counterpart of the Verilog instance template, and a file that analyses on its own."""
    ports = [f"      {port.name} : {'in ' if port.direction == 'input' else 'out'} "
             f"{vhdl_type(port.width)}" for port in table]
    pad = max(len(port.name) for port in table)
    mapping = [f"--       {port.name.ljust(pad)} => {module}_{port.name}" for port in table]
    lines = list(header) + [
        f"-- The component {module}, to instantiate the entity from a design of your own:",
        f"--   use work.{module}_pkg.all;", "--   ...",
        f"--   u_{module} : {module}", "--     port map ("]
    lines += [line + ("," if i + 1 < len(mapping) else "") for i, line in enumerate(mapping)]
    lines += ["--     );", "-- or without the package: u_x : entity work." + module + " port map "
              "(...).", "", "library ieee;", "use ieee.std_logic_1164.all;", "",
              f"package {module}_pkg is", f"  component {module} is", "    port ("]
    lines += [line + (";" if i + 1 < len(ports) else "") for i, line in enumerate(ports)]
    lines += ["    );", "  end component;", f"end package {module}_pkg;", ""]
    return "\n".join(lines)
