"""What the SMT export cannot show, checked on Yosys's ``write_json`` record of the netlist:
its ports, free inputs and clocking; and the flops that only ever load a constant."""

import re

from ..errors import InputError
from .outcome import Undecided

__all__ = ["check_structure", "constant_loads"]

# Flops with a clock polarity parameter: plain, enabled, synchronous or asynchronous reset
# (the export reads the asynchronous ones through async2sync, see smt.export_smt2).
_SYNC_FLOPS = {"$dff", "$dffe", "$sdff", "$sdffe", "$sdffce", "$adff", "$adffe"}
_FINE_SYNC_FLOPS = {"$_DFF_P_", "$_DFFE_PP_", "$_DFFE_PN_"}
_FINE_SYNC_RESET_FLOP = re.compile(r"^\$_SDFFC?E?_P")


def check_structure(module, port_rows):
    """What the SMT export cannot show: the netlist's ports are the model's, exactly; its
    inputs are free (nothing inside drives them); every register is clocked by the rising
    edge of the clock port (the export steps every register on one global clock, whatever its
    clock). Raises :class:`InputError` for other ports, :class:`Undecided` for clocking
    the method does not cover."""
    ports = module["ports"]
    wanted = {name: (direction, width) for _, name, direction, width, _ in port_rows}
    for name, (direction, width) in wanted.items():
        got = ports.get(name)
        if got is None or got["direction"] != direction or len(got["bits"]) != width:
            found = "is missing" if got is None else \
                f"is {got['direction']} of {len(got['bits'])} bits"
            raise InputError(f"the netlist's port {name!r} {found}; the model needs "
                             f"{direction} [{width - 1}:0]")
    extra = sorted(set(ports) - set(wanted))
    if extra:
        raise InputError(f"the netlist has a port {extra[0]!r} that the model does not")
    driven = set()
    for cell in module["cells"].values():
        for port, direction in cell.get("port_directions", {}).items():
            if direction == "output":
                driven.update(b for b in cell["connections"][port] if isinstance(b, int))
    seen = set()
    for name, port in ports.items():
        if port["direction"] != "input":
            continue
        bits = port["bits"]
        if any(not isinstance(b, int) for b in bits) or driven & set(bits) or seen & set(bits):
            raise InputError(f"input {name!r} is driven inside the netlist (or tied to "
                             f"another input); an input must be free")
        seen.update(bits)
    clock = next((name for internal, name, *_ in port_rows if internal == "clk"), None)
    clock_bits = ports[clock]["bits"] if clock else None
    for cell in module["cells"].values():
        kind = cell["type"]
        lowered = kind.lower()
        if not any(word in lowered for word in ("dff", "latch", "$ff", "$sr", "$mem",
                                                 "$_ff", "$_sr", "aldff")):
            continue
        if kind in _SYNC_FLOPS:
            rising = str(cell["parameters"].get("CLK_POLARITY", "1")).lstrip("0") == "1"
        else:
            rising = kind in _FINE_SYNC_FLOPS or bool(_FINE_SYNC_RESET_FLOP.match(kind))
        if not rising or cell["connections"].get("C", cell["connections"].get("CLK")) \
                != clock_bits:
            raise Undecided(f"a register ({kind}) is not clocked by the rising edge of "
                             f"{clock or 'a clock port'} alone; the method covers only that")



def constant_loads(module):
    """Flops that only ever load one constant (``$dff`` whose D is that constant, or a
    multiplexer between the constant and the flop's own output), by a register name that
    holds exactly their bits: name -> the constant. Synthesis makes them where a register
    carries a constant (a split adder's part that only the bias fills) and merges the bits
    that are 1, which load the constant only from the first cycle that moves the pipeline:
    free in an arbitrary state, so the proof states when they hold it (see
    :meth:`.lemmas._Pipeline.held_constants`)."""
    cells = module["cells"].values()
    driven_by = {}
    for cell in cells:
        if cell["type"] == "$mux":
            for position, bit in enumerate(cell["connections"]["Y"]):
                driven_by[bit] = (cell, position)
    names = {tuple(net["bits"]): name for name, net in sorted(module["netnames"].items())
             if not name.startswith("$")}
    found = {}
    for cell in cells:
        if cell["type"] != "$dff":
            continue
        q, d = cell["connections"]["Q"], cell["connections"]["D"]
        constant = [_loaded_bit(bit, own, driven_by) for bit, own in zip(d, q)]
        if tuple(q) in names and all(bit in ("0", "1") for bit in constant):
            found[names[tuple(q)]] = int("".join(reversed(constant)), 2)
    return found


def _loaded_bit(bit, own, driven_by):
    """The constant that flop bit ``own`` loads through ``bit`` (its D), or None."""
    if bit in ("0", "1"):
        return bit
    if bit not in driven_by:
        return None
    cell, position = driven_by[bit]
    a, b = (cell["connections"][side][position] for side in ("A", "B"))
    if a == own and b in ("0", "1"):
        return b
    if b == own and a in ("0", "1"):
        return a
    return None
