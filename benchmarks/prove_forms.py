"""Proof time of the forms an engineer picks for speed, size or flexibility: split adders (8
bits, two carry registers, every level registered), the serial architecture, loadable weights (tree, every level registered) and loadable weights on the serial
architecture, on-chip learning (tree, every level registered, 8-bit weights: the model's
weights halved so that its registers hold them, rate 1/16; its update step proved too), Yosys
step included.

    python benchmarks/prove_forms.py [--quick]

Random 12-bit unsigned models (seeded, as benchmarks/prove_speed.py makes them). Targets on 2
cores: each form of the 16-feature unit proved in <= 10 s, of the 64-feature unit in <= 60 s.
Baseline, in the same run: the constant-weight tree of the same model with every level
registered (the form the proof covered first); the ratio is each form's time over it.
"""

import argparse
import time
from dataclasses import replace

from thresh2hdl.emit.verilog import emit_verilog, port_table
from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.proof.prover import prove_netlist

from prove_speed import model_of

TARGETS_S = {16: 10, 64: 60}
FORMS = {
    "tree (baseline)": {"pipeline": "full"},
    "split adders": {"pipeline": "full", "split_bits": 8, "carry_registers": 2},
    "serial": {"arch": "serial"},
    "loadable tree": {"pipeline": "full", "loadable_weights": True, "weight_bits": 12},
    "loadable serial": {"arch": "serial", "loadable_weights": True, "weight_bits": 12},
    "learning tree": {"pipeline": "full", "on_chip_learning": True, "weight_bits": 8,
                      "bias_bits": 20, "learning_rate": "1/16"},
}


def start_of(model, options):
    """The model a form is built from: with on-chip learning, weights its registers hold
    (the random model's, from -200 to 200, halved)."""
    if not options.get("on_chip_learning"):
        return model
    return replace(model, units=[replace(u, weights=tuple(w // 2 for w in u.weights))
                                 for u in model.units])


def prove_seconds(model, options, timeout_s):
    component = make_component(UnitConfig(model, **options))
    text = emit_verilog(component, model)
    started = time.perf_counter()
    outcome = prove_netlist(text, component, model, port_table(component, model),
                            timeout_s=timeout_s)
    return time.perf_counter() - started, outcome


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--quick", action="store_true", help="only the 16-feature unit")
    args = parser.parse_args()
    print(f"{'form':>16} {'features':>8} {'seconds':>8} {'ratio':>6} {'target s':>9}  status")
    for features in [16] + ([] if args.quick else [64]):
        model = model_of(features, 1)
        baseline = None
        for name, options in FORMS.items():
            seconds, outcome = prove_seconds(start_of(model, options), options,
                                             4 * TARGETS_S[features])
            baseline = baseline or seconds
            ok = outcome.status == "proved" and seconds <= TARGETS_S[features]
            print(f"{name:>16} {features:8d} {seconds:8.1f} {seconds / baseline:6.2f} "
                  f"{TARGETS_S[features]:9d}  {outcome.status} ({outcome.lemmas} lemmas)"
                  f"{'' if ok or name.endswith('(baseline)') else '  MISSED'}")
    print(f"solver {outcome.solver}, {outcome.yosys}")


if __name__ == "__main__":
    main()
