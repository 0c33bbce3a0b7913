"""Child seeds from one workflow seed, identical whatever the backend or number of workers."""

from __future__ import annotations

import numpy as np


def child_seeds(seed: int | np.random.SeedSequence | None, n: int) -> list[int]:
    """`n` independent integer seeds spawned from `seed` with numpy's SeedSequence."""
    parent = seed if isinstance(seed, np.random.SeedSequence) else np.random.SeedSequence(seed)
    return [int(child.generate_state(1, dtype=np.uint32)[0]) for child in parent.spawn(n)]


#: The randomised stages of a run, in the order their seeds are spawned from the run's seed.
RUN_STAGES = ("sweep", "evaluate", "graphs")  # new stages go last: earlier seeds stay as they were


def run_seeds(seed: int) -> dict[str, int]:
    """The seed of each randomised stage of a run whose workflow says `seed = <seed>`.

    In Python, `SubtypeSweep(random_state=run_seeds(s)["sweep"])` gives the labels of that run.
    """
    return dict(zip(RUN_STAGES, child_seeds(seed, len(RUN_STAGES))))


def as_generator(random_state: int | np.random.Generator | None) -> np.random.Generator:
    """A numpy Generator from an int seed, an existing Generator, or None (fresh entropy)."""
    if isinstance(random_state, np.random.Generator):
        return random_state
    return np.random.default_rng(random_state)
