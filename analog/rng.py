"""Explicit randomness: one seed per study, one independent stream per stage."""
from __future__ import annotations

import numpy as np

# Fixed order: adding a stage appends to the end so earlier streams do not move.
STAGES = ("fates", "selectivity", "matching", "analog_risk", "occupancy", "trajectory_fit",
          "noise_null", "hindcast", "combine", "regions", "figures")


def stage_generators(seed: int) -> dict[str, np.random.Generator]:
    """One ``numpy.random.Generator`` per stage, spawned from ``seed`` with ``SeedSequence.spawn``."""
    children = np.random.SeedSequence(seed).spawn(len(STAGES))
    return {name: np.random.default_rng(child) for name, child in zip(STAGES, children)}
