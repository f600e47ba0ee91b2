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

from thresh2hdl.hardware import ThresholdUnit, UnitConfig, make_component
from thresh2hdl.verify.runner import CHUNK_VECTORS, chunk_vectors, verify
from thresh2hdl.verify.sim_verilator import VerilatorBackend
from thresh2hdl.model.records import FeatureFormat, Model, Unit
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.verify.sim_amaranth import simulate_amaranth
from thresh2hdl.verify.stimulus import make_stimulus
from thresh2hdl.verify.vectors import make_vectors
from thresh2hdl.verify.sim_verilator import compiled_harness, simulate_verilator
from thresh2hdl.emit.verilog import emit_verilog, port_table


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

    start = time.perf_counter()
    verified = verify(VerilatorBackend(text, ports, model.module), dut, model, count=args.vectors)
    total = time.perf_counter() - start
    print(f"Verilator: {verified.vectors_checked} vectors end to end (made, simulated, "
          f"compared, in chunks of {chunk_vectors(16)}) in {total:.1f} s (target <= 10 s for 1e7), "
          f"{verified.mismatches} mismatches")
    path_rate = verified.vectors_checked / total

    # The compiled model alone, on one chunk: how fast the simulator itself is.
    rows = make_vectors(dut.analysis, random_count=CHUNK_VECTORS).array
    stimulus = make_stimulus(reference, rows, latency=dut.latency)
    result = simulate_verilator(text, ports, model.module, stimulus)
    verilator_rate = len(rows) / result.run_seconds
    print(f"  the compiled model alone: {verilator_rate:.3e} vectors/s; the whole path: "
          f"{path_rate:.3e} vectors/s")

    small = make_vectors(dut.analysis, random_count=5000).array
    small_stimulus = make_stimulus(reference, small, latency=dut.latency)
    start = time.perf_counter()
    simulate_amaranth(ThresholdUnit(UnitConfig(model, pipeline=2)), small_stimulus)
    amaranth_rate = len(small) / (time.perf_counter() - start)
    print(f"Amaranth simulator: {amaranth_rate:.3e} vectors/s")
    print(f"ratio Verilator / Amaranth: {verilator_rate / amaranth_rate:.0f}x for the simulator "
          f"alone, {path_rate / amaranth_rate:.0f}x for the whole path (target >= 1000x)")

    # A 64-input, 10-unit bank (target: >= 1e6 vectors/s through Verilator).
    bank = Model(module="bank64", features=[FeatureFormat(f"x{i}", 12) for i in range(64)],
                 units=[Unit(f"c{k}", tuple(int(v) for v in rng.integers(-128, 128, 64)),
                             int(rng.integers(-5000, 5000))) for k in range(10)])
    bank_dut = make_component(UnitConfig(bank, pipeline=3))
    bank_text = emit_verilog(bank_dut, bank)
    bank_ports = port_table(bank_dut, bank)
    start = time.perf_counter()
    compiled_harness(bank_text, bank_ports, bank.module)
    print(f"bank harness compile (or cache hit): {time.perf_counter() - start:.1f} s")
    rows = make_vectors(bank_dut.analysis, random_count=1_000_000).array
    stimulus = make_stimulus(ReferenceModel.from_model(bank), rows, latency=bank_dut.latency)
    # Best of three runs of the compiled model (the machine's other load only slows a run).
    runs = [simulate_verilator(bank_text, bank_ports, bank.module, stimulus) for _ in range(3)]
    result = min(runs, key=lambda r: r.run_seconds)
    mismatches = sum(r.check(stimulus).mismatch_count for r in runs)
    start = time.perf_counter()
    verified = verify(VerilatorBackend(bank_text, bank_ports, bank.module), bank_dut, bank,
                      count=2_000_000)
    path = verified.vectors_checked / (time.perf_counter() - start)
    print(f"64-input 10-unit bank: {len(rows) / result.run_seconds:.3e} vectors/s in the "
          f"compiled model, {path:.3e} vectors/s for the whole path (target >= 1e6); "
          f"{mismatches + verified.mismatches} mismatches")


if __name__ == "__main__":
    main()
