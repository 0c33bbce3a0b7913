"""Child seeds from one workflow seed, identical whatever the backend or number of workers."""

from __future__ import annotations

import numpy as np


def child_seeds(seed: int | np.random.SeedSequence | None, n: int) -> list[int]:
    """`n` independent integer seeds spawned from `seed` with numpy's SeedSequence."""
    parent = seed if isinstance(seed, np.random.SeedSequence) else np.random.SeedSequence(seed)
    return [int(child.generate_state(1, dtype=np.uint32)[0]) for child in parent.spawn(n)]


def as_generator(random_state: int | np.random.Generator | None) -> np.random.Generator:
    """A numpy Generator from an int seed, an existing Generator, or None (fresh entropy)."""
    if isinstance(random_state, np.random.Generator):
        return random_state
    return np.random.default_rng(random_state)
