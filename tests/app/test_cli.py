"""The command line as a user meets it: exit codes, one-line errors, whole output folders."""

import json
import subprocess
from pathlib import Path

import pytest

from helpers import require_tool, run, assert_one_line_error
from thresh2hdl.app import demo_model
from thresh2hdl.model import model_to_toml
from thresh2hdl.analysis import signed_bits

EXAMPLE = Path(__file__).parents[2] / "examples" / "pump_vibration" / "pump_fault.toml"


def test_demo_end_to_end(tmp_path):
    out = tmp_path / "demo"
    result = run("demo", "--out", out, "--simulator", "amaranth")
    assert result.returncode == 0, result.stderr
    assert "0 mismatches" in result.stdout and "not a safety-rated function" in result.stdout
    # stderr is a pipe here, as in a CI log: a line per step and a few for the long simulation.
    lines = result.stderr.splitlines()
    assert "\r" not in result.stderr and all(line.startswith("  ") for line in lines)
    assert lines[0].startswith("  planned") and lines[1].startswith("  verifying in amaranth")
    assert lines[-1] == f"  writing {out}" and 4 <= len(lines) <= 10
    report = json.loads((out / "report.json").read_text())
    for key in ("module", "verilog", "weights", "bias", "feature_ranges", "score_range",
                "score_bits", "headroom_bits", "latency_cycles", "vectors_checked", "mismatches"):
        assert key in report
    assert report["mismatches"] == 0 and report["vectors_checked"] >= 10_000
    # score_bits is the exact minimal width of the reported range (two's complement width
    # computed independently: common practice).
    lo, hi = report["score_range"]
    independent = max((lo if lo >= 0 else ~lo).bit_length(), (hi if hi >= 0 else ~hi).bit_length()) + 1
    assert report["score_bits"] == independent == signed_bits(lo, hi)
    model = demo_model()
    expected_lo = sum(min(w * a, w * b) for w, (a, b) in zip(model.unit.weights, model.feature_ranges)) + model.unit.bias
    assert lo == expected_lo
    assert (out / report["verilog"]).read_text().startswith("// pump_fault")
    assert sorted(p.name for p in out.iterdir()) == sorted(
        ["pump_fault.v", "pump_fault_instance.vh", "model.toml", "report.json",
         "pump_fault_tb.v", "stimulus.hex", "expected.hex", "report.html", "report.md",
         "build_settings.json", "pump_fault.core", "test_pump_fault.py"])


def test_build_example_twice_from_two_folders_is_byte_identical(tmp_path):
    outs = []
    (tmp_path / "elsewhere").mkdir()
    for name, cwd in (("a", tmp_path), ("b", tmp_path / "elsewhere")):
        result = run("build", EXAMPLE, "--out", tmp_path / name, "--pipeline", "2",
                     "--vectors", "2000", cwd=cwd)
        assert result.returncode == 0, result.stderr
        outs.append(tmp_path / name)
    for file in ("pump_fault.v", "pump_fault_instance.vh", "model.toml", "pump_fault_tb.v",
                 "stimulus.hex", "expected.hex", "report.html", "report.md"):
        assert (outs[0] / file).read_bytes() == (outs[1] / file).read_bytes()
    reports = [json.loads((o / "report.json").read_text()) for o in outs]
    for report in reports:
        report.pop("timing")
    assert reports[0] == reports[1]
    assert reports[0]["latency_cycles"] == 2


def test_levels_are_one_count_and_full_registers_every_level(tmp_path):
    # The demo has 10 features: products (level 0), ceil(log2 10) = 4 levels of pairwise
    # adders, then the bias and decision: 6 levels (pairwise tree depth, common practice).
    levels = 1 + 4 + 1
    out = tmp_path / "full"
    result = run("demo", "--out", out, "--pipeline", "full", "--simulator", "amaranth",
                 "--vectors", "300")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    tree = report["tree"]
    assert tree["levels"] == levels == report["register_stages"] == report["latency_cycles"]
    assert tree["stages"] == [{"stage": k + 1, "levels": [k, k]} for k in range(levels)]
    assert tree["level_names"] == ["products"] + ["adders"] * 4 + ["bias and decision"]
    assert sorted({n["level"] for n in tree["nodes"]}) == list(range(levels))
    assert f"{levels} levels (0 products, 1-4 adders, 5 bias and decision)" in result.stdout
    assert f"{levels} register stages, one after every level" in result.stdout
    # One more than the levels is refused, in the same count, saying what to do.
    refused = run("demo", "--out", tmp_path / "deep", "--pipeline", str(levels + 1))
    assert_one_line_error(refused, 2, f"this design has {levels} levels")
    assert f"at most {levels}: use {levels} or fewer, or 'full'" in refused.stderr


