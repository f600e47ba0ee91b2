"""Amaranth's simulator: the component driven cycle by cycle with a
:class:`~thresh2hdl.verify.stimulus.Stimulus`, its outputs recorded.

The Amaranth simulator is the embedded default: it needs nothing beyond pip. All inputs of a
cycle are set with one ``ctx.set`` on their concatenation and all outputs read with one
``ctx.get``, which is several times faster than a call per signal.
"""

from importlib.metadata import version

import numpy as np
from amaranth.hdl import Cat, Module
from amaranth.sim import Simulator

from ..hardware import reset_domain
from .backend import SimulationResult, SimulatorBackend
from .stimulus import enable_column, write_columns

__all__ = ["AmaranthBackend", "simulate_amaranth"]


class AmaranthBackend(SimulatorBackend):
    """Amaranth's simulator, which runs the component itself (no Verilog)."""

    name = "amaranth"
    in_process = True

    def __init__(self, component):
        self.component = component

    def version(self):
        return f"amaranth {version('amaranth')}"

    def run(self, stimulus, progress=None):
        return simulate_amaranth(self.component, stimulus, progress=progress)


def _pack_columns(columns, widths):
    """Pack per-signal integer columns (LSB signal first) into one Python int per row."""
    packed = []
    shifts = np.cumsum([0] + list(widths[:-1])).tolist()
    masks = [(1 << w) - 1 for w in widths]
    for row in zip(*columns):
        value = 0
        for item, shift, mask in zip(row, shifts, masks):
            value |= (int(item) & mask) << shift
        packed.append(value)
    return packed


def simulate_amaranth(component, stimulus, *, progress=None):
    """Run ``stimulus`` through ``component`` in Amaranth's simulator (one reset cycle first).

    The component's clock domain has the configuration's reset, synchronous or asynchronous;
    its level is the domain's own (active high): an active-low port is an inverter the
    netlist adds in front of it, which the Verilog simulators drive."""
    features = component.feature_ports
    inputs = [component.in_valid, component.out_ready, *features]
    columns = [stimulus.in_valid.astype(np.int64), stimulus.out_ready.astype(np.int64),
               *stimulus.inputs.T]
    if "weight_write" in component.signature.members:
        inputs += [component.weight_write, component.weight_address, component.weight_data]
        columns += list(write_columns(stimulus))
    if component.config.clock_enable:
        inputs.append(component.ce)
        columns.append(enable_column(stimulus).astype(np.int64))
    channel = stimulus.bus.channel if stimulus.bus is not None else None
    bus_inputs = [getattr(component, channel.prefix + name) for name in channel.inputs] \
        if channel else []
    if bus_inputs:
        inputs += bus_inputs
        columns += stimulus.bus.rows(channel.inputs)
    widths = [len(signal) for signal in inputs]
    packed = _pack_columns(columns, widths)
    score_ports = component.score_ports
    flag_ports = [component.out_of_range] if "out_of_range" in component.signature.members \
        else []
    bus_outputs = [getattr(component, channel.prefix + name) for name in channel.outputs] \
        if channel else []
    outputs = [component.in_ready, component.out_valid, component.y, *flag_ports,
               *score_ports, *bus_outputs]
    input_bus = Cat(*inputs)
    output_bus = Cat(*outputs)
    decision_bits = len(component.y)
    recorded = []

    async def testbench(ctx):
        ctx.set(component.in_valid, 0)
        if component.latency:
            ctx.set(domain.rst, 1)
            await ctx.tick()
            ctx.set(domain.rst, 0)
        for t, value in enumerate(packed):
            ctx.set(input_bus, value)
            recorded.append(ctx.get(output_bus))
            if component.latency:
                await ctx.tick()
            if progress is not None and (t % 4096 == 0 or t + 1 == len(packed)):
                progress(t + 1, len(packed))

    top = Module()
    top.submodules.dut = component
    domain = reset_domain(component.config.reset)
    if component.latency:
        top.domains.sync = domain
    simulator = Simulator(top)
    if component.latency:
        simulator.add_clock(1e-6, domain="sync")
    simulator.add_testbench(testbench)
    simulator.run()

    raw = np.array(recorded, dtype=object)
    in_ready = (raw & 1).astype(bool)
    out_valid = ((raw >> 1) & 1).astype(bool)
    decisions = ((raw >> 2) & ((1 << decision_bits) - 1)).astype(np.int64)
    flags = ((raw >> (2 + decision_bits)) & 1).astype(bool) if flag_ports else None
    scores = None
    if score_ports:
        columns = []
        shift = 2 + decision_bits + len(flag_ports)
        for port in score_ports:
            width = len(port)
            unsigned = (raw >> shift) & ((1 << width) - 1)
            sign = 1 << (width - 1)
            columns.append([int(v) - (1 << width) if v & sign else int(v) for v in unsigned])
            shift += width
        scores = np.array(columns, dtype=object).T
        if not component.config.model.is_bank:
            scores = scores[:, 0]
    bus = None
    if bus_outputs:
        shift = 2 + decision_bits + len(flag_ports) + sum(len(p) for p in score_ports)
        bus = {}
        for name, port in zip(channel.outputs, bus_outputs):
            bus[name] = np.array([(int(v) >> shift) & ((1 << len(port)) - 1) for v in raw],
                                 dtype=np.int64)
            shift += len(port)
    return SimulationResult("amaranth", in_ready, out_valid, decisions, scores, flags=flags,
                            bus=bus)
