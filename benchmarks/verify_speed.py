"""Verification speed of the emitted Verilog, against Amaranth's simulator, in one run.

    python benchmarks/verify_speed.py [--vectors 10000000]

For a 16-input, unsigned 12-bit unit: end-to-end seconds for N vectors through Verilator
(vectors made, stimulus and expectations made, simulated, compared; the harness compile is
timed apart), and vectors per second there and in Amaranth's simulator on the same design.
Targets: <= 10 s for 1e7 vectors after compile; Verilator >= 1000x Amaranth in vectors/s.
"""

import argparse
import time

import numpy as np

from thresh2hdl.circuit import ThresholdUnit, UnitConfig
from thresh2hdl.model import FeatureFormat, Model, Unit
from thresh2hdl.reference import ReferenceModel
from thresh2hdl.simulate import simulate_amaranth
from thresh2hdl.stimulus import make_stimulus
from thresh2hdl.vectors import make_vectors
from thresh2hdl.verilator import compiled_harness, simulate_verilator
from thresh2hdl.verilog import emit_verilog, port_table


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--vectors", type=int, default=10_000_000)
    args = parser.parse_args()
    rng = np.random.default_rng(0)
    model = Model(module="bench16", features=[FeatureFormat(f"x{i}", 12) for i in range(16)],
                  units=[Unit("u", tuple(int(v) for v in rng.integers(-128, 128, 16)), -1000)])
    dut = ThresholdUnit(UnitConfig(model, pipeline=2))
    text = emit_verilog(dut, model)
    ports = port_table(dut, model)
    reference = ReferenceModel.from_model(model)

    start = time.perf_counter()
    compiled_harness(text, ports, model.module)
    print(f"Verilator harness compile (or cache hit): {time.perf_counter() - start:.1f} s")

    timings = {}
    start = time.perf_counter()
    rows = make_vectors(dut.analysis, random_count=args.vectors).array
    timings["vectors"] = time.perf_counter() - start
    start = time.perf_counter()
    stimulus = make_stimulus(reference, rows, latency=dut.latency)
    timings["stimulus and expectations"] = time.perf_counter() - start
    start = time.perf_counter()
    result = simulate_verilator(text, ports, model.module, stimulus)
    timings["Verilator run"] = time.perf_counter() - start
    start = time.perf_counter()
    checked = result.check(stimulus)
    timings["compare"] = time.perf_counter() - start
    total = sum(timings.values())
    for step, seconds in timings.items():
        print(f"  {step}: {seconds:.2f} s")
    path_rate = len(rows) / timings["Verilator run"]
    verilator_rate = len(rows) / result.run_seconds
    print(f"Verilator: {len(rows)} vectors end to end in {total:.1f} s (target <= 10 s for 1e7), "
          f"{checked.mismatch_count} mismatches")
    print(f"  the compiled model alone: {verilator_rate:.3e} vectors/s; with the vector files "
          f"written and read: {path_rate:.3e} vectors/s")

    small = make_vectors(dut.analysis, random_count=5000).array
    small_stimulus = make_stimulus(reference, small, latency=dut.latency)
    start = time.perf_counter()
    simulate_amaranth(ThresholdUnit(UnitConfig(model, pipeline=2)), small_stimulus)
    amaranth_rate = len(small) / (time.perf_counter() - start)
    print(f"Amaranth simulator: {amaranth_rate:.3e} vectors/s")
    print(f"ratio Verilator / Amaranth: {verilator_rate / amaranth_rate:.0f}x for the model alone, "
          f"{path_rate / amaranth_rate:.0f}x with file transfer (target >= 1000x)")
    print("64-input 10-unit bank: not measured, banks are not built into hardware yet")


if __name__ == "__main__":
    main()
