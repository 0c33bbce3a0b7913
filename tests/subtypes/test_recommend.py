"""The recommendation rule on criteria tables written by hand."""

import pandas as pd
import pytest

from strataweave import InputError
from strataweave.subtypes.recommend import RULE, recommend_count


def criteria(pac, stability, smallest):
    return pd.DataFrame(
        {"pac": pac, "stability": stability, "smallest_subtype": smallest}, index=pd.Index([2, 3, 4, 5], name="count")
    )


def test_lowest_pac_wins_when_it_stands_alone():
    table = criteria([0.30, 0.02, 0.15, 0.20], [0.6, 0.9, 0.8, 0.7], [80, 40, 30, 20])
    choice = recommend_count(table, min_size=10)
    assert (choice.count, choice.chosen_by, choice.rule_count) == (3, "rule", 3)
    assert choice.reason.startswith("It has the lowest PAC (0.020)")  # the count is said beside it, not in it
    assert choice.rule == RULE and "min_size" in RULE


def test_near_ties_in_pac_go_to_the_largest_equally_crisp_count():
    table = criteria([0.05, 0.04, 0.045, 0.30], [0.80, 0.85, 0.95, 0.5], [80, 40, 30, 20])
    choice = recommend_count(table, min_size=10, pac_tolerance=0.02)
    assert choice.count == 4 and "(equally crisp: 2, 3)" in choice.reason
    assert recommend_count(table, min_size=10, pac_tolerance=0.0).count == 3
    merged_as_crisp = criteria([0.0, 0.0, 0.2, 0.3], [1.0, 0.99, 0.5, 0.5], [80, 40, 30, 20])
    assert recommend_count(merged_as_crisp, min_size=10).count == 3


def test_a_count_a_little_less_crisp_is_chosen_where_the_graph_confirms_its_cut():
    # A weak contrast missed in some resamples raises PAC a little at the planted count (4 here); a
    # stable bisection of one homogeneous group (5 here) does too, but leaves no gap in the spectrum.
    table = criteria([0.0, 0.005, 0.03, 0.04], [1.0, 0.99, 0.97, 0.96], [80, 40, 30, 20]).assign(
        eigengap=[0.10, 0.30, 0.20, 0.05]
    )
    choice = recommend_count(table, min_size=10)
    assert choice.count == 4
    assert "confirms, its eigengap (0.200) being at least half the largest among those counts (0.300 at 3)" in choice.reason
    assert choice.reason.endswith("Equally crisp: 2, 3.")
    assert recommend_count(table.assign(eigengap=[0.1, 0.3, 0.2, 0.2]), min_size=10).count == 5
    no_clear_cut = table.assign(eigengap=[0.010, 0.030, 0.020, 0.005])
    assert recommend_count(no_clear_cut, min_size=10).count == 3  # within pac_tolerance 0.01 only
    without_gaps = table.drop(columns="eigengap")
    assert recommend_count(without_gaps, min_size=10).count == 3


def test_never_a_count_whose_smallest_subtype_is_below_min_size():
    table = criteria([0.30, 0.20, 0.0, 0.25], [0.5, 0.7, 1.0, 0.6], [80, 40, 3, 20])
    choice = recommend_count(table, min_size=10)
    assert choice.count == 3 and "at least 10 patients" in choice.reason
    with pytest.raises(InputError, match="min_size=100"):
        recommend_count(table, min_size=100)


def test_user_override_is_kept_with_the_rules_choice_in_the_reason():
    table = criteria([0.30, 0.02, 0.15, 0.20], [0.6, 0.9, 0.8, 0.7], [80, 40, 3, 20])
    choice = recommend_count(table, min_size=10, user_count=5)
    assert (choice.count, choice.chosen_by, choice.rule_count) == (5, "user", 3)
    assert "Chosen by the user; the rule would choose 3. It has the lowest PAC" in choice.reason
    with pytest.raises(InputError, match="found 4, whose smallest subtype has 3 patients"):
        recommend_count(table, min_size=10, user_count=4)
    with pytest.raises(InputError, match="expected one of the counts swept"):
        recommend_count(table, min_size=10, user_count=9)


def test_a_count_that_fits_the_graph_better_is_named_as_runner_up():
    table = criteria([0.0, 0.004, 0.04, 0.3], [1.0, 0.99, 0.95, 0.5], [80, 40, 30, 20]).assign(
        modularity=[0.40, 0.51, 0.52, 0.45]
    )
    choice = recommend_count(table, min_size=10)
    assert choice.count == 3
    assert choice.reason.endswith("Runner-up: 4 subtypes, whose partition fits the modalities' own graphs "
                                  "better (mean modularity 0.520 against 0.510, PAC 0.040).")
    best_fit_chosen = table.assign(modularity=[0.40, 0.53, 0.52, 0.45])
    assert "Runner-up" not in recommend_count(best_fit_chosen, min_size=10).reason
