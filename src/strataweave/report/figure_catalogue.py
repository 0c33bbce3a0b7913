"""Every figure of the report: its file name, section, caption, size and when it applies."""

from __future__ import annotations

from concurrent.futures import Executor
from dataclasses import dataclass
from functools import partial
from itertools import repeat
from pathlib import Path
from typing import Callable

from strataweave.report import figures_biology, figures_cohort, figures_evidence, figures_outcome
from strataweave.report import figures_modalities, figures_selection, figures_subtypes, figures_volcano
from strataweave.report.drawing_pool import on_run
from strataweave.report.figure_style import FIGURE_SIZE, grid_rows, new_figure, report_style, save_figure
from strataweave.report.run_folder import RunView

FIGURES_DIR = "figures"


@dataclass(frozen=True)
class FigurePlan:
    """One figure to draw: `draw(run, canvas)` fills a figure or a slide's sub-figure."""

    name: str
    section: str
    caption: str
    draw: Callable
    size: tuple[float, float] = FIGURE_SIZE


@dataclass(frozen=True)
class DrawnFigure:
    plan: FigurePlan
    png: bytes


def marker_blocks(run: RunView) -> list[tuple[int, dict]]:
    """(index, block) of the modalities with at least one marker: a heatmap without rows shows nothing."""
    return [(index, block) for index, block in enumerate(run.results.get("markers") or []) if block["rows"]]


def modality_plans(run: RunView) -> list[FigurePlan]:
    """Each layer's map with the separation table, and the factors' shares and top loadings, where the run has them."""
    plans = []
    mapped = figures_modalities.mapped_modalities(run)
    if mapped:
        rows = grid_rows(len(mapped) + 1, figures_modalities.MAP_COLUMNS)
        plans.append(FigurePlan(
            "modality_maps", "modalities",
            "Each omics layer's patients on its first two principal components, coloured by subtype, and how well "
            "the layer keeps each subtype apart (mean silhouette: near 1 apart, near 0 mixed, below 0 closer to "
            "another subtype).", figures_modalities.draw_modality_maps, (12.0, 1.4 + 3.6 * rows)))
    if "factor_contribution" in run.arrays:
        factors = run.arrays["factor_contribution"].shape[1]
        plans += [
            FigurePlan("factor_contributions", "modalities",
                       "The share of each factor's loading that each modality holds; each factor is named by the "
                       "subtype whose patients score highest on it.", figures_modalities.draw_factor_contributions,
                       (11.0, 2.6 + 0.7 * len(run.results["cohort"]["modalities"]))),
            FigurePlan("factor_loadings", "modalities",
                       "The features with the largest loadings on each factor, across all layers.",
                       figures_modalities.draw_factor_loadings,
                       (12.0, 1.4 + 3.3 * grid_rows(factors, figures_modalities.LOADING_COLUMNS))),
        ]
    return plans


def marker_plans(run: RunView) -> list[FigurePlan]:
    """Per modality, the heatmap of its top markers (when it has any) and beside it the volcano of every feature."""
    heatmaps = dict(marker_blocks(run))
    volcanoes = set(figures_volcano.volcano_blocks(run))
    plans = []
    for index, block in enumerate(run.results.get("markers") or []):
        if index in heatmaps:
            plans.append(FigurePlan(f"markers_{index + 1}", "markers", f"Top markers per subtype in {block['modality']}.",
                                    partial(figures_biology.draw_marker_heatmap, index=index), (12.0, 7.0)))
        panels = len(figures_volcano.tested_subtypes(run, index)) if index in volcanoes else 0
        if panels:
            plans.append(FigurePlan(
                f"markers_{index + 1}_volcano", "markers",
                f"Every feature tested in {block['modality']}: difference of means against p, one panel per "
                "subtype; the highest markers are named.", partial(figures_volcano.draw_volcano, index=index),
                (12.0, 1.6 + 3.0 * grid_rows(panels, figures_volcano.COLUMNS))))
    return plans


