"""The labelled data's range check: which code it names when several are out of range."""

import numpy as np
import pytest

from thresh2hdl.errors import InputError
from thresh2hdl.model.data import Dataset, check_ranges
from thresh2hdl.model.records import FeatureFormat


def test_range_check_names_the_first_column_then_its_first_row():
    formats = [FeatureFormat("a", 4), FeatureFormat("b", 4, True, -3, 5),
               FeatureFormat("c", 4)]
    x = np.array([[1, 0, 2], [2, 0, 99], [3, 6, 1], [4, -4, 3]])
    data = Dataset("d.csv", ("a", "b", "c"), x, np.array([0, 1, 0, 1]))
    with pytest.raises(InputError) as caught:
        check_ranges(data, formats)
    # Column b is the first out of range (c's is in an earlier row): its first bad row, the
    # file's line 4 (line 1 the header).
    assert "'b' = 6 is outside its declared range [-3, 5]" in str(caught.value)
    assert "line 4" in str(caught.value)
    low = Dataset("d.csv", ("a", "b", "c"), np.where(x == 6, 0, x), data.labels)
    with pytest.raises(InputError, match=r"line 5: 'b' = -4 "):
        check_ranges(low, formats)
    check_ranges(Dataset("d.csv", ("a", "b", "c"), np.clip(x, 0, 5), data.labels), formats)
    check_ranges(Dataset("d.csv", ("a", "b", "c"), x[:0], data.labels[:0]), formats)
