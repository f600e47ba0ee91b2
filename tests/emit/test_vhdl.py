"""The emitted VHDL-2008: analysed by GHDL with every warning on, simulated by GHDL against the
integer model in every design form, read back by GHDL's synthesis and proved, deterministic.

GHDL 2.0 (Debian 2.0.0) is an implementation of IEEE 1076-2008 independent of this project and
of Amaranth/Yosys, so a VHDL file it analyses without a warning, simulates with 0 mismatches and
synthesises into a netlist that proves, is one an outside tool reads as the model.
"""

import subprocess

import numpy as np
import pytest

from helpers import bank_model, make_model, require_proof_tools, require_tool
from thresh2hdl.app import demo_model
from thresh2hdl.app.progress import progress_of
from thresh2hdl.emit import emit_vhdl, port_table
from thresh2hdl.hardware import FULL_PIPELINE, UnitConfig, make_component
from thresh2hdl.verify import GhdlBackend, first_stimulus, ghdl_lint, ghdl_reading, make_vectors

pytestmark = [pytest.mark.ghdl]


def random_model(seed, units=1):
    """Synthetic: signed and unsigned features, some ranges tighter than the port."""
    rng = np.random.default_rng(seed)
    count, bits, is_signed = int(rng.integers(2, 7)), int(rng.integers(3, 11)), bool(seed % 2)
    weights = rng.integers(-200, 201, (units, count))
    biases = rng.integers(-3000, 3001, units)
    if units == 1:
        lo = -(1 << (bits - 1)) if is_signed else 0
        ranges = [(lo + 1, (1 << (bits - 1)) - 2) if i == 0 else (None, None)
                  for i in range(count)]
        return make_model(weights[0].tolist(), int(biases[0]), bits=bits, signed=is_signed,
                          ranges=ranges)
    return bank_model(weights.tolist(), biases.tolist(), bits=bits, is_signed=is_signed)


FORMS = {
    "tree-comb": (1, {"pipeline": 0}),
    "tree-2": (1, {"pipeline": 2}),
    "shiftadd-full": (1, {"arch": "shiftadd", "pipeline": FULL_PIPELINE}),
    "split": (1, {"arch": "shiftadd", "pipeline": 3, "split_bits": 5, "carry_registers": 2}),
    "serial": (1, {"arch": "serial"}),
    "loadable": (1, {"loadable_weights": True, "pipeline": 2}),
    "flag-only": (1, {"clamp": False, "pipeline": 1}),
    "bank-2": (3, {"pipeline": 2}),
    "bank-shared": (3, {"arch": "shiftadd", "share_terms": True, "pipeline": 3}),
    "bank-serial": (3, {"arch": "serial"}),
    "async-low-enable": (1, {"pipeline": 2, "reset": "async-low", "clock_enable": True}),
    "sync-low": (1, {"arch": "shiftadd", "pipeline": 3, "reset": "sync-low"}),
    "async-high-bank": (3, {"pipeline": 2, "reset": "async-high", "clock_enable": True}),
    "stream": (1, {"pipeline": 2, "interface": "axi-stream"}),
    "stream-bank": (3, {"pipeline": 1, "interface": "axi-stream", "reset": "async-low"}),
    "split-bank": (3, {"pipeline": 2, "split_bits": 4}),
    # 12-bit weights behind the AXI4-Lite slave: registers written byte by byte, whose flops
    # synthesis splits by enable (each file joins them under the register's name).
    "axi-lite": (1, {"loadable_weights": True, "weight_port": "axi4-lite", "weight_bits": 12,
                     "pipeline": FULL_PIPELINE}),
}


def design(name, seed):
    units, options = FORMS[name]
    model = random_model(seed, units)
    component = make_component(UnitConfig(model, **options))
    return model, component, port_table(component, model)


def stimulus_of(component, model, seed, count=400):
    analyses = component.unit_analyses
    rows = make_vectors(analyses[0], random_count=count, seed=seed, data=None,
                        others=analyses[1:], guard=component.config.guard).array
    stimulus, _ = first_stimulus(component, model, rows, seed=seed, reload_count=30)
    return stimulus


@pytest.mark.parametrize("name", sorted(FORMS))
def test_every_form_is_lint_clean_and_agrees_in_ghdl(tmp_path, name):
    require_tool("ghdl")
    for seed in (1,):            # each CI run draws the same; a second seed is a local check
        model, component, ports = design(name, seed)
        text = emit_vhdl(component, model)
        path = tmp_path / f"{model.module}.vhd"
        path.write_text(text)
        ghdl_lint(path)               # any warning of GHDL's is a ToolError
        stimulus = stimulus_of(component, model, seed)
        result = GhdlBackend(text, ports, model.module).run(stimulus)
        checked = result.check(stimulus)
        assert checked.mismatch_count == 0, (name, seed, checked.mismatches[:3])
        assert checked.vectors_checked == len(stimulus.vectors)


