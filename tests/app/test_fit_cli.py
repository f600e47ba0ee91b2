"""`fit`, `quantize` and `build --data` from the command line, with bad inputs."""

import json

import numpy as np
import pytest

from helpers import run, assert_one_line_error, HEADER, write_csv, separable_rows


def test_fit_then_build_is_exact_on_separable_data(tmp_path):
    data = write_csv(tmp_path / "train.csv", HEADER, separable_rows())
    model = tmp_path / "model.toml"
    result = run("fit", data, "--out", model, "--input-bits", "12", "--module", "trigger")
    assert result.returncode == 0, result.stderr
    assert "train accuracy 1.0000" in result.stdout and result.stderr == ""
    log = json.loads((tmp_path / "model.fit.json").read_text())
    assert log["train_accuracy"] == 1.0 and log["mistakes_per_epoch"][0][-1] == 0
    out = tmp_path / "build"
    result = run("build", model, "--out", out, "--data", data, "--vectors", "2000")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["mismatches"] == 0
    assert report["data"]["accuracy"] == 1.0
    per_class = report["data"]["per_class"]
    assert per_class["0"]["rows"] + per_class["1"]["rows"] == 300
    assert per_class["1"]["correct"] == per_class["1"]["rows"]
    assert dict(report["verification"]["vector_groups"])["dataset rows"] == 300


def test_fit_without_formats_warns_and_sizes_from_data(tmp_path):
    data = write_csv(tmp_path / "d.csv", HEADER, separable_rows(100))
    result = run("fit", data, "--out", tmp_path / "m.toml")
    assert result.returncode == 0
    assert "sized only for the ranges seen" in result.stderr


def test_multiclass_fit_makes_a_bank_that_builds(tmp_path):
    rng = np.random.default_rng(2)
    rows = []
    for _ in range(150):
        label = int(rng.integers(0, 3))
        centre = [(3, 3, 12), (12, 4, 4), (6, 13, 8)][label]
        rows.append([int(np.clip(c + rng.integers(-2, 3), 0, 15)) for c in centre] + [label])
    data = write_csv(tmp_path / "d.csv", ["a", "b", "c", "label"], rows)
    model = tmp_path / "m.toml"
    assert run("fit", data, "--out", model, "--input-bits", "4", "--epochs", "50").returncode == 0
    text = model.read_text()
    assert text.count("[[unit]]") == 3 and "class_labels = [0, 1, 2]" in text
    out = tmp_path / "o"
    result = run("build", model, "--out", out, "--data", data, "--vectors", "3000",
                 "--pipeline", "2")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    assert report["mismatches"] == 0 and len(report["units"]) == 3
    assert report["data"]["accuracy"] == 1.0
    verilog = (out / "thresh_unit.v").read_text()
    assert "output reg [1:0] y" in verilog
    for unit in ("class_0", "class_1", "class_2"):
        assert f"score_{unit}" in verilog


BAD_CSV = {
    "empty": ("", "is empty"),
    "header_only": ("a,b,label\n", "no data rows"),
    "ragged": ("a,b,label\n1,2,0\n3,1\n", "line 3: has 2 cells"),
    "text": ("a,b,label\n1,x,0\n2,1,1\n", "'b' is 'x', not a number"),
    "nan": ("a,b,label\n1,nan,0\n2,1,1\n", "not a finite number"),
    "inf": ("a,b,label\n1,inf,0\n2,1,1\n", "not a finite number"),
    "fraction": ("a,b,label\n1,2.5,0\n2,1,1\n", "not an integer code"),
    "range": ("a,b,label\n1,300,0\n2,1,1\n", "outside its declared range [0, 255]"),
    "one_class": ("a,b,label\n1,2,1\n2,1,1\n", "one class only"),
    "label_text": ("a,b,label\n1,2,yes\n2,1,no\n", "'label' is 'yes'"),
    "no_label": ("a,b,c\n1,2,1\n2,1,0\n", "no label column 'label'"),
}


@pytest.mark.parametrize("name", sorted(BAD_CSV))
def test_fit_bad_csv(tmp_path, name):
    text, expected = BAD_CSV[name]
    data = tmp_path / f"{name}.csv"
    data.write_text(text)
    result = run("fit", data, "--out", tmp_path / "m.toml", "--input-bits", "8")
    assert_one_line_error(result, 2, expected)
    assert sorted(p.name for p in tmp_path.iterdir()) == [f"{name}.csv"]


def float_npz(path, **arrays):
    base = dict(coef=np.array([[0.5, -1.0, 0.25]]), intercept=np.array([0.1]),
                offset=np.array([8.0, 8.0, 8.0]), scale=np.array([4.0, 2.0, 1.0]),
                input_lo=np.array([0, 0, 0]), input_hi=np.array([15, 15, 15]))
    base.update(arrays)
    base = {k: v for k, v in base.items() if v is not None}
    np.savez(path, **base)
    return path


def test_quantize_folds_exactly_representable_weights(tmp_path):
    # coef / scale = (0.125, -0.5, 0.25); bias 0.1 - (1 + -4 + 2) = 1.1: integers 1, -4, 2 after
    # scaling by 8 agree with the float model on every input (checked exhaustively below).
    npz = float_npz(tmp_path / "f.npz")
    model = tmp_path / "m.toml"
    result = run("quantize", npz, "--bits", "4", "--out", model)
    assert result.returncode == 0, result.stderr
    assert "agreement with the float model 1.0000" in result.stdout
    from thresh2hdl.model import load_model
    unit = load_model(model).unit
    grid = np.array(np.meshgrid(*[range(16)] * 3)).reshape(3, -1).T
    folded = grid @ np.array([0.125, -0.5, 0.25]) + 1.1
    integer = grid @ np.array(unit.weights) + unit.bias
    assert np.array_equal(folded > 0, integer > 0)
    log = json.loads((tmp_path / "m.quantize.json").read_text())
    assert log["agreement_with_float"] == 1.0


