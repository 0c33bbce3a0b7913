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
    assert "adjusted for age (years)" in text and "seed 20261201" in text
    assert "up to 36 months" in text
    numbers = [int(n) for group in re.findall(r"\[([\d, ]+)\]", text) for n in group.split(", ")]
    assert sorted(set(numbers)) == list(range(1, len(cited) + 1))
    assert numbers == sorted(numbers), "references are numbered in order of first citation"
    assert set(cited) <= set(REFERENCES)


def test_methods_paragraph_names_each_preprocessing_step_and_the_software_version():
    results, _ = make_results(modality_names=("rna", "methylation", "protein"))
    modalities = results["parameters"]["modalities"]
    modalities[2].update(kind="abundance", impute="none", top_features=None, quantile_normalise=True,
                         max_missing_fraction=0.35, non_negative="shift")
    text, _ = methods_paragraph(results, "9.8.7")
    assert "using strataweave 9.8.7." in text
    sentences = {name: re.search(rf"Preprocessing of {name}: (.*?)\.\s(?=[A-Z])", text).group(1)
                 for name in ("rna", "methylation", "protein")}
    assert "log2 counts per million (prior count 0.5)" in sentences["rna"]
    assert "median ratio to the cohort's mean profile" in sentences["rna"] and "failed libraries" in sentences["rna"]
    assert "anders2010" in methods_paragraph(results)[1]
    assert "imputed from the 10 nearest patients" in sentences["rna"]
    assert "M-values" in sentences["methylation"] and "imputed by the feature median" in sentences["methylation"]
    for name in ("rna", "methylation"):
        assert "missing in more than 20% of the patients" in sentences[name]
        assert "the 500 features of highest variance (all, where fewer) were kept" in sentences[name]
        assert "centred and scaled to unit variance and split into its positive and negative parts" in sentences[name]
    protein = sentences["protein"]
    assert "log2 abundances" in protein and "quantile normalised" in protein and "35%" in protein
    assert "not imputed" in protein and "shifted to be non-negative" in protein and "were kept" not in protein
    assert "scaled exponential kernel" in text and "scaled_exponential" not in text
    assert "rank-based competitive test" in text
    assert "mean consensus with its own subtype across the resamples was at least 0.8" not in text
    modalities[0]["library_size"] = "total"
    total_text, total_cited = methods_paragraph(results)
    assert "of each patient's total count" in total_text and "anders2010" not in total_cited
    results["parameters"]["subtypes"]["core_threshold"] = 0.8
    assert "at least 0.8" in methods_paragraph(results)[0]
    assert "strataweave (version not recorded)" in methods_paragraph(results)[0]


def test_methods_paragraph_says_when_neighbours_were_found_approximately():
    results, _ = make_results()
    graph = results["graph"]
    graph.update(neighbour_search={"rna": "exact", "methylation": "exact"}, neighbour_search_requested="auto",
                 approximate_above=3000)
    text, cited = methods_paragraph(results)
    assert "approximately" not in text and "dong2011" not in cited
    graph["neighbour_search"]["methylation"] = "approximate"
    text, cited = methods_paragraph(results)
    assert ("found approximately, by nearest-neighbour descent" in text and "in methylation, exactly in the others "
            "(the automatic rule searches approximately in a modality of more than 3000 patients" in text)
    assert "dong2011" in cited
    graph.update(neighbour_search={"rna": "approximate", "methylation": "approximate"},
                 neighbour_search_requested="approximate")
    text, _ = methods_paragraph(results)
    assert "in rna and methylation (as the workflow asked)" in text


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


def test_tables_show_machine_names_in_words():
    results, _ = make_results()
    clinical = rows_table(results["clinical"])
    shown = {cell for row in clinical.rows for cell in row} | set(clinical.header)
    assert {"chi-square", "Kruskal-Wallis", "Cram\u00e9r's V", "epsilon squared", "age (years)", "adjusted p"} <= shown
    assert not any("_" in cell for cell in shown)


def test_tables_keep_every_column_and_format_p_columns():
    table = rows_table([{"variable": "age", "p_value": 0.00001, "effect": 0.123456}, {"variable": "sex", "extra": 1}])
    assert table.header == ["variable", "p", "effect", "extra"]
    assert table.rows[0] == ["age", "1.00e-05", "0.123", "\u2013"]
    assert table.rows[1] == ["sex", "not tested", "\u2013", "1"]
    results, _ = make_results()
    criteria = criteria_table(results["selection"])
    assert criteria.header[0] == "subtype count" and [row[0] for row in criteria.rows] == ["2", "3", "4"]
