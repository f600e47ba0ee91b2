"""A shift-add bank sharing terms across its units (UnitConfig.share_terms): the circuit
against plain Python sums in every simulator, its adder count, and the refusals."""

import itertools
import re

import numpy as np
import pytest

from helpers import (assert_lint_clean_and_agrees, assert_one_line_error, bank_model,
                     digits_bank, require_tool, run)
from thresh2hdl.emit.verilog import emit_verilog
from thresh2hdl.errors import InputError
from thresh2hdl.hardware import FULL_PIPELINE, UnitConfig, make_component
from thresh2hdl.model import model_to_toml
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.verify.sim_amaranth import AmaranthBackend
from thresh2hdl.verify.stimulus import make_stimulus

# Four units over three features that repeat sums of two digits (x0 + x1 and others).
WEIGHTS = [[3, 5, -7], [3, 5, 6], [-3, 5, 7], [7, 3, 5]]
BIASES = [1, -2, 0, 5]


def gold(weights, biases, x):
    """Scores as plain Python sums and the argmax (lowest index on a tie), written here."""
    scores = [sum(w * v for w, v in zip(row, x)) + b for row, b in zip(weights, biases)]
    return scores.index(max(scores)), scores


def shared_design(model, pipeline, rows):
    dut = make_component(UnitConfig(model, pipeline=pipeline, arch="shiftadd",
                                    share_terms=True))
    reference = ReferenceModel.from_model(model)
    # The reference (w . x + b) is itself checked against the plain sums on these rows.
    assert [[int(reference.decisions(np.array([r]))[0])] for r in rows[:50]] == \
        [[gold(*weights_of(model), r)[0]] for r in rows[:50]]
    stimulus = make_stimulus(reference, rows, latency=dut.latency, valid_probability=0.8,
                             ready_probability=0.7)
    return dut, stimulus


def weights_of(model):
    return [list(u.weights) for u in model.units], [u.bias for u in model.units]


def every_input(bits, features, signed=False):
    codes = range(-(1 << (bits - 1)), 1 << (bits - 1)) if signed else range(1 << bits)
    return np.array(list(itertools.product(codes, repeat=features)))


@pytest.mark.parametrize("pipeline", [0, 1, 2, FULL_PIPELINE])
@pytest.mark.parametrize("signed", [False, True])
def test_small_shared_banks_agree_on_every_input_in_amaranth(pipeline, signed):
    model = bank_model(WEIGHTS, BIASES, bits=3, is_signed=signed)
    dut, stimulus = shared_design(model, pipeline, every_input(3, 3, signed))
    assert dut.bank.sharing.terms, "the bank must share something"
    result = AmaranthBackend(dut).run(stimulus)
    assert result.check(stimulus).mismatch_count == 0


def test_a_wrong_shared_term_is_caught():
    # The check can fail: a bank planned for other weights (one digit off) disagrees.
    model = bank_model(WEIGHTS, BIASES, bits=3)
    other = bank_model([[3, 5, -7], [3, 5, 6], [-3, 5, 7], [7, 3, 4]], BIASES, bits=3)
    dut = make_component(UnitConfig(other, pipeline=1, arch="shiftadd", share_terms=True))
    rows = every_input(3, 3)
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency)
    assert AmaranthBackend(dut).run(stimulus).check(stimulus).mismatch_count > 0


@pytest.mark.icarus
@pytest.mark.verilator
@pytest.mark.parametrize("pipeline", [0, 2, FULL_PIPELINE])
def test_small_shared_banks_agree_in_icarus_and_verilator(tmp_path, pipeline):
    # Independent simulators: Icarus Verilog 11 and Verilator 5.006 run the emitted file, on
    # every input, against plain Python sums (shared_design checks the reference on them).
    require_tool("verilator", "g++", "iverilog", "vvp")
    model = bank_model(WEIGHTS + [[-5, 6, 3]], BIASES + [-4], bits=3)
    dut, stimulus = shared_design(model, pipeline, every_input(3, 3))
    assert_lint_clean_and_agrees(tmp_path, model, dut, stimulus)


def test_shared_terms_are_built_once_and_the_verilog_is_the_same_every_run():
    model = bank_model(WEIGHTS, BIASES, bits=3)
    config = UnitConfig(model, pipeline=2, arch="shiftadd", share_terms=True)
    first = emit_verilog(make_component(config), model)
    assert first == emit_verilog(make_component(config), model)
    plain = emit_verilog(make_component(UnitConfig(model, pipeline=2, arch="shiftadd")), model)
    assert first != plain
    for name in ("share0", "share1"):
        # One wire per shared term, not one per unit (u0_share0, u1_share0, ...).
        assert len(re.findall(rf"\bwire\b[^;]* {name};", first)) == 1
        assert not re.search(rf"\bu\d+_{name}\b", first)


