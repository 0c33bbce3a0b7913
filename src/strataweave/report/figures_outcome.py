"""Outcome figures: Kaplan-Meier curves with numbers at risk, and the Cox model's forest plot."""

from __future__ import annotations

import textwrap

import numpy as np
from matplotlib.figure import Figure, SubFigure

from strataweave.report.figure_style import plain_log_ticks
from strataweave.report.formatting import format_p, plot_text, shorten
from strataweave.report.palette import NEUTRAL, NEUTRAL_SHADES, subtype_colour
from strataweave.report.run_folder import RunView
from strataweave.report.wording import term_words

Canvas = Figure | SubFigure
LINE_STYLES = ("-", "--", ":", "-.")


def group_styles(run: RunView) -> list[tuple[str, str]]:
    """(colour, line style) per survival group: subtype colours when the groups are the subtypes."""
    groups = run.survival_groups
    if groups == run.labels:
        return [(subtype_colour(code), "-") for code in range(len(groups))]
    return [(NEUTRAL_SHADES[g % len(NEUTRAL_SHADES)], LINE_STYLES[g % len(LINE_STYLES)]) for g in range(len(groups))]


def logrank_sentence(survival: dict) -> str:
    """The log-rank result in one line, as printed on the figure, the slides and the HTML."""
    if survival.get("not_tested"):
        return f"log-rank: {survival['not_tested']}"
    test = survival["logrank"]
    statistic = "n/a" if test["statistic"] is None else f"{test['statistic']:.2f}"
    permutations = f", {test['permutations']} permutations" if test.get("permutations") else ""
    return (f"log-rank \u03c7\u00b2 = {statistic} (df {test['df']}), p = {format_p(test['p_value'])}; "
            f"permutation p = {format_p(test['p_value_permutation'])}{permutations}")


def time_label(run: RunView) -> str:
    unit = run.results["survival"].get("time_unit")
    return f"time ({plot_text(unit)})" if unit else "time (in the unit of the clinical table's time column)"


def draw_kaplan_meier(run: RunView, fig: Canvas) -> None:
    """Kaplan-Meier curves with 95% bands and a numbers-at-risk table aligned under the time axis."""
    groups = run.survival_groups
    styles = group_styles(run)
    ax, table = fig.subplots(2, 1, sharex=True, height_ratios=[4, 0.28 * len(groups) + 0.5])
    for g, (name, (colour, style)) in enumerate(zip(groups, styles)):
        time = run.arrays[f"km_{g}_time"]
        ax.step(time, run.arrays[f"km_{g}_survival"], where="post", color=colour, linestyle=style, linewidth=2.4,
                label=shorten(plot_text(name), 24))
        ax.fill_between(time, run.arrays[f"km_{g}_lower"], run.arrays[f"km_{g}_upper"], step="post",
                        color=colour, alpha=0.15, linewidth=0)
    ax.set_ylim(0, 1.02)
    ax.set_ylabel("survival probability (0-1)")
    ax.legend(frameon=False, loc="lower left")
    ax.set_title(plot_text(textwrap.fill(logrank_sentence(run.results["survival"]), 70)), fontsize=12)
    ticks = run.arrays["km_at_risk_time"]
    at_risk = run.arrays["km_at_risk"]
    for g, (colour, _) in enumerate(styles):
        table.plot([-0.01], [g], marker="s", markersize=11, color=colour, transform=table.get_yaxis_transform(),
                   clip_on=False)
        for t, n in zip(ticks, at_risk[g]):
            table.text(t, g, str(int(n)), ha="center", va="center", color=NEUTRAL, fontsize=12)
    table.set_ylim(len(groups) - 0.5, -0.5)
    table.set_yticks(range(len(groups)), [shorten(plot_text(name), 14) for name in groups])
    table.set_xticks(ticks)
    table.set_xlabel(time_label(run))
    table.set_title("number at risk", fontsize=12, loc="left")
    table.spines[["left", "top", "right"]].set_visible(False)
    table.tick_params(left=False, pad=14)
    fig.suptitle("Kaplan-Meier survival (95% bands)")


def draw_forest(run: RunView, fig: Canvas) -> None:
    """Hazard ratios with 95% intervals on a log axis; 1 (no effect) marked."""
    rows = run.results["survival"]["cox"]
    ax = fig.subplots()
    positions = np.arange(len(rows))
    estimable = [r for r in rows if None not in (r["hazard_ratio"], r["ci_lower"], r["ci_upper"])]
    values = [v for r in estimable for v in (r["ci_lower"], r["ci_upper"])]
    for position, row in zip(positions, rows):
        if row in estimable:
            ax.plot([row["ci_lower"], row["ci_upper"]], [position, position], color=NEUTRAL, linewidth=2)
            ax.plot(row["hazard_ratio"], position, "s", color=NEUTRAL, markersize=9)
        text = ("not estimable" if row not in estimable else
                f"{row['hazard_ratio']:.2f} ({row['ci_lower']:.2f}-{row['ci_upper']:.2f}), p = {format_p(row['p_value'])}")
        ax.annotate(text, (1.02, position), xycoords=("axes fraction", "data"), va="center", fontsize=12)
    ax.axvline(1.0, color=NEUTRAL, linestyle="--", linewidth=1)
    ax.set_xscale("log")
    plain_log_ticks(ax.xaxis, "25")
    if values:
        low, high = min(values + [1.0]), max(values + [1.0])
        ax.set_xlim(low / 1.3, high * 1.3)
    ax.set_yticks(positions, [shorten(plot_text(term_words(r["term"], run.covariates)), 32) for r in rows])
    ax.set_ylim(len(rows) - 0.5, -0.5)
    ax.set_xlabel("hazard ratio (95% CI, log scale; 1 = no difference)")
    concordance = run.results["survival"].get("concordance")
    extra = f" (concordance {concordance:.2f})" if concordance is not None else ""
    fig.suptitle(f"Cox proportional-hazards model{extra}")
