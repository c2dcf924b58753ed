"""Samplers written as a user would, shared by the engine tests."""

from __future__ import annotations

import numpy as np

import forestlab as fl


class FirstPlusOne(fl.CandidateSampler):
    """Feature 0 and one other at random (one or two candidates a node, so unequal counts per node): the
    sampler of ``CandidateSampler``'s docstring example, line for line."""

    def draw(self, rng, nodes, features):
        mask = np.zeros((nodes, features), dtype=bool)
        mask[:, 0] = True
        mask[np.arange(nodes), rng.integers(0, features, size=nodes)] = True
        return mask
