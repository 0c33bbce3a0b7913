"""The generated methods paragraph and the number formats of tables and slides."""

from __future__ import annotations

import re

from report_fixture import make_results

from strataweave.report.formatting import format_p, format_value, plot_text
from strataweave.report.methods_text import REFERENCES, methods_paragraph
from strataweave.report.tables import criteria_table, rows_table


def test_methods_paragraph_uses_the_parameters_given():
    results, _ = make_results()
    text, cited = methods_paragraph(results)
    assert "(graph weight 0.5, 3 restarts)" in text
    assert "20 resamples of 0.8 of the patients" in text and "window 0.1-0.9" in text
    assert "adjusted for age_years" in text and "seed 20261201" in text
    assert "up to 36 months" in text
    numbers = [int(n) for group in re.findall(r"\[([\d, ]+)\]", text) for n in group.split(", ")]
    assert sorted(set(numbers)) == list(range(1, len(cited) + 1))
    assert numbers == sorted(numbers), "references are numbered in order of first citation"
    assert set(cited) <= set(REFERENCES)


def test_methods_paragraph_invents_no_parameter():
    results, _ = make_results(survival=False, markers=False)
    results.pop("parameters")
    results.pop("clinical")
    text, cited = methods_paragraph(results)
    assert "graph weight" not in text and "seed" not in text and not re.search(r"\d resamples", text)
    assert "Kaplan-Meier" not in text and "kaplan1958" not in cited
    assert "Benjamini" not in text


def test_number_formats():
    assert format_p(0.0123) == "0.0123"
    assert format_p(0.00012) == "1.20e-04"
    assert format_p(None) == "not tested"
    assert format_value(None) == "\u2013" and format_value(True) == "yes" and format_value(12) == "12"
    assert format_value([2, 3]) == "2, 3"
    assert plot_text("cost $5 and $6") == r"cost \$5 and \$6"


def test_tables_keep_every_column_and_format_p_columns():
    table = rows_table([{"variable": "age", "p_value": 0.00001, "effect": 0.123456}, {"variable": "sex", "extra": 1}])
    assert table.header == ["variable", "p value", "effect", "extra"]
    assert table.rows[0] == ["age", "1.00e-05", "0.123", "\u2013"]
    assert table.rows[1] == ["sex", "not tested", "\u2013", "1"]
    results, _ = make_results()
    criteria = criteria_table(results["selection"])
    assert criteria.header[0] == "subtype count" and [row[0] for row in criteria.rows] == ["2", "3", "4"]
