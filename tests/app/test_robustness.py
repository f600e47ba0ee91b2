"""No bad input breaks the tool: generated corruptions, limits, interrupted runs."""

import json
import signal
import subprocess
import sys
import time
import tomllib

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from helpers import require_tool, run, assert_one_line_error
from thresh2hdl.app.cli import main
from thresh2hdl.model.data import read_csv
from thresh2hdl.errors import InputError
from thresh2hdl.app import BuildOptions, build, demo_model
from thresh2hdl.model import FeatureFormat, Model, Unit, load_model, model_to_toml, parse_model
from thresh2hdl.train.quantize import load_float_model

GOOD_MODEL = model_to_toml(demo_model())
JUNK = st.one_of(st.sampled_from(["nan", "inf", "-inf", "1e999", "99999999999999999999999",
                                  "-1", "0", '"x"', "true", "[]", "{}", "[1, 2", '"\u00e9\u2603"',
                                  '"a b"', '"module"', "1.5", '""', "=", "[[", "\x00"]),
                 st.text(max_size=12))


def corrupt(text, data):
    lines = text.splitlines()
    kind = data.draw(st.sampled_from(["truncate", "replace", "delete", "duplicate", "insert",
                                      "junk"]))
    if kind == "truncate":
        return text[: data.draw(st.integers(0, len(text)))]
    index = data.draw(st.integers(0, len(lines) - 1))
    if kind == "replace" and "=" in lines[index]:
        key = lines[index].split("=")[0]
        lines[index] = f"{key}= {data.draw(JUNK)}"
    elif kind == "delete":
        del lines[index]
    elif kind == "duplicate":
        lines.insert(index, lines[index])
    elif kind == "insert":
        lines.insert(index, f"{data.draw(st.sampled_from(['bits', 'weights', 'surprise', 'min']))}"
                            f" = {data.draw(JUNK)}")
    else:
        lines[index] = data.draw(st.text(max_size=30))
    return "\n".join(lines)


def only_input_errors(function, path):
    """The call either succeeds or raises InputError with one line naming the file."""
    try:
        return function(path)
    except InputError as error:
        message = str(error)
        assert "\n" not in message and str(path) in message
        return None


@pytest.mark.slow
@settings(max_examples=4500, deadline=None, suppress_health_check=list(HealthCheck))
@given(data=st.data())
def test_corrupted_model_files(tmp_path_factory, data):
    path = tmp_path_factory.getbasetemp() / "corrupt.toml"
    path.write_bytes(corrupt(GOOD_MODEL, data).encode("utf-8", "surrogatepass"))
    model = only_input_errors(load_model, path)
    # A file that loads must really be a model: TOML to Python's own parser (tomllib, the
    # standard library's), and the model read back from its canonical text is the same.
    try:
        document = tomllib.loads(path.read_bytes().decode("utf-8"))
    except (UnicodeDecodeError, tomllib.TOMLDecodeError):
        document = None
    if model is not None:
        assert document is not None
        assert parse_model(tomllib.loads(model_to_toml(model))) == model


GOOD_CSV = "a,b,c,label\n" + "".join(f"{i % 16},{(3 * i) % 16},{(5 * i) % 16},{i % 2}\n"
                                    for i in range(20))


