"""Random streams: one helper turns any seed into a Generator; campaigns spawn per-job streams."""

import numpy as np


def make_rng(seed=None) -> np.random.Generator:
    """Return a numpy Generator from an int, a SeedSequence, a Generator or None."""
    if isinstance(seed, np.random.Generator):
        return seed
    if isinstance(seed, np.random.SeedSequence):
        return np.random.default_rng(seed)
    return np.random.default_rng(seed)


def child_seed(seed, *indices: int) -> np.random.SeedSequence:
    """SeedSequence for job `indices` (e.g. grid point, realisation) of a campaign seeded by `seed`.

    Uses `spawn_key`, so child (i, j) is the same whether or not the others are ever created; a
    SeedSequence parent keeps its own spawn key in front, so children of different parents differ.
    """
    if isinstance(seed, np.random.SeedSequence):
        return np.random.SeedSequence(seed.entropy, spawn_key=tuple(seed.spawn_key) + tuple(int(i) for i in indices))
    return np.random.SeedSequence(seed, spawn_key=tuple(int(i) for i in indices))


def child_seeds(seed, n: int) -> list:
    """Children 0 .. n-1 of `seed` (`child_seed(seed, j)`), e.g. one for the walkers and one for
    the sampler of a fit. They do not depend on, or change, the parent's spawn counter; with
    seed None the n children share one fresh root."""
    parent = seed if isinstance(seed, np.random.SeedSequence) else np.random.SeedSequence(seed)
    return [child_seed(parent, j) for j in range(n)]
