"""On-chip learning in every simulator: each result against the registers its vector met,
every register read back every cycle, and the host's rule bit for bit."""

import importlib.util
from pathlib import Path

import numpy as np
import pytest

from helpers import (exported_testbench, lint_icarus, lint_verilator, make_model, require_tool,
                     run)
from thresh2hdl.emit.verilog import emit_verilog, port_table
from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.model import Model, Unit, dataset_for_model
from thresh2hdl.model.data import Dataset
from thresh2hdl.train import fit_on_chip, learn_in_order, unit_targets
from thresh2hdl.verify import ReferenceModel, make_stimulus
from thresh2hdl.verify.learning import learning_trace, with_learning
from thresh2hdl.verify.runner import first_stimulus, make_backend
from thresh2hdl.verify.vectors import random_vectors

EXAMPLE = Path(__file__).parents[2] / "examples" / "field_drift" / "drift.py"


def drift_example():
    spec = importlib.util.spec_from_file_location("drift_example", EXAMPLE)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def guarded_unit():
    model = make_model([5, -3, 2], bias=-7, bits=6, signed=True,
                       ranges=[(-20, 25), (-32, 31), (-10, 10)])
    return model, make_component(UnitConfig(model, on_chip_learning=True, weight_bits=5,
                                            bias_bits=9, learning_rate="1/2", pipeline=2))


def bank():
    features = make_model([0, 0, 0], bits=5).features
    model = Model(module="bk", features=features,
                  units=[Unit("a", (1, 2, -3), -3), Unit("b", (-1, 2, 3), 5),
                         Unit("c", (0, 4, 1), 0)])
    return model, make_component(UnitConfig(model, on_chip_learning=True, weight_bits=6,
                                            bias_bits=10, learning_rate="2",
                                            pipeline="full"))


def backends(model, component, tmp_path, names):
    text = emit_verilog(component, model)
    ports = port_table(component, model)
    found = []
    for name in names:
        if name == "amaranth":
            found.append(make_backend("amaranth", component=component))
        elif name == "ghdl":
            from thresh2hdl.emit.vhdl import emit_vhdl
            from thresh2hdl.verify import GhdlBackend
            found.append(GhdlBackend(emit_vhdl(component, model), ports, model.module))
        else:
            found.append(make_backend(name, verilog_text=text, ports=ports,
                                      module=model.module))
    return found


def test_the_trace_moves_the_registers_and_reaches_their_limits():
    model, component = guarded_unit()
    rows = random_vectors(np.random.default_rng(2), [(-32, 31)] * 3, 800)
    stimulus, _ = first_stimulus(component, model, rows, reload_count=100)
    read = stimulus.bus.expected["read_data"]
    assert stimulus.bus.inputs["enable"].any() and len(set(read.tolist())) > 20
    weights = np.where(read >= 256, read - 512, read)       # 9-bit read-back, signed
    assert {-16, 15} & set(weights.tolist())                # some 5-bit weight at a limit


@pytest.mark.parametrize("design", [guarded_unit, bank], ids=["guarded-unit", "bank"])
def test_amaranth_agrees_with_the_trace(design):
    model, component = design()
    rows = random_vectors(np.random.default_rng(5), model.feature_ranges, 500)
    stimulus, _ = first_stimulus(component, model, rows, reload_count=80)
    checked = make_backend("amaranth", component=component).run(stimulus).check(stimulus)
    assert checked.mismatch_count == 0 and checked.vectors_checked > 500


@pytest.mark.slow
@pytest.mark.parametrize("design", [guarded_unit, bank], ids=["guarded-unit", "bank"])
def test_every_simulator_agrees_and_lints_clean(design, tmp_path):
    # Outside references: Icarus Verilog 11, Verilator 5.006 and GHDL 2.0 run the emitted
    # files; every one is judged by the same cycle-exact trace.
    require_tool("iverilog", "vvp", "verilator", "g++", "ghdl")
    model, component = design()
    (tmp_path / f"{model.module}.v").write_text(emit_verilog(component, model))
    for lint in (lint_verilator(tmp_path, model.module),
                 lint_icarus(tmp_path, f"{model.module}.v")):
        assert lint == (0, ""), lint[1]
    rows = random_vectors(np.random.default_rng(9), model.feature_ranges, 400)
    stimulus, _ = first_stimulus(component, model, rows, reload_count=60)
    for backend in backends(model, component, tmp_path,
                            ("amaranth", "icarus", "verilator", "ghdl")):
        checked = backend.run(stimulus).check(stimulus)
        assert checked.mismatch_count == 0, (backend.name, checked.mismatches[:2])


