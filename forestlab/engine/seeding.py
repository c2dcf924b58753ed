"""Where randomness comes from: one root ``SeedSequence``, one child per tree.

Tree ``b`` draws its bootstrap sample and all its candidate features from
``SeedSequence(root.entropy, spawn_key=root.spawn_key + (b,))`` and nothing else, so a forest is the same
whatever the number of workers, the batching of trees or the order in which trees finish, and trees added
later continue the numbering.
"""

from __future__ import annotations

import numbers

import numpy as np

__all__ = ["check_rng", "root_seed", "tree_seed", "tree_generator"]


def check_rng(rng: object) -> None:
    """Raise if ``rng`` is not None, a non-negative int, a SeedSequence or a Generator (draws nothing)."""
    if rng is None or isinstance(rng, (np.random.SeedSequence, np.random.Generator)):
        return
    if isinstance(rng, (bool, np.bool_)) or not isinstance(rng, numbers.Integral):
        raise TypeError(
            f"`rng` must be None, a non-negative int, a numpy SeedSequence or a numpy Generator; "
            f"got {type(rng).__name__}"
        )
    if rng < 0:
        raise ValueError(f"`rng` must be non-negative when an int; got {rng}")


def root_seed(rng: object) -> np.random.SeedSequence:
    """Normalise ``rng`` (None, int, SeedSequence or Generator) to the forest's root SeedSequence.

    A Generator is advanced by one draw of 128 bits of entropy, as is usual for spawning from a user's
    generator; an int or SeedSequence gives the same forest every time.
    """
    check_rng(rng)
    if rng is None:
        return np.random.SeedSequence()
    if isinstance(rng, np.random.SeedSequence):
        return rng
    if isinstance(rng, np.random.Generator):
        entropy = rng.integers(0, 2**63, size=2, dtype=np.int64)
        return np.random.SeedSequence([int(e) for e in entropy])
    return np.random.SeedSequence(int(rng))


def tree_seed(root: np.random.SeedSequence, b: int) -> np.random.SeedSequence:
    """The SeedSequence child of tree ``b``: same as ``root.spawn(b + 1)[b]`` on a fresh root."""
    return np.random.SeedSequence(root.entropy, spawn_key=tuple(root.spawn_key) + (int(b),),
                                  pool_size=root.pool_size)


def tree_generator(root: np.random.SeedSequence, b: int) -> np.random.Generator:
    """The Generator tree ``b`` draws everything from."""
    return np.random.default_rng(tree_seed(root, b))
