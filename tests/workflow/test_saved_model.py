"""A damaged model folder is bad input (exit 2 with one line), never an internal error."""

from __future__ import annotations

import json

import numpy as np
import pytest

from strataweave import InputError
from strataweave.subtypes.model import MODEL_ARRAYS, MODEL_FORMAT, MODEL_JSON, SubtypeModel


def _model_folder(folder, description) -> None:
    folder.mkdir()
    (folder / MODEL_JSON).write_text(json.dumps(description))
    np.savez(folder / MODEL_ARRAYS, centres=np.eye(2))


@pytest.mark.parametrize(
    ("description", "named"),
    [
        ({"format": MODEL_FORMAT, "subtypes": ["S1", "S2"]}, "'modalities'"),
        ({"format": MODEL_FORMAT, "modalities": [{"name": "rna"}]}, "'kind'"),
        (["not", "a", "model"], "model.json: holds a JSON list"),
        ({"format": "other/1"}, "'format'"),
    ],
)
def test_a_damaged_model_is_bad_input_naming_the_key(tmp_path, description, named) -> None:
    _model_folder(tmp_path / "model", description)
    with pytest.raises(InputError, match=named) as raised:
        SubtypeModel.load(tmp_path / "model")
    assert "\n" not in str(raised.value)