def mutant_mismatches(monkeypatch, module, target, replacement):
    monkeypatch.setattr(module, target, replacement)
    model, component = guarded_unit()
    rows = random_vectors(np.random.default_rng(1), model.feature_ranges, 300)
    stimulus, _ = first_stimulus(component, model, rows, reload_count=40)
    return make_backend("amaranth", component=component).run(stimulus).check(stimulus)


def test_a_wrapping_update_is_caught(monkeypatch):
    # A mutant: the sum kept to the register's width (two's complement wrap), not clamped.
    from amaranth.hdl import Mux
    from thresh2hdl.hardware import learning
    checked = mutant_mismatches(monkeypatch, learning, "_saturated",
                                lambda m, register, step, up, name:
                                Mux(up, register + step, register - step))
    assert checked.mismatch_count > 0
    assert "learn_read_data" in {m.signal for m in checked.mismatches}


def test_the_live_bias_instead_of_the_entered_one_is_caught(monkeypatch):
    # A mutant: the tree adds the bias register as it is at the bias's stage, so a vector
    # meets a bias updated after it entered.
    from thresh2hdl.hardware import unit
    checked = mutant_mismatches(monkeypatch, unit, "entry_bias",
                                lambda m, stages, config, bias: bias)
    assert checked.mismatch_count > 0
    assert "score" in {m.signal for m in checked.mismatches}


def drifted_run(module, count=600):
    codes, labels, drifted, drifted_labels = module.scenario(seed=1, before=1500, after=count)
    from thresh2hdl.train import FitOptions, fit
    from thresh2hdl.model import FeatureFormat
    formats = [FeatureFormat(name, 12, False) for name in module.FEATURES]
    start, _ = fit(Dataset(x=codes, labels=labels, feature_names=module.FEATURES,
                           source="before"), formats=formats,
                   options=FitOptions(weight_bits=8), module="overload_trip")
    return start, drifted, drifted_labels


@pytest.mark.parametrize("form", [{}, {"dsp_products": 2}], ids=["plain", "rows"])
@pytest.mark.parametrize("simulators", [
    ("amaranth",), pytest.param(("icarus", "verilator", "ghdl"), marks=pytest.mark.slow)],
    ids=["amaranth", "hdl-simulators"])
def test_the_drift_scenario_is_learned_bit_exact_with_fit(simulators, form, tmp_path):
    # The synthetic drift of examples/field_drift, fed back to back as labelled samples for
    # one pass: every simulator against the cycle-exact trace, and the trace's registers at
    # the end against the host's rule (fit_on_chip, one epoch, the build's delay: its
    # latency, plus the learning lag of the dsp_products form).
    if simulators != ("amaranth",):
        require_tool("iverilog", "vvp", "verilator", "g++", "ghdl")
    start, drifted, labels = drifted_run(drift_example())
    config = UnitConfig(start, on_chip_learning=True, learning_rate="1/256", weight_bits=8,
                        bias_bits=24, pipeline=2, **form)
    component = make_component(config)
    stimulus = make_stimulus(ReferenceModel.from_model(start), drifted,
                             latency=component.latency, valid_probability=1.0,
                             ready_probability=1.0, stall_vectors=0, guard=config.guard)
    stimulus = with_learning(stimulus, config, 0, labelled=np.ones(len(labels), bool),
                             targets=labels, writes_in_updates=False)
    for backend in backends(start, component, tmp_path, simulators):
        checked = backend.run(stimulus).check(stimulus)
        assert checked.mismatch_count == 0, (backend.name, checked.mismatches[:2])
    _, _, _, (weights, biases) = learning_trace(
        stimulus, config, np.ones(len(labels), bool), labels,
        stimulus.bus.inputs["read_address"])
    data = Dataset(x=drifted, labels=labels, feature_names=tuple(f.name for f in start.features),
                   source="after")
    delay = component.latency + config.learning_lag
    learned, log = fit_on_chip(data, start, config.learning_rule, epochs=1, delay=delay)
    assert weights == [list(learned.unit.weights)] and biases == [learned.unit.bias]
    assert log.mistakes_per_epoch[0] > 20        # it had something to learn
    if config.learning_lag:     # the lag changes what is learned here: the delay must count it
        early, _ = fit_on_chip(data, start, config.learning_rule, epochs=1,
                               delay=component.latency)
        assert (list(early.unit.weights), early.unit.bias) != (weights[0], biases[0])


