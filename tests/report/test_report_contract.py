"""The run-folder contract: complete invented results pass, each missing or malformed key is named."""

import copy

import numpy as np
import pytest

from strataweave import InputError
from strataweave.report.contract import check_figure_data, check_manifest, check_results, expected_arrays

from report_fixture import make_results


def test_complete_results_and_arrays_pass():
    results, arrays = make_results()
    check_results(results)
    check_figure_data(arrays, results)


def test_optional_sections_may_be_absent():
    results, arrays = make_results(survival=False, markers=False)
    for key in ("graph", "selection", "baselines", "clinical", "parameters", "report"):
        results.pop(key)
    check_results(results)
    names = {name for name, _ in expected_arrays(results)}
    assert names == {"subtype_code", "confidence", "core", "presence"}
    check_figure_data(arrays, results)


@pytest.mark.parametrize(
    "path, expected",
    [
        (("caution",), "key 'caution' is missing"),
        (("subtype_count",), "key 'subtype_count' is missing"),
        (("survival", "logrank", "p_value_permutation"), "key 'survival.logrank.p_value_permutation' is missing"),
        (("survival", "cox", 1, "ci_upper"), "key 'survival.cox[1].ci_upper' is missing"),
        (("cohort", "modalities", 0, "filters"), "key 'cohort.modalities[0].filters' is missing"),
        (("selection", "reason"), "key 'selection.reason' is missing"),
        (("markers", 1, "rows", 0, "auc"), "key 'markers[1].rows[0].auc' is missing"),
    ],
)
def test_missing_key_is_named(path, expected):
    results, _ = make_results()
    holder = results
    for step in path[:-1]:
        holder = holder[step]
    del holder[path[-1]]
    with pytest.raises(InputError, match=expected.replace("[", r"\[").replace("]", r"\]")):
        check_results(results)


def test_wrong_type_and_length_are_named():
    results, _ = make_results()
    bad = copy.deepcopy(results)
    bad["subtype_count"] = "three"
    with pytest.raises(InputError, match="'subtype_count' is 'three'; expected an integer"):
        check_results(bad)
    bad = copy.deepcopy(results)
    bad["subtype_count"] = 4
    with pytest.raises(InputError, match="'subtypes.labels' has 3 entries; expected subtype_count = 4"):
        check_results(bad)
    bad = copy.deepcopy(results)
    bad["selection"]["criteria"]["pac"].append(0.1)
    with pytest.raises(InputError, match="selection.criteria.pac' has 4 values"):
        check_results(bad)


def test_null_allowed_only_where_documented():
    results, _ = make_results()
    results["survival"]["logrank"]["p_value_permutation"] = None
    check_results(results)
    results["subtypes"]["sizes"][0] = None
    with pytest.raises(InputError, match=r"'subtypes.sizes\[0\]' is null"):
        check_results(results)


def test_missing_or_misshapen_array_is_named():
    results, arrays = make_results()
    del arrays["consensus_k4"]
    with pytest.raises(InputError, match="array 'consensus_k4' is missing"):
        check_figure_data(arrays, results)
    results, arrays = make_results()
    arrays["presence"] = arrays["presence"][:, :1]
    with pytest.raises(InputError, match="array 'presence' has shape"):
        check_figure_data(arrays, results)
    results, arrays = make_results()
    arrays["km_2_time"] = np.array(["a", "b"])
    with pytest.raises(InputError, match="array 'km_2_time' has dtype"):
        check_figure_data(arrays, results)


def test_manifest_types_checked():
    check_manifest({"command": ["strataweave", "run", "w.toml"]})
    with pytest.raises(InputError, match="manifest.json: key 'seed'"):
        check_manifest({"seed": "x"})
