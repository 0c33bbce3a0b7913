"""Stage cache: lossless JSON + npz round trip, keys that chain, reruns limited to what changed."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp

from strataweave.codec import CodecState, decode, encode
from strataweave.files import write_table
from strataweave.workflow.cache import Pipeline, Stage, StageCache, stage_key


def _mixed_result() -> dict:
    clinical = pd.DataFrame(
        {
            "age": [51, 62, 70],
            "stage": ["II", None, "=IV"],  # missing text as the clinical reader gives it
            "os_months": [10.5, np.nan, 3.25],
            "smoker": [True, False, True],
            "centre": pd.Categorical(["north", "south", "north"]),
        },
        index=pd.Index(["P1", "P2", "P3"], name="patient_id"),
    )
    return {
        "clinical": clinical,
        "matrix": pd.DataFrame(np.arange(6.0).reshape(3, 2), index=["a", "b", "c"], columns=["G1", "G2"]),
        "affinity": sp.random(5, 5, density=0.4, random_state=0, format="csr"),
        "labels": pd.Series([0, 1, 1], index=["P1", "P2", "P3"], name="subtype"),
        "by_count": {2: np.array([0, 1]), 3: (1, "two", None)},
        "numbers": [float("nan"), float("inf"), 1e-300, np.float32(0.1)],
        "empty": pd.DataFrame(index=pd.Index(["x"]), columns=pd.Index([], dtype=object)),
    }


def test_round_trip_is_lossless() -> None:
    original = _mixed_result()
    tree, arrays = encode(original)
    assert all(array.dtype != object for array in arrays.values())  # nothing that would need pickle
    back = decode(tree, arrays)
    # pandas' own testing helpers are the reference for "equal frame / series"
    pd.testing.assert_frame_equal(back["clinical"], original["clinical"])
    pd.testing.assert_frame_equal(back["matrix"], original["matrix"])
    pd.testing.assert_series_equal(back["labels"], original["labels"])
    assert (back["affinity"] != original["affinity"]).nnz == 0
    assert list(back["by_count"]) == [2, 3] and back["by_count"][3] == (1, "two", None)
    assert np.isnan(back["numbers"][0]) and back["numbers"][1] == np.inf and back["numbers"][2] == 1e-300
    assert back["empty"].shape == (1, 0)


def test_tables_written_from_a_cached_result_are_byte_identical(tmp_path) -> None:
    original = _mixed_result()
    cache = StageCache(tmp_path / "stages")
    cache.save("load", "k" * 64, original)
    back = cache.load("load", "k" * 64)
    write_table(original["clinical"], tmp_path / "fresh.tsv", index=True)
    write_table(back["clinical"], tmp_path / "cached.tsv", index=True)
    assert (tmp_path / "fresh.tsv").read_bytes() == (tmp_path / "cached.tsv").read_bytes()


def test_object_arrays_of_other_things_are_refused() -> None:
    with pytest.raises(TypeError):
        encode({"bad": np.array([{"a": 1}], dtype=object)})


def test_result_counts_as_finished_only_with_its_json(tmp_path) -> None:
    cache = StageCache(tmp_path)
    key = stage_key("sweep", {"counts": [2, 3]}, {})
    assert not cache.has("sweep", key)
    cache.save("sweep", key, {"x": np.ones(3)})
    assert cache.has("sweep", key)
    next(tmp_path.glob("sweep-*.json")).unlink()  # as if killed between the npz and the json
    assert not cache.has("sweep", key)


def test_keys_depend_on_parameters_and_upstream() -> None:
    base = stage_key("graphs", {"n_neighbours": 10}, {"prepare": "abc"})
    assert base == stage_key("graphs", {"n_neighbours": 10}, {"prepare": "abc"})
    assert base != stage_key("graphs", {"n_neighbours": 11}, {"prepare": "abc"})
    assert base != stage_key("graphs", {"n_neighbours": 10}, {"prepare": "abd"})


class _Quiet:
    def stage_started(self, name, cached):
        pass

    def stage_finished(self, name, key, seconds, cached):
        pass


def _chain(calls: list, middle: int) -> list[Stage]:
    def step(name, value):
        def compute(inputs):
            calls.append(name)
            return {"value": value + sum(v["value"] for v in inputs.values())}

        return compute

    return [
        Stage("first", (), {"a": 1}, step("first", 1)),
        Stage("middle", ("first",), {"b": middle}, step("middle", middle)),
        Stage("last", ("middle",), {}, step("last", 100)),
        Stage("side", ("first",), {}, step("side", 1000)),
    ]


def test_changing_one_parameter_reruns_only_what_depends_on_it(tmp_path) -> None:
    cache = StageCache(tmp_path)
    calls: list[str] = []
    first = Pipeline(_chain(calls, middle=10), cache, _Quiet())
    assert first.result("last") == {"value": 111} and first.result("side") == {"value": 1001}
    assert calls == ["first", "middle", "last", "side"]
    calls.clear()
    again = Pipeline(_chain(calls, middle=10), cache, _Quiet())
    assert again.result("last") == {"value": 111} and again.result("side") == {"value": 1001}
    assert calls == []
    changed = Pipeline(_chain(calls, middle=20), cache, _Quiet())
    assert changed.result("last") == {"value": 121} and changed.result("side") == {"value": 1001}
    assert calls == ["middle", "last"]
    cache.prune(changed.keys)
    assert len(list(tmp_path.glob("*.json"))) == 4


class _Counts:
    """A typed stage result (the cache's Stateful protocol)."""

    def __init__(self, counts: np.ndarray) -> None:
        self.counts = counts

    def to_state(self):
        return {"n": int(self.counts.size)}, {"counts": self.counts}

    @classmethod
    def from_state(cls, state, arrays):
        assert arrays["counts"].size == state["n"]
        return cls(arrays["counts"])


class _Noting(_Quiet):
    def __init__(self) -> None:
        self.notices: list[str] = []

    def notice(self, message):
        self.notices.append(message)


def test_a_typed_result_is_saved_by_its_state_and_rebuilt_by_its_class(tmp_path) -> None:
    def stages(calls: list) -> list[Stage]:
        return [Stage("sweep", (), {}, lambda inputs: calls.append(1) or _Counts(np.arange(4)), result_type=_Counts),
                Stage("select", ("sweep",), {}, lambda inputs: {"total": int(inputs["sweep"].counts.sum())})]

    calls: list = []
    assert Pipeline(stages(calls), StageCache(tmp_path), _Quiet()).result("select") == {"total": 6}
    again = Pipeline(stages(calls), StageCache(tmp_path), _Quiet()).result("sweep")
    assert isinstance(again, _Counts) and again.counts.tolist() == [0, 1, 2, 3] and calls == [1]


def test_an_entry_of_the_other_kind_is_computed_again_with_a_notice(tmp_path) -> None:
    cache, listener = StageCache(tmp_path), _Noting()
    pipeline = Pipeline([Stage("sweep", (), {}, lambda inputs: _Counts(np.arange(3)), result_type=_Counts)],
                        cache, listener)
    cache.save("sweep", pipeline.keys["sweep"], {"counts": np.arange(3)})  # as a plain record, like an older run
    assert pipeline.result("sweep").counts.tolist() == [0, 1, 2]
    assert len(listener.notices) == 1 and "holds no state" in listener.notices[0]


def test_a_dataclass_of_codec_values_round_trips_by_its_fields(tmp_path) -> None:
    @dataclass(frozen=True)
    class Fit(CodecState):
        count: int
        table: pd.DataFrame
        affinity: sp.csr_matrix

    fresh = Fit(3, _mixed_result()["clinical"], sp.identity(4, format="csr"))
    cache = StageCache(tmp_path)
    cache.save("final_fit", "k" * 64, fresh)
    back = cache.load("final_fit", "k" * 64, Fit)
    assert back.count == 3 and (back.affinity != fresh.affinity).nnz == 0
    pd.testing.assert_frame_equal(back.table, fresh.table)
