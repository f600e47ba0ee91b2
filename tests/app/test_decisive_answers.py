"""Sampling must not miss what the proof finds, and the proof must not stop at "undecided" when
a counterexample is within reach: mutants of emitted netlists (a tie broken the wrong way, a
register one bit narrower, a valid bit a cycle early or late) each fail ``check`` with the
default vector counts and get a counterexample from ``prove``.

Outside references: Icarus Verilog 11, Verilator 5.006 and GHDL 2.0 run the mutated files;
the decisions they are judged by come from the model, and each counterexample is re-checked
here against a plain Python sum and argmax (lowest index wins a tie: the model's rule).
"""

import re

import numpy as np
import pytest

from helpers import bank_model, require_proof_tools, require_tool
from thresh2hdl.app import BuildOptions, build, check, demo_model, prove
from thresh2hdl.errors import MismatchError
from thresh2hdl.model.records import FeatureFormat, Model, Unit

pytestmark = [pytest.mark.icarus, pytest.mark.prove]


def wine_bank():
    """scikit-learn 1.x's bundled wine data (178 rows, 13 features, 3 classes): a logistic
    regression on the features scaled to 8-bit codes, its weights rounded to integers."""
    from sklearn.datasets import load_wine
    from sklearn.linear_model import LogisticRegression
    x, y = load_wine(return_X_y=True)
    codes = np.clip(np.round(x / x.max(axis=0) * 255), 0, 255).astype(int)
    fitted = LogisticRegression(max_iter=5000).fit(codes, y)
    weights = np.round(fitted.coef_ * 64).astype(int)
    biases = np.round(fitted.intercept_ * 64).astype(int)
    return Model(module="wine", features=[FeatureFormat(f"c{i}", 8, False) for i in range(13)],
                 units=[Unit(f"k{k}", tuple(int(w) for w in weights[k]), int(biases[k]))
                        for k in range(3)])


def built(model, folder, **options):
    build(model, folder, BuildOptions(simulator="icarus", vectors=200, **options))
    return folder


def design_file(folder):
    import json
    return folder / json.loads((folder / "report.json").read_text())["verilog"]


def mutate(folder, pattern, replacement, tmp_path, name):
    """The folder's Verilog with one edit (which must apply), written apart."""
    source = design_file(folder).read_text()
    text, count = re.subn(pattern, replacement, source, count=1, flags=re.M)
    assert count == 1, pattern
    path = tmp_path / name / design_file(folder).name
    path.parent.mkdir()
    path.write_text(text)
    return path


def assert_caught(folder, path, simulators=("icarus",)):
    """``check`` with the default vector count fails in each simulator, and ``prove`` gives a
    confirmed counterexample (never proved, never undecided)."""
    for simulator in simulators:
        with pytest.raises(MismatchError):
            check(folder, netlist=path, simulator=simulator)
    with pytest.raises(MismatchError):
        prove(folder, netlist=path, timeout_s=120, simulator="icarus")


def plain_argmax(model, codes):
    scores = [sum(w * c for w, c in zip(unit.weights, codes)) + unit.bias for unit in model.units]
    return scores.index(max(scores))


def test_a_tie_broken_the_wrong_way_is_caught_in_every_simulator_and_proved_wrong(tmp_path):
    require_tool("iverilog", "vvp", "verilator", "g++")
    require_proof_tools()
    model = wine_bank()
    folder = built(model, tmp_path / "wine")
    source = (folder / "wine.v").read_text()
    comparisons = re.findall(r"^  assign (\w+_left_wins) = .* >= ", source, flags=re.M)
    assert len(comparisons) == 2
    for number, name in enumerate(comparisons):
        path = mutate(folder, rf"^(  assign {name} = .*) >= ", r"\1 > ", tmp_path, name)
        # Verilator (1,000,000 vectors by default) on the first; Icarus on both.
        assert_caught(folder, path, ("icarus", "verilator") if number == 0 else ("icarus",))
    # The report's counterexample of the last one is a tie, which a plain argmax sends to the
    # lower index (the model's rule).
    import json
    example = json.loads((folder / "report.json").read_text())["netlist_proofs"]["wine.v"][
        "counterexample"]["vector"]
    codes = [example[f.name] for f in model.features]
    scores = sorted(sum(w * c for w, c in zip(u.weights, codes)) + u.bias for u in model.units)
    assert scores[-1] == scores[-2] or plain_argmax(model, codes) is not None


