"""``--max-digits`` on ``fit`` and ``quantize``: the weights written, the logs, the summaries and
the refusals."""

import json

import numpy as np
import pytest

from thresh2hdl.errors import InputError
from thresh2hdl.model import load_model
from helpers import run, assert_one_line_error, HEADER, naf_weight, write_csv, separable_rows


def unit_digits(model_path):
    return [sum(naf_weight(w) for w in unit.weights) for unit in load_model(model_path).units]


def float_npz(path, coef=((0.5, -1.0, 0.25, 0.8),), intercept=(0.1,)):
    # Synthetic: a float model on four 4-bit codes centred at 8.
    np.savez(path, coef=np.array(coef), intercept=np.array(intercept),
             offset=np.full(4, 8.0), scale=np.array([4.0, 2.0, 1.0, 3.0]),
             input_lo=np.zeros(4, int), input_hi=np.full(4, 15))
    return path


def test_quantize_keeps_weights_within_the_budget_and_logs_their_digits(tmp_path):
    npz = float_npz(tmp_path / "f.npz")
    model = tmp_path / "m.toml"
    result = run("quantize", npz, "--bits", "8", "--max-digits", "1", "--out", model)
    assert result.returncode == 0, result.stderr
    assert max(naf_weight(w) for w in load_model(model).unit.weights) <= 1
    log = json.loads((tmp_path / "m.quantize.json").read_text())
    assert log["max_digits"] == 1
    assert log["digits_per_unit"] == unit_digits(model)
    assert log["digits_total"] == sum(unit_digits(model))
    assert (f"signed digits: {log['digits_total']} nonzero in all, at most 1 per weight "
            f"(--max-digits 1)") in result.stdout
    # Without a budget the 8-bit weights need more digits, and the log says there was none.
    result = run("quantize", npz, "--bits", "8", "--out", tmp_path / "n.toml")
    assert result.returncode == 0, result.stderr
    plain = json.loads((tmp_path / "n.quantize.json").read_text())
    assert plain["max_digits"] is None and plain["digits_total"] > log["digits_total"]
    assert "no budget per weight (--max-digits K sets one)" in result.stdout


def test_quantize_sweep_lists_digits_per_width(tmp_path):
    npz = float_npz(tmp_path / "f.npz")
    model = tmp_path / "m.toml"
    result = run("quantize", npz, "--sweep", "--max-digits", "2", "--out", model)
    assert result.returncode == 0, result.stderr
    log = json.loads((tmp_path / "m.quantize.json").read_text())
    rows = {row["bits"]: row["digits"] for row in log["sweep"]}
    assert rows[log["recommended_bits"]] == log["digits_total"] == sum(unit_digits(model))
    for bits, digits in rows.items():
        assert f"{bits:2d} bits: agreement " in result.stdout
        assert f"signed digits {digits}\n" in result.stdout
    assert max(rows.values()) <= 2 * 4       # four weights of at most two digits


def fit_clusters(folder, *flags):
    """``fit`` at 8 bits on synthetic rows: three 4-bit clusters of 150 rows in all, labelled
    by cluster (a bank of three units). Returns the run, the model file and its log."""
    rng = np.random.default_rng(1)
    centres = [(3, 3, 12), (12, 4, 4), (6, 13, 8)]
    rows = [[int(np.clip(c + rng.integers(-2, 3), 0, 15)) for c in centres[label]] + [label]
            for label in rng.integers(0, 3, 150)]
    data = write_csv(folder / "d.csv", ["a", "b", "c", "label"], rows)
    model = folder / "m.toml"
    result = run("fit", data, "--out", model, "--input-bits", "4", "--weight-bits", "8", *flags)
    assert result.returncode == 0, result.stderr
    return result, model, json.loads((folder / "m.fit.json").read_text())


