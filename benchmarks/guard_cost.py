"""What the input guard costs, measured in the same run against the same design without it.

    python benchmarks/guard_cost.py        (needs pip install 'thresh2hdl[synth]')

The embedded demo (synthetic pump-vibration scenario: ten 12-bit features, two of them declared
tighter than their port) on iCE40 UP5K, for each guard choice: clamp and flag (the default),
clamp only, flag only, none. Prints LUT4, flip-flops and fmax (median of three placement
seeds), and each one's LUT4 against the unguarded design.
"""

import statistics

from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.cost.estimate import estimate_cost
from thresh2hdl.app import demo_model
from thresh2hdl.emit.verilog import emit_verilog, port_table

SEEDS = (1, 2, 3)
CHOICES = (("clamp and flag", True, True), ("clamp only", True, False),
           ("flag only", False, True), ("no guard", False, False))


def main():
    model = demo_model()
    results = {}
    for arch, pipeline in (("tree", 2), ("shiftadd", 2)):
        for label, clamp, flag in CHOICES:
            dut = make_component(UnitConfig(model, pipeline=pipeline, arch=arch, clamp=clamp,
                                            range_flag=flag))
            text = emit_verilog(dut, model)
            runs = [estimate_cost(text, model.module, port_table(dut, model), seed=seed)
                    for seed in SEEDS]
            results[(arch, label)] = runs
        base = results[(arch, "no guard")][0]["luts"]
        for label, _, _ in CHOICES:
            runs = results[(arch, label)]
            luts = runs[0]["luts"]
            fmax = statistics.median(r["fmax_mhz"] for r in runs)
            print(f"{arch:8s} pipeline {pipeline} {label:15s}: {luts} LUT4 ({luts - base:+d}, "
                  f"{luts / base:.3f}x no guard), {runs[0]['flip_flops']} flip-flops, "
                  f"fmax {fmax:.1f} MHz (median of {len(SEEDS)} seeds)")
    tools = results[("tree", "no guard")][0]["tool_versions"]
    print(f"({tools['yosys']}, {tools['nextpnr']}, iCE40 UP5K)")


if __name__ == "__main__":
    main()
