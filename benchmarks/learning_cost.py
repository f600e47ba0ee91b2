"""What on-chip learning costs, measured in the same run against the same unit with loadable
weights alone.

    python benchmarks/learning_cost.py [--dsp] [--device=NAME] [PIPELINE ...]
    (needs pip install 'thresh2hdl[synth]')

A synthetic 16-feature unit on 12-bit unsigned codes with 8-bit weights and a 24-bit bias
(random weights, seeded), eta 1/64, on the iCE40 UP5K (or --device=hx8k...), for each
pipeline given (default: 2 and
full): logic cells, flip-flops and fmax of the loadable unit and of the learning unit, and the
learning unit's logic cells against the loadable one's; ``--dsp`` lets synthesis put
multipliers into the part's eight DSP blocks. A design larger than the part is reported with
its synthesis figures. Either unit takes one input (labelled or not) per clock.
"""

import sys

import numpy as np

from thresh2hdl.cost.estimate import DoesNotFitError, estimate_cost
from thresh2hdl.emit.verilog import emit_verilog, port_table
from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.model import FeatureFormat, Model, Unit

SEED = 1


def model():
    rng = np.random.default_rng(7)
    features = [FeatureFormat(f"f{i}", 12, False) for i in range(16)]
    weights = tuple(int(w) for w in rng.integers(-100, 101, 16))
    return Model(module="learn16", features=features, units=[Unit("u", weights, -30_000)])


DEVICE = "up5k"


def measure(unit_model, dsp=False, **options):
    dut = make_component(UnitConfig(unit_model, weight_bits=8, bias_bits=24, **options))
    text = emit_verilog(dut, unit_model)
    try:
        figures = estimate_cost(text, unit_model.module, port_table(dut, unit_model),
                                device=DEVICE, seed=SEED, dsp=dsp)
    except DoesNotFitError as error:
        figures = error.figures
    return dut.latency, figures


def line(label, latency, figures):
    fmax = figures.get("fmax_mhz")
    placed = f"fmax {fmax:.1f} MHz" if fmax else "does not fit: " + \
        "; ".join(str(v) for v in figures.get("does_not_fit", []))
    return (f"  {label:9s} latency {latency}: {figures['logic_cells']} logic cells, "
            f"{figures['flip_flops']} flip-flops, {figures['lut4_equivalents']} LUT4, {placed}")


def main(pipelines, dsp=False):
    unit_model = model()
    for pipeline in pipelines:
        pipeline = pipeline if pipeline == "full" else int(pipeline)
        base_latency, base = measure(unit_model, dsp, loadable_weights=True, pipeline=pipeline)
        latency, learning = measure(unit_model, dsp, on_chip_learning=True,
                                    learning_rate="1/64", pipeline=pipeline)
        print(f"pipeline {pipeline}{', DSP blocks allowed' if dsp else ''}:")
        print(line("loadable", base_latency, base))
        print(line("learning", latency, learning))
        print(f"  learning / loadable logic cells: "
              f"{learning['logic_cells'] / base['logic_cells']:.2f}x")
    tools = base["tool_versions"]
    print(f"({tools['yosys']}, {tools['nextpnr']}, {base['device_name']}, placement seed "
          f"{SEED})")


if __name__ == "__main__":
    arguments = [a for a in sys.argv[1:] if a != "--dsp" and not a.startswith("--device=")]
    DEVICE = next((a.split("=", 1)[1] for a in sys.argv[1:] if a.startswith("--device=")),
                  DEVICE)
    main(arguments or ["2", "full"], dsp="--dsp" in sys.argv[1:])