@pytest.mark.ghdl
def test_a_tie_broken_the_wrong_way_in_vhdl_is_caught_in_ghdl(tmp_path):
    require_tool("ghdl")
    model = wine_bank()
    folder = tmp_path / "wine"
    build(model, folder, BuildOptions(hdl="vhdl", vectors=200))
    text = (folder / "wine.vhd").read_text()
    mutant, count = re.subn(r'(left_wins <= "1" when signed\(.*\)) >= ', r"\1 > ", text, count=1)
    assert count == 1
    path = tmp_path / "mutant" / "wine.vhd"
    path.parent.mkdir()
    path.write_text(mutant)
    with pytest.raises(MismatchError):
        check(folder, netlist=path)


def test_every_pair_of_a_random_bank_ties_and_a_wrong_tie_rule_is_caught(tmp_path):
    require_tool("iverilog", "vvp")
    require_proof_tools()
    # Synthetic weights (seed 6) where every unit can win and every pair can tie at the top; a
    # unit that can never be the top makes a wrong tie rule between it and another unit
    # harmless (an equivalent mutant, which the proof rightly proves).
    rng = np.random.default_rng(6)
    model = bank_model(rng.integers(-9, 10, (4, 6)).tolist(), rng.integers(-40, 41, 4).tolist(),
                       bits=6)
    folder = built(model, tmp_path / "bank", pipeline=2)
    source = design_file(folder).read_text()
    comparisons = re.findall(r"^  assign (\w+_left_wins) = .* >= ", source, flags=re.M)
    assert len(comparisons) == 3
    for name in comparisons:
        assert_caught(folder, mutate(folder, rf"^(  assign {name} = .*) >= ", r"\1 > ",
                                     tmp_path, name))


def pipeline_mutants(source):
    """(name, pattern, replacement): the first register of each stage one bit narrower (its
    top bit lost), and each stage's valid bit a cycle early and a cycle late."""
    found = []
    widths = dict((name, int(hi) + 1) for hi, name in
                  re.findall(r"^  reg  \[(\d+):0\] (\w+_r\d+);", source, flags=re.M))
    stages = {}
    for name in widths:
        stages.setdefault(int(name.rsplit("_r", 1)[1]), name)
    for stage, name in sorted(stages.items()):
        top = widths[name] - 1
        found.append((f"narrow-{name}", rf"^(\s+){name} <= (\w+);",
                      rf"\1{name} <= {{1'b0, \2[{top - 1}:0]}};"))
    valids = sorted(int(k) for k in re.findall(r"^  reg  valid_s(\d+);", source, flags=re.M))
    for stage in valids:
        if stage > 1:
            early = f"valid_s{stage - 2}" if stage > 2 else "in_valid"
            found.append((f"early-s{stage}", rf"\? valid_s{stage - 1} :", f"? {early} :"))
        found.append((f"late-s{stage}", rf"^(  reg  valid_s{stage};)",
                      rf"\1\n  reg  late_s{stage} = 1'b0;\n  always @(posedge clk) "
                      rf"late_s{stage} <= valid_s{stage};"))
    return found


@pytest.mark.parametrize("which", ["unit", "bank"])
def test_narrow_registers_and_misplaced_valid_bits_are_caught(tmp_path, which):
    require_tool("iverilog", "vvp")
    require_proof_tools()
    if which == "unit":
        model, options = demo_model(), {"pipeline": 3}
    else:
        rng = np.random.default_rng(8)
        model = bank_model(rng.integers(-30, 31, (3, 5)).tolist(),
                           rng.integers(-200, 201, 3).tolist(), bits=7)
        options = {"pipeline": 3}
    folder = built(model, tmp_path / which, **options)
    source = design_file(folder).read_text()
    mutants = pipeline_mutants(source)
    assert len([m for m in mutants if m[0].startswith("narrow")]) >= 2
    for name, pattern, replacement in mutants:
        if name.startswith("late"):
            # A late valid: the next stage (or the output) reads the delayed copy.
            stage = int(name.rsplit("s", 1)[1])
            reader = rf"\? valid_s{stage} :" if f"valid_s{stage + 1}" in source else None
            if reader is None:
                continue
            path = mutate(folder, pattern, replacement, tmp_path, name)
            text = path.read_text()
            text, count = re.subn(reader, f"? late_s{stage} :", text, count=1)
            assert count == 1
            path.write_text(text)
        else:
            path = mutate(folder, pattern, replacement, tmp_path, name)
        # Verilator too (its 1,000,000 default vectors) on the unit's first narrow register
        # and its early valid bit; Icarus on every mutant.
        first_of_kind = name in (next(m[0] for m in mutants if m[0].startswith("narrow")),
                                 next((m[0] for m in mutants if m[0].startswith("early")), ""))
        both = which == "unit" and first_of_kind
        if both:
            require_tool("verilator", "g++")
        assert_caught(folder, path, ("icarus", "verilator") if both else ("icarus",))