def test_example_file_is_the_embedded_scenario():
    from thresh2hdl.model import load_model
    assert load_model(EXAMPLE) == demo_model()


def test_module_override_and_headroom(tmp_path):
    result = run("demo", "--out", tmp_path / "o", "--module", "guard", "--score-bits", "24",
                 "--vectors", "500")
    assert result.returncode == 0, result.stderr
    report = json.loads((tmp_path / "o" / "report.json").read_text())
    assert report["module"] == "guard" and report["verilog"] == "guard.v"
    assert report["score_bits"] == 24 and report["headroom_bits"] == 24 - report["score_bits_min"]


@pytest.mark.parametrize("args, contains", [
    (("build", "missing.toml"), "missing.toml: no such file"),
    (("demo", "--module", "wire"), "Verilog keyword"),
    (("demo", "--module", "a/b"), "must be a Verilog identifier"),
    (("demo", "--pipeline", "99"), "register stages requested"),
    (("demo", "--pipeline", "-1"), "non-negative"),
    (("demo", "--pipeline", "every"), "'every' is not a number of register stages or 'full'"),
    (("demo", "--score-bits", "4"), "needs at least"),
    (("demo", "--vectors", "ten"), "not a valid integer"),
    (("build",), "Missing argument"),
])
def test_bad_input_is_one_line_exit_2_and_writes_nothing(tmp_path, args, contains):
    out = tmp_path / "out"
    result = run(*args, "--out", out, cwd=tmp_path)
    assert_one_line_error(result, 2, contains)
    assert not out.exists()
    assert [p.name for p in tmp_path.iterdir()] == []


def test_bad_model_files(tmp_path):
    good = model_to_toml(demo_model())
    cases = {
        "not_toml.toml": ("model_format = = 1", "not valid TOML"),
        "nan.toml": (good.replace("weights = [3,", "weights = [nan,"), "weights[0] must be an integer"),
        "width.toml": (good.replace("bits = 12", "bits = 40", 1), "feature[0]: bits"),
        "count.toml": (good.replace("weights = [3, ", "weights = ["), "has 9 weights"),
        "keyword.toml": (good.replace('name = "pump_fault"', 'name = "always"'), "Verilog keyword"),
        "extra.toml": (good + "\nsurprise = 1\n", "unknown key 'surprise'"),
    }
    for name, (text, contains) in cases.items():
        path = tmp_path / name
        path.write_text(text)
        result = run("build", path, "--out", tmp_path / "out")
        assert_one_line_error(result, 2, contains)
        assert name in result.stderr
        assert not (tmp_path / "out").exists()


