"""Grouping checks and the JSON-ready summaries."""

import json

import numpy as np
import pandas as pd
import pytest

from strataweave import InputError
from strataweave.evaluate.grouping import check_grouping, group_order
from strataweave.evaluate.result import plain


@pytest.mark.parametrize(
    ("grouping", "message"),
    [
        ([1, 2, 1], "found list, expected a pandas Series"),
        (pd.Series([1, 2, 1], index=["a", "b", "a"]), "patient ID 'a' appears more than once"),
        (pd.Series([1, 1, None], index=["a", "b", "c"]), "found 1 group"),
    ],
)
def test_unusable_groupings_raise(grouping, message):
    with pytest.raises(InputError, match=message):
        check_grouping(grouping)


def test_unlabelled_patients_are_left_out_and_order_is_natural():
    labels = check_grouping(pd.Series([10, 2, None, 2, 1], index=list("abcde")))
    assert list(labels.index) == ["a", "b", "d", "e"]
    assert group_order(labels) == [1, 2, 10]
    assert group_order(pd.Series(["b", 3, "a"])) == [3, "a", "b"]


def test_plain_turns_numpy_and_missing_values_into_json():
    frame = pd.DataFrame({"x": [1.5, np.nan], "n": np.array([1, 2], dtype=np.int64), "flag": [True, False]})
    value = plain({"rows": frame, 3: np.float64(np.inf), "array": np.array([0.5, np.nan]), "none": None})
    assert value == {
        "rows": [{"x": 1.5, "n": 1, "flag": True}, {"x": None, "n": 2, "flag": False}],
        "3": None,
        "array": [0.5, None],
        "none": None,
    }
    json.dumps(value, allow_nan=False)