@pytest.mark.slow
@settings(max_examples=3000, deadline=None, suppress_health_check=list(HealthCheck))
@given(data=st.data())
def test_corrupted_csv_files(tmp_path_factory, data):
    path = tmp_path_factory.getbasetemp() / "corrupt.csv"
    text = GOOD_CSV
    lines = text.splitlines()
    kind = data.draw(st.sampled_from(["truncate", "cell", "ragged", "header", "junk"]))
    if kind == "truncate":
        text = text[: data.draw(st.integers(0, len(text)))]
    elif kind == "cell":
        row = data.draw(st.integers(1, len(lines) - 1))
        cells = lines[row].split(",")
        cells[data.draw(st.integers(0, 3))] = data.draw(JUNK).replace("\n", "")
        lines[row] = ",".join(cells)
        text = "\n".join(lines)
    elif kind == "ragged":
        row = data.draw(st.integers(1, len(lines) - 1))
        lines[row] += "," + data.draw(st.sampled_from(["", "1", "x"]))
        text = "\n".join(lines)
    elif kind == "header":
        lines[0] = data.draw(st.sampled_from(["a,a,c,label", "a,b,c", "", "label", "a,b,c,lab"]))
        text = "\n".join(lines)
    else:
        text = data.draw(st.text(max_size=200))
    path.write_bytes(text.encode("utf-8", "surrogatepass"))
    dataset = only_input_errors(read_csv, path)
    if dataset is not None:
        from thresh2hdl.train.perceptron import FitOptions, fit
        try:
            fit(dataset, options=FitOptions(epochs=2))
        except InputError as error:
            assert "\n" not in str(error)


arrays = st.sampled_from(["coef", "intercept", "offset", "scale", "input_lo", "input_hi",
                          "classes", "extra"])


@pytest.mark.slow
@settings(max_examples=3000, deadline=None, suppress_health_check=list(HealthCheck))
@given(data=st.data())
def test_corrupted_float_models(tmp_path_factory, data):
    path = tmp_path_factory.getbasetemp() / "corrupt.npz"
    base = {"coef": np.ones((2, 3)), "intercept": np.zeros(2), "offset": np.zeros(3),
            "scale": np.ones(3), "input_lo": np.zeros(3, int), "input_hi": np.full(3, 15)}
    for _ in range(data.draw(st.integers(1, 3))):
        name = data.draw(arrays)
        choice = data.draw(st.sampled_from(["drop", "shape", "nan", "text", "bool", "neg"]))
        if choice == "drop":
            base.pop(name, None)
        elif choice == "shape":
            base[name] = np.zeros(data.draw(st.lists(st.integers(0, 4), max_size=3)))
        elif choice == "nan":
            base[name] = np.full(np.shape(base.get(name, np.zeros(3))), np.nan)
        elif choice == "text":
            base[name] = np.array(["a", "b", "c"])
        elif choice == "bool":
            base[name] = np.ones(3, dtype=bool)
        else:
            current = np.asarray(base.get(name, np.ones(3)))
            if current.dtype.kind in "iuf":
                base[name] = -np.abs(current.astype(float)) - 1
    with open(path, "wb") as stream:
        np.savez(stream, **base)
    only_input_errors(load_float_model, path)


