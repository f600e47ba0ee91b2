"""The training tests' fixture: the epoch walk as numba compiles it, and as written."""

import pytest

from thresh2hdl.train import kernel


@pytest.fixture(params=["compiled", "uncompiled"])
def walker(request, monkeypatch):
    """Train with :func:`kernel.walk_epoch` compiled, then as plain Python (what runs where
    numba is missing): the tests using it hold for both forms of the one implementation."""
    if request.param == "compiled":
        pytest.importorskip("numba")
        assert kernel.compiled()
    else:
        monkeypatch.setattr(kernel, "_walker", kernel.walk_epoch)
        assert not kernel.compiled()
    return request.param
