import doctest

import pytest

import thresh2hdl
from thresh2hdl import reference


@pytest.mark.parametrize("module", [thresh2hdl, reference])
def test_docstring_examples_run(module):
    failures, tried = doctest.testmod(module)
    assert tried > 0 and failures == 0