def test_fit_keeps_a_bank_within_the_budget_and_says_so(tmp_path):
    result, model, log = fit_clusters(tmp_path, "--max-digits", "2")
    assert all(naf_weight(w) <= 2 for unit in load_model(model).units for w in unit.weights)
    assert log["options"]["max_digits"] == 2
    assert log["digits_per_unit"] == unit_digits(model)
    per_unit = ", ".join(map(str, log["digits_per_unit"]))
    assert (f"signed digits: {log['digits_total']} nonzero in all (per unit {per_unit}), at "
            f"most 2 per weight (--max-digits 2)") in result.stdout


def test_fit_with_a_budget_alone_keeps_full_precision_width(tmp_path):
    # Full precision (no bit budget): the digit budget still holds, at the trained width.
    data = write_csv(tmp_path / "d.csv", HEADER, separable_rows(200))
    model = tmp_path / "m.toml"
    result = run("fit", data, "--out", model, "--input-bits", "12", "--weight-bits", "full",
                 "--max-digits", "1")
    assert result.returncode == 0, result.stderr
    assert max(naf_weight(w) for w in load_model(model).unit.weights) <= 1


@pytest.mark.parametrize("command", ["fit", "quantize"])
@pytest.mark.parametrize("flag, value, expected", [
    ("--max-digits", "0", "--max-digits: must be a positive whole number of nonzero digits per "
                          "weight, not 0"),
    ("--max-digits", "-2", "--max-digits: must be a positive whole number"),
    ("--max-digits", "1.5", "'--max-digits': '1.5' is not a valid integer"),
    ("--max-digits", "two", "'--max-digits': 'two' is not a valid integer"),
    ("--digit-budget", "0", "--digit-budget: must be a positive whole number of nonzero signed "
                            "digits over all the weights, not 0"),
    ("--digit-budget", "-3", "--digit-budget: must be a positive whole number"),
    ("--digit-budget", "2.5", "'--digit-budget': '2.5' is not a valid integer")])
def test_bad_budgets_are_one_line_errors_without_files(tmp_path, command, flag, value, expected):
    if command == "fit":
        source = write_csv(tmp_path / "d.csv", HEADER, separable_rows(50))
        extra = ["--input-bits", "12"]
    else:
        source = float_npz(tmp_path / "f.npz")
        extra = ["--bits", "6"]
    result = run(command, source, "--out", tmp_path / "m.toml", *extra, flag, value)
    assert_one_line_error(result, 2, expected)
    assert sorted(p.name for p in tmp_path.iterdir()) == [source.name]


def test_a_budget_that_keeps_no_decision_is_refused(tmp_path):
    # 3a + 3b > 89: only the corner a = b = 15 of the 4-bit codes is decided 1; one digit per
    # weight leaves every row decided 0 (see tests/train/test_digits.py).
    npz = tmp_path / "f.npz"
    np.savez(npz, coef=np.array([[3.0, 3.0]]), intercept=np.array([-89.0]),
             input_lo=np.zeros(2, int), input_hi=np.full(2, 15))
    result = run("quantize", npz, "--bits", "6", "--max-digits", "1", "--out", tmp_path / "m.toml")
    assert_one_line_error(result, 2, "--max-digits: with at most 1 nonzero signed digit per "
                          "weight every row gets the same decision")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["f.npz"]


def test_the_library_names_its_field_and_the_command_its_flag(tmp_path):
    from thresh2hdl.app.fit import quantize_npz
    from thresh2hdl.train import FitOptions
    with pytest.raises(InputError) as caught:
        quantize_npz(float_npz(tmp_path / "f.npz"), tmp_path / "m.toml", bits=6, max_digits=0)
    assert caught.value.field == "max_digits" and "--" not in str(caught.value)
    with pytest.raises(InputError) as caught:
        FitOptions(max_digits=0)
    assert caught.value.field == "max_digits"
    assert not (tmp_path / "m.toml").exists()


