"""Fusion rules that combine the kernel values of several modalities pair by pair.

`values` is a pairs x modalities array with NaN where a patient of the pair lacks that
modality; every pair has at least one value. Each rule looks only at the modalities that
both patients have.
"""

from __future__ import annotations

import numpy as np

from strataweave.errors import InputError

RULES = ("auto", "intersection", "quorum", "average", "diffusion")


def check_quorum(rule: str, quorum: int | None, n_modalities: int) -> None:
    """InputError for a quorum missing, misplaced or outside 1..n (the rule itself: its parameter table)."""
    if rule != "quorum":
        if quorum is not None:
            raise InputError(f"quorum: found {quorum!r} with rule {rule!r}; expected it only with rule 'quorum'")
        return
    if isinstance(quorum, bool) or not isinstance(quorum, (int, np.integer)) or not 1 <= quorum <= n_modalities:
        raise InputError(
            f"quorum: found {quorum!r}; expected a whole number from 1 to {n_modalities} (the number of modalities)"
        )


def quorum_values(values: np.ndarray, quorum: int) -> np.ndarray:
    """The q-th largest value per pair, q capped at the number of modalities the pair shares.

    q = number of modalities gives the minimum (intersection), q = 1 the maximum (union).
    """
    descending = -np.sort(-values, axis=1)  # NaN sort last
    shared = np.count_nonzero(~np.isnan(values), axis=1)
    position = np.minimum(quorum, shared) - 1
    return descending[np.arange(len(values)), position]


def combine_values(values: np.ndarray, rule: str, quorum: int | None = None) -> np.ndarray:
    """Fused value per pair under `intersection`, `quorum` or `average`."""
    if rule == "intersection":
        return np.nanmin(values, axis=1)
    if rule == "quorum":
        return quorum_values(values, quorum)
    if rule == "average":
        return np.nanmean(values, axis=1)
    raise InputError(f"fusion rule: found {rule!r}; expected intersection, quorum or average here")
