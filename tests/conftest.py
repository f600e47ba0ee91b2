"""Test-run settings and hooks; the helpers the test modules share are in helpers.py."""

import os
import tempfile

import pytest

# Compiled Verilator harnesses go to a cache of the test run's own, not the user's.
os.environ.setdefault("THRESH2HDL_CACHE", tempfile.mkdtemp(prefix="thresh2hdl-test-cache-"))


# Tests that need an outside tool, or that build many designs, are slow: `pytest -m "not slow"`
# is the quick loop (see DEVELOPERS.md), the whole suite the one CI runs.
_SLOW_MARKERS = ("icarus", "verilator", "ghdl", "synth", "prove", "browser")


def pytest_collection_modifyitems(config, items):
    for item in items:
        params = getattr(getattr(item, "callspec", None), "params", {}).values()
        if any(item.get_closest_marker(name) for name in _SLOW_MARKERS) or \
                any(value in _SLOW_MARKERS for value in params if isinstance(value, str)):
            item.add_marker(pytest.mark.slow)