def plan_figures(run: RunView) -> list[FigurePlan]:
    """The figures this run calls for, in report order; absent sections give no figures."""
    plans = []
    if run.has_modalities:
        plans += [
            FigurePlan("cohort_presence", "cohort", "Patients (columns, ordered by subtype) measured in each modality.",
                       figures_cohort.draw_presence, (11.0, 3.0 + 0.45 * len(run.results["cohort"]["modalities"]))),
            FigurePlan("cohort_filters", "cohort", "Features kept after each filter step, per modality.",
                       figures_cohort.draw_filters, (10.0, 5.0)),
        ]
    if run.has("graph") and run.results["graph"]["agreement"]:
        plans.append(FigurePlan("graph_agreement", "graph",
                                "Mean fraction of shared neighbours between the graphs of two modalities.",
                                figures_cohort.draw_agreement, (7.5, 6.0)))
    if run.has("selection"):
        plans += [
            FigurePlan("selection_evidence", "selection",
                       "The evidence for each subtype count: every criterion at every count, the count used framed.",
                       figures_evidence.draw_count_evidence,
                       (11.0, 1.8 + 0.75 * len(run.results["selection"]["criteria"]))),
            FigurePlan("selection_consensus", "selection",
                       "Consensus of the resamples: the matrix at the count used, and how decisively each count "
                       "groups the pairs of patients.", figures_selection.draw_consensus, (12.0, 6.5)),
        ]
        if run.results["selection"].get("flow"):
            plans.append(FigurePlan("selection_split_flow", "selection",
                                    "How patients move between subtypes from one count to the next; the numbers are patients per "
                                    "subtype and per band.",
                                    figures_selection.draw_split_flow, (11.0, 6.0)))
    sizes_caption = ("Patients per group." if run.groups_given
                     else "Patients per subtype; the solid part are core patients.")
    plans.append(FigurePlan("subtype_sizes", "subtypes", sizes_caption, figures_subtypes.draw_sizes,
                            (9.0, 1.6 + 0.7 * len(run.labels))))
    if "embedding" in run.arrays:
        plans.append(FigurePlan("subtype_embedding", "subtypes", "Two-dimensional spectral embedding of the fused graph.",
                                figures_subtypes.draw_embedding, (10.0, 7.0)))
    if not run.groups_given:
        plans.append(FigurePlan("subtype_confidence", "subtypes",
                                "Distribution of assignment confidence within each subtype.",
                                figures_subtypes.draw_confidence, (9.0, 1.8 + 1.1 * len(run.labels))))
    if run.has("baselines"):
        plans.append(FigurePlan("subtype_baselines", "subtypes", "Agreement of the baseline methods with our subtypes.",
                                figures_subtypes.draw_baselines, (10.0, 1.8 + 0.8 * len(run.results["baselines"]))))
    plans += modality_plans(run)
    if run.has("survival"):
        plans.append(FigurePlan("survival_kaplan_meier", "survival", "Kaplan-Meier curves with numbers at risk.",
                                figures_outcome.draw_kaplan_meier, (11.0, 7.0)))
        if run.results["survival"]["cox"]:
            plans.append(FigurePlan("survival_cox_forest", "survival",
                                    "Hazard ratios of the Cox model with 95% intervals.", figures_outcome.draw_forest,
                                    (12.0, 1.8 + 0.6 * len(run.results["survival"]["cox"]))))
    plans += marker_plans(run)
    if run.has("enrichment") and figures_biology.enrichment_rows(run):
        plans.append(FigurePlan("enrichment_dots", "enrichment", "Top over-represented gene sets per subtype.",
                                figures_biology.draw_enrichment, (12.0, 7.0)))
    return plans


def draw_figure(run: RunView, plan: FigurePlan) -> bytes:
    """Draw one planned figure into run_dir/figures as PNG and SVG; return the PNG bytes."""
    with report_style():
        fig = new_figure(plan.size)
        plan.draw(run, fig)
        return save_figure(fig, Path(run.run_dir) / FIGURES_DIR, plan.name)


def draw_planned(run: RunView, index: int) -> bytes:
    """`draw_figure` of the run's index-th planned figure (what a worker is sent: a number, not a plan)."""
    return draw_figure(run, plan_figures(run)[index])


def draw_figures(run: RunView, progress: Callable[[int], None] | None = None,
                 pool: Executor | None = None) -> list[DrawnFigure]:
    """Draw every planned figure into run_dir/figures as PNG and SVG (on `pool`'s workers when
    given); return them, in plan order, with their PNG bytes.

    Figures of an earlier rendering that this one does not draw (a figure since renamed or left out)
    are removed, so the folder always matches the report.
    """
    folder = Path(run.run_dir) / FIGURES_DIR
    plans = plan_figures(run)
    if pool is None:
        pngs = (draw_figure(run, plan) for plan in plans)
    else:
        pngs = pool.map(on_run, repeat(draw_planned), range(len(plans)))
    drawn = []
    for done, (plan, png) in enumerate(zip(plans, pngs), start=1):
        drawn.append(DrawnFigure(plan, png))
        if progress is not None:
            progress(done)
    names = {figure.plan.name for figure in drawn}
    for stale in [*folder.glob("*.png"), *folder.glob("*.svg")]:
        if stale.stem not in names:
            stale.unlink()
    return drawn
