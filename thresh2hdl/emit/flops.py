"""The netlist's flip-flops as Verilog-2001 ``always`` blocks, one per flop cell: plain, with an
enable, a synchronous reset (``$sdff*``) or an asynchronous one (``$adff*``), as Yosys's
``opt_dff`` folds them into the cell. Shared by the Verilog writer; a flop kind not listed in
:data:`FLOPS` is an internal error there."""

from ..errors import ToolError

__all__ = ["FLOPS", "flop_lines", "literal", "param"]

FLOPS = {"$dff", "$dffe", "$sdff", "$sdffe", "$sdffce", "$adff", "$adffe"}


def param(cell, key):
    """A cell parameter as a number (Yosys writes them as bit strings or numbers)."""
    value = cell["parameters"][key]
    return int(value, 2) if isinstance(value, str) else int(value)


def literal(bits):
    """A sized literal for constant bits (LSB first)."""
    width = len(bits)
    if any(b not in ("0", "1") for b in bits):
        return f"{width}'b" + "".join(reversed(bits))
    value = sum(1 << i for i, b in enumerate(bits) if b == "1")
    return f"{width}'d{value}" if width <= 64 else f"{width}'h{value:x}"


def _constant(value, width):
    """A flop's reset value (a parameter: a bit string, MSB first, or a number)."""
    if isinstance(value, str):
        return literal(list(reversed(value)))
    return literal([str((int(value) >> i) & 1) for i in range(width)])


def _active(cell, key, signal):
    """``signal`` as a condition that is true at the level its ``{key}_POLARITY`` asserts."""
    return signal if param(cell, f"{key}_POLARITY") else f"!{signal}"


def flop_lines(cell, q, ref):
    """The ``always`` block of flop ``cell`` driving ``q``; ``ref`` gives the Verilog
    expression of a list of netlist bits."""
    c = cell["connections"]
    if not param(cell, "CLK_POLARITY"):
        raise ToolError("internal: negative-edge flop in the netlist")
    clock, data, kind = ref(c["CLK"]), ref(c["D"]), cell["type"]
    if kind in ("$adff", "$adffe"):
        return _async_flop(cell, q, ref, clock, data)
    body = [f"{q} <= {data};"]
    if kind in ("$dffe", "$sdffe", "$sdffce"):
        enable = _active(cell, "EN", ref(c["EN"]))
    if kind in ("$sdff", "$sdffe", "$sdffce"):
        reset = _active(cell, "SRST", ref(c["SRST"]))
        value = _constant(cell["parameters"]["SRST_VALUE"], param(cell, "WIDTH"))
    if kind == "$dffe":
        body = [f"if ({enable})", f"  {q} <= {data};"]
    elif kind == "$sdff":
        body = [f"if ({reset})", f"  {q} <= {value};", "else", f"  {q} <= {data};"]
    elif kind == "$sdffe":
        body = [f"if ({reset})", f"  {q} <= {value};", f"else if ({enable})",
                f"  {q} <= {data};"]
    elif kind == "$sdffce":
        body = [f"if ({enable}) begin", f"  if ({reset})", f"    {q} <= {value};",
                "  else", f"    {q} <= {data};", "end"]
    return [f"always @(posedge {clock}) begin"] + [f"  {line}" for line in body] + ["end"]


def _async_flop(cell, q, ref, clock, data):
    """A flop with an asynchronous reset (``$adff``, and ``$adffe`` with an enable): the reset
    in the sensitivity list at its active edge, and tested first."""
    c = cell["connections"]
    reset = ref(c["ARST"])
    edge = "posedge" if param(cell, "ARST_POLARITY") else "negedge"
    value = _constant(cell["parameters"]["ARST_VALUE"], param(cell, "WIDTH"))
    load = ["else", f"  {q} <= {data};"]
    if cell["type"] == "$adffe":
        load = [f"else if ({_active(cell, 'EN', ref(c['EN']))})", f"  {q} <= {data};"]
    return [f"always @(posedge {clock} or {edge} {reset}) begin",
            f"  if ({_active(cell, 'ARST', reset)})", f"    {q} <= {value};"] + \
        [f"  {line}" for line in load] + ["end"]
