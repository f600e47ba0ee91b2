"""The emitted Verilog: clean under Verilator's and Icarus's strictest lint, deterministic, named."""

import re
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from helpers import make_model, lint_verilator, lint_icarus
from thresh2hdl.hardware import ThresholdUnit, UnitConfig
from thresh2hdl.app import demo_model
from thresh2hdl.model.records import PortNames
from thresh2hdl.analysis import analyse
from thresh2hdl.emit.verilog import emit_verilog, instance_template


def emit(model, pipeline=1):
    return emit_verilog(ThresholdUnit(UnitConfig(model, pipeline=pipeline)), model)


def write(folder, model, text):
    path = Path(folder) / f"{model.module}.v"
    path.write_text(text)
    return path


@pytest.mark.verilator
@pytest.mark.parametrize("pipeline", [0, 1, 2, 4])
def test_demo_is_lint_clean_in_verilator_and_icarus(tmp_path, pipeline):
    model = demo_model()
    write(tmp_path, model, emit(model, pipeline))
    code, output = lint_verilator(tmp_path, model.module)
    assert code == 0 and output.strip() == "", output
    code, output = lint_icarus(tmp_path, f"{model.module}.v")
    assert code == 0 and output.strip() == "", output


lint_cases = st.integers(1, 9).flatmap(lambda n: st.tuples(
    st.lists(st.integers(-(1 << 12), 1 << 12), min_size=n, max_size=n),
    st.integers(-(1 << 20), 1 << 20), st.integers(1, 16), st.booleans(), st.booleans(),
    st.integers(0, 5)))


@pytest.mark.verilator
@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=lint_cases)
def test_random_models_are_lint_clean(tmp_path, case):
    weights, bias, bits, is_signed, with_score, pipeline = case
    ports = PortNames() if with_score else PortNames(score="")
    model = make_model(weights, bias, bits=bits, signed=is_signed, ports=ports)
    pipeline = min(pipeline, analyse(model).final_level + 1)
    write(tmp_path, model, emit(model, pipeline))
    code, output = lint_verilator(tmp_path, model.module)
    assert code == 0 and output.strip() == "", output
    code, output = lint_icarus(tmp_path, f"{model.module}.v")
    assert code == 0 and output.strip() == "", output


def test_same_model_gives_byte_identical_verilog_with_no_paths_or_times():
    model = demo_model()
    first = emit(model, 2)
    second = emit(demo_model(), 2)
    assert first == second
    assert str(Path.cwd()) not in first and "/home" not in first and "/tmp" not in first
    assert not re.search(r"\b20\d\d-\d\d-\d\d\b", first)
    assert "src =" not in first
    assert set(re.findall(r"\(\*[^*]*\*\)", first)) == {"(* keep *)"}


def test_verilog_is_identical_from_another_working_folder(tmp_path):
    code = ("import sys, thresh2hdl; from thresh2hdl.hardware import *; "
            "m = thresh2hdl.demo_model(); "
            "sys.stdout.write(thresh2hdl.emit_verilog(ThresholdUnit(UnitConfig(m)), m))")
    outputs = []
    for folder in (tmp_path, Path(__file__).parent):
        result = subprocess.run([sys.executable, "-c", code], cwd=folder, capture_output=True,
                                text=True, check=True)
        outputs.append(result.stdout)
    assert outputs[0] == outputs[1] == emit(demo_model(), 1)


def test_names_come_from_the_model():
    model = demo_model().with_module("pump_guard")
    text = emit(model)
    assert "module pump_guard (" in text
    for feature in model.features:
        assert re.search(rf"input\s+wire\s+\[11:0\] {feature.name}\b", text)
    assert re.search(r"output reg fault\b", text)
    assert re.search(r"output reg signed \[\d+:0\] score\b", text)
    assert "in_valid" in text and "out_ready" in text


def test_negative_weights_use_positive_constant_products():
    model = make_model([-37, 37, -5], 0, bits=12)
    text = emit(model)
    products = re.findall(r"assign p\d+ = .*;", text)
    assert len(products) == 3
    for line in products:
        assert "-" not in line      # |w| times x; the sign goes into an adder


def test_no_score_port_compares_against_a_constant():
    model = make_model([3, -2], -10, bits=8, ports=PortNames(score=""))
    text = emit(model)
    assert "score" not in text.split(");")[0]     # not in the port list
    assert "score_sum" not in text                  # no bias adder


@pytest.mark.icarus
def test_instance_template_compiles(tmp_path):
    model = demo_model()
    dut = ThresholdUnit(UnitConfig(model))
    write(tmp_path, model, emit_verilog(dut, model))
    (tmp_path / "inst.vh").write_text(instance_template(dut, model))
    (tmp_path / "top.v").write_text("module top;\n`include \"inst.vh\"\nendmodule\n")
    code, output = lint_icarus(tmp_path, "top.v", f"{model.module}.v")
    assert code == 0, output
