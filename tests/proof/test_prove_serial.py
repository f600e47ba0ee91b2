"""`prove` on the serial architecture: lemmas per beat over the netlist's registers (the
beat counter, the accumulator and its range invariant, the result registers, the handshake,
the out-of-range flag), so the design is proved for every input in range, whatever the
handshake.

Checked by Boolector 3.2.3 on the export of Yosys 0.70 (the PyPI WebAssembly builds); the
mutants as ``helpers.assert_mutant_caught`` says (Icarus Verilog 11, plain Python sums).
"""

import numpy as np
import pytest

from helpers import assert_mutant_caught, bank_model, make_model, prove_design, replace_once

pytestmark = pytest.mark.prove


def proved(model, text=None, **config):
    return prove_design(model, text, arch="serial", **config)


def guarded():
    # Tightened ranges: the clamp and the flag by default.
    return make_model([3, -2, 5, -7], bias=-4, bits=6,
                      ranges=[(0, 40), (0, 63), (3, 60), (0, 63)])


def bank():
    return bank_model([[1, 2, -3], [3, -1, 2], [0, 2, -3]], [1, -2, 0], is_signed=True)


@pytest.mark.parametrize("make, config", [
    (guarded, {}),
    (guarded, {"clamp": False}),                       # the flag alone
    (guarded, {"reset": "async-low", "clock_enable": True}),
    (lambda: make_model([-9], bias=4, bits=5), {}),    # one feature: one beat
    (bank, {}),
    (bank, {"interface": "axi-stream"}),
    (guarded, {"loadable_weights": True}),
    (bank, {"loadable_weights": True, "weight_port": "axi4-lite"}),
], ids=["clamp-flag", "flag-only", "async-low-enable", "one-beat", "bank", "bank-stream",
        "loadable", "bank-loadable-axi4-lite"])
def test_serial_forms_are_proved(make, config):
    outcome = proved(make(), **config)
    assert outcome.status == "proved", outcome.detail


@pytest.mark.parametrize("seed", range(3))
def test_random_serial_models_are_proved(seed):
    rng = np.random.default_rng([seed, 11])
    n = int(rng.integers(1, 9))
    model = make_model([int(w) for w in rng.integers(-200, 201, n)],
                       bias=int(rng.integers(-3000, 3001)), bits=int(rng.integers(3, 13)),
                       signed=bool(seed % 2))
    outcome = proved(model, loadable_weights=seed == 2)
    assert outcome.status == "proved", outcome.detail


MUTANTS = {   # (what the emitted file says, what the mutant says instead)
    "weight": ("assign magnitude = n27 ? 3'd3", "assign magnitude = n27 ? 3'd2"),
    "beat counter off by one": ("assign n45 = beat + 2'd1;", "assign n45 = beat + 2'd2;"),
    "bias": ("10'd1020 : accumulator", "10'd1021 : accumulator"),
    "flag forgets earlier beats": ("assign outside_now = n23 | n25;",
                                   "assign outside_now = n23;"),
}


@pytest.mark.slow
@pytest.mark.parametrize("mutant", sorted(MUTANTS))
def test_each_mutant_gives_a_counterexample_icarus_confirms(tmp_path, mutant):
    # Every code the 6-bit port carries, some outside the declared ranges: the design clamps
    # those, so the plain sums are of the clamped codes.
    rows = np.random.default_rng(0).integers(0, 64, (200, 4))
    assert_mutant_caught(tmp_path, guarded(), {"arch": "serial"},
                         replace_once(*MUTANTS[mutant]), rows,
                         np.clip(rows, [0, 0, 3, 0], [40, 63, 60, 63]))