@pytest.mark.parametrize("text", ["model_format = 1\n[[feature]]\nbits = 40\n",
                                  GOOD_MODEL[: len(GOOD_MODEL) // 2],
                                  GOOD_MODEL.replace("bias = ", "bias = nan #")])
def test_cli_maps_bad_models_to_one_line(tmp_path, capsys, text):
    path = tmp_path / "m.toml"
    path.write_text(text)
    with pytest.raises(SystemExit) as info:
        main(["build", str(path), "--out", str(tmp_path / "out")])
    assert info.value.code == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err and "m.toml" in err
    assert not (tmp_path / "out").exists()


def test_limits_are_refused_by_name():
    features = [FeatureFormat(f"x{i}", 8) for i in range(4097)]
    with pytest.raises(ValueError, match="1 to 4096 features"):
        Model(module="m", features=features, units=[Unit("u", (1,) * 4097, 0)])
    features = [FeatureFormat("x0", 8)]
    with pytest.raises(ValueError, match="1 to 256"):
        Model(module="m", features=features, units=[Unit(f"u{i}", (1,), 0) for i in range(257)])
    with pytest.raises(ValueError, match="from 1 to 32"):
        FeatureFormat("x", 33)


@pytest.mark.slow
def test_wide_scores_use_exact_integers_end_to_end(tmp_path):
    # 64 products of 32-bit codes and 32-bit weights: a score wider than int64.
    weights = [-(1 << 31) + 7 * i for i in range(64)]
    model = Model(module="wide", features=[FeatureFormat(f"x{i}", 32, True) for i in range(64)],
                  units=[Unit("u", tuple(weights), 12345)])
    path = tmp_path / "wide.toml"
    path.write_text(model_to_toml(model))
    result = run("build", path, "--out", tmp_path / "o", "--simulator", "amaranth",
                 "--vectors", "200")
    assert result.returncode == 0, result.stderr
    import json
    report = json.loads((tmp_path / "o" / "report.json").read_text())
    lo, hi = report["score_range"]
    independent = max((lo if lo >= 0 else ~lo).bit_length(), (hi if hi >= 0 else ~hi).bit_length()) + 1
    assert report["score_bits"] == independent > 64 and report["mismatches"] == 0
    result = run("build", path, "--out", tmp_path / "v", "--simulator", "verilator")
    assert_one_line_error(result, 2, "use --simulator icarus", after_progress=True)


@pytest.mark.slow
@pytest.mark.parametrize("how", [signal.SIGINT, signal.SIGKILL])
def test_an_interrupted_run_leaves_the_previous_output(tmp_path, how):
    out = tmp_path / "out"
    assert run("demo", "--out", out, "--simulator", "amaranth", "--vectors", "100").returncode == 0
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    process = subprocess.Popen([sys.executable, "-P", "-m", "thresh2hdl", "demo", "--out",
                                str(out), "--force", "--simulator", "amaranth", "--vectors",
                                "2000000", "--module", "other"],
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    time.sleep(4)
    assert process.poll() is None, "the run ended before it could be interrupted"
    process.send_signal(how)
    _, err = process.communicate(timeout=60)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    if how == signal.SIGINT:
        assert process.returncode == 130 and "interrupted" in err and "Traceback" not in err
        assert [p for p in tmp_path.iterdir() if p.name.startswith(".")] == []


@pytest.mark.verilator
def test_the_largest_model_builds_and_verifies(tmp_path):
    # The feature limit (4096 inputs of 12 bits): about 8,000 adder-tree nodes. Verilator runs
    # the emitted file (Amaranth's simulator would take about 14 minutes here); the plain
    # numpy sum below is the independent check of the report's score range (interval
    # arithmetic over independent terms, common practice).
    require_tool("verilator")
    rng = np.random.default_rng(0)
    n = 4096
    weights = [int(v) for v in rng.integers(-128, 128, n)]
    model = Model(module="wide4096", features=[FeatureFormat(f"x{i}", 12) for i in range(n)],
                  units=[Unit("u", tuple(weights), -1000)])
    built = build(model, tmp_path / "out", BuildOptions(simulator="verilator", vectors=2000))
    w = np.array(weights)
    assert built.report["score_range"] == [int(w[w < 0].sum() * 4095) - 1000,
                                           int(w[w > 0].sum() * 4095) - 1000]
    assert built.report["mismatches"] == 0 and built.report["vectors_checked"] > 2000
    assert len(built.report["tree"]["nodes"]) > 8000


@pytest.mark.icarus
def test_a_bank_of_the_most_units_builds_and_verifies(tmp_path):
    # The unit limit (256 units, argmax over all of them) through the emitted file in Icarus;
    # the plain Python argmax (first index of the largest score, as numpy.argmax documents)
    # is the independent check of the decisions.
    require_tool("iverilog", "vvp")
    rng = np.random.default_rng(0)
    weights = rng.integers(-50, 50, (256, 4))
    biases = rng.integers(-100, 100, 256)
    model = Model(module="bank256", features=[FeatureFormat(f"x{i}", 8) for i in range(4)],
                  units=[Unit(f"c{k}", tuple(int(v) for v in row), int(b))
                         for k, (row, b) in enumerate(zip(weights, biases))])
    built = build(model, tmp_path / "out", BuildOptions(simulator="icarus", vectors=500,
                                                        pipeline=2))
    assert built.report["mismatches"] == 0 and built.report["vectors_checked"] > 500
    from thresh2hdl.verify.reference import ReferenceModel
    x = rng.integers(0, 256, (200, 4))
    assert (ReferenceModel.from_model(model).decisions(x) ==
            np.argmax(x @ weights.T + biases, axis=1)).all()


# Parser limits: nesting the parsers recurse through, numbers no field holds, values that
# overflow later arithmetic. Each file is refused in one line naming it, with exit code 2.
DEEP = "[" * 5000 + "]" * 5000
DIGITS = "9" * 5000


def exits_2_naming(tmp_path, capsys, argv, name):
    with pytest.raises(SystemExit) as info:
        main([str(a) for a in argv])
    err = capsys.readouterr().err
    assert info.value.code == 2, err
    assert err.count("\n") == 1 and err.startswith("thresh2hdl: error: ") and name in err
    assert len(err) < 400 and "Traceback" not in err
    return err


@pytest.mark.parametrize("text, expected", [
    (f"model_format = 1\nx = {DEEP}\n", "nests arrays or tables too deeply"),
    ("model_format = 1\nx = " + "{a = " * 3000 + "1" + "}" * 3000,
     "nests arrays or tables too deeply"),
    (f"model_format = {DIGITS}\n", "more than 4300 digits"),
    (GOOD_MODEL.replace("bias = ", f"bias = 1{'0' * 60} #"), "unit[0].bias: an integer of"),
])
def test_model_files_past_the_parsers_limits(tmp_path, capsys, text, expected):
    path = tmp_path / "m.toml"
    path.write_text(text)
    err = exits_2_naming(tmp_path, capsys, ["build", path, "--out", tmp_path / "o"], "m.toml")
    assert expected in err and not (tmp_path / "o").exists()


def test_formats_csv_and_netlist_files_past_the_parsers_limits(tmp_path, capsys):
    data = tmp_path / "d.csv"
    data.write_text("a,b,label\n1,2,0\n3,4,1\n")
    formats = tmp_path / "formats.toml"
    formats.write_text(f"x = {DEEP}\n")
    exits_2_naming(tmp_path, capsys, ["fit", data, "--out", tmp_path / "m.toml", "--formats",
                                      formats], "formats.toml")
    big = tmp_path / "big.csv"
    big.write_text(f"a,b,label\n1,{DIGITS},0\n3,4,1\n")
    err = exits_2_naming(tmp_path, capsys, ["fit", big, "--out", tmp_path / "m.toml"], "big.csv")
    assert "line 2" in err and "not a finite number" in err
    wide = tmp_path / "wide.csv"
    wide.write_text(",".join(f"c{i}" for i in range(5000)) + ",label\n"
                    + ",".join("1" * 5000) + ",0\n" + ",".join("2" * 5000) + ",1\n")
    exits_2_naming(tmp_path, capsys, ["fit", wide, "--out", tmp_path / "m.toml"],
                   "more than the limit of 4096")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["big.csv", "d.csv", "formats.toml",
                                                          "wide.csv"]


@pytest.mark.parametrize("arrays, expected", [
    ({"coef": np.array([[1e308, -1e308, 1.0]])}, "coef: the weights folded"),
    ({"scale": np.array([1e-308, 1.0, 1.0])}, "coef: the weights folded"),
    ({"input_hi": np.array([1e300, 15, 15])}, "input_hi: holds a code beyond 32 bits"),
    ({"intercept": np.array([1e300])}, "intercept: the bias is too large"),
    ({"coef": np.ones((300, 3)), "intercept": np.zeros(300)}, "at most 256 units"),
    ({"classes": np.array([1, 1])}, "classes: must be 2 different labels"),
])
def test_float_models_past_the_arithmetics_limits(tmp_path, capsys, arrays, expected):
    base = dict(coef=np.array([[0.5, -1.0, 0.25]]), intercept=np.array([0.1]),
                input_lo=np.array([0, 0, 0]), input_hi=np.array([15, 15, 15]))
    np.savez(tmp_path / "f.npz", **{**base, **arrays})
    err = exits_2_naming(tmp_path, capsys, ["quantize", tmp_path / "f.npz", "--bits", "6",
                                            "--out", tmp_path / "m.toml"], "f.npz")
    assert expected in err and not (tmp_path / "m.toml").exists()


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    out = tmp_path_factory.mktemp("built") / "demo"
    build(demo_model(), out, BuildOptions(simulator="amaranth", vectors=50))
    return out


# ``older``: a folder built before build_settings.json, whose design is read from the report.
@pytest.mark.parametrize("edit, expected, older", [
    (lambda r: DEEP, "nests arrays or tables too deeply", False),
    (lambda r: json.dumps({**r, "x": json.loads("[" * 40 + "]" * 40)}), "nests more than 32",
     False),
    (lambda r: json.dumps(r)[:-1] + f', "x": {DIGITS}}}', "more than 4300 digits", False),
    (lambda r: json.dumps({**r, "latency_cycles": float("inf")}), "not valid JSON", False),
    (lambda r: json.dumps({**r, "register_stages": 10 ** 30}), "register_stages: must be", True),
    (lambda r: json.dumps({**r, "weight_port": [1]}), "weight_port: must be a table", True),
    (lambda r: json.dumps({**r, "tree": {**r["tree"], "split_bits": 1}}),
     "recorded build settings are refused", True),
    (lambda r: json.dumps({**r, "verilog": "../../x.v"}), "verilog: must be the name", True),
    (lambda r: json.dumps({**r, "features": 5}), "cannot show this report", False),
    (lambda r: json.dumps([r]), "is not a build report", False),
    (lambda r: json.dumps([r]), "is not a build report", True),
])
def test_report_json_read_back_past_its_limits(folder, tmp_path, capsys, edit, expected, older):
    import shutil
    copy = tmp_path / "copy"
    shutil.copytree(folder, copy)
    if older:
        (copy / "build_settings.json").unlink()
    report = json.loads((folder / "report.json").read_text())
    (copy / "report.json").write_text(edit(report))
    before = {p.name: p.read_bytes() for p in copy.iterdir()}
    for command in (["check", copy], ["prove", copy], ["estimate", copy]):
        err = exits_2_naming(tmp_path, capsys, command, "report.json")
        assert expected in err
    assert {p.name: p.read_bytes() for p in copy.iterdir()} == before


@pytest.mark.parametrize("text, expected", [
    (DEEP, "nests arrays or tables too deeply"),
    ('{"mistakes_per_epoch": "abc", "epochs_run": [1], "train_accuracy": 1}',
     "mistakes_per_epoch: must be"),
    ('{"mistakes_per_epoch": [[1]], "epochs_run": [1], "train_accuracy": null}',
     "train_accuracy: must be a number, not missing"),
    ("[1]", "is not a fit log"),
])
def test_a_fit_log_beside_the_model_past_its_limits(tmp_path, capsys, text, expected):
    model = tmp_path / "m.toml"
    model.write_text(GOOD_MODEL)
    (tmp_path / "m.fit.json").write_text(text)
    err = exits_2_naming(tmp_path, capsys, ["build", model, "--out", tmp_path / "o"],
                         "m.fit.json")
    assert expected in err and not (tmp_path / "o").exists()


def test_a_netlist_with_a_port_width_past_any_limit(folder, capsys, tmp_path):
    netlist = tmp_path / "big.v"
    netlist.write_text(f"module pump_fault(input [{DIGITS}:0] clk); endmodule\n")
    err = exits_2_naming(tmp_path, capsys, ["check", folder, "--netlist", netlist], "big.v")
    assert "is missing" in err
