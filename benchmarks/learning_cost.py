"""What on-chip learning costs, measured in the same run against the same unit with loadable
weights alone.

    python benchmarks/learning_cost.py [--dsp] [--dsp-products=N] [--device=NAME] [PIPELINE ...]
    (needs pip install 'thresh2hdl[synth]')

A synthetic 16-feature unit on 12-bit unsigned codes with 8-bit weights and a 24-bit bias
(random weights, seeded), eta 1/64, on the iCE40 UP5K (or --device=hx8k...), for each
pipeline given (default: 2 and
full): logic cells, flip-flops and fmax of the loadable unit and of the learning unit, and the
learning unit's logic cells against the loadable one's; ``--dsp`` lets synthesis put
multipliers into the part's eight DSP blocks. A design larger than the part is reported with
its synthesis figures. Either unit takes one input (labelled or not) per clock.
``--dsp-products=N`` builds both units with ``dsp_products=N`` (N products written as
multiplications for the DSP blocks, the rest as rows of partial products; implies ``--dsp``)
and checks the UP5K target of on-chip learning: the learning unit placed in the part's
5,280 logic cells, at 50 MHz or more, in at most twice the loadable unit's logic cells.
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


# The target of on-chip learning on the UP5K (issue 19): fmax, and the learning unit's logic
# cells against the loadable unit's.
TARGET_MHZ, TARGET_RATIO = 50.0, 2.0


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


def verdict(learning, ratio):
    """The target, met or not, in one line."""
    fits = learning.get("fmax_mhz") is not None
    fmax = learning.get("fmax_mhz") or 0
    checks = [f"placed in {learning['logic_cells']:,} of 5,280 logic cells: "
              f"{'yes' if fits else 'no'}",
              f"fmax >= {TARGET_MHZ:.0f} MHz: {'yes' if fmax >= TARGET_MHZ else 'no'}",
              f"<= {TARGET_RATIO:.0f}x the loadable unit's cells: "
              f"{'yes' if ratio <= TARGET_RATIO else 'no'}"]
    return "  target: " + "; ".join(checks)


def main(pipelines, dsp=False, dsp_products=None):
    unit_model = model()
    rows = {} if dsp_products is None else {"dsp_products": dsp_products}
    for pipeline in pipelines:
        pipeline = pipeline if pipeline == "full" else int(pipeline)
        base_latency, base = measure(unit_model, dsp, loadable_weights=True, pipeline=pipeline,
                                     **rows)
        latency, learning = measure(unit_model, dsp, on_chip_learning=True,
                                    learning_rate="1/64", pipeline=pipeline, **rows)
        print(f"pipeline {pipeline}{', DSP blocks allowed' if dsp else ''}"
              f"{f', dsp_products {dsp_products}' if rows else ''}:")
        print(line("loadable", base_latency, base))
        print(line("learning", latency, learning))
        ratio = learning['logic_cells'] / base['logic_cells']
        print(f"  learning / loadable logic cells: {ratio:.2f}x")
        if rows and DEVICE == "up5k":
            print(verdict(learning, ratio))
    tools = base["tool_versions"]
    print(f"({tools['yosys']}, {tools['nextpnr']}, {base['device_name']}, placement seed "
          f"{SEED})")


if __name__ == "__main__":
    arguments = [a for a in sys.argv[1:] if a != "--dsp" and not a.startswith("--device=")]
    DEVICE = next((a.split("=", 1)[1] for a in sys.argv[1:] if a.startswith("--device=")),
                  DEVICE)
    products = next((a.split("=", 1)[1] for a in sys.argv[1:]
                     if a.startswith("--dsp-products=")), None)
    arguments = [a for a in arguments if not a.startswith("--dsp-products=")]
    main(arguments or ["2", "full"], dsp="--dsp" in sys.argv[1:] or products is not None,
         dsp_products=None if products is None else int(products))
