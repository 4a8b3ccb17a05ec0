"""Shared builders for the trajectory tests: small invented studies with known histories."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from analog.study import Study, StudyConfig


def make_study(taxa: pd.DataFrame, occurrences: pd.DataFrame, intervals: pd.DataFrame | None = None) -> Study:
    """A Study holding only what the trajectory stage reads."""
    if intervals is None:
        intervals = pd.DataFrame({"interval_id": pd.Series(dtype=str), "name": pd.Series(dtype=str),
                                  "oldest_ma": pd.Series(dtype=float), "youngest_ma": pd.Series(dtype=float)})
    taxa = taxa.copy()
    if "scientificName" not in taxa:
        taxa["scientificName"] = "Genus " + taxa["taxon_id"].astype(str)
    return Study(config=StudyConfig(name="test", seed=1, folder=Path(".")), taxa=taxa,
                 fossil_occurrences=occurrences, modern_occurrences=pd.DataFrame(), regions=None,
                 intervals=intervals)


def simulate_histories(curves: dict[str, np.ndarray], *, extant: dict[str, bool], n_sites: int = 60,
                       bin_width: float = 10.0, seed: int = 0) -> Study:
    """Occurrences drawn from planted occupancy curves.

    ``curves[name][j]`` is the chance that the taxon occurs at a site in bin ``j``
    (bin 0 is the youngest). Each bin has ``n_sites`` localities, all sampled by a
    filler taxon so every site counts as sampled; ages sit inside the bin.
    """
    rng = np.random.default_rng(seed)
    n_bins = len(next(iter(curves.values())))
    rows = []
    for j in range(n_bins):
        young, old = j * bin_width, (j + 1) * bin_width
        for s in range(n_sites):
            loc = f"L{j}_{s}"
            lat, lon = rng.uniform(-60, 60), rng.uniform(-170, 170)
            rows.append(("filler", young + 1, old - 1, lat, lon, loc))
            for name, p in curves.items():
                if rng.random() < p[j]:
                    rows.append((name, young + 1, old - 1, lat, lon, loc))
    occ = pd.DataFrame(rows, columns=["taxon_id", "youngest_ma", "oldest_ma", "decimalLatitude",
                                      "decimalLongitude", "locationID"])
    occ.insert(0, "occurrenceID", [f"o{i}" for i in range(len(occ))])
    names = ["filler"] + list(curves)
    taxa = pd.DataFrame({"taxon_id": names, "extant": [True] + [extant[n] for n in curves]})
    return make_study(taxa, occ)


def planted_histories(seed: int = 3) -> Study:
    """Twelve planted histories over 20 bins: hats, declines and flat lines."""
    n = 20
    j = np.arange(n)           # bin index, 0 = youngest
    curves, extant = {}, {}
    for i in range(4):          # extinct hats ending at bins 2..5
        end = 2 + i
        peak = end + 6
        p = 0.45 * np.exp(-((j - peak) / 3.0) ** 2)
        p[(j < end) | (j > peak + 7)] = 0.0
        curves[f"hat{i}"], extant[f"hat{i}"] = p, False
    for i in range(4):          # extant, declining toward the present
        p = np.clip(0.03 + 0.025 * (j - 1) * (1 + 0.2 * i), 0, 0.6)
        p[j > 14] = 0.0
        curves[f"decline{i}"], extant[f"decline{i}"] = p, True
    for i in range(4):          # extant, flat
        p = np.where(j <= 14, 0.3 + 0.02 * i, 0.0)
        curves[f"flat{i}"], extant[f"flat{i}"] = p, True
    study = simulate_histories(curves, extant=extant, seed=seed)
    # an extant taxon without any fossil record: must get NaN and a note, never a number
    extra = pd.DataFrame({"taxon_id": ["nofossil"], "extant": [True], "scientificName": ["Genus nofossil"]})
    study.taxa = pd.concat([study.taxa, extra], ignore_index=True)
    return study

