"""The knobs of a subtype-count sweep, checked once so bad input fails before any work."""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import asdict, dataclass

from strataweave.errors import InputError
from strataweave.parameters import Parameter, check_parameters, choice, flag, integer, list_of, number
from strataweave.subtypes.consensus import check_window
from strataweave.subtypes.partitions import PARTITION_SOURCES


START_FROM = ("graph", "init")
LABELS_FROM = ("best_fit", *PARTITION_SOURCES)


#: The sweep's parameters: rule, default and help; SweepSettings takes its defaults from here and
#: checks its values against it once, the workflow's [subtypes] and [resampling] keys read it.
PARAMETERS = {
    "n_resamples": Parameter(integer(2), 50, "resamples per subtype count"),
    "fraction": Parameter(number(maximum=1, above=0), 0.8, "share of patients per resample"),
    "feature_fraction": Parameter(number(maximum=1, above=0), 1.0, "share of features per resample"),
    "pac_window": Parameter(list_of(number(0, 1), "two numbers between 0 and 1, lower first"), (0.1, 0.9),
                            "consensus values counted as ambiguous by PAC"),
    "pac_tolerance": Parameter(number(minimum=0), 0.01, "PAC differences below this are ties"),
    "min_size": Parameter(integer(1), None, "never recommend a count with a smaller subtype "
                                            "(default: 2 % of the patients, at least 5)"),
    "core_threshold": Parameter(number(0, 1), 0.8, "mean consensus with the own subtype"),
    "user_count": Parameter(integer(2), None, "a count fixed by the user instead of the rule's"),
    "resample_restarts": Parameter(integer(1), 1, "NMF restarts per resample"),
    "warm_start": Parameter(flag(), False, "start resamples from the full-data factors"),
    "start_from": Parameter(choice(*START_FROM), "graph", "graph: start each fit from the spectral partition of "
                                                            "its fused graph; init: from `init`"),
    "labels_from": Parameter(choice(*LABELS_FROM), "best_fit", "best_fit: the candidate partition that agrees best "
                             "with the others and the modalities' own partitions; or one candidate"),
}


@dataclass(frozen=True)
class SweepSettings:
    """How the sweep resamples and judges.

    n_resamples: resamples per count (each draws `fraction` of the patients and, optionally,
    `feature_fraction` of each modality's features). pac_window: consensus values counted as
    ambiguous. min_size: smallest subtype size a recommended count may have (None:
    `default_min_size` of the cohort). pac_tolerance: PAC differences below it count as ties
    (see recommend.RULE). core_threshold: mean
    consensus with the own subtype above which a patient is core. user_count: a count fixed
    by the user instead of the rule. resample_restarts: NMF restarts per resample (the lowest
    objective wins). One by default: with the graph start, random restarts that reach a lower
    objective gave worse subtypes on the validity panel (ARI 0.88 -> 0.63 and 0.88 -> 0.70 on two
    invented cohorts), so the lowest objective is not the better partition there.
    warm_start: start each resample from the full-data factors of its count (faster, but the
    resamples then share a starting point, which can make the consensus look crisper).
    start_from: "graph" starts every fit from the spectral partition of its own (resampled)
    fused graph at that count, "init" from the factorisation's own `init`. The graph start
    puts the NMF in the basin of the partition the modalities agree on and lets the data
    term refine it; restarts after the first are random either way.
    labels_from: "best_fit" takes, at each count, the candidate partition of the full-data
    fit that agrees best with the other candidates and the modalities' own partitions, and the
    resamples of that count repeat that candidate (see `partitions`); a candidate's name ("joint_model",
    "fused_graph", "concatenation") takes that one always.
    """

    n_resamples: int = PARAMETERS["n_resamples"].default
    fraction: float = PARAMETERS["fraction"].default
    feature_fraction: float = PARAMETERS["feature_fraction"].default
    pac_window: tuple[float, float] = PARAMETERS["pac_window"].default
    pac_tolerance: float = PARAMETERS["pac_tolerance"].default
    min_size: int | None = PARAMETERS["min_size"].default
    core_threshold: float = PARAMETERS["core_threshold"].default
    user_count: int | None = PARAMETERS["user_count"].default
    resample_restarts: int = PARAMETERS["resample_restarts"].default
    warm_start: bool = PARAMETERS["warm_start"].default
    start_from: str = PARAMETERS["start_from"].default
    labels_from: str = PARAMETERS["labels_from"].default

    def __post_init__(self) -> None:
        check_parameters(PARAMETERS, asdict(self))
        object.__setattr__(self, "pac_window", check_window(self.pac_window))

    def to_dict(self) -> dict:
        """Plain JSON-ready parameters."""
        values = asdict(self)
        values["pac_window"] = list(self.pac_window)
        return values


def check_counts(counts: Iterable[int], n_patients: int, min_size: int) -> list[int]:
    """Sorted distinct subtype counts >= 2, without those that cannot give every subtype `min_size` patients.

    A workflow written for many cohorts may list counts too large for a small one: those are
    left out (the result's `counts` shows what was swept); only a list with none left is an error.
    """
    found = list(counts)
    if not found:
        raise InputError("counts: found none; expected subtype counts such as 2..8")
    for count in found:
        if isinstance(count, bool) or not isinstance(count, int) or count < 2:
            raise InputError(f"counts: found {count!r}; expected whole numbers >= 2")
    feasible = sorted({count for count in found if count * min_size <= n_patients})
    if not feasible:
        raise InputError(
            f"counts: found {', '.join(map(str, sorted(set(found))))}, each leaving fewer than min_size={min_size} "
            f"patients per subtype among {n_patients}; expected counts up to {n_patients // min_size}"
        )
    return feasible


def default_min_size(n_patients: int) -> int:
    """Smallest subtype a recommended count may have when the user sets none: 2 % of the
    patients, at least 5 (a rule of thumb, common practice: smaller groups are anecdotes)."""
    return max(5, math.ceil(0.02 * n_patients))
