"""`prove` on split adders: per piece (a low part's sum with its carry, a top part, a
subtrahend's complemented part, each step of the decision chain) and per register, so a
design split for speed is proved for every input in range, whatever the handshake.

The solver is Boolector 3.2.3, the export Yosys 0.70's (yowasp builds); for the mutants,
see ``helpers.assert_mutant_caught`` (re-run in Icarus Verilog 11 against plain sums).
"""

import numpy as np
import pytest

from helpers import assert_mutant_caught, make_model, prove_design, replace_once

pytestmark = pytest.mark.prove


def proved(model, text=None, **config):
    return prove_design(model, text, **config)


def unit():
    return make_model([3, -2, 5, -7], bias=-4, bits=8)


@pytest.mark.parametrize("config", [
    {"pipeline": 1, "split_bits": 4},
    {"pipeline": 1, "split_bits": 2, "carry_registers": 3},
    {"pipeline": 2, "split_bits": 5},
    {"pipeline": "full", "split_bits": 3, "arch": "shiftadd", "carry_registers": 2},
    {"pipeline": 1, "split_bits": 4, "reset": "async-low", "clock_enable": True},
    {"pipeline": 1, "split_bits": 4, "interface": "axi-stream"},
], ids=["split4", "split2-carry3", "pipe2-split5", "shiftadd-full", "async-low-enable",
        "stream"])
def test_split_forms_are_proved(config):
    outcome = proved(unit(), **config)
    assert outcome.status == "proved", outcome.detail


@pytest.mark.parametrize("seed", range(4))
def test_random_split_models_are_proved(seed):
    rng = np.random.default_rng([seed, 13])
    n = int(rng.integers(2, 10))
    ranges = None
    if seed == 3:       # tightened ranges: the clamp and the flag
        ranges = [(int(lo), int(lo) + 90) for lo in rng.integers(0, 160, n)]
    model = make_model([int(w) for w in rng.integers(-300, 301, n)],
                       bias=int(rng.integers(-5000, 5001)), bits=8, signed=seed == 1,
                       ranges=ranges)
    outcome = proved(model, pipeline=[1, 2, "full", 1][seed], split_bits=[4, 6, 3, 5][seed],
                     carry_registers=[1, 2, 1, 2][seed],
                     arch=["tree", "shiftadd", "tree", "shiftadd"][seed])
    assert outcome.status == "proved", outcome.detail


@pytest.mark.parametrize("seed", range(6))
def test_random_split_models_without_a_score_port_are_proved(seed):
    # The decision then compares the tree's root with the threshold part by part, from the
    # lowest part up (digits compared from the top).
    from thresh2hdl.model.records import PortNames
    rng = np.random.default_rng([seed, 17])
    n = int(rng.integers(2, 9))
    model = make_model([int(w) for w in rng.integers(-300, 301, n)],
                       bias=int(rng.integers(-5000, 5001)), bits=8, signed=seed % 2 == 1,
                       ports=PortNames(score=""))
    outcome = proved(model, pipeline=[1, 2, "full"][seed % 3], split_bits=[3, 4, 5][seed % 3],
                     arch=["tree", "shiftadd"][seed % 2], carry_registers=1 + seed % 2)
    assert outcome.status == "proved", outcome.detail


def test_the_split_demo_is_proved(tmp_path):
    # The demo's split form that benchmarks/cost.py measures for speed (split 8, two carry
    # registers, every level registered), through the command line.
    from helpers import run
    out = tmp_path / "d"
    assert run("demo", "--out", out, "--split-adders", "8", "--carry-registers", "2",
               "--pipeline", "full", "--simulator", "amaranth",
               "--vectors", "200").returncode == 0
    result = run("prove", out)
    assert result.returncode == 0, result.stderr


MUTANTS = {   # (what the emitted file says, what the mutant says instead)
    "carry register dropped": ("assign s1_0_p1_sum = n8 + {4'd0, s1_0_c0_r1};",
                               "assign s1_0_p1_sum = n8 + {4'd0, s1_0_p0_sum[4]};"),
    "part one bit narrower": ("score_sum_p0_r1 <= score_sum_p0_sum[3:0];",
                              "score_sum_p0_r1 <= {1'd0, score_sum_p0_sum[2:0]};"),
    "bias part": ("+ 5'd12;", "+ 5'd13;"),
    "decision chain": ("assign decision_p1 = decision_p0_r1 | n39;",
                       "assign decision_p1 = n39;"),
}


@pytest.mark.slow
@pytest.mark.parametrize("mutant", sorted(MUTANTS))
def test_each_mutant_gives_a_counterexample_icarus_confirms(tmp_path, mutant):
    rows = np.random.default_rng(0).integers(0, 256, (300, 4))
    assert_mutant_caught(tmp_path, unit(), {"pipeline": 1, "split_bits": 4},
                         replace_once(*MUTANTS[mutant]), rows)