def test_the_drift_example_recovers_its_accuracy_as_the_readme_says():
    # The figures README.md and examples/field_drift/README.md quote: the start model (fit,
    # 8-bit weights) on the drifted windows, then one pass of the rule at eta 1/1024 with the
    # default build's latency of 1.
    from thresh2hdl.model import FeatureFormat
    from thresh2hdl.train import FitOptions, accuracy, fit
    module = drift_example()
    codes, labels, drifted, drifted_labels = module.scenario()
    formats = [FeatureFormat(name, 12, False) for name in module.FEATURES]
    start, _ = fit(Dataset(x=codes, labels=labels, feature_names=module.FEATURES,
                           source="before"), formats=formats, options=FitOptions(weight_bits=8))
    config = UnitConfig(start, on_chip_learning=True, learning_rate="1/1024", bias_bits=24)
    after = Dataset(x=drifted, labels=drifted_labels, feature_names=module.FEATURES,
                    source="after")
    learned, log = fit_on_chip(after, start, config.learning_rule, epochs=1, delay=1)
    assert accuracy(start, drifted, drifted_labels) == 0.8755
    assert accuracy(learned, drifted, drifted_labels) == 0.9935
    assert log.mistakes_per_epoch == [38]


def test_a_separable_set_is_learned_in_as_many_epochs_as_fit_takes():
    # Epochs fed back to back, each followed by an idle pipeline (as fit --in-fabric ends
    # each epoch drained), in the Amaranth simulation: the registers equal fit_on_chip's
    # after the same epochs, and the last epoch's decisions all equal their targets.
    from thresh2hdl.verify.reference import cycle_model
    from thresh2hdl.verify.stimulus import Stimulus
    rng = np.random.default_rng(3)
    rows = rng.integers(0, 64, (80, 3))
    hidden = rows @ np.array([2, -3, 1]) + 20
    keep = np.abs(hidden) > 12
    rows, labels = rows[keep], (hidden[keep] > 0).astype(np.int64)
    start = make_model([0, 0, 0], bias=0, bits=6)
    config = UnitConfig(start, on_chip_learning=True, weight_bits=8, bias_bits=12,
                        bias_step=64, pipeline=2)
    component = make_component(config)
    data = Dataset(x=rows, labels=labels, feature_names=("f0", "f1", "f2"), source="rows")
    learned, log = fit_on_chip(data, start, config.learning_rule, epochs=50,
                               delay=component.latency)
    epochs, count = len(log.mistakes_per_epoch), len(rows)
    assert log.mistakes_per_epoch[-1] == 0 and epochs > 2
    period = count + component.latency + 1
    trace = cycle_model(component.latency, count * epochs, offer=lambda t: t % period < count,
                        accept=lambda t: True)
    vectors = np.tile(rows, (epochs, 1))
    zeros = np.zeros(len(vectors), dtype=np.int64)
    stimulus = Stimulus(latency=component.latency, vectors=vectors,
                        in_valid=trace["in_valid"], out_ready=trace["out_ready"],
                        in_index=trace["in_index"], expect_in_ready=trace["in_ready"],
                        expect_out_valid=trace["out_valid"],
                        expect_out_index=trace["out_index"], expect_scores=zeros,
                        expect_decisions=zeros.astype(np.uint8))
    targets = np.tile(labels, epochs)
    stimulus = with_learning(stimulus, config, 0, labelled=np.ones(len(vectors), bool),
                             targets=targets, writes_in_updates=False)
    checked = make_backend("amaranth", component=component).run(stimulus).check(stimulus)
    assert checked.mismatch_count == 0
    _, _, _, (weights, biases) = learning_trace(stimulus, config, np.ones(len(vectors), bool),
                                                targets, stimulus.bus.inputs["read_address"])
    assert weights == [list(learned.unit.weights)] and biases == [learned.unit.bias]
    assert (stimulus.expect_decisions[-count:] == labels).all()
