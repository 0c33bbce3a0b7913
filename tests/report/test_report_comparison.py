"""The comparison page and figure of `strataweave compare`: counts as pandas counts them, offline, with the caution."""

from __future__ import annotations

import html
import re
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from strataweave.caution import CAUTION
from strataweave.report.comparison_view import ComparisonView
from strataweave.report.figure_style import new_figure, report_style
from strataweave.report.figures_comparison import FIGURE_SIZE, draw_comparison
from strataweave.report.render import render_comparison
from strataweave.subtypes.compare import compare_partitions

HOSTILE_LABEL = '<b>S9</b>$x$&"'


class _Cells(HTMLParser):
    """The text of every <td> of a page, row by row."""

    def __init__(self) -> None:
        super().__init__()
        self.rows: list[list[str]] = []
        self._in_cell = False

    def handle_starttag(self, tag, attrs):
        if tag == "tr":
            self.rows.append([])
        self._in_cell = self._in_cell or tag == "td"

    def handle_endtag(self, tag):
        self._in_cell = self._in_cell and tag != "td"

    def handle_data(self, data):
        if self._in_cell:
            self.rows[-1].append(data)


@pytest.fixture(scope="module")
def partitions() -> tuple[pd.Series, pd.Series]:
    """Two invented labelings of 90 patients that mostly agree, with one hostile label, and patients only in one."""
    rng = np.random.default_rng(3)
    patients = pd.Index([f"PATIENT-{i:03d}" for i in range(90)])
    a = pd.Series(rng.choice(["S1", "S2", "S3", HOSTILE_LABEL], size=90), index=patients)
    b = a.map({"S1": "S1", "S2": "S2", "S3": "S3", HOSTILE_LABEL: "S3"}).where(rng.random(90) > 0.2, "S1")
    return a.iloc[5:], b.iloc[:-5]


def _view(a: pd.Series, b: pd.Series) -> ComparisonView:
    comparison = compare_partitions(a, b)
    return ComparisonView("run one", "run <two>", comparison.contingency, comparison.ari, comparison.nmi,
                          comparison.n_patients, CAUTION)


def _crosstab(a: pd.Series, b: pd.Series) -> pd.DataFrame:
    """The reference: pandas.crosstab of the patients labelled in both runs."""
    shared = a.index.intersection(b.index)
    return pd.crosstab(a.loc[shared], b.loc[shared])


def test_heatmap_counts_and_flow_totals_equal_pandas_crosstab(partitions) -> None:
    a, b = partitions
    view = _view(a, b)
    with report_style():
        fig = new_figure(FIGURE_SIZE)
        draw_comparison(view, fig)
    heatmap, flow = [ax for ax in fig.axes if ax.images or ax.patches][:2]
    expected = _crosstab(a, b).loc[view.labels_a, view.labels_b].to_numpy()
    drawn = np.array([int(t.get_text()) for t in heatmap.texts]).reshape(expected.shape)
    assert np.array_equal(drawn, expected)
    node_texts = [t.get_text() for t in flow.texts if not t.get_bbox_patch()]  # band numbers sit in a box
    totals = [int(text.rsplit(" ", 1)[1]) for text in node_texts]
    assert totals == [*expected.sum(axis=1), *expected.sum(axis=0)]
    band_numbers = sorted(int(t.get_text()) for t in flow.texts if t.get_bbox_patch())
    assert set(band_numbers) <= set(expected[expected > 0].ravel())


def test_page_and_figure_written_offline_with_the_caution_and_no_patient_ids(partitions, tmp_path: Path) -> None:
    a, b = partitions
    written = render_comparison(tmp_path, _view(a, b))
    page = written["html"].read_text(encoding="utf-8")
    assert written["figure"].read_bytes().startswith(b"\x89PNG")
    svg = (tmp_path / "comparison.svg").read_text(encoding="utf-8")
    for sentence in ("Research use only.", "Not for clinical decisions", "licensed clinicians", "local regulations"):
        assert sentence in svg
    assert page.count(html.escape(CAUTION, quote=False)) == 2
    assert not re.search(r"(src|href)=\"(?!data:|#)", page) and "http" not in page.replace(
        "http-equiv", "")
    assert "PATIENT-" not in page and "PATIENT-" not in svg
    assert HOSTILE_LABEL not in page and "&lt;b&gt;S9&lt;/b&gt;" in page
    parser = _Cells()
    parser.feed(page)
    rows = [row for row in parser.rows if row]
    expected = _crosstab(a, b)
    body = {row[0]: [int(cell) for cell in row[1:-1]] for row in rows[:-1]}
    assert body == {str(label): list(counts) for label, counts in zip(expected.index, expected.to_numpy())}
    assert int(rows[-1][-1]) == expected.to_numpy().sum() == len(a.index.intersection(b.index))
