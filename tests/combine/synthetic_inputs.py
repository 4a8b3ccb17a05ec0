"""Small invented inputs that follow the stage contracts (notes in analog/study.py and the
result contracts), for testing combine, regions and figures without running the evidence stages.

Everything here is made up: fictional taxa (Genus names "Alpha".."Theta"), fictional regions on a
grid near 40-44°N, 10-16°E.
"""
from __future__ import annotations

from types import SimpleNamespace

import geopandas as gpd
import numpy as np
import pandas as pd
from scipy.special import expit, logit
from shapely.geometry import Polygon, box

from analog.study import Study, StudyConfig

GENERA = ["Alpha", "Beta", "Gamma", "Delta", "Epsilon", "Zeta", "Eta", "Theta"]
FAMILIES = ["Aidae", "Bidae", "Cidae", "Didae"]


def make_taxa(n: int = 40) -> pd.DataFrame:
    ids = [f"t{i:03d}" for i in range(n)]
    genus = [GENERA[i % len(GENERA)] for i in range(n)]
    family = [FAMILIES[(i % len(GENERA)) // 2] for i in range(n)]
    return pd.DataFrame({
        "taxon_id": ids, "scientificName": [f"{g} species{i}" for i, g in enumerate(genus)],
        "taxonRank": "species", "kingdom": "Animalia", "phylum": "Mollusca",
        "class": ["Bivalvia" if f in ("Aidae", "Bidae") else "Gastropoda" for f in family],
        "order": ["Ordo" + f[0] for f in family], "family": family, "genus": genus,
        "extant": True,
    })


def make_regions() -> gpd.GeoDataFrame:
    """Six regions: a 3 x 2 grid of 2° cells; R2 has a hole holding the small island region R6;
    R5 is tiny (few records, to be flagged)."""
    cells = {"R1": box(10, 42, 12, 44), "R3": box(14, 42, 16, 44),
             "R4": box(10, 40, 12, 42), "R5": box(12, 40, 12.3, 40.3)}
    outer = [(12, 42), (14, 42), (14, 44), (12, 44)]
    hole = [(12.8, 42.8), (13.2, 42.8), (13.2, 43.2), (12.8, 43.2)]
    cells["R2"] = Polygon(outer, [hole])
    cells["R6"] = box(12.9, 42.9, 13.1, 43.1)  # island inside R2's hole (the hole rim stays empty)
    ids = sorted(cells)
    names = {"R1": "North Fen", "R2": "Lake Ring", "R3": "East Downs", "R4": "South Moor",
             "R5": "Pebble Cove", "R6": "Isle Middle"}
    return gpd.GeoDataFrame({"region_id": ids, "name": [names[i] for i in ids]},
                            geometry=[cells[i] for i in ids], crs="EPSG:4326")


def make_occurrences(taxa: pd.DataFrame, regions: gpd.GeoDataFrame, rng: np.random.Generator,
                     per_taxon: int = 12) -> pd.DataFrame:
    rows = []
    k = 0
    lon_lo, lat_lo, lon_hi, lat_hi = 10, 40, 16, 44
    for t in taxa["taxon_id"]:
        lon = rng.uniform(lon_lo, lon_hi, per_taxon)
        lat = rng.uniform(lat_lo, lat_hi, per_taxon)
        for x, y in zip(lon, lat):
            rows.append((f"o{k:05d}", t, y, x))
            k += 1
    # a few records in the small regions and a few outside every region
    for i, (x, y) in enumerate([(12.1, 40.1), (12.2, 40.2), (13.0, 43.0), (13.05, 42.95), (20.0, 50.0)]):
        rows.append((f"o{k:05d}", taxa["taxon_id"].iloc[i], y, x))
        k += 1
    return pd.DataFrame(rows, columns=["occurrenceID", "taxon_id", "decimalLatitude", "decimalLongitude"])


def make_study(n_taxa: int = 40, seed: int = 7) -> Study:
    rng = np.random.default_rng(seed)
    taxa = make_taxa(n_taxa)
    regions = make_regions()
    occ = make_occurrences(taxa, regions, rng)
    cfg = StudyConfig(name="Synthetic check study", seed=seed, folder=None, data_date="2026-11-01")
    empty = pd.DataFrame(columns=["occurrenceID", "taxon_id", "oldest_ma", "youngest_ma",
                                  "decimalLatitude", "decimalLongitude", "locationID"])
    return Study(config=cfg, taxa=taxa, fossil_occurrences=empty, modern_occurrences=occ, regions=regions,
                 intervals=pd.DataFrame(), context=None)


def _draws(p: np.ndarray, ids, rng, n_draws: int, spread: float) -> pd.DataFrame:
    d = expit(logit(p)[:, None] + rng.normal(0, spread, (len(p), n_draws)))
    return pd.DataFrame(d, index=pd.Index(ids, name="taxon_id"), columns=range(n_draws))


def make_lines(study: Study, *, seed: int = 11, n_draws: int = 200, skill=(0.72, 0.64),
               analog_missing: int = 3, trajectory_missing: int = 4):
    """An AnalogResult-like and a TrajectoryResult-like object with correlated risks.

    The first ``analog_missing`` taxa lack an analog estimate, the last ``trajectory_missing``
    lack a trajectory estimate.
    """
    rng = np.random.default_rng(seed)
    ids = study.taxa["taxon_id"].to_numpy()
    names = study.taxa["scientificName"].to_numpy()
    n = len(ids)
    latent = rng.normal(0, 1.2, n)
    pa = expit(latent + rng.normal(0, 0.6, n) - 0.5)
    pt = expit(latent + rng.normal(0, 0.9, n) - 0.8)
    a_ok = np.arange(n) >= analog_missing
    t_ok = np.arange(n) < n - trajectory_missing
    risk_a = pd.DataFrame({"taxon_id": ids, "scientificName": names, "analog_p": np.where(a_ok, pa, np.nan),
                           "analog_low": np.where(a_ok, pa * 0.6, np.nan),
                           "analog_high": np.where(a_ok, 1 - (1 - pa) * 0.6, np.nan),
                           "n_relatives": 5, "note": ""})
    terms = ["depth_zone[slope]", "depth_zone[basin]", "body_size", "larval_mode[direct]"]
    contrib = pd.DataFrame([(t, term, float(c)) for t in ids[a_ok] for term, c in
                            zip(terms, rng.normal(0, 0.8, len(terms)))],
                           columns=["taxon_id", "term", "log_odds_contribution"])
    analog = SimpleNamespace(risk=risk_a, risk_draws=_draws(pa[a_ok], ids[a_ok], rng, n_draws, 0.5),
                             contributions=contrib, skill=skill[0])
    models = np.array(["rise-and-fall", "random walk", "random walk with drift", "stasis"])
    pref = models[rng.integers(0, 4, n)]
    risk_t = pd.DataFrame({"taxon_id": ids, "scientificName": names, "trajectory_p": np.where(t_ok, pt, np.nan),
                           "trajectory_low": np.where(t_ok, pt * 0.5, np.nan),
                           "trajectory_high": np.where(t_ok, 1 - (1 - pt) * 0.5, np.nan),
                           "preferred_model": np.where(t_ok, pref, None),
                           "note": np.where(pref == "rise-and-fall", "past its occupancy peak", "")})
    traj = SimpleNamespace(risk=risk_t, risk_draws=_draws(pt[t_ok], ids[t_ok], rng, n_draws, 0.7),
                           skill=skill[1])
    return analog, traj
