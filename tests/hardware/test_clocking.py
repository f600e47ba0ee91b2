"""The reset choices and the clock enable in the design (Amaranth's simulator), the stimulus
that holds cycles, and the refusals.

Outside reference for the enable's meaning (common practice for a clock enable on an FPGA
flip-flop, e.g. the CE pin of a vendor's D flip-flop primitive): while it is low every register
keeps its value; the handshake outputs that start a transfer read 0 so that nothing is
transferred in a held cycle. The gold model here is the same stimulus with the held cycles
taken out, which must be exactly the stimulus the design without an enable is judged by.
"""

import numpy as np
import pytest

from helpers import bank_model, make_model, run, assert_one_line_error
from thresh2hdl.errors import InputError
from thresh2hdl.hardware import RESET_KINDS, UnitConfig, make_component, plan_design
from thresh2hdl.hardware import unit as unit_module, stages as stages_module
from thresh2hdl.verify.runner import first_stimulus
from thresh2hdl.verify.sim_amaranth import simulate_amaranth
from thresh2hdl.verify.stimulus import with_held_cycles
from thresh2hdl.verify.vectors import make_vectors


def tiny_model(seed):
    rng = np.random.default_rng(seed)
    weights = [int(w) for w in rng.integers(-40, 41, 4)]
    return make_model(weights, int(rng.integers(-200, 201)), bits=5, signed=bool(seed % 2))


def run_amaranth(config, seed=0, count=200):
    dut = make_component(config)
    rows = make_vectors(dut.analysis, random_count=count, seed=seed).array
    stimulus, _ = first_stimulus(dut, config.model, rows, seed=seed)
    return simulate_amaranth(dut, stimulus).check(stimulus), stimulus


@pytest.mark.parametrize("reset", RESET_KINDS)
def test_every_reset_with_an_enable_agrees_with_the_reference(reset):
    model = tiny_model(RESET_KINDS.index(reset))
    checked, stimulus = run_amaranth(UnitConfig(model, pipeline=2, reset=reset,
                                                clock_enable=True))
    assert stimulus.enable is not None and not stimulus.enable.all()
    assert checked.mismatch_count == 0 and checked.vectors_checked == len(stimulus.vectors)


def test_held_cycles_are_the_original_cycles_with_quiet_handshake_between():
    model = tiny_model(3)
    design = plan_design(UnitConfig(model, pipeline=2))
    rows = make_vectors(design.analysis, random_count=300).array
    plain, _ = first_stimulus(design, model, rows)
    held = with_held_cycles(plain, seed=5)
    on, off = held.enable, ~held.enable
    assert 0.05 < off.mean() < 0.2          # HOLD_PROBABILITY 0.1: about 10% held
    # Gold: taking the held cycles out gives back the plain run, cycle for cycle.
    for key in ("in_valid", "out_ready", "in_index", "expect_in_ready", "expect_out_valid",
                "expect_out_index"):
        assert np.array_equal(getattr(held, key)[on], getattr(plain, key)), key
    assert not held.expect_in_ready[off].any() and not held.expect_out_valid[off].any()
    # The inputs of held cycles are not all quiet: they must be ignored, not merely absent.
    assert held.in_valid[off].any() and held.out_ready[off].any()


def test_held_write_strobes_are_ignored_with_loadable_weights():
    model = tiny_model(4)
    checked, stimulus = run_amaranth(UnitConfig(model, pipeline=1, loadable_weights=True,
                                                clock_enable=True, reset="async-low"))
    strobe = stimulus.writes[0]
    assert (strobe.astype(bool) & ~stimulus.enable).any()
    assert checked.mismatch_count == 0


def test_serial_and_bank_designs_hold_too():
    model = tiny_model(6)
    checked, _ = run_amaranth(UnitConfig(model, arch="serial", clock_enable=True,
                                         reset="sync-low"))
    assert checked.mismatch_count == 0
    bank = bank_model([[3, -2, 1], [-1, 2, 2], [0, 1, -3]], [1, 0, -2])
    checked, _ = run_amaranth(UnitConfig(bank, pipeline=3, clock_enable=True,
                                         reset="async-high"))
    assert checked.mismatch_count == 0


def test_registers_that_ignore_the_enable_are_caught(monkeypatch):
    # The check can fail: the design without EnableInserter keeps moving in held cycles.
    monkeypatch.setattr(unit_module, "enabled", lambda component, module: module)
    checked, _ = run_amaranth(UnitConfig(tiny_model(1), pipeline=2, clock_enable=True))
    assert checked.mismatch_count > 0


def test_a_handshake_that_ignores_the_enable_is_caught(monkeypatch):
    monkeypatch.setattr(stages_module, "gated", lambda component, value: value)
    checked, _ = run_amaranth(UnitConfig(tiny_model(2), pipeline=2, clock_enable=True))
    assert checked.mismatch_count > 0


@pytest.mark.parametrize("config, field", [
    (dict(pipeline=0, clock_enable=True), "clock_enable"),
    (dict(pipeline=0, reset="async-high"), "reset"),
    (dict(pipeline=1, reset="async"), "reset"),
    (dict(pipeline=1, clock_enable="yes"), "clock_enable"),
])
def test_refused_clocking_names_the_field(config, field):
    with pytest.raises(InputError) as error:
        UnitConfig(tiny_model(0), **config)
    assert error.value.field == field


def test_port_names_that_clash_are_refused():
    from thresh2hdl.model.records import PortNames
    clash = make_model([1, 2], ports=PortNames(clock_enable="f0"))
    with pytest.raises(InputError, match="clock enable"):
        UnitConfig(clash, clock_enable=True)
    low = make_model([1, 2], ports=PortNames(reset="f0_x"), module="f0_x_n")
    with pytest.raises(InputError, match="active-low reset"):
        UnitConfig(low, reset="sync-low")
    UnitConfig(clash)        # without an enable the name is not used


def test_bad_clocking_options_are_one_line(tmp_path):
    result = run("demo", "--out", tmp_path / "a", "--reset", "sideways")
    assert_one_line_error(result, contains="--reset")
    result = run("demo", "--out", tmp_path / "b", "--clock-enable", "--pipeline", "0",
                 "--simulator", "amaranth")
    assert_one_line_error(result, contains="--clock-enable")
    assert not (tmp_path / "a").exists() and not (tmp_path / "b").exists()
