"""Explicit randomness: one seed per study, one independent stream per stage.

Each top-level stage receives its own ``numpy.random.Generator``; a stage that
needs several streams splits its own with ``Generator.spawn``. Streams do not
depend on which other stages ran, so reruns are identical and stages do not
disturb each other.
"""
from __future__ import annotations

import numpy as np

# Fixed order: a new stage is appended so earlier streams do not move.
STAGES = ("analog", "trajectory", "combine", "regions", "figures")


def stage_generators(seed: int) -> dict[str, np.random.Generator]:
    """One ``numpy.random.Generator`` per stage, spawned from ``seed`` with ``SeedSequence.spawn``."""
    children = np.random.SeedSequence(int(seed)).spawn(len(STAGES))
    return {name: np.random.default_rng(child) for name, child in zip(STAGES, children)}
