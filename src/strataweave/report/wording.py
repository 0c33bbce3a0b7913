"""Words for people in place of machine names: tests, statistics, filter steps, settings, columns.

The machine names stay in results.json and the TSV tables; the HTML report, the figures and the
slides show these words instead.
"""

from __future__ import annotations

import re

WORDS: dict[str, str] = {
    # tests and effect sizes
    "kruskal_wallis": "Kruskal-Wallis",
    "chi_square": "chi-square",
    "chi_square_monte_carlo": "chi-square, Monte Carlo p",
    "fisher_exact": "Fisher's exact",
    "mann_whitney": "Mann-Whitney U",
    "welch": "Welch's t-test",
    "cramers_v": "Cram\u00e9r's V",
    "epsilon_squared": "epsilon squared",
    "not tested": "not tested",
    # filter and preprocessing steps
    "missing_filter": "missing values",
    "variance_filter": "near-constant",
    "top_features": "most variable",
    "kind_transform": "transform",
    "split_signs": "sign split",
    "quantile_normalise": "quantile normalisation",
    "zscore": "z-score",
    # settings
    "scaled_exponential": "scaled exponential",
    "gaussian": "Gaussian",
    "log_expression": "log expression",
    "copy_number": "copy number",
    "log2_cpm": "log2 counts per million",
    "m_values": "M-values",
    # criteria
    "pac": "PAC",
    "cophenetic": "cophenetic correlation",
    "reconstruction_error": "reconstruction error",
    "smallest_subtype": "smallest subtype",
    "smallest_size": "smallest subtype",
    # table columns
    "p_value": "p",
    "p_adjusted": "adjusted p",
    "effect_size": "effect size",
    "effect_size_name": "effect size measure",
    "n_used": "patients used",
    "n_missing": "patients missing",
    "anova_statistic": "ANOVA F",
    "anova_p_value": "ANOVA p",
    "hazard_ratio": "hazard ratio",
    "ci_lower": "95% CI, lower",
    "ci_upper": "95% CI, upper",
    "group_a": "group",
    "group_b": "against",
    "confirmed_share": "confirmed share",
    "fallback_patients": "fallback patients",
}

#: Columns whose cells hold machine words (shown through WORDS); other cells are shown as they are.
WORD_COLUMNS = frozenset({"test", "effect_size_name", "step", "kind", "status"})

_UNIT = re.compile(r"^(.+?)_(years|months|weeks|days|kg|cm|mm|percent)$")


def words(name: str) -> str:
    """A machine name in words: the table above, else underscores as spaces."""
    return WORDS.get(name, name.replace("_", " "))


def column_words(name: str) -> str:
    """A clinical column name for people: 'age_years' -> 'age (years)', other underscores as spaces."""
    match = _UNIT.match(name)
    if match:
        return f"{match.group(1).replace('_', ' ')} ({match.group(2)})"
    return name.replace("_", " ")


def term_words(term: str, covariates: list[str]) -> str:
    """A Cox term for people: 'group S2 vs S1' -> 'S2 vs S1', a covariate's column name in words
    ('age_years' -> 'age (years)')."""
    for name in sorted(covariates, key=len, reverse=True):
        if term == name or term.startswith(name + " "):
            return column_words(name) + term[len(name):]
    return term.removeprefix("group ")


def listing(items: list[str]) -> str:
    """'a', 'a and b', 'a, b and c'."""
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]
