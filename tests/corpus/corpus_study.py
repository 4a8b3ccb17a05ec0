"""A tiny but complete invented study that runs through every stage, and a writer for it.

Each corpus case starts from :func:`tiny_study` (20 invented taxa, 300 fossil and
120 modern occurrences, three square regions) and spoils it in one way, either in
the tables and config before ``write()`` or in the written files afterwards.
Everything here is invented: taxa, places and numbers come from a seeded generator.
"""
from __future__ import annotations

import copy
import hashlib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
from shapely.geometry import Polygon
from study_files import StudyFiles

N_TAXA = 20
N_EXTANT = 12
FOSSILS_PER_TAXON = 15
MODERN_PER_TAXON = 10

_NAMES = ["Corvalla", "Drimesta", "Fenoria", "Galtrina", "Heskova", "Imbrella", "Jorvasta", "Kelmira",
          "Lotrevia", "Mordessa", "Nalvoria", "Orpessa", "Pyrlitha", "Quennara", "Rastolva", "Sindrella",
          "Tovarra", "Umbreska", "Vastrina", "Wendolla"]
# Last appearance windows of the extinct taxa: inside three built-in warming intervals
# (toa 184.5-181.5, ctb 95-93.5, petm 57-55 Ma) so that every interval has losses.
_LOSS_AGES = [183.0, 182.5, 182.0, 94.5, 94.2, 93.9, 56.5, 55.8]

CONFIG = {
    "study": {"name": "Corpus study of the invented Halvren Shelf", "seed": 11},
    "inputs": {"taxa": "taxa.csv", "fossil_occurrences": "fossil_occurrences.csv",
               "modern_occurrences": "modern_occurrences.csv", "regions": "regions.gpkg"},
    "traits": {
        "depth_zone": {"kind": "categorical", "levels": ["shelf", "slope", "basin"]},
        "body_size": {"kind": "ordinal", "levels": ["small", "medium", "large"]},
        "length_mm": {"kind": "numeric"},
        "planktonic": {"kind": "binary"},
    },
    "scenario": {"warming_c": 4.0},
    # fewer resamples than the defaults keep a full run to a few seconds
    "analog": {"age_draws": 4, "n_bootstrap": 10, "min_at_risk": 5, "ci_method": "wald"},
    "trajectory": {"age_draws": 4, "n_bootstrap": 10, "n_null": 200, "n_skill_boot": 100, "subsample_reps": 4},
}


def make_tables(seed: int = 20261):
    """Taxa, fossil and modern occurrences and regions of the tiny study (all text columns)."""
    rng = np.random.default_rng(seed)
    ids = [f"T{i:02d}" for i in range(1, N_TAXA + 1)]
    extant = np.arange(N_TAXA) < N_EXTANT
    families = ["Corvallidae", "Fenoriidae", "Heskovidae", "Lotreviidae"]
    taxa = pd.DataFrame({
        "taxon_id": ids,
        "scientificName": _NAMES,
        "taxonRank": ["genus"] * N_TAXA,
        "kingdom": ["Animalia"] * N_TAXA,
        "phylum": ["Mollusca"] * N_TAXA,
        "class": ["Bivalvia"] * N_TAXA,
        "order": ["Halvrenida" if i % 4 < 2 else "Skorrida" for i in range(N_TAXA)],
        "family": [families[i % 4] for i in range(N_TAXA)],
        "genus": _NAMES,
        "extant": ["true" if e else "false" for e in extant],
        "depth_zone": [("shelf", "slope", "basin")[i % 3] for i in range(N_TAXA)],
        "body_size": [("small", "medium", "large")[(i // 2) % 3] for i in range(N_TAXA)],
        "length_mm": [f"{v:.1f}" for v in rng.uniform(5, 60, N_TAXA)],
        "planktonic": ["yes" if i % 2 else "no" for i in range(N_TAXA)],
    })
    first = rng.uniform(195.0, 215.0, N_TAXA)
    last = np.where(extant, rng.uniform(1.0, 4.0, N_TAXA), 0.0)
    last[~extant] = _LOSS_AGES
    rows = []
    k = 0
    for t in range(N_TAXA):
        # first and last occurrence pin the range ends; the rest fall between them
        mids = np.r_[first[t], last[t], rng.uniform(last[t], first[t], FOSSILS_PER_TAXON - 2)]
        for m in mids:
            k += 1
            half = 0.25
            rows.append({"occurrenceID": f"F{k:04d}", "taxon_id": ids[t],
                         "oldest_ma": f"{m + half:.3f}", "youngest_ma": f"{max(m - half, 0.0):.3f}",
                         "decimalLatitude": f"{rng.uniform(0, 30):.4f}", "decimalLongitude": f"{rng.uniform(0, 30):.4f}",
                         "locationID": f"L{rng.integers(1, 61):03d}"})
    fossils = pd.DataFrame(rows)
    mrows = []
    k = 0
    for t in np.flatnonzero(extant):
        for _ in range(MODERN_PER_TAXON):
            k += 1
            r = rng.integers(0, 3)  # one of the three square regions on the diagonal
            mrows.append({"occurrenceID": f"M{k:04d}", "scientificName": _NAMES[t],
                          "decimalLatitude": f"{10 * r + rng.uniform(0.5, 9.5):.4f}",
                          "decimalLongitude": f"{10 * r + rng.uniform(0.5, 9.5):.4f}"})
    modern = pd.DataFrame(mrows)
    regions = gpd.GeoDataFrame(
        {"region_id": ["R1", "R2", "R3"], "name": ["Inner Halvren", "Middle Halvren", "Outer Halvren"]},
        geometry=[Polygon([(10 * r, 10 * r), (10 * r + 10, 10 * r), (10 * r + 10, 10 * r + 10), (10 * r, 10 * r + 10)])
                  for r in range(3)],
        crs="EPSG:4326")
    return taxa, fossils, modern, regions


class TinyStudy(StudyFiles):
    """Tables and config of the tiny study; change them, then ``write()`` puts them in ``folder``."""

    def __init__(self, folder: Path, seed: int = 20261):
        self.folder = Path(folder)
        self.taxa, self.fossils, self.modern, self.regions = make_tables(seed)
        self.config = copy.deepcopy(CONFIG)
        self.sep = ","
        self.encoding = "utf-8"


def tree_hashes(folder: Path) -> dict[str, str]:
    """sha256 of every file under ``folder`` (relative path -> hex digest); {} if absent."""
    folder = Path(folder)
    if not folder.exists():
        return {}
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}
