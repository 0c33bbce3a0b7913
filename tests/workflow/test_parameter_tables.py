"""One parameter table per estimator, read by the estimator, the workflow file's reader and the reference."""

from __future__ import annotations

import dataclasses
import inspect
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from workflow_files import MINIMAL

from strataweave import InputError
from strataweave import GraphFusion, SubtypeSweep
from strataweave.factorize import JointNMF
from strataweave.factorize.joint_nmf import PARAMETERS as NMF
from strataweave.graph import fuse_modalities
from strataweave.graph.fusion import PARAMETERS as FUSION
from strataweave.subtypes.settings import PARAMETERS as SWEEP
from strataweave.subtypes.settings import SweepSettings
from strataweave.workflow.config import (
    FactorizationSettings, GraphSettings, ResamplingSettings, SubtypeSettings, parse_workflow, workflow_reference,
)

TABLES = {"JointNMF": NMF, "fuse_modalities": FUSION, "SweepSettings": SWEEP}


@pytest.mark.parametrize("estimator, tables", [
    (JointNMF, [NMF]), (fuse_modalities, [FUSION]), (GraphFusion, [FUSION]), (SweepSettings, [SWEEP]),
    (SubtypeSweep, [SWEEP, NMF]),
])
def test_the_tables_defaults_are_the_estimators_defaults(estimator, tables):
    signature = inspect.signature(estimator).parameters
    for table in tables:
        shared = [name for name in table if name in signature]
        assert shared, estimator
        for name in shared:
            assert signature[name].default == table[name].default, (estimator, name)
    if len(tables) == 1 and estimator is not GraphFusion:
        assert set(tables[0]) <= set(signature)  # every row is one of the estimator's parameters


def test_every_workflow_key_of_an_estimators_parameter_is_its_table_row():
    read = 0
    for section in (GraphSettings, FactorizationSettings, SubtypeSettings, ResamplingSettings):
        for field in dataclasses.fields(section):
            rows = [table[field.name] for table in TABLES.values() if field.name in table]
            if not rows:
                continue
            row = rows[0]
            assert (field.default, field.metadata["rule"], field.metadata["doc"]) == (row.default, row.rule, row.help)
            read += 1
    assert read >= 20
    reference = workflow_reference()
    assert f"| `tol` | {NMF['tol'].rule.expected} | {NMF['tol'].default:g} | {NMF['tol'].help} |" in reference


@pytest.mark.parametrize("section, key, python_value, toml_value, expected", [
    ("factorization", "max_iter", 0, "0", "an integer >= 1"),
    ("resampling", "n_resamples", 1, "1", "an integer >= 2"),
    ("graph", "kernel", "laplace", "'laplace'", "one of 'scaled_exponential', 'gaussian'"),
])
def test_the_estimator_and_the_workflow_file_expect_the_same(tiny_files: Path, section, key, python_value,
                                                             toml_value, expected):
    with pytest.raises(InputError, match=f"key '{section}.{key}': found .*, expected {expected}"):
        parse_workflow(MINIMAL + f"\n[{section}]\n{key} = {toml_value}\n", tiny_files / "flow.toml")
    rng = np.random.default_rng(0)
    views = [np.abs(rng.normal(size=(20, 5))) for _ in range(2)]
    with pytest.raises(InputError, match=rf"^{key}: found {python_value!r}; expected {expected}"):
        if section == "factorization":
            JointNMF(2, **{key: python_value}).fit(views)
        elif section == "resampling":
            SweepSettings(**{key: python_value})
        else:
            fuse_modalities({"a": pd.DataFrame(views[0])}, **{key: python_value})


@pytest.mark.filterwarnings("ignore:JointNMF stopped at max_iter")
def test_a_numpy_whole_number_is_a_whole_number():
    views = [np.abs(np.random.default_rng(1).normal(size=(20, 5)))]
    assert JointNMF(np.int64(2), max_iter=np.int64(5)).fit(views).patient_factor_.shape == (20, 2)
    with pytest.raises(InputError, match="max_iter: found True; expected an integer >= 1"):
        JointNMF(2, max_iter=True).fit(views)


def test_every_subtype_sweep_parameter_goes_where_a_table_says():
    # SubtypeSweep hands each parameter to the sweep or the NMF by the table whose row it is
    own = {"counts", "modality_weights", "backend", "n_jobs", "scheduler", "random_state"}
    routed = set(SubtypeSweep().get_params()) - own
    assert routed == (routed & set(SWEEP)) | (routed & set(NMF)) and not set(SWEEP) & set(NMF)
    assert routed & set(NMF) == {"graph_weight", "max_iter", "tol", "init", "n_restarts"}
