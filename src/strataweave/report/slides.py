"""PDF slides for a lab meeting: at most 12 16:9 pages telling the report's story, each titled by a sentence."""

from __future__ import annotations

import io
import math

from matplotlib.backends.backend_pdf import PdfPages

from strataweave.report import figures_biology, figures_cohort, figures_evidence, figures_outcome
from strataweave.report import figures_selection, figures_subtypes
from strataweave.report.figure_catalogue import marker_blocks
from strataweave.report.figure_style import report_style
from strataweave.report.findings import findings, headline
from strataweave.report.formatting import format_p, format_value
from strataweave.report.run_folder import RunView
from strataweave.report.slide_pages import SlideDeck
from strataweave.report.tables import clinical_summary_table, rows_table
from strataweave.report.wording import column_words, listing

MAX_SLIDES = 12
MARKER_PANELS = 4


def _title_lines(run: RunView, answer: str) -> list[str]:
    cohort = run.results["cohort"]
    layers = len(cohort["modalities"])
    lines = [f"{cohort['patients']} patients, {layers} omics layer{'' if layers == 1 else 's'}", answer]
    if "created" in run.manifest:
        lines.append(f"run started {run.manifest['created']}")
    return lines + ["details, tables, methods and the rerun command: report.html"]


def _cohort_title(run: RunView) -> str:
    layers = len(run.results["cohort"]["modalities"])
    return f"{run.results['cohort']['patients']} patients were profiled on {layers} omics layer{'s' * (layers != 1)}"


def _consensus_title(run: RunView) -> str:
    selection, k = run.results["selection"], run.results["subtype_count"]
    pac = selection["criteria"].get("pac")
    if not pac or k not in selection["counts"] or pac[selection["counts"].index(k)] is None:
        return f"Resamples group the patients consistently into {k} subtypes"
    share = pac[selection["counts"].index(k)]
    if share < 0.0005:
        return f"At {k} subtypes, almost no pair of patients is grouped ambiguously across resamples"
    return f"At {k} subtypes, {100 * share:.1f}% of patient pairs are grouped ambiguously across resamples"


def _sizes_title(run: RunView) -> str:
    sizes = run.results["subtypes"]["sizes"]
    text = f"The {run.group_word}s hold {min(sizes)} to {max(sizes)} patients each"
    if not run.groups_given:
        core = int(run.arrays["core"].sum())
        text += f"; {core} of {sum(sizes)} patients are core"
    return text


def _hazards_note(survival: dict) -> str:
    """The proportional-hazards check in one short sentence (the advice is in report.html)."""
    check = survival.get("ph_global")
    if not check:
        return ""
    p_value = f"global Schoenfeld test p = {format_p(check['p_value'])}"
    if survival.get("ph_warning"):
        return (f"Hazards not proportional ({p_value}): each ratio is an average over follow-up; read the "
                "restricted mean survival (report.html).")
    return f"No clear departure from proportional hazards ({p_value})."


def _cox_title(run: RunView) -> tuple[str, str]:
    """The group term with the largest hazard ratio away from 1, in words, and the model's note."""
    survival = run.results["survival"]
    terms = [r for r in survival["cox"] if r["term"].startswith("group ") and r.get("hazard_ratio")]
    adjusted = listing([column_words(c) for c in run.covariates]) if run.covariates else ""
    note = (f"Cox model adjusted for {adjusted}. " if adjusted else "Cox model. ") + _hazards_note(survival)
    if not terms:
        return "Hazard ratios of the Cox model", note
    strongest = max(terms, key=lambda r: abs(math.log(r["hazard_ratio"])))
    group, reference = strongest["term"].removeprefix("group ").split(" vs ", 1)
    return (f"{group} has {format_value(strongest['hazard_ratio'])} times the hazard of {reference}", note)


def _clinical_page(deck: SlideDeck, run: RunView, title: str) -> None:
    if run.has("clinical_summary"):
        deck.table_page(title, clinical_summary_table(run.results["clinical_summary"]),
                        "n (%) within the group or median [IQR]; test and adjusted p on each variable's first row")
    else:
        deck.table_page(title, rows_table(run.results["clinical"],
                                          ["variable", "test", "effect_size", "effect_size_name", "p_adjusted"]))


def render_slides(run: RunView) -> bytes:
    """The slide deck as PDF bytes: title, answer, cohort, count, subtypes, outcome, clinical, biology."""
    results = run.results
    found = findings(run)
    buffer = io.BytesIO()
    with report_style(), PdfPages(buffer, metadata={"Title": run.title, "Creator": "strataweave",
                                                    "CreationDate": None}) as pdf:
        deck = SlideDeck(run, pdf)
        answer = headline(found, "count", "")
        deck.lines_page(run.title, _title_lines(run, answer), size=20)
        deck.findings_page(f"In short: {answer[:1].lower()}{answer[1:]}", found, run.not_run_sentences())
        if run.has_modalities:
            deck.figure_page(_cohort_title(run), [figures_cohort.draw_presence, figures_cohort.draw_filters])
        if run.has("selection"):
            selection = results["selection"]
            deck.figure_page(answer, [figures_evidence.draw_count_evidence],
                             f"Recommended: {selection['recommended']}. {selection['reason']}")
            deck.figure_page(_consensus_title(run), [figures_selection.draw_consensus])
            if selection.get("flow"):
                deck.figure_page("Subtypes split, and patients move, as the count grows",
                                 [figures_selection.draw_split_flow])
        subtype_draws = [figures_subtypes.draw_sizes]
        if "embedding" in run.arrays:
            subtype_draws.insert(0, figures_subtypes.draw_embedding)
        deck.figure_page(_sizes_title(run), subtype_draws)
        if run.has("survival"):
            survival = results["survival"]
            deck.figure_page(headline(found, "survival", "Survival by subtype"), [figures_outcome.draw_kaplan_meier],
                             survival.get("not_tested") or "")
            if survival["cox"]:
                title, note = _cox_title(run)
                deck.figure_page(title, [figures_outcome.draw_forest], note)
        if run.has("clinical"):
            _clinical_page(deck, run, headline(found, "clinical", "Clinical variables by subtype"))
        blocks = marker_blocks(run)[:MARKER_PANELS]
        if blocks:
            hidden = len(marker_blocks(run)) - len(blocks)
            deck.figure_page(headline(found, "markers", "Markers per subtype"),
                             [lambda r, c, i=index: figures_biology.draw_marker_heatmap(r, c, i) for index, _ in blocks],
                             f"{hidden} more modalities in report.html" if hidden else "")
        if run.has("enrichment") and figures_biology.enrichment_rows(run):
            deck.figure_page(headline(found, "enrichment", "Gene sets of the markers"), [figures_biology.draw_enrichment])
    return buffer.getvalue()
