"""Split adders: every wide adder in parts, each part a stage (or more) after the one below."""

import json
import re

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from helpers import (require_tool, make_model, bank_model, assert_agrees_in_amaranth, run,
                     assert_one_line_error, assert_lint_clean_and_agrees)
from thresh2hdl.app import BuildOptions, build
from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.errors import InputError
from thresh2hdl.verify.sim_amaranth import AmaranthBackend
from thresh2hdl.model.records import PortNames
from thresh2hdl.analysis import analyse
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.reports.markdown import report_markdown
from thresh2hdl.verify.stimulus import make_stimulus
from thresh2hdl.verify.vectors import make_vectors

cases = st.tuples(
    st.lists(st.integers(-(1 << 9), 1 << 9), min_size=1, max_size=7),
    st.integers(-20000, 20000), st.integers(1, 14), st.booleans(), st.booleans(),
    st.sampled_from(["tree", "shiftadd"]), st.integers(1, 9), st.integers(2, 16),
    st.integers(1, 3))


def prepared(case, vectors=150):
    weights, bias, bits, is_signed, with_score, arch, pipeline, split, carry = case
    ports = PortNames() if with_score else PortNames(score="")
    model = make_model(weights, bias, bits=bits, signed=is_signed, ports=ports)
    pipeline = min(pipeline, analyse(model, arch=arch).final_level + 1)
    dut = make_component(UnitConfig(model, pipeline=pipeline, arch=arch, split_bits=split,
                                    carry_registers=carry))
    rows = make_vectors(dut.analysis, random_count=vectors).array
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency,
                             valid_probability=0.8, ready_probability=0.7)
    return model, dut, stimulus


@settings(max_examples=40, deadline=None)
@given(cases)
def test_random_split_units_agree_with_reference_in_amaranth(case):
    model, dut, stimulus = prepared(case)
    # The latency from the plan, counted here: one stage more per carry register for each
    # split_bits-wide part of the result (the score, else the tree's root; a product is never
    # split) past the first.
    analysis, config = dut.analysis, dut.config
    index = analysis.score_node if analysis.has_score else analysis.tree_root
    node = analysis.nodes[index] if index is not None else None
    bits = node.bits if node is not None and node.kind != "product" else 0
    parts = max(1, -(-bits // config.split_bits))
    assert dut.latency == config.pipeline + (parts - 1) * config.carry_registers
    assert_agrees_in_amaranth(model, dut, stimulus)


@pytest.mark.verilator
@pytest.mark.icarus
@settings(max_examples=4, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=cases)
def test_random_split_units_lint_clean_and_agree_in_icarus_and_verilator(tmp_path_factory,
                                                                         case):
    # Independent simulators: Verilator 5 and Icarus Verilog 11 run the emitted file.
    require_tool("verilator", "g++", "iverilog", "vvp")
    model, dut, stimulus = prepared(case)
    assert_lint_clean_and_agrees(tmp_path_factory.mktemp("split"), model, dut, stimulus)


def test_parts_of_a_wide_adder_each_take_their_own_stages():
    # A 23-bit score in 5-bit parts: five parts, each two stages after the one below, so the
    # result comes 8 cycles after the unsplit design's. Gold: a plain Python sum per vector.
    weights = [-77, 100, 51, -3, 127, -128]
    model = make_model(weights, -1234, bits=14, signed=True)
    dut = make_component(UnitConfig(model, pipeline=3, arch="shiftadd", split_bits=5,
                                    carry_registers=2))
    assert dut.analysis.score_bits == 23 and dut.result_parts == 5
    assert dut.latency == 3 + 4 * 2
    assert max(dut.split_parts.values()) == 5
    rows = make_vectors(dut.analysis, random_count=400).array
    gold = [sum(w * int(x) for w, x in zip(weights, row)) - 1234 for row in rows]
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency,
                             valid_probability=0.7, ready_probability=0.6)
    assert list(stimulus.expect_scores[:len(gold)]) == gold
    result = AmaranthBackend(dut).run(stimulus)
    assert result.check(stimulus).mismatch_count == 0


def test_the_check_can_fail_when_the_extra_stage_is_forgotten():
    model = make_model([100, -77, 3], 5, bits=12)
    dut = make_component(UnitConfig(model, pipeline=2, arch="shiftadd", split_bits=8))
    rows = make_vectors(dut.analysis, random_count=100).array
    wrong = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency - 1)
    result = AmaranthBackend(dut).run(wrong)
    assert result.check(wrong).mismatch_count > 0


def test_split_bank_waits_for_its_widest_score():
    # Unit 0's score is far wider than unit 1's: split at 4 bits, the argmax compares whole
    # scores once the widest has all its parts, counted here from the score ranges. Judged
    # against the integer reference model (itself checked against plain Python sums in
    # tests/hardware/test_bank.py, test_bank_reference_matches_gold).
    weights, biases = [[1000, -900, 77], [1, 2, -1]], [-5000, 3]
    model = bank_model(weights, biases, bits=8)
    dut = make_component(UnitConfig(model, pipeline=3, arch="shiftadd", split_bits=4,
                                    carry_registers=2))
    widest = max(analysis.nodes[analysis.score_node].bits for analysis in dut.unit_analyses)
    assert dut.result_parts == -(-widest // 4) > 1
    assert dut.latency == 3 + (dut.result_parts - 1) * 2
    assert set(dut.split_parts) <= {f"u{k}_{node.name}" for k, analysis in
                                    enumerate(dut.unit_analyses) for node in analysis.nodes}
    rows = make_vectors(dut.analysis, random_count=300, others=dut.unit_analyses[1:]).array
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency,
                             valid_probability=0.8, ready_probability=0.7)
    assert AmaranthBackend(dut).run(stimulus).check(stimulus).mismatch_count == 0
    early = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency - 1)
    assert AmaranthBackend(dut).run(early).check(early).mismatch_count > 0