def test_output_folder_rules(tmp_path):
    a_file = tmp_path / "taken"
    a_file.write_text("keep me")
    assert_one_line_error(run("demo", "--out", a_file, "--vectors", "10"), 2, "is a file")
    assert a_file.read_text() == "keep me"
    full = tmp_path / "full"
    full.mkdir()
    (full / "mine.txt").write_text("mine")
    assert_one_line_error(run("demo", "--out", full, "--vectors", "10"), 2, "not empty")
    assert (full / "mine.txt").read_text() == "mine"
    result = run("demo", "--out", full, "--vectors", "10", "--force")
    assert result.returncode == 0, result.stderr
    assert not (full / "mine.txt").exists() and (full / "report.json").exists()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_an_output_folder_one_rename_cannot_replace_is_refused(tmp_path):
    # The current folder, a folder holding it, a symbolic link, a folder holding an input file:
    # one line, exit 2, before any work; nothing changed and nothing left behind.
    work = tmp_path / "work"
    (work / "sub").mkdir(parents=True)
    (work / "keep.txt").write_text("keep")
    for out, cwd in ((".", work), ("..", work / "sub"), (work, work / "sub")):
        result = run("demo", "--out", out, "--force", "--vectors", "10", cwd=cwd)
        assert_one_line_error(result, 2, "is the current folder or holds it")
    (tmp_path / "link").symlink_to(work)
    assert_one_line_error(run("demo", "--out", tmp_path / "link", "--force", "--vectors", "10"),
                          2, "is a symbolic link")
    (work / "mine.toml").write_text(EXAMPLE.read_text())
    assert_one_line_error(run("build", work / "mine.toml", "--out", work, "--force"), 2,
                          "holds the input file")
    (work / "rows.csv").write_text("x\n")
    assert_one_line_error(run("build", EXAMPLE, "--out", work, "--force", "--data",
                              work / "rows.csv"), 2, "holds the input file")
    assert sorted(p.name for p in work.iterdir()) == ["keep.txt", "mine.toml", "rows.csv", "sub"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["link", "work"]


def test_a_folder_rebuilds_from_its_own_model_file_only_when_nothing_is_lost(tmp_path):
    out = tmp_path / "o"
    options = ("--simulator", "amaranth", "--vectors", "100")
    assert run("demo", "--out", out, *options).returncode == 0
    # model.toml is written back unchanged: allowed.
    result = run("build", out / "model.toml", "--out", out, "--force", "--pipeline", "2", *options)
    assert result.returncode == 0, result.stderr
    assert json.loads((out / "report.json").read_text())["latency_cycles"] == 2
    # Another module name would write another model.toml: the given file would be lost.
    assert_one_line_error(run("build", out / "model.toml", "--out", out, "--force", "--module",
                              "other", *options), 2, "holds the input file")
    assert (out / "pump_fault.v").exists()


@pytest.mark.parametrize("failing", ["old folder", "new folder"])
def test_a_replace_that_fails_keeps_the_previous_folder(tmp_path, monkeypatch, failing):
    # A folder the system will not move (another device, no permission: simulated here) is
    # named in one InputError, and the previous folder stays as it was, with no leftovers.
    import errno
    import os
    from thresh2hdl import outdir
    from thresh2hdl.errors import InputError
    out = tmp_path / "out"
    out.mkdir()
    (out / "old.txt").write_text("old")
    real = os.rename

    def rename(source, target):
        moving = Path(source).resolve() == out.resolve() if failing == "old folder" else \
            ".out.partial-" in str(source)
        if moving:
            raise OSError(errno.EBUSY, "Device or resource busy")
        return real(source, target)

    monkeypatch.setattr(outdir.os, "rename", rename)
    with pytest.raises(InputError, match="cannot replace the folder"):
        with outdir.staged_folder(out, force=True) as staging:
            (staging / "new.txt").write_text("new")
    assert [p.name for p in out.iterdir()] == ["old.txt"]
    assert [p.name for p in tmp_path.iterdir()] == ["out"]


def test_progress_on_a_terminal_and_in_a_log(capsys):
    from thresh2hdl.app.cli import _Progress
    log = _Progress(terminal=False)
    log.note("verifying")
    for done in range(0, 100_000, 4096):
        log(done, 100_000)
    log(100_000, 100_000)
    # In a log: a line for the step, one a quarter, no carriage returns.
    assert capsys.readouterr().err.splitlines() == [
        "  verifying", "  simulating: 28%", "  simulating: 53%", "  simulating: 77%",
        "  simulating: 100%"]
    terminal = _Progress(terminal=True)
    terminal(50_000, 100_000)
    terminal(100_000, 100_000)
    assert capsys.readouterr().err == "\r  simulating  50%\r  simulating 100%\n"


def test_help_for_each_command():
    for command in ((), ("build",), ("demo",)):
        result = run(*command, "--help")
        assert result.returncode == 0 and "Usage:" in result.stdout
    demo_help, build_help = run("demo", "--help").stdout, run("build", "--help").stdout
    options = lambda text: sorted(set(w for w in text.split() if w.startswith("--")))
    assert options(demo_help) == options(build_help)


def test_mismatch_writes_files_and_exits_1(tmp_path, monkeypatch, capsys):
    # Feed the flow a reference whose bias is off by one: the check must fail, say so, keep the
    # files for inspection, and exit 1.
    from thresh2hdl.app.cli import main
    from thresh2hdl.verify.reference import ReferenceModel

    real = ReferenceModel.from_model

    def off_by_one(model):
        ref = real(model)
        return ReferenceModel(weights=ref.weights, bias=ref.bias + 1,
                              feature_ranges=ref.feature_ranges)

    monkeypatch.setattr(ReferenceModel, "from_model", staticmethod(off_by_one))
    with pytest.raises(SystemExit) as info:
        main(["demo", "--out", str(tmp_path / "o"), "--vectors", "2000"])
    assert info.value.code == 1
    lines = capsys.readouterr().err.splitlines()
    # Progress lines (indented) first, then the one error line last.
    assert all(line.startswith("  ") for line in lines[:-1]) and len(lines) > 1
    assert lines[-1].startswith("thresh2hdl: error: ") and "mismatch" in lines[-1] \
        and "vector" in lines[-1]
    report = json.loads((tmp_path / "o" / "report.json").read_text())
    assert report["mismatches"] > 0 and report["verification"]["first_mismatches"]


def test_console_script_is_installed(tmp_path):
    import shutil
    require_tool("thresh2hdl")          # the console script of the installed package
    script = shutil.which("thresh2hdl")
    result = subprocess.run([script, "--version"], capture_output=True, text=True)
    assert result.returncode == 0 and "0.1.0" in result.stdout


def test_each_build_option_is_declared_once_and_the_commands_follow():
    # build and demo make their options from BuildOptions' fields: the same names, flags,
    # defaults and choices (the code's own constants), and their arguments map one to one.
    from dataclasses import fields
    from thresh2hdl.analysis import ARCHITECTURES
    from thresh2hdl.app import BuildOptions
    from thresh2hdl.app.cli import _options, cli
    from thresh2hdl.app.options import SIMULATORS
    for name in ("build", "demo"):
        params = {p.name: p for p in cli.commands[name].params}
        for field in fields(BuildOptions):
            assert params[field.name].opts[0] == field.metadata["flag"].name
            assert params[field.name].default == field.default, field.name
        assert tuple(params["arch"].type.choices) == ARCHITECTURES
        assert tuple(params["simulator"].type.choices) == SIMULATORS
    context = cli.commands["build"].make_context("build", [
        "m.toml", "--out", "o", "--split-adders", "9", "--no-clamp", "--prove", "--module", "m",
        "--prove-timeout", "5", "--pipeline", "full"])
    assert _options(context.params) == BuildOptions(
        split_bits=9, clamp=False, prove=True, module="m", prove_timeout_s=5.0, pipeline="full")


def test_errors_name_the_flags_of_the_command_line_and_the_fields_of_the_library(tmp_path):
    from thresh2hdl.app import BuildOptions, build
    from thresh2hdl.app.cli import cli, flags_named
    from thresh2hdl.errors import InputError
    params = cli.commands["build"].params
    for field, flag in (("split_bits", "--split-adders"), ("--split-adders", "--split-adders"),
                        ("prove_timeout_s", "--prove-timeout"), ("range_flag", "--range-flag")):
        assert str(flags_named(InputError("wrong", field=field), params)) == f"{flag}: wrong"
    assert str(flags_named(InputError("wrong", field="timeout_s"),
                           cli.commands["prove"].params)) == "--timeout: wrong"
    # A field in a file, or no option's, stays as it is.
    for error in (InputError("wrong", source="m.toml", field="arch"),
                  InputError("wrong", field="unit")):
        assert flags_named(error, params) is error
    # The design's fields are judged by UnitConfig alone, when the build plans the design
    # (before any output): the library names the field, the command line its flag.
    with pytest.raises(InputError, match="^pipeline: must be a non-negative integer"):
        build(demo_model(), tmp_path / "o", BuildOptions(pipeline=-1, simulator="amaranth"))
    with pytest.raises(InputError, match="^vectors: must be a non-negative integer"):
        BuildOptions(vectors=-1)
    for flag, value, said in (("--score-bits", "0", "must be an integer from 1 to 128"),
                              ("--pipeline", "-1", "must be a non-negative integer"),
                              ("--vectors", "-1", "must be a non-negative integer")):
        result = run("demo", "--out", tmp_path / "o", "--simulator", "amaranth", flag, value)
        assert_one_line_error(result, 2, f"error: {flag}: {said}")
    assert not (tmp_path / "o").exists()


def test_one_progress_interface_for_every_long_call(tmp_path):
    from thresh2hdl.app import BuildOptions, Progress, build

    class Kept(Progress):
        def __init__(self):
            self.notes, self.counts = [], []

        def note(self, text):
            self.notes.append(text)

        def __call__(self, done, total, text="simulating"):
            self.counts.append((done, total))

    kept, out = Kept(), tmp_path / "o"
    build(demo_model(), out, BuildOptions(simulator="amaranth", vectors=100), progress=kept)
    assert kept.notes[0].startswith("planned") and kept.notes[-1] == f"writing {out}"
    assert kept.counts and kept.counts[-1][0] == kept.counts[-1][1]
    with pytest.raises(TypeError, match="progress must be"):
        build(demo_model(), tmp_path / "p", BuildOptions(simulator="amaranth"), progress=print)
    assert not (tmp_path / "p").exists()
