"""Simulated fossil studies with planted selectivity, for the analog-stage tests.

Every taxon is followed through a sequence of warming intervals: in each one it is
lost with probability expit(a_k + x'beta); between intervals it may go extinct in the
background. Occurrences are placed so that first and last occurrences mark the true
range; the last occurrence of a taxon lost in an interval lies inside that window.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from scipy.special import expit

from analog.study import Study, StudyConfig, TraitSpec

TRAITS = {
    "depth_zone": TraitSpec("depth_zone", "categorical", ("shelf", "slope", "basin"), "shelf", "Depth zone"),
    "body_size": TraitSpec("body_size", "ordinal", ("small", "medium", "large"), None, "Body size"),
    "temp_range": TraitSpec("temp_range", "numeric", None, None, "Thermal range"),
    "calcified": TraitSpec("calcified", "binary", None, None, "Calcified skeleton"),
}

# planted log odds per term (ordinal per step, numeric per SD of a standard normal trait)
BETA = {"depth_zone[slope]": 0.0, "depth_zone[basin]": 1.2, "body_size": -0.6, "temp_range": -0.5,
        "calcified": 0.8}


def simulate_study(seed: int, *, n_taxa: int = 400, n_intervals: int = 5, beta: dict | None = None,
                   intercepts=None, background: float = 0.1, age_halfwidth: float = 0.3,
                   warming=None, ambiguous: float = 0.0) -> tuple[Study, dict]:
    """A Study with planted selectivity; returns (study, truth).

    ``ambiguous``: share of lost taxa given one more occurrence, truly inside the window of
    their loss but dated to a range that runs 1 Myr past the window's young edge (so in
    some age draws they look like survivors).
    """
    rng = np.random.default_rng(seed)
    beta = dict(BETA if beta is None else beta)
    K = n_intervals
    old = 250.0 - 25.0 * np.arange(K)          # window old edges (Ma)
    young = old - 2.0                          # 2 Myr windows
    a = np.full(K, -1.0) if intercepts is None else np.asarray(intercepts, float)
    warm = np.linspace(2.0, 6.0, K) if warming is None else np.asarray(warming, float)

    depth = rng.choice(["shelf", "slope", "basin"], size=n_taxa, p=[0.45, 0.3, 0.25])
    size = rng.choice(["small", "medium", "large"], size=n_taxa)
    temp = rng.normal(10.0, 3.0, size=n_taxa)
    calc = rng.integers(0, 2, size=n_taxa).astype(float)
    size_code = pd.Categorical(size, categories=["small", "medium", "large"]).codes
    lp_traits = (beta["depth_zone[slope]"] * (depth == "slope") + beta["depth_zone[basin]"] * (depth == "basin")
                 + beta["body_size"] * size_code + beta["temp_range"] * (temp - 10.0) / 3.0
                 + beta["calcified"] * calc)

    origin = rng.integers(0, K, size=n_taxa)
    fad = old[origin] + rng.uniform(3.0, 15.0, size=n_taxa)
    lad = np.full(n_taxa, np.nan)
    lost_in = np.full(n_taxa, -1)
    extant = np.zeros(n_taxa, dtype=bool)
    alive = np.ones(n_taxa, dtype=bool)
    for k in range(K):
        risk = alive & (origin <= k)
        dies = risk & (rng.random(n_taxa) < expit(a[k] + lp_traits))
        lost_in[dies] = k
        lad[dies] = rng.uniform(young[k] + age_halfwidth + 0.05, old[k] - age_halfwidth - 0.05, dies.sum())
        alive &= ~dies
        nxt = old[k + 1] if k + 1 < K else 0.0
        bg = alive & (origin <= k) & (rng.random(n_taxa) < background)
        if k + 1 < K:
            lad[bg] = rng.uniform(nxt + 1.0, young[k] - 1.0, bg.sum())
            alive &= ~bg
    survivors = alive & np.isnan(lad)
    ext = survivors & (rng.random(n_taxa) < 0.6)
    extant[ext] = True
    gone = survivors & ~ext
    lad[gone] = rng.uniform(5.0, young[-1] - 1.0, gone.sum())
    lad[ext] = rng.uniform(1.0, young[-1] - 1.0, ext.sum())   # last fossil of an extant taxon

    rows = []
    for t in range(n_taxa):
        n_mid = rng.integers(0, 4)
        centres = np.r_[fad[t], lad[t], rng.uniform(lad[t] + age_halfwidth, fad[t], n_mid)]
        half = np.full(centres.size, age_halfwidth)
        for c, h in zip(centres, half):
            rows.append((f"T{t:04d}", c + h, max(c - h, 0.0)))
        k = lost_in[t]
        if k >= 0 and rng.random() < ambiguous:
            rows.append((f"T{t:04d}", lad[t], young[k] - 1.0))
    occ = pd.DataFrame(rows, columns=["taxon_id", "oldest_ma", "youngest_ma"])
    occ.insert(0, "occurrenceID", [f"O{i:05d}" for i in range(len(occ))])
    occ["decimalLatitude"] = 0.0
    occ["decimalLongitude"] = 0.0
    occ["locationID"] = "L1"

    genus = np.arange(n_taxa) // 4
    taxa = pd.DataFrame({
        "taxon_id": [f"T{t:04d}" for t in range(n_taxa)],
        "scientificName": [f"Genus{g} species{t}" for t, g in enumerate(genus)],
        "taxonRank": "species", "kingdom": "Animalia", "phylum": "Mollusca", "class": "Bivalvia",
        "order": [f"Order{g // 20}" for g in genus], "family": [f"Family{g // 5}" for g in genus],
        "genus": [f"Genus{g}" for g in genus], "extant": extant,
        "depth_zone": pd.Categorical(depth, categories=["shelf", "slope", "basin"]),
        "body_size": pd.Categorical(size, categories=["small", "medium", "large"], ordered=True),
        "temp_range": temp, "calcified": calc,
    })
    for c in ("taxon_id", "scientificName", "taxonRank", "kingdom", "phylum", "class", "order", "family", "genus"):
        taxa[c] = taxa[c].astype("str")
    intervals = pd.DataFrame({
        "interval_id": [f"W{k}" for k in range(K)], "name": [f"Warming {k}" for k in range(K)],
        "oldest_ma": old, "youngest_ma": young, "warming_c": warm, "warming_low_c": np.nan,
        "warming_high_c": np.nan, "province": "", "source": "simulated", "note": "",
    })
    config = StudyConfig(name="simulated", seed=seed, folder=Path("."), warming_c=4.0, traits=dict(TRAITS))
    study = Study(config=config, taxa=taxa, fossil_occurrences=occ,
                  modern_occurrences=pd.DataFrame(columns=["occurrenceID", "taxon_id", "decimalLatitude",
                                                           "decimalLongitude"]),
                  regions=None, intervals=intervals)
    truth = {"beta": beta, "intercepts": a, "lost_in": lost_in, "origin": origin}
    return study, truth


def coverage_study(n_reps: int, *, seed0: int = 1000, params=None, **sim_kwargs) -> dict:
    """Share of replicate datasets whose intervals cover the planted log odds.

    Returns {'pooled': {term: share}, 'interval': {term: share}, 'n_reps': n} for the
    non-intercept terms (planted values are the same in every interval, so both the
    per-interval and the pooled estimates target them).
    """
    import warnings

    from analog.analogs import AnalogParams, run_analog
    from analog.errors import AnalogWarning

    params = params or AnalogParams(age_draws=5, n_bootstrap=0)
    pooled_hits: dict[str, list[bool]] = {}
    interval_hits: dict[str, list[bool]] = {}
    for rep in range(n_reps):
        study, truth = simulate_study(seed0 + rep, **sim_kwargs)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", AnalogWarning)
            result = run_analog(study, params, rng=np.random.default_rng(seed0 + rep))
        sel = result.selectivity
        for row in sel[sel["term"] != "intercept"].itertuples():
            target = truth["beta"][row.term]
            hit = bool(row.ci_low <= target <= row.ci_high)
            (pooled_hits if row.scope == "pooled" else interval_hits).setdefault(row.term, []).append(hit)
    return {"pooled": {k: float(np.mean(v)) for k, v in pooled_hits.items()},
            "interval": {k: float(np.mean(v)) for k, v in interval_hits.items()},
            "pooled_all": float(np.mean(sum(pooled_hits.values(), []))),
            "interval_all": float(np.mean(sum(interval_hits.values(), []))),
            "n_reps": n_reps}