def test_quantize_sweep_recommends(tmp_path):
    npz = float_npz(tmp_path / "f.npz")
    result = run("quantize", npz, "--sweep", "--out", tmp_path / "m.toml")
    assert result.returncode == 0, result.stderr
    assert " 2 bits:" in result.stdout and "12 bits:" in result.stdout
    assert "recommended:" in result.stdout


@pytest.mark.parametrize("arrays, expected", [
    ({"coef": None}, "missing array 'coef'"),
    ({"input_hi": None}, "missing array 'input_hi'"),
    ({"intercept": np.array([0.1, 0.2])}, "intercept"),
    ({"offset": np.array([1.0, 2.0])}, "offset: has shape"),
    ({"scale": np.array([1.0, 0.0, 1.0])}, "scale: must be positive"),
    ({"coef": np.array([[np.nan, 1.0, 1.0]])}, "coef: holds NaN"),
    ({"input_lo": np.array([0, 20, 0])}, "is above input_hi"),
    ({"extra": np.array([1])}, "unknown array 'extra'"),
])
def test_quantize_bad_npz(tmp_path, arrays, expected):
    npz = float_npz(tmp_path / "f.npz", **arrays)
    result = run("quantize", npz, "--bits", "6", "--out", tmp_path / "m.toml")
    assert_one_line_error(result, 2, expected)
    assert not (tmp_path / "m.toml").exists()


@pytest.mark.parametrize("bits", ["1", "33"])
def test_quantize_bits_outside_2_to_32(tmp_path, bits):
    npz = float_npz(tmp_path / "f.npz")
    assert_one_line_error(run("quantize", npz, "--bits", bits, "--out", tmp_path / "m.toml"),
                          2, "from 2 to 32")


def test_quantize_not_an_archive(tmp_path):
    bad = tmp_path / "f.npz"
    bad.write_text("hello")
    assert_one_line_error(run("quantize", bad, "--bits", "6", "--out", tmp_path / "m.toml"), 2,
                          "not a readable .npz")


def test_fit_refuses_to_overwrite_without_force(tmp_path):
    data = write_csv(tmp_path / "d.csv", HEADER, separable_rows(50))
    model = tmp_path / "m.toml"
    model.write_text("mine")
    assert_one_line_error(run("fit", data, "--out", model, "--input-bits", "12"), 2, "exists")
    assert model.read_text() == "mine"
    assert run("fit", data, "--out", model, "--input-bits", "12", "--force").returncode == 0


def test_fit_defaults_say_what_they_chose_and_keep_weights_narrow(tmp_path):
    # Synthetic noisy 12-bit rows (helpers.noisy_codes): full-precision weights come out
    # wider than 12 bits there.
    from helpers import noisy_codes
    x, y = noisy_codes(0)
    data = write_csv(tmp_path / "noisy.csv", ["a", "b", "c", "d", "e", "f", "label"],
                     [list(r) + [int(v)] for r, v in zip(x, y)])
    model = tmp_path / "m.toml"
    result = run("fit", data, "--out", model, "--input-bits", "12", "--holdout", "0.3")
    assert result.returncode == 0 and result.stderr == "", result.stderr
    assert "kept the pocket weights (default" in result.stdout
    assert "brought into the default budget of 12 bits" in result.stdout
    from thresh2hdl.model import load_model
    assert max(abs(w) for w in load_model(model).unit.weights) < 1 << 11
    log = json.loads((tmp_path / "m.fit.json").read_text())
    assert log["weight_budget_bits"] == 12 < log["full_precision_weight_bits"]
    assert log["options"]["keep"] == "pocket"
    # Full precision on request, with a warning that says how wide and what to do.
    result = run("fit", data, "--out", model, "--input-bits", "12", "--weight-bits", "full",
                 "--force")
    assert result.returncode == 0, result.stderr
    assert "warning: the weights need" in result.stderr and "--weight-bits 12" in result.stderr
    assert "at full precision (--weight-bits full)" in result.stdout
    assert max(abs(w) for w in load_model(model).unit.weights) >= 1 << 11
    assert_one_line_error(run("fit", data, "--out", model, "--weight-bits", "wide"), 2,
                          "neither a number of bits nor 'full'")


@pytest.mark.parametrize("args, field, flag", [
    (("--epochs", "0"), "epochs", "--epochs"),
    (("--holdout", "1.5"), "holdout", "--holdout"),
    (("--module", "9x"), "module", "--module"),
])
def test_training_errors_name_fields_in_the_library_and_flags_on_the_command(
        tmp_path, args, field, flag):
    # The core names its own fields; the command line names them as its options (cli.flags_named).
    from thresh2hdl.errors import InputError
    from thresh2hdl.model import read_csv
    from thresh2hdl.train import FitOptions, fit
    data = write_csv(tmp_path / "train.csv", HEADER, separable_rows())
    result = run("fit", data, "--out", tmp_path / "m.toml", "--input-bits", "12", *args)
    assert_one_line_error(result, contains=f"{flag}: ")
    assert not (tmp_path / "m.toml").exists()
    with pytest.raises(InputError) as caught:
        if field == "module":
            fit(read_csv(data, label="label"), module="9x")
        else:
            FitOptions(**{field: int(args[1]) if field == "epochs" else float(args[1])})
    assert caught.value.field == field and "--" not in str(caught.value)