def test_split_is_refused_where_it_does_not_apply():
    unit = make_model([3, 4], bits=8)
    # The error names the refused UnitConfig field, never a command-line flag (the
    # application maps fields to its options).
    for field, config in (
            ("split_bits", dict(model=unit, split_bits=8, pipeline=0)),
            ("split_bits", dict(model=unit, split_bits=8, arch="serial")),
            ("carry_registers", dict(model=unit, split_bits=8, carry_registers=0)),
            ("carry_registers", dict(model=unit, split_bits=8, carry_registers=5)),
            ("split_bits", dict(model=unit, split_bits=1)),
            ("split_bits", dict(model=unit, split_bits=8, loadable_weights=True))):
        with pytest.raises(InputError, match=f"^{field}: ") as refused:
            UnitConfig(**config)
        assert refused.value.field == field and "--" not in str(refused.value), config
    with pytest.raises(InputError, match="^carry_registers: applies only to split adders"):
        UnitConfig(model=unit, carry_registers=2)


def test_cli_split_build_reports_and_rebuilds(tmp_path):
    out = tmp_path / "s"
    result = run("demo", "--out", out, "--simulator", "amaranth", "--arch", "shiftadd",
                 "--pipeline", "3", "--split-adders", "10", "--carry-registers", "2",
                 "--vectors", "500")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["tree"]["split_bits"] == 10 and report["register_stages"] == 3
    assert report["tree"]["carry_registers"] == 2 and report["tree"]["result_parts"] == 2
    assert report["latency_cycles"] == 5 and report["mismatches"] == 0
    split = report["tree"]["split_adders"]
    assert split >= 1
    assert f"| split adders | {split} adders in parts of 10 bits, 2 register(s) on each " \
        "carry; the result in 2 part(s) |" in (out / "report.md").read_text()
    require_tool("iverilog", "vvp")
    checked = run("check", out, "--simulator", "icarus", "--vectors", "300")
    assert checked.returncode == 0, checked.stderr
    bad = run("demo", "--out", tmp_path / "b", "--split-adders", "0")
    assert_one_line_error(bad, contains="--split-adders")
    # A folder from a version that timed split adders otherwise (there: two parts, so another
    # latency) is refused in one line, never judged a cycle off, whether its settings record
    # or (a folder from before the record) its report holds the latency; its report still
    # renders without the keys this version added.
    record = json.loads((out / "build_settings.json").read_text())
    (out / "build_settings.json").write_text(json.dumps({**record, "latency_cycles": 4}))
    assert_one_line_error(run("check", out, "--simulator", "icarus"), 2,
                          "build_settings.json: latency_cycles is 4")
    (out / "build_settings.json").unlink()
    report["latency_cycles"] = 4
    (out / "report.json").write_text(json.dumps(report))
    assert_one_line_error(run("check", out, "--simulator", "icarus"), 2,
                          "report.json: latency_cycles is 4")
    for key in ("carry_registers", "result_parts", "split_adders"):
        report["tree"].pop(key)
    assert "| split adders |" in report_markdown(report)


def test_a_wider_score_port_is_sign_extended():
    model = make_model([3, -5, 7, -2], -4, bits=6, signed=True, score_bits=20)
    dut = make_component(UnitConfig(model, pipeline=3, arch="shiftadd", split_bits=2))
    assert dut.result_parts > 1 and len(dut.score) == 20
    rows = make_vectors(dut.analysis, random_count=300).array
    stimulus = make_stimulus(ReferenceModel.from_model(model), rows, latency=dut.latency)
    result = AmaranthBackend(dut).run(stimulus)
    assert result.check(stimulus).mismatch_count == 0
    assert stimulus.expect_scores.min() < 0


def test_split_bank_builds_verifies_and_reports(tmp_path):
    model = bank_model([[300, -250, 41], [-7, 120, 99], [64, 64, -128]], [-900, 5, 77], bits=8)
    out = tmp_path / "bank"
    build(model, out, BuildOptions(arch="shiftadd", pipeline=2, split_bits=5,
                                   simulator="amaranth", vectors=400))
    report = json.loads((out / "report.json").read_text())
    tree = report["tree"]
    assert tree["split_bits"] == 5 and tree["split_adders"] >= 3 and tree["result_parts"] > 1
    assert report["latency_cycles"] == 2 + tree["result_parts"] - 1
    assert report["mismatches"] == 0
    verilog = (out / "bank.v").read_text()
    assert re.search(r"\bu0_\w+_p1_sum\b", verilog)    # unit 0's adders in parts
    assert (f"| split adders | {tree['split_adders']} adders in parts of 5 bits, 1 register(s) "
            f"on each carry; the widest score in {tree['result_parts']} part(s), whole before "
            f"the argmax |") in (out / "report.md").read_text()
