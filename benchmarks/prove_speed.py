"""Proof time of the emitted Verilog against its model, Yosys step included.

    python benchmarks/prove_speed.py [--quick]

Random 12-bit unsigned models (seeded), every size as a combinational design and with three
register stages. Targets on 2 cores: 16 x 12 <= 5 s, 64 x 12 <= 10 s, 256 x 12 <= 60 s, a
10-unit bank of 64 features <= 60 s; pipelined within 2x of the combinational time. A
``synth_ice40`` netlist (Yosys; also ``synth_ecp5`` and a flattened ``synth``) of the
64-feature unit (shift-add, every level registered) proved equivalent to the emitted file
(``prove --netlist``'s gate-level method) <= 60 s, the synthesis and the emitted file's own
proof not counted.
Baseline, in the same run: the same lemmas in one solver query (no batches), on the sizes
where that finishes in reasonable time.
"""

import argparse
import subprocess
import tempfile
from pathlib import Path

import numpy as np

import thresh2hdl.proof.prover as prove_module
import thresh2hdl.proof.solve as solve_module
from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.model.records import FeatureFormat, Model, Unit
from thresh2hdl.emit.verilog import emit_verilog, port_table

from thresh2hdl.proof import gate_netlist, prove_gate_netlist
from thresh2hdl.tools import find_tool

TARGETS_S = {(16, 1): 5, (64, 1): 10, (256, 1): 60, (64, 10): 60}
GATE_TARGET_S = 60


def model_of(features, units, seed=0):
    rng = np.random.default_rng(seed)
    return Model(module="bench", features=[FeatureFormat(f"x{i}", 12) for i in range(features)],
                 units=[Unit(f"u{k}", tuple(int(v) for v in rng.integers(-200, 201, features)),
                             int(rng.integers(-100000, 100001))) for k in range(units)])


def prove_time(model, pipeline, *, timeout_s=300):
    component = make_component(UnitConfig(model, pipeline=pipeline))
    text = emit_verilog(component, model)
    outcome = prove_module.prove_netlist(text, component, model, port_table(component, model),
                                         timeout_s=timeout_s)
    return outcome


def gate_equivalence_time(features, family="ice40"):
    """The gate-level method on Yosys's synth_<family> netlist of a fully pipelined shift-add
    unit: the outcome (its seconds exclude the tools' warm-up) and the synthesis time."""
    import time
    model = model_of(features, 1)
    config = UnitConfig(model, pipeline="full", arch="shiftadd")
    component = make_component(config)
    text = emit_verilog(component, model)
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        (folder / "own.v").write_text(text)
        clock = time.perf_counter()
        synth = "synth -flatten" if family == "generic" else f"synth_{family}"
        subprocess.run([find_tool("yosys"), "-q", "-p", f"read_verilog own.v; {synth} "
                        "-top bench; write_verilog -noattr gate.v"], cwd=folder, check=True)
        synthesis = time.perf_counter() - clock
        netlist = (folder / "gate.v").read_text()
    outcome = prove_gate_netlist(netlist, gate_netlist(netlist, "bench"), text, component,
                                 model, port_table(component, model), timeout_s=300)
    return outcome, synthesis


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--quick", action="store_true", help="only 16 and 64 features")
    args = parser.parse_args()
    sizes = [(16, 1), (64, 1)] + ([] if args.quick else [(256, 1), (64, 10)])
    print(f"{'design':>22} {'comb s':>8} {'pipe3 s':>8} {'ratio':>6} {'target s':>9}  status")
    for features, units in sizes:
        model = model_of(features, units)
        comb = prove_time(model, 0)
        piped = prove_time(model, 3)
        name = f"{features} x 12" + (f", {units} units" if units > 1 else "")
        ok = comb.seconds <= TARGETS_S[(features, units)] and \
            piped.seconds <= 2 * max(comb.seconds, 1.0)
        print(f"{name:>22} {comb.seconds:8.1f} {piped.seconds:8.1f} "
              f"{piped.seconds / comb.seconds:6.2f} {TARGETS_S[(features, units)]:9d}  "
              f"{comb.status}/{piped.status} ({comb.lemmas}/{piped.lemmas} lemmas)"
              f"{'' if ok else '  MISSED'}")
    print(f"solver {comb.solver}, {comb.yosys}")
    families = ["ice40"] if args.quick else ["ice40", "ecp5", "generic"]
    for family in families:
        gate, synthesis = gate_equivalence_time(64, family)
        ok = gate.status == "proved" and gate.seconds <= GATE_TARGET_S
        synth = "synth -flatten" if family == "generic" else f"synth_{family}"
        print(f"{synth} netlist of 64 x 12 (shiftadd, pipeline full) equivalent to the "
              f"emitted file: {gate.seconds:.1f} s (target {GATE_TARGET_S} s; synthesis "
              f"{synthesis:.1f} s not counted), {gate.status}, {gate.lemmas} lemmas"
              f"{'' if ok else '  MISSED'}")
    # Baseline: one query holding every lemma, as a single solver call would.
    batch = solve_module.BATCH_LEMMAS
    for features, units in [(64, 1), (16, 10)]:
        model = model_of(features, units)
        batched = prove_time(model, 0)
        solve_module.BATCH_LEMMAS = 10 ** 9
        try:
            single = prove_time(model, 0, timeout_s=120)
        finally:
            solve_module.BATCH_LEMMAS = batch
        print(f"baseline {features} x 12, {units} unit(s): one query {single.seconds:.1f} s "
              f"({single.status}), batches of {batch} {batched.seconds:.1f} s: "
              f"{single.seconds / batched.seconds:.1f}x")


if __name__ == "__main__":
    main()