def test_sharing_is_refused_where_it_does_not_apply():
    bank = bank_model(WEIGHTS, BIASES, bits=3)
    lone = bank_model([WEIGHTS[0]], [0], bits=3)
    for model, options, words in [
            (bank, {"arch": "tree"}, "architecture has none"),
            (bank, {"arch": "serial"}, "architecture has none"),
            (lone, {"arch": "shiftadd"}, "no other unit"),
            (bank, {"arch": "tree", "loadable_weights": True}, "architecture has none"),
            (bank, {"arch": "shiftadd", "loadable_weights": True}, "cannot be loaded"),
            (bank, {"arch": "shiftadd", "split_bits": 4}, "not built with split adders")]:
        with pytest.raises(InputError, match=words):
            UnitConfig(model, share_terms=True, **options)
    with pytest.raises(InputError, match="True or False"):
        UnitConfig(bank, arch="shiftadd", share_terms="yes")


@pytest.mark.parametrize("options, words", [
    (["--arch", "tree"], "--share-terms: terms are shared between shift-add sums"),
    (["--arch", "shiftadd", "--loadable-weights"], "--loadable-weights: shiftadd recodes"),
])
def test_the_command_refuses_sharing_with_one_line(tmp_path, options, words):
    path = tmp_path / "bank.toml"
    path.write_text(model_to_toml(bank_model(WEIGHTS, BIASES, bits=3)))
    out = tmp_path / "out"
    result = run("build", path, "--out", out, "--share-terms", *options, "--vectors", "10")
    assert_one_line_error(result, 2, words)
    assert not out.exists()


@pytest.mark.slow
@pytest.mark.parametrize("max_digits", [1, None])
def test_the_digits_bank_shares_terms_and_agrees_with_plain_sums(max_digits):
    # Measured here (6 bits): with at most 1 digit a weight, 572 digits, 562 adders alone and
    # 364 with sharing (109 shared terms); without a budget, 921 digits, 911 and 513 (182).
    from thresh2hdl.analysis import analyse_bank
    model, x_test = digits_bank(max_digits)
    sharing = analyse_bank(model, arch="shiftadd", share_terms=True).sharing
    assert sharing.adders_with <= 0.7 * sharing.adders_without
    dut, stimulus = shared_design(model, 2, np.concatenate([x_test[:150], np.random.default_rng(
        0).integers(0, 17, (150, 64))]))
    result = AmaranthBackend(dut).run(stimulus)
    assert result.check(stimulus).mismatch_count == 0
    # The reference the circuit was judged against gives the plain sums (no project code).
    weights, biases = weights_of(model)
    assert [gold(weights, biases, row)[1] for row in x_test[:5]] == \
        ReferenceModel.from_model(model).scores(x_test[:5]).tolist()


def test_a_build_records_its_shared_terms_and_repeats_byte_for_byte(tmp_path):
    import json
    import os
    import subprocess
    import sys
    path = tmp_path / "bank.toml"
    model = bank_model(WEIGHTS, BIASES, bits=3)
    path.write_text(model_to_toml(model))
    texts = []
    for seed in ("1", "2"):      # other hash seeds: no set or dict order leaks into a file
        out = tmp_path / f"out{seed}"
        result = subprocess.run(
            [sys.executable, "-P", "-m", "thresh2hdl", "build", path, "--out", out,
             "--arch", "shiftadd", "--share-terms", "--pipeline", "2", "--simulator",
             "amaranth", "--vectors", "200"], capture_output=True, text=True, timeout=600,
            env={**os.environ, "PYTHONHASHSEED": seed})
        assert result.returncode == 0, result.stderr
        texts.append([(out / name).read_text() for name in ("bank.v", "report.md")])
    assert texts[0] == texts[1]
    assert json.loads((out / "build_settings.json").read_text())["share_terms"] is True
    shared = json.loads((out / "report.json").read_text())["tree"]["shared_terms"]
    assert shared["adders_with"] < shared["adders_without"]
    for term in shared["terms"]:
        # Each range is the extremes of its definition over every input, evaluated here (a
        # definition reads features and earlier terms: "f0 + (f1 << 2)", "share0 - f2").
        values = []
        for x in every_input(3, 3):
            env = {f"f{i}": int(v) for i, v in enumerate(x)}
            for earlier in shared["terms"]:
                env[earlier["name"]] = eval(earlier["definition"], {}, dict(env))
                if earlier is term:
                    break
            values.append(env[term["name"]])
        assert term["range"] == [min(values), max(values)], term
        assert term["units"] and set(term["units"]) <= {u.name for u in model.units}
    assert "shared:" in result.stdout + result.stderr


@pytest.mark.slow
@pytest.mark.verilator
@pytest.mark.icarus
def test_the_benchmarks_pipelined_digits_bank_agrees_in_icarus_and_verilator(tmp_path):
    # The design benchmarks/bank_cost.py places at 14 stages (240 digits in all, shared
    # terms, no score ports), on the scikit-learn digits test rows (scikit-learn 1.9.1) and
    # random codes. Independent simulators: Icarus Verilog 11 and Verilator 5.006 run the
    # emitted file against the reference, itself checked against plain sums (shared_design).
    require_tool("verilator", "g++", "iverilog", "vvp")
    model, x_test = digits_bank(1, 240, score=False)
    rows = np.concatenate([x_test[:200], np.random.default_rng(1).integers(0, 17, (200, 64))])
    dut, stimulus = shared_design(model, 14, rows)
    assert_lint_clean_and_agrees(tmp_path, model, dut, stimulus)
