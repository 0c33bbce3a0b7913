"""Shared inputs for the evaluate tests."""

import pandas as pd
import pytest
from lifelines.datasets import load_leukemia


@pytest.fixture
def leukemia() -> tuple[pd.Series, pd.DataFrame]:
    """The remission data of Kleinbaum & Klein as shipped by lifelines, keyed by string IDs.

    Rx = 0 is the 6-MP treatment arm, Rx = 1 the placebo arm.
    """
    data = load_leukemia()
    data.index = [f"P{i:02d}" for i in range(len(data))]
    grouping = data["Rx"].map({0: "treatment", 1: "placebo"})
    return grouping, data