def test_decisions_equal_a_plain_python_sum(tmp_path):
    # The outside reference: w.x + b > 0 written out here in Python integers (the perceptron's
    # definition, Rosenblatt 1958), not the project's reference model.
    require_tool("ghdl")
    model, component, ports = design("tree-2", 3)
    stimulus = stimulus_of(component, model, 3, count=300)
    result = GhdlBackend(emit_vhdl(component, model), ports, model.module).run(stimulus)
    unit, guard = model.units[0], component.config.guard
    valid = np.flatnonzero(result.out_valid & stimulus.out_ready)
    assert len(valid) > 100
    for cycle, index in zip(valid, range(len(valid))):
        codes = [min(max(int(code), lo), hi) for code, (lo, hi) in
                 zip(stimulus.vectors[index], guard.feature_ranges)]
        total = sum(w * c for w, c in zip(unit.weights, codes)) + unit.bias
        assert result.decisions[cycle] == int(total > 0)


def demo_mutant(pipeline):
    """The demo's design and a mutant of its VHDL: one adder turned into a subtractor."""
    model = demo_model()
    component = make_component(UnitConfig(model, pipeline=pipeline))
    text = emit_vhdl(component, model)
    line = next(line for line in text.splitlines() if line.startswith("  s2_0 <="))
    mutant = text.replace(line, line.replace(") + unsigned(", ") - unsigned("))
    assert mutant != text
    return model, component, port_table(component, model), mutant


def test_a_wrong_vhdl_file_is_caught_in_ghdl():
    # A mutant: one adder turned into a subtractor. GHDL must see the difference.
    require_tool("ghdl")
    model, component, ports, mutant = demo_mutant(pipeline=1)
    stimulus = stimulus_of(component, model, 0, count=200)
    assert GhdlBackend(mutant, ports, model.module).run(stimulus).check(
        stimulus).mismatch_count > 0


@pytest.mark.prove
@pytest.mark.parametrize("name", ["tree-comb", "tree-2", "shiftadd-full", "flag-only",
                                  "bank-2", "bank-shared", "async-low-enable", "sync-low",
                                  "async-high-bank", "stream", "stream-bank", "split",
                                  "split-bank", "axi-lite"])
def test_ghdl_reading_proves(name):
    # GHDL's synthesis reads the VHDL (ghdl --synth --out=verilog); that reading is proved
    # equal to the model, so an independent tool's reading of our VHDL computes the model.
    require_tool("ghdl")
    require_proof_tools()
    from thresh2hdl.app.proving import prove_text
    model, component, ports = design(name, 4)
    reading = ghdl_reading(emit_vhdl(component, model), model.module)
    result = prove_text(reading, f"{model.module}.vhd", component, model, ports,
                        timeout_s=60, simulator="auto", progress=progress_of(None))
    assert result.status == "proved", result.section["detail"]


@pytest.mark.prove
def test_a_wrong_vhdl_file_gives_a_counterexample(tmp_path):
    require_tool("ghdl")
    require_proof_tools()
    from thresh2hdl.app.proving import prove_text
    model, component, ports, mutant = demo_mutant(pipeline=2)
    result = prove_text(ghdl_reading(mutant, model.module), "pump_fault.vhd", component, model,
                        ports, timeout_s=60, simulator="auto", progress=progress_of(None))
    assert result.status == "counterexample"
    assert result.section["counterexample"]["confirmed_in"]
    # The counterexample, replayed in GHDL on the mutant VHDL itself, gives a decision or a
    # score that a plain Python sum (w.x + b, > 0, on the clamped codes) disagrees with.
    vector = result.section["counterexample"]["vector"]
    codes = [vector[f.name] for f in model.features]
    clamped = [min(max(c, lo), hi) for c, (lo, hi) in
               zip(codes, component.config.guard.feature_ranges)]
    score = sum(w * c for w, c in zip(model.units[0].weights, clamped)) + model.units[0].bias
    stimulus, _ = first_stimulus(component, model, np.array([codes] * 4), seed=0,
                                 reload_count=0)
    got = GhdlBackend(mutant, ports, model.module).run(stimulus)
    done = got.out_valid & stimulus.out_ready
    assert np.count_nonzero(done)
    assert any(int(d) != int(score > 0) for d in got.decisions[done]) or \
        any(int(v) != score for v in got.scores[done])


def test_emitted_vhdl_is_deterministic():
    model = demo_model()
    make = lambda: emit_vhdl(make_component(UnitConfig(model, pipeline=3, arch="shiftadd")),
                             model)
    first, second = make(), make()
    assert first == second and "/" not in first.split("library ieee;")[0].replace("//", "")


def test_the_exported_vhdl_testbench_passes_and_fails(tmp_path):
    require_tool("ghdl")
    from helpers import run
    out = tmp_path / "out"
    result = run("demo", "--out", out, "--hdl", "vhdl", "--vectors", "500")
    assert result.returncode == 0, result.stderr
    assert not (out / "pump_fault.v").exists() and (out / "pump_fault_pkg.vhd").exists()
    import json
    command = json.loads((out / "report.json").read_text())["testbench"]["command"]
    ran = subprocess.run(command, shell=True, cwd=out, capture_output=True, text=True)
    assert "PASS pump_fault" in ran.stdout and ran.returncode == 0, ran.stdout + ran.stderr
    lines = (out / "expected.hex").read_text().splitlines()
    index = next(i for i, line in enumerate(lines) if int(line, 16) & 2)   # a result expected
    lines[index] = f"{int(lines[index], 16) ^ 4:0{len(lines[index])}x}"        # its decision flipped
    (out / "expected.hex").write_text("\n".join(lines) + "\n")
    ran = subprocess.run(command, shell=True, cwd=out, capture_output=True, text=True)
    assert "FAIL pump_fault" in ran.stdout and "MISMATCH" in ran.stdout
