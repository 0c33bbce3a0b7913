"""The answer of a run in a few sentences: each finding is a headline (a slide title) and its numbers.

Read from results.json alone; the report's summary panel and the slides' titles both come from here.
Nothing is tested again: a finding only picks, among the numbers of the run, the ones that answer.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from strataweave.report.formatting import format_p, format_value
from strataweave.report.run_folder import RunView
from strataweave.report.wording import column_words, listing, words

SIGNIFICANT = 0.05  # adjusted p below which a difference is called clear (common practice)


@dataclass(frozen=True)
class Finding:
    """One answer: `headline` is a sentence, `detail` the numbers behind it."""

    topic: str
    headline: str
    detail: str


def _share(size: int, total: int) -> str:
    return f"{100 * size / max(total, 1):.0f}%"


def count_finding(run: RunView) -> Finding:
    """How many subtypes, and why that count."""
    k, word = run.results["subtype_count"], run.group_word
    sizes = run.results["subtypes"]["sizes"]
    listed = ", ".join(f"{label} {size} ({_share(size, sum(sizes))})" for label, size in zip(run.labels, sizes))
    if not run.has("selection"):
        return Finding("count", f"{k} {word}s were given for evaluation", f"Patients per {word}: {listed}.")
    selection = run.results["selection"]
    if selection.get("overridden"):
        headline = f"{k} subtypes were used, as fixed by the user"
    else:
        headline = f"The data support {k} subtypes"
    return Finding("count", headline, f"{selection['reason']} Patients per subtype: {listed}.")


def _by_group(rows: list[dict], key: str) -> dict[str, float]:
    return {str(r["group"]): r[key] for r in rows if r.get(key) is not None}


def survival_finding(run: RunView) -> Finding:
    """Which group fares worst, with the log-rank p, the RMST and the Cox hazard ratio behind it."""
    survival = run.results["survival"]
    if survival.get("not_tested"):
        return Finding("survival", "Survival could not be compared", survival["not_tested"])
    p_value = survival["logrank"]["p_value"]
    rmst = _by_group(survival.get("rmst") or [], "rmst")
    parts = [f"log-rank p = {format_p(p_value)}"]
    worst = min(rmst, key=rmst.get) if rmst else None
    if worst is not None:
        best = max(rmst, key=rmst.get)
        unit = f" {survival['time_unit']}" if survival.get("time_unit") else ""
        horizon = format_value(survival.get("rmst_horizon"))
        parts.append(f"restricted mean survival up to {horizon}{unit}: {worst} {format_value(rmst[worst])}, "
                     f"{best} {format_value(rmst[best])}")
        medians = _by_group(survival.get("medians") or [], "median")
        if worst in medians:
            parts.append(f"median survival of {worst} {format_value(medians[worst])}{unit}")
        ratio = next((r for r in survival.get("cox") or [] if r["term"].startswith(f"group {worst} vs ")), None)
        if ratio and ratio.get("hazard_ratio") is not None:
            parts.append(f"hazard ratio {ratio['term'].removeprefix('group ')} "
                         f"{format_value(ratio['hazard_ratio'])} (95% CI {format_value(ratio['ci_lower'])}"
                         f"-{format_value(ratio['ci_upper'])})")
    if p_value is not None and p_value < SIGNIFICANT and worst is not None:
        headline = f"{run.group_word.capitalize()} {worst} has the worst survival"
    else:
        headline = f"Survival does not differ clearly between the {run.group_word}s"
    return Finding("survival", headline, "; ".join(parts) + ".")


def _effect(row: dict) -> str:
    name = words(str(row.get("effect_size_name") or "effect size"))
    return f"{words(str(row['test']))}, {name} {format_value(row.get('effect_size'))}"


def clinical_finding(run: RunView) -> Finding:
    """The clinical variable that differs most between groups; a tie in adjusted p is said as a tie."""
    tested = [r for r in run.results["clinical"] if r.get("p_adjusted") is not None]
    if not tested:
        return Finding("clinical", "No clinical variable could be tested", "Every variable was left untested.")
    lowest = min(r["p_adjusted"] for r in tested)
    tied = [r for r in tested if math.isclose(r["p_adjusted"], lowest, rel_tol=1e-9)]
    names = [column_words(str(r["variable"])) for r in tied]
    effects = "; ".join(f"{name}: {_effect(r)}" for name, r in zip(names, tied))
    if lowest >= SIGNIFICANT:
        return Finding("clinical", f"No clinical variable differs clearly between the {run.group_word}s",
                       f"Lowest adjusted p = {format_p(lowest)} ({effects}).")
    if len(tied) == 1:
        return Finding("clinical", f"The {run.group_word}s differ most in {names[0]}",
                       f"{effects}; adjusted p = {format_p(lowest)}.")
    return Finding("clinical", f"The {run.group_word}s differ in {listing(names)}, tied for the strongest",
                   f"{len(tied)} variables share the lowest adjusted p = {format_p(lowest)} (the "
                   f"Benjamini-Hochberg adjustment gives them one value); {effects}.")


def _strongest_marker(block: dict) -> dict:
    return max(block["rows"], key=lambda r: abs((r.get("auc") or 0.5) - 0.5))


def molecular_finding(run: RunView) -> Finding:
    """Per modality, the marker that separates one group from the rest best (AUC furthest from 0.5)."""
    blocks = [b for b in run.results["markers"] if b["rows"]]
    if not blocks:
        return Finding("markers", f"No marker separates a {run.group_word} from the rest",
                       "No feature passed the marker threshold in any modality.")
    strongest = [(b["modality"], _strongest_marker(b)) for b in blocks]
    modality, top = max(strongest, key=lambda pair: abs(pair[1]["auc"] - 0.5))
    lines = "; ".join(f"{m}: {r['feature']} {'higher' if r['effect'] > 0 else 'lower'} in {r['subtype']} "
                      f"(AUC {format_value(r['auc'])}, difference {format_value(r['effect'])} SD)" for m, r in strongest)
    return Finding("markers", f"{top['feature']} ({modality}) marks {run.group_word} {top['subtype']} most strongly",
                   lines + ".")


def enrichment_finding(run: RunView) -> Finding:
    """The most over-represented gene set of any group's markers."""
    top = min(run.results["enrichment"], key=lambda r: r["p_adjusted"] if r["p_adjusted"] is not None else 1.0)
    return Finding("enrichment", f"Markers of {top['subtype']} are over-represented in {top['gene_set']}",
                   f"{top['overlap']} of the set's {top['set_size']} measured members are markers of {top['subtype']}; "
                   f"adjusted p = {format_p(top['p_adjusted'])}.")


def findings(run: RunView) -> list[Finding]:
    """The findings this run has, in the order a reader asks for them."""
    found = [count_finding(run)]
    if run.has("survival"):
        found.append(survival_finding(run))
    if run.has("clinical"):
        found.append(clinical_finding(run))
    if run.has("markers"):
        found.append(molecular_finding(run))
    if run.has("enrichment"):
        found.append(enrichment_finding(run))
    return found


def headline(found: list[Finding], topic: str, fallback: str) -> str:
    """The headline of the finding on `topic`, or `fallback` when the run has none."""
    return next((f.headline for f in found if f.topic == topic), fallback)