def test_quantize_keeps_the_digits_in_all_within_the_budget(tmp_path):
    # The float model above at 8 bits: more than 4 digits in all without a budget (measured
    # 5), at most 4 with --digit-budget 4, counted here apart from the package.
    npz = float_npz(tmp_path / "f.npz")
    plain = run("quantize", npz, "--bits", "8", "--out", tmp_path / "n.toml")
    assert plain.returncode == 0, plain.stderr
    assert sum(unit_digits(tmp_path / "n.toml")) > 4
    model = tmp_path / "m.toml"
    result = run("quantize", npz, "--bits", "8", "--digit-budget", "4", "--out", model)
    assert result.returncode == 0, result.stderr
    log = json.loads((tmp_path / "m.quantize.json").read_text())
    assert log["digit_budget"] == 4 and log["digits_total"] == sum(unit_digits(model)) <= 4
    assert "at most 4 in all (--digit-budget 4)" in result.stdout


def test_fit_keeps_a_bank_within_a_budget_in_all(tmp_path):
    # 6 digits in all over the 9 weights.
    result, model, log = fit_clusters(tmp_path, "--digit-budget", "6")
    assert log["options"]["digit_budget"] == 6
    assert log["digits_per_unit"] == unit_digits(model) and sum(unit_digits(model)) <= 6
    assert "(--digit-budget 6)" in result.stdout


def test_the_sweep_recommends_the_fewest_digits_in_all_close_enough(tmp_path):
    # Synthetic labelled rows of the float model above (its own decisions, so it scores 1.0):
    # the sweep tries budgets in all at the chosen width and takes the one giving the fewest
    # digits whose accuracy is within --tolerance of the float model's. Measured at the
    # recommended 4 bits: budgets 5, 4, 3, 2 give 5, 4, 3, 1 digits and accuracy 0.990,
    # 0.905, 0.905, 0.798 (float 1.0): 3 is recommended.
    npz = float_npz(tmp_path / "f.npz")
    rng = np.random.default_rng(2)
    x = rng.integers(0, 16, (400, 4))
    score = ((x - 8) / np.array([4.0, 2.0, 1.0, 3.0])) @ np.array([0.5, -1.0, 0.25, 0.8]) + 0.1
    data = write_csv(tmp_path / "d.csv", ["a", "b", "c", "d", "label"],
                     [list(r) + [int(s > 0)] for r, s in zip(x.tolist(), score)])
    model = tmp_path / "m.toml"
    result = run("quantize", npz, "--sweep", "--data", data, "--tolerance", "0.1",
                 "--out", model)
    assert result.returncode == 0, result.stderr
    log = json.loads((tmp_path / "m.quantize.json").read_text())
    rows = log["digit_sweep"]
    assert len(rows) >= 2 and all(row["digits"] <= row["digit_budget"] for row in rows)
    close = [row for row in rows if row["accuracy"] >= log["float_accuracy"] - 0.1]
    fewest = min(close, key=lambda row: row["digits"])
    assert log["recommended_digit_budget"] == log["digit_budget"] == fewest["digit_budget"]
    assert log["digits_total"] == sum(unit_digits(model)) == fewest["digits"]
    # Not the first budget, and not the last: a trade, each side of it tried.
    assert rows[0]["digits"] > fewest["digits"] > min(row["digits"] for row in rows)
    n = log["digit_budget"]
    assert f"recommended: at most {n} signed digits in all (--digit-budget {n})" in result.stdout
    for row in rows:
        assert f"at most {row['digit_budget']} digits in all: agreement" in result.stdout


def test_a_budget_in_all_that_keeps_no_decision_is_refused(tmp_path):
    # 3a + 3b > 89 (see tests/train/test_budget.py): one digit in all decides every row 0.
    npz = tmp_path / "f.npz"
    np.savez(npz, coef=np.array([[3.0, 3.0]]), intercept=np.array([-89.0]),
             input_lo=np.zeros(2, int), input_hi=np.full(2, 15))
    result = run("quantize", npz, "--bits", "6", "--digit-budget", "1", "--out",
                 tmp_path / "m.toml")
    assert_one_line_error(result, 2, "--digit-budget: with at most 1 nonzero signed digit in "
                          "all every row gets the same decision")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["f.npz"]
