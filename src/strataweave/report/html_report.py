"""The self-contained HTML report: jinja2 with autoescaping, figures inlined, no network requests."""

from __future__ import annotations

import base64
import shlex
from typing import Any

import numpy as np
from jinja2 import Environment, PackageLoader, StrictUndefined

from strataweave.caution import CAUTION
from strataweave.report.figure_catalogue import DrawnFigure
from strataweave.report.figures_modalities import map_notes
from strataweave.report.figures_outcome import logrank_sentence
from strataweave.report.findings import findings
from strataweave.report.formatting import format_p, format_value
from strataweave.report.methods_text import REFERENCES, methods_paragraph
from strataweave.report.run_folder import RunView
from strataweave.report.tables import clinical_summary_table, criteria_table, modalities_table, rows_table
from strataweave.report.wording import term_words, words

TEMPLATE = "report.html.j2"
#: The clinical tests as shown; clinical.tsv keeps every column (kind, status, the ANOVA beside Kruskal-Wallis).
CLINICAL_COLUMNS = ("variable", "test", "statistic", "df", "effect_size", "effect_size_name", "p_value", "p_adjusted",
                    "n_used", "n_missing")


def template_environment() -> Environment:
    """Autoescaping is on for every template, whatever its file name."""
    return Environment(loader=PackageLoader("strataweave.report", "templates"), autoescape=True,
                       undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)


def _figures_by_section(figures: list[DrawnFigure]) -> dict[str, list[dict[str, str]]]:
    sections: dict[str, list[dict[str, str]]] = {}
    for figure in figures:
        sections.setdefault(figure.plan.section, []).append({
            "name": figure.plan.name,
            "caption": figure.plan.caption,
            "source": "data:image/png;base64," + base64.b64encode(figure.png).decode("ascii"),
        })
    return sections


def _subtype_rows(run: RunView) -> list[dict[str, Any]]:
    codes, core = run.arrays["subtype_code"], run.arrays["core"]
    total = max(sum(run.results["subtypes"]["sizes"]), 1)
    rows = []
    for code, (label, size) in enumerate(zip(run.labels, run.results["subtypes"]["sizes"])):
        member = codes == code
        row = {run.group_word: label, "patients": size, "share": f"{100 * size / total:.1f}%"}
        if not run.groups_given:
            row["core patients"] = int(np.count_nonzero(member & core))
        if run.show_patient_ids:
            row["core patient IDs"] = ", ".join(str(i) for i in run.arrays["patient_ids"][member & core])
        rows.append(row)
    return rows


def _reproducibility(run: RunView) -> dict[str, Any]:
    manifest = run.manifest
    command = manifest.get("command")
    facts = [(key.replace("_", " "), manifest[key]) for key in ("created", "strataweave_version", "python",
                                                                  "platform", "seed") if key in manifest]
    stages = [{"stage": name, "seconds": info.get("seconds") if isinstance(info, dict) else None,
               "cache key": info.get("key") if isinstance(info, dict) else None}
              for name, info in (manifest.get("stages") or {}).items()]
    workflow = manifest.get("workflow") or {}
    return {
        "command": shlex.join(command) if command else None,
        "workflow": {key: workflow.get(key) for key in ("path", "sha256", "text")} if workflow else None,
        "facts": facts,
        "packages": rows_table([{"package": k, "version": v} for k, v in (manifest.get("packages") or {}).items()]),
        "inputs": rows_table([{"input": k, "sha256": v} for k, v in (manifest.get("inputs") or {}).items()]),
        "stages": rows_table(stages),
    }


def _partition_rows(selection: dict[str, Any]) -> list[dict[str, Any]]:
    """The partition chosen at each count and each candidate's agreement with the other partitions."""
    return [{key.replace("agreement_", "agreement, "): value.replace("_", " ") if key == "source" else value
             for key, value in row.items()} for row in selection.get("partitions") or []]


def _split_modalities(results: dict[str, Any]) -> list[str]:
    """Modalities whose kept features reach the factorisation as two columns each (positive and negative parts)."""
    return [str(m["name"]) for m in (results.get("parameters") or {}).get("modalities") or []
            if m.get("non_negative") == "split"]


def report_context(run: RunView, figures: list[DrawnFigure]) -> dict[str, Any]:
    """Everything the template shows, as plain values; user strings stay raw (the template escapes them)."""
    results = run.results
    paragraph, cited = methods_paragraph(results, run.manifest.get("strataweave_version"))
    survival = results.get("survival")
    context: dict[str, Any] = {
        "caution": results.get("caution") or CAUTION,
        "title": run.title,
        "figures": _figures_by_section(figures),
        "subtype_count": results["subtype_count"],
        "group_word": run.group_word,
        "cohort": {"patients": results["cohort"]["patients"],
                   "modalities": modalities_table(results["cohort"]["modalities"])},
        "graph": results.get("graph"),
        "agreement": rows_table(results["graph"]["agreement"]) if run.has("graph") else None,
        "selection": results.get("selection"),
        "criteria": criteria_table(results["selection"]) if run.has("selection") else None,
        "rule_evidence": rows_table((results.get("graph") or {}).get("rule_evidence") or []),
        "partitions": rows_table(_partition_rows(results.get("selection") or {})),
        "subtypes": rows_table(_subtype_rows(run)),
        "show_patient_ids": run.show_patient_ids,
        "subtypes_explained": None if run.groups_given else results["subtypes"].get("core_threshold"),
        "baselines": rows_table(results["baselines"]) if run.has("baselines") else None,
        "survival": survival,
        "logrank": logrank_sentence(survival) if survival else None,
        "findings": findings(run),
        "map_notes": map_notes(run) if run.has_modalities else [],
        "split_features": _split_modalities(results),
        "clinical": rows_table(results["clinical"], CLINICAL_COLUMNS) if run.has("clinical") else None,
        "clinical_summary": clinical_summary_table(results["clinical_summary"]) if run.has("clinical_summary")
        else None,
        "rank_test": rows_table((results.get("enrichment_summary") or {}).get("rank_test_rows") or []),
        "markers": [{"modality": block["modality"], "test": words(block["test"]) if block.get("test") else None,
                     "table": rows_table(block["rows"])}
                    for block in results.get("markers") or []],
        "enrichment": rows_table(results["enrichment"]) if run.has("enrichment") else None,
        "not_run": {section: run.not_run_sentences(section)
                    for section in ("graph_agreement", "survival", "clinical", "markers", "enrichment")},
        "methods": paragraph,
        "references": [REFERENCES[key] for key in cited],
        "reproducibility": _reproducibility(run),
    }
    if survival:
        shown = {**survival, "cox": [{**row, "term": term_words(row["term"], run.covariates)}
                                     for row in survival.get("cox") or []]}
        check = survival.get("ph_global") or {}
        context["ph_global"] = {"statistic": format_value(check.get("statistic")), "df": check.get("df"),
                                "p": format_p(check.get("p_value"))}
        context["ph_terms"] = rows_table([{"term": term_words(r["term"], run.covariates), "statistic": r.get("statistic"),
                                           "p_value": r.get("p_value")} for r in survival.get("ph_check") or []])
        context["survival_tables"] = [
            (title, rows_table(shown[key]))
            for key, title in (("cox", "Cox model"), ("medians", "Median survival"),
                               ("rmst", "Restricted mean survival time"), ("pairwise", "Pairwise log-rank tests"))
            if survival.get(key)
        ]
    return context


def render_html(run: RunView, figures: list[DrawnFigure]) -> str:
    """The report as one HTML string."""
    return template_environment().get_template(TEMPLATE).render(**report_context(run, figures))
