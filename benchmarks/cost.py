"""FPGA cost of our architectures against a naive design, measured in the same run.

    python benchmarks/cost.py        (needs pip install 'thresh2hdl[synth]')

A 16-feature, unsigned 12-bit, 8-bit-weight unit on iCE40 UP5K. The naive design is plain
Verilog written here: every product and the sum in 32-bit signed arithmetic, registered outputs.
Targets: LUT4 <= 0.40x the naive design; fmax >= 75 MHz for the pipelined multiplier-free one;
the serial architecture <= 0.25x the LUT4 of the parallel one.
"""

import statistics

import numpy as np

from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.cost.estimate import estimate_cost
from thresh2hdl.model.records import FeatureFormat, Model, Unit
from thresh2hdl.analysis import analyse
from thresh2hdl.emit.verilog import emit_verilog, port_table


SEEDS = (1, 2, 3, 4, 5)
# (split bits, carry registers) of the fmax runs: unsplit, then the best of sweeps here
# (split 6 to 13, one or two carry registers; see DEVELOPERS.md).
FMAX_CONFIGS = ((None, 1), (13, 1), (9, 2), (6, 2))


def naive_verilog(weights, bias):
    ports = ",\n".join([f"  input wire [11:0] x{i}" for i in range(len(weights))])
    terms = " + ".join(f"$signed({{20'd0, x{i}}}) * {w}" for i, w in enumerate(weights))
    return (f"module naive (\n  input wire clk,\n{ports},\n  output reg y,\n"
            f"  output reg signed [31:0] score\n);\n"
            f"  wire signed [31:0] sum = {terms} + {bias};\n"
            f"  always @(posedge clk) begin\n    score <= sum;\n    y <= sum > 0;\n  end\n"
            f"endmodule\n")


def main():
    rng = np.random.default_rng(0)
    weights = [int(v) for v in rng.integers(-128, 128, 16)]
    bias = -20000
    model = Model(module="unit16", features=[FeatureFormat(f"x{i}", 12) for i in range(16)],
                  units=[Unit("u", tuple(weights), bias)])
    naive_ports = [("clk", "clk", "input", 1, False)] + \
        [(f"x{i}", f"x{i}", "input", 12, False) for i in range(16)] + \
        [("y", "y", "output", 1, False), ("score", "score", "output", 32, True)]
    base = estimate_cost(naive_verilog(weights, bias), "naive", naive_ports)
    print(f"naive 32-bit: {base['luts']} LUT4, {base['carries']} carries, "
          f"{base['fmax_mhz']:.1f} MHz  ({base['tool_versions']['yosys']}, "
          f"{base['tool_versions']['nextpnr']})")
    parallel = {}
    for arch, pipeline in (("tree", 1), ("tree", 3), ("shiftadd", 1), ("shiftadd", 3),
                           ("shiftadd", 6), ("serial", 1)):
        dut = make_component(UnitConfig(model, pipeline=pipeline, arch=arch))
        figures = estimate_cost(emit_verilog(dut, model), model.module, port_table(dut, model))
        parallel.setdefault(arch, figures["luts"])
        print(f"{arch:8s} pipeline {pipeline:2d}: {figures['luts']} LUT4 "
              f"({figures['luts'] / base['luts']:.3f}x naive; target <= 0.40x), "
              f"{figures['carries']} carries, {figures['flip_flops']} flip-flops, "
              f"{figures['fmax_mhz']:.1f} MHz")
    serial = parallel["serial"]
    print(f"serial: {serial / parallel['tree']:.2f}x the LUT4 of the parallel tree, "
          f"{serial / parallel['shiftadd']:.2f}x of the parallel shiftadd (target <= 0.25x); "
          f"one result per {len(weights)} beats")
    # The UP5K has eight SB_MAC16 blocks; a serial design needs one for its multiplier.
    dut = make_component(UnitConfig(model, arch="serial"))
    with_dsp = estimate_cost(emit_verilog(dut, model), model.module, port_table(dut, model),
                             dsp=True)
    print(f"serial, multiplier in a DSP block (synth_ice40 -dsp): {with_dsp['luts']} LUT4 and "
          f"{with_dsp['dsps']} SB_MAC16: {with_dsp['luts'] / parallel['tree']:.2f}x the LUT4 of "
          f"the parallel tree, {with_dsp['luts'] / parallel['shiftadd']:.2f}x of the parallel "
          f"shiftadd, {with_dsp['fmax_mhz']:.1f} MHz")
    # fmax of the pipelined multiplier-free unit: every level registered, with and without
    # split adders; nextpnr's placement seed moves fmax by a few MHz, so several seeds.
    levels = analyse(model, arch="shiftadd").levels
    for split, carry in FMAX_CONFIGS:
        dut = make_component(UnitConfig(model, pipeline=levels, arch="shiftadd",
                                        split_bits=split, carry_registers=carry))
        text, ports = emit_verilog(dut, model), port_table(dut, model)
        runs = [estimate_cost(text, model.module, ports, seed=seed) for seed in SEEDS]
        fmax = sorted(r["fmax_mhz"] for r in runs)
        name = "" if split is None else f", split {split}, carry registers {carry}"
        print(f"shiftadd pipeline {levels}{name}: latency {dut.latency}, {runs[0]['luts']} LUT4 "
              f"({runs[0]['luts'] / base['luts']:.3f}x naive), {runs[0]['flip_flops']} "
              f"flip-flops, fmax over seeds {list(SEEDS)}: median "
              f"{statistics.median(fmax):.1f} MHz (min {fmax[0]:.1f}, max {fmax[-1]:.1f}; "
              f"target >= 75 MHz)")


if __name__ == "__main__":
    main()