def sweep_config(seed):
    """A random split design: 1-11 features of 3-12 bits, some weights zero, a bias up to
    +-30000 (often folded into a shift-add sum, where a part of it is constant), sometimes
    tightened ranges (the guard) or no score port; any pipeline depth, split width and carry
    registers."""
    from thresh2hdl.model.records import PortNames
    rng = np.random.default_rng([seed, 23])
    n, bits, signed = int(rng.integers(1, 12)), int(rng.integers(3, 13)), bool(rng.integers(0, 2))
    ranges = None
    if rng.random() < 0.3:
        lo, hi = (-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if signed else (0, (1 << bits) - 1)
        ranges = [tuple(sorted(int(v) for v in rng.integers(lo, hi + 1, 2))) for _ in range(n)]
    weights = [int(w) * int(rng.random() < 0.9) for w in rng.integers(-600, 601, n)]
    model = make_model(weights, bias=int(rng.integers(-30000, 30001)), bits=bits, signed=signed,
                       ranges=ranges, ports=PortNames(score="") if rng.random() < 0.4 else None)
    config = dict(pipeline=[1, 2, 3, "full"][int(rng.integers(0, 4))],
                  split_bits=int(rng.integers(2, 9)),
                  arch=["tree", "shiftadd"][int(rng.integers(0, 2))],
                  carry_registers=int(rng.integers(1, 4)))
    return model, config


# Seeds 0, 4 and 18 hold a bias part in flops that synthesis merged into one (it loads the
# constant only once the pipeline moves), seed 2 a decision step its part's range decides:
# all four were undecided before the proof covered them.
@pytest.mark.slow
@pytest.mark.parametrize("seed", [0, 2, 4, 18])
def test_random_split_configurations_are_proved(seed):
    from thresh2hdl.hardware import plan_design, UnitConfig
    model, config = sweep_config(seed)
    assert plan_design(UnitConfig(model, **config)).split_parts, "not a split design"
    outcome = proved(model, **config)
    assert outcome.status == "proved", outcome.detail


@pytest.mark.slow
def test_a_merged_constant_flop_loading_the_wrong_constant_is_caught(tmp_path):
    # The bias part 22759 mod 2**7 = 103 is carried by flops that Yosys merges into one
    # (it holds 1 from the first cycle the pipeline moves); the mutant loads 0 instead.
    import re
    model = make_model([0, 280, 24, 111, 474, 127, -110], bias=22759, bits=5)

    def mutate(text):
        (flop,) = re.findall(r"(n\d+) <= 1'd1;", text)
        return text.replace(f"{flop} <= 1'd1;", f"{flop} <= 1'd0;")

    rows = np.random.default_rng(1).integers(0, 32, (300, 7))
    assert_mutant_caught(tmp_path, model, {"pipeline": 2, "split_bits": 7, "arch": "shiftadd",
                                           "carry_registers": 3}, mutate, rows)


def split_bank(seed):
    """A random bank of 2-4 units split for speed (the argmax compares whole scores, each
    joined where its last part has arrived)."""
    from helpers import bank_model
    from thresh2hdl.model.records import PortNames
    rng = np.random.default_rng([seed, 31])
    units, n, bits = int(rng.integers(2, 5)), int(rng.integers(1, 7)), int(rng.integers(3, 9))
    weights = (rng.integers(-300, 301, (units, n)) * (rng.random((units, n)) < 0.9)).tolist()
    model = bank_model(weights, [int(b) for b in rng.integers(-20000, 20001, units)], bits=bits,
                       is_signed=bool(rng.integers(0, 2)),
                       ports=PortNames(score="") if rng.random() < 0.4 else PortNames())
    config = dict(pipeline=[1, 2, 3, "full"][int(rng.integers(0, 4))],
                  split_bits=int(rng.integers(2, 9)),
                  arch=["tree", "shiftadd"][int(rng.integers(0, 2))],
                  carry_registers=int(rng.integers(1, 4)))
    return model, config


@pytest.mark.parametrize("seed", [0, 6])      # (0: a merged constant flop in a unit)
def test_random_split_banks_are_proved(seed):
    model, config = split_bank(seed)
    outcome = proved(model, **config)
    assert outcome.status == "proved", outcome.detail


@pytest.mark.slow
def test_a_split_bank_with_a_carry_register_dropped_gives_a_counterexample_icarus_confirms(
        tmp_path):
    from helpers import bank_model, require_tool
    from thresh2hdl.app import BuildOptions, build, prove
    from thresh2hdl.emit.verilog import port_table
    from thresh2hdl.errors import MismatchError
    from thresh2hdl.hardware import UnitConfig, plan_design
    from thresh2hdl.verify.reference import ReferenceModel
    from thresh2hdl.verify.sim_icarus import IcarusBackend
    from thresh2hdl.verify.stimulus import make_stimulus
    require_tool("iverilog", "vvp")
    model = bank_model([[3, -2, 5], [-4, 6, 1], [2, 2, -7]], [-4, 3, 1], bits=8)
    options = {"pipeline": 1, "split_bits": 4}
    out = tmp_path / "build"
    build(model, out, BuildOptions(simulator="icarus", vectors=100, **options))
    text = (out / f"{model.module}.v").read_text()
    mutant = replace_once("u1_score_sum_p1_sum = n42 + {4'd0, u1_score_sum_c0_r1};",
                          "u1_score_sum_p1_sum = n42 + {4'd0, u1_score_sum_p0_sum[4]};")(text)
    (tmp_path / "mutant.v").write_text(mutant)
    with pytest.raises(MismatchError, match="counterexample"):
        prove(out, netlist=tmp_path / "mutant.v", timeout_s=120, simulator="icarus")
    # Independently: the plain sums' argmax (first index on ties) of random rows, and Icarus
    # Verilog 11 running the mutant (a mismatch) and the original (none) on them.
    rows = np.random.default_rng(2).integers(0, 256, (300, 3))
    scores = [[sum(w * x for w, x in zip(u.weights, row)) + u.bias for u in model.units]
              for row in rows.tolist()]
    design = plan_design(UnitConfig(model, **options))
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=design.latency)
    assert stimulus.expect_decisions.tolist() == [s.index(max(s)) for s in scores]
    for source, wrong in ((mutant, True), (text, False)):
        result = IcarusBackend(source, port_table(design, model), model.module).run(stimulus)
        assert bool(result.check(stimulus).mismatches) == wrong
