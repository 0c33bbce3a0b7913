"""Permutation p-values computed on many shuffled label rows at once, in memory-bounded chunks."""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from strataweave.seeding import as_generator

CHUNK_CELLS = 4_000_000


def permutation_p(
    statistic: Callable[[np.ndarray], np.ndarray],
    codes: np.ndarray,
    n_permutations: int,
    random_state=None,
    cells_per_row: int | None = None,
    progress: Callable[[int], None] | None = None,
) -> float:
    """(1 + #{statistic of shuffled codes >= observed}) / (1 + n_permutations).

    `statistic` maps a (rows x patients) array of label codes to one value per row; the observed
    value is that of `codes` itself. `cells_per_row` sizes the chunks (default: number of patients).
    `progress`, when given, is called with the number of permutations done after each chunk.
    """
    observed = statistic(codes[None, :])[0]
    tolerance = 1e-9 * max(1.0, abs(observed))
    rng = as_generator(random_state)
    chunk = max(1, CHUNK_CELLS // (cells_per_row or codes.size))
    at_least_as_large = 0
    done = 0
    while done < n_permutations:
        rows = min(chunk, n_permutations - done)
        shuffled = rng.permuted(np.broadcast_to(codes, (rows, codes.size)), axis=1)
        at_least_as_large += int(np.count_nonzero(statistic(shuffled) >= observed - tolerance))
        done += rows
        if progress is not None:
            progress(done)
    return (1 + at_least_as_large) / (1 + n_permutations)
