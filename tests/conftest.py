import os
import shutil
import tempfile

import pytest

from thresh2hdl.model import FeatureFormat, Model, Unit

# Compiled Verilator harnesses go to a cache of the test run's own, not the user's.
os.environ.setdefault("THRESH2HDL_CACHE", tempfile.mkdtemp(prefix="thresh2hdl-test-cache-"))

IN_CI = os.environ.get("CI", "").lower() in ("1", "true", "yes")


def require_tool(*names):
    """Skip locally when a tool is missing, but fail in CI, where every tool must be present."""
    missing = [name for name in names if shutil.which(name) is None]
    if missing:
        message = f"{', '.join(missing)} not found on PATH"
        if IN_CI:
            pytest.fail(f"{message}; CI must have it (see .ci/run)")
        pytest.skip(message)


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
    from thresh2hdl.flow import run_simulator
    from thresh2hdl.verilog import port_table
    result, _ = run_simulator("amaranth", dut, "", port_table(dut, model), model.module,
                              stimulus)
    checked = result.check(stimulus)
    assert checked.mismatch_count == 0 and checked.vectors_checked == len(stimulus.vectors)
