"""On-chip learning in the Amaranth design, against a deliberately simple gold model."""

import re

import numpy as np
import pytest
from amaranth.hdl import Module
from amaranth.sim import Simulator

from helpers import make_model
from thresh2hdl.errors import InputError
from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.model.records import Model, Unit


def gold_step(weights, bias, x, target, eta_shift, bias_step, weight_bits, bias_bits):
    """The rule as written (Rosenblatt 1958, "The perceptron", from memory; here with a
    power-of-two rate and saturation): if the decision w.x + b > 0 differs from the target,
    w += eta (t - y) x, b += (t - y) step, each clamped to its signed width. Python integers,
    one line each."""
    y = int(sum(w * v for w, v in zip(weights, x)) + bias > 0)
    if y == target:
        return list(weights), bias
    sign = target - y
    clamp = lambda v, bits: max(-(1 << (bits - 1)), min((1 << (bits - 1)) - 1, v))
    scaled = [(v << eta_shift) if eta_shift >= 0 else (v >> -eta_shift) for v in x]
    return ([clamp(w + sign * s, weight_bits) for w, s in zip(weights, scaled)],
            clamp(bias + sign * bias_step, bias_bits))


def run_samples(dut, samples, registers):
    """Present each (x, target) as a labelled sample with gaps between them (so that every
    update has landed before the next enters); read every register back after each."""
    read = []

    async def testbench(ctx):
        ctx.set(dut.out_ready, 1)
        for x, target in samples:
            for port, value in zip(dut.feature_ports, x):
                ctx.set(port, value)
            ctx.set(dut.learn_enable, 1)
            ctx.set(dut.learn_target, target)
            ctx.set(dut.in_valid, 1)
            await ctx.tick()
            ctx.set(dut.in_valid, 0)
            for _ in range(dut.latency + 1):
                await ctx.tick()
            values = []
            for address in range(registers):
                ctx.set(dut.learn_read_address, address)
                values.append(ctx.get(dut.learn_read_data))
            read.append(values)

    top = Module()
    top.submodules.dut = dut
    simulator = Simulator(top)
    simulator.add_clock(1e-6)
    simulator.add_testbench(testbench)
    simulator.run()
    return read


@pytest.mark.parametrize("pipeline, shift", [(1, 0), (2, -1), ("full", 1)])
def test_registers_follow_the_rule_sample_by_sample(pipeline, shift):
    model = make_model([3, -2, 1], bias=-5, bits=5, signed=True)
    weight_bits, bias_bits = 5, 8
    dut = make_component(UnitConfig(model, on_chip_learning=True, learning_rate=2.0 ** shift,
                                    weight_bits=weight_bits, bias_bits=bias_bits,
                                    bias_step=3, pipeline=pipeline))
    rng = np.random.default_rng(4)
    samples = [([int(v) for v in rng.integers(-16, 16, 3)], int(rng.integers(0, 2)))
               for _ in range(60)]
    read = run_samples(dut, samples, 4)
    weights, bias = [3, -2, 1], -5
    limits = set()
    for (x, target), got in zip(samples, read):
        weights, bias = gold_step(weights, bias, x, target, shift, 3, weight_bits, bias_bits)
        assert got == weights + [bias]
        limits |= {w for w in weights if w in (-16, 15)}
    if shift >= 0:      # steps of a whole code or more reach the 5-bit limits in this run
        assert limits, "the run should drive some weight to its limit"


def test_a_bank_learns_one_vs_rest_by_each_units_target_bit():
    features = make_model([0, 0], bits=4).features
    model = Model(module="bank", features=features,
                  units=[Unit("a", (1, -1), 0), Unit("b", (-1, 2), 1), Unit("c", (0, 1), -2)])
    dut = make_component(UnitConfig(model, on_chip_learning=True, weight_bits=6,
                                    bias_bits=8, bias_step=2, pipeline=2))
    rng = np.random.default_rng(7)
    samples = [([int(v) for v in rng.integers(0, 16, 2)], int(rng.integers(0, 8)))
               for _ in range(40)]
    read = run_samples(dut, samples, 9)
    state = [([1, -1], 0), ([-1, 2], 1), ([0, 1], -2)]
    for (x, target), got in zip(samples, read):
        state = [gold_step(w, b, x, (target >> u) & 1, 0, 2, 6, 8)
                 for u, (w, b) in enumerate(state)]
        assert got == [v for w, b in state for v in w + [b]]


@pytest.mark.parametrize("options, field", [
    (dict(learning_rate="3"), "learning_rate"),
    (dict(learning_rate="1/3"), "learning_rate"),
    (dict(weight_bits=3), "weight_bits"),          # the trained weight 5 needs 4 bits
    (dict(arch="serial"), "on_chip_learning"),
    (dict(weight_port="axi4-lite"), "on_chip_learning"),
    (dict(bias_step=0), "bias_step"),
])
def test_refusals_name_the_field(options, field):
    model = make_model([5, -2], bias=1, bits=4)
    with pytest.raises(InputError) as caught:
        UnitConfig(model, on_chip_learning=True, **options)
    assert caught.value.field == field


def test_a_learning_rate_without_learning_is_refused():
    with pytest.raises(InputError) as caught:
        UnitConfig(make_model([1], bits=4), learning_rate="1/2")
    assert caught.value.field == "learning_rate"


@pytest.mark.parametrize("form", [{}, {"dsp_products": 1}], ids=["plain", "rows"])
def test_the_reported_update_widths_are_the_built_ones_behind_a_clamping_guard(form):
    # The guard clamps f0 to 0..20 and f1 to 0..15 (5 and 4 bits, not their ports' 8): the
    # steps and the adders the report states (hardware.learning.update_widths) are those of
    # the codes the arithmetic sees, as the emitted Verilog declares them (the copies of the
    # form built for speed; the bias's adder above the bias step's two low zero bits).
    from thresh2hdl.emit.verilog import emit_verilog
    from thresh2hdl.hardware.learning import update_widths
    model = make_model([3, -2], bias=-5, bits=8, ranges=[(0, 20), (0, 15)])
    config = UnitConfig(model, on_chip_learning=True, learning_rate="1/2", weight_bits=6,
                        bias_bits=10, bias_step=4, clamp=True, **form)
    text = emit_verilog(make_component(config), model)
    step_bits, weight_bits, bias_bits = update_widths(config)
    assert "f0_clamped" in text
    if form:
        widths = {name: int(top) + 1 for top, name in
                  re.findall(r"reg  \[(\d+):0\] (\w+_learned);", text)}
        moves = [int(top) + 1 for top in re.findall(r"wire \[(\d+):0\] learn_move\d;", text)]
        assert step_bits == max(moves)
        assert weight_bits == max(widths["weight0_learned"], widths["weight1_learned"])
        assert bias_bits == widths["bias_learned"] - 2
    else:
        steps = [int(top) + 1 for top in re.findall(r"reg  \[(\d+):0\] learn_step\d_r1;",
                                                    text)]
        adders = [int(top) + 1 for top in re.findall(r"wire \[(\d+):0\] weight\d_next;", text)]
        assert step_bits == max(steps) and weight_bits == max(adders)
        assert bias_bits == int(re.search(r"wire \[(\d+):0\] bias_next;", text)[1]) + 1
