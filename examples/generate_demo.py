#!/usr/bin/env python
"""Generate the invented demo study and the truth planted in it.

Everything here is fictional: the Orrimar Sea, Skarnhal Island, its twelve named waters and
every taxon name are made up, and the geography sits in empty open ocean of the South
Pacific (about 40-50°S, 116-129°W) so that nothing real is implied.

    python examples/generate_demo.py [--seed N] [--out DIR] [--coastline PATH] [--scale S]

writes ``study.toml``, ``taxa.csv``, ``fossil_occurrences.csv``, ``modern_occurrences.csv``,
``regions.gpkg``, ``truth.json`` into ``--out`` (default: examples/demo) and the context
coastline into ``--coastline`` (default: maps/demo_coastline.gpkg). The same seed and
scale give byte-identical CSV/JSON/TOML files; GeoPackages hold identical geometries.
See examples/README.md for what is planted.
"""
from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

import numpy as np
import pandas as pd

REPO = Path(__file__).resolve().parent.parent
if str(REPO) not in sys.path:  # run from a source checkout without installing
    sys.path.insert(0, str(REPO))

from analog.reference import load_intervals, load_timescale, resolve_stage  # noqa: E402

DEFAULT_SEED = 4242
DEFAULT_OUT = REPO / "examples" / "demo"
DEFAULT_COASTLINE = REPO / "maps" / "demo_coastline.gpkg"
DATA_DATE = "2026-11-01"

# ---- sizes at scale 1 ------------------------------------------------------------------------
N_FOSSIL_LINEAGES = 315      # simulated lineages with a fossil record (a few go unsampled)
N_EXTANT_NO_RECORD = 30      # living genera without fossils
N_COHORT = 110               # lineages already alive when the record starts
RECORD_START_MA = 275.0      # oldest locality age
BIN_MA = 10.0
LOCALITIES_PER_BIN = 72
WINDOW_LOCALITIES = 26       # extra, narrowly dated localities inside each warming window
MODERN_RECORDS_MEAN = 143
STAGE_NAMED_SHARE = 0.17     # of non-window localities (about 15% of fossil rows)
MISSING_SHARE = 0.03         # of trait cells
BACKGROUND_HAZARD = 1 / 170  # per Myr, outside warming windows

# ---- planted selectivity (log-odds of loss given at risk) --------------------------------------
TERMS = ("depth_zone[slope]", "depth_zone[basin]", "body_size", "calcified", "thermal_breadth_c",
         "larval_mode[lecithotrophic]", "larval_mode[brooding]")
MEAN_EFFECTS = {"depth_zone[slope]": -0.4, "depth_zone[basin]": -0.8, "body_size": 0.6,
                "calcified": 1.2, "thermal_breadth_c": -0.5,
                "larval_mode[lecithotrophic]": 0.0, "larval_mode[brooding]": 0.0}
NULL_TERMS = ("larval_mode[lecithotrophic]", "larval_mode[brooding]")
EFFECT_SD = 0.2              # interval-to-interval spread of the non-null effects
BASE_LOGIT = {"cap": -2.3, "ptb": -0.7, "cpe": -2.7, "tjb": -1.5, "toa": -2.2, "oae1a": -2.8,
              "ctb": -2.5, "petm": -2.6, "mmco": -3.0}
DEFAULT_BASE = -2.7

# ---- invented geography (fixed, independent of the seed) ---------------------------------------
CENTER = (-122.5, -45.0)
LON_STRETCH = 1.0 / math.cos(math.radians(45.0))
SECTOR_START_DEG = 15
SECTORS = ("Ombrel", "Kestavine", "Drullen", "Varrowmere", "Isquane", "Pelthorn")
INNER_KIND = ("Shoals", "Bight", "Sound", "Flats", "Inlet", "Reach")
OUTER_KIND = ("Deep", "Banks", "Slope", "Trough", "Canyon", "Basin")
HOTSPOT_SECTORS = (0, 1, 2)  # inner waters of Ombrel, Kestavine, Drullen
LAND_NAME = "Skarnhal Island"
SEA_NAME = "Orrimar Sea"


def coast_r(theta):
    return 1.55 + 0.30 * np.sin(3 * theta + 0.4) + 0.18 * np.cos(5 * theta + 1.1) + 0.07 * np.sin(11 * theta + 0.3)


def mid_r(theta):
    return coast_r(theta) + 0.85 + 0.12 * np.sin(2 * theta + 0.7)


def out_r(theta):
    return mid_r(theta) + 1.25 + 0.18 * np.cos(3 * theta + 0.2)


def to_lonlat(r, theta):
    return (np.round(CENTER[0] + r * np.cos(theta) * LON_STRETCH, 6),
            np.round(CENTER[1] + r * np.sin(theta), 6))


def _ring(radius, deg):
    theta = np.radians(deg)
    lon, lat = to_lonlat(radius(theta), theta)
    return list(zip(lon.tolist(), lat.tolist()))


def build_geography():
    """Coastline polygon and 12 region polygons sharing edges exactly (same vertices)."""
    from shapely.geometry import Polygon

    degs = np.arange(SECTOR_START_DEG, SECTOR_START_DEG + 360)
    land = Polygon(_ring(coast_r, degs))
    regions = []
    for k in range(6):
        seg = np.arange(SECTOR_START_DEG + 60 * k, SECTOR_START_DEG + 60 * (k + 1) + 1)
        inner = Polygon(_ring(coast_r, seg) + _ring(mid_r, seg[::-1]))
        outer = Polygon(_ring(mid_r, seg) + _ring(out_r, seg[::-1]))
        regions.append((f"R{k + 1:02d}", f"{SECTORS[k]} {INNER_KIND[k]}", "nearshore", inner))
        regions.append((f"R{k + 7:02d}", f"{SECTORS[k]} {OUTER_KIND[k]}", "offshore", outer))
    regions.sort(key=lambda r: r[0])
    return land, regions


# ---- invented names ---------------------------------------------------------------------------
_ONSET = ("b", "br", "c", "cl", "d", "dr", "g", "gr", "h", "k", "kr", "l", "m", "n", "p", "pr",
          "qu", "r", "s", "sk", "st", "t", "th", "tr", "v", "vr", "z")
_NUCLEUS = ("a", "e", "i", "o", "u", "ae", "y")
_CODA = ("l", "n", "r", "s", "x", "sk", "lv")
_GENUS_END = ("ia", "ella", "ina", "ites", "odus", "ora", "ium", "aster", "ula", "ona", "ax", "is", "opsis")
_RARE = ("vr", "sk", "qu", "kr", "lv", "x", "z")
_UNWANTED = ("fuk", "fuc", "shit", "cunt", "nig", "fag", "cum", "tit", "dik", "kok", "pis", "poo", "ass")


def _stem(rng, nsyl):
    while True:
        s = "".join(rng.choice(_ONSET) + rng.choice(_NUCLEUS) + (rng.choice(_CODA) if rng.random() < 0.35 else "")
                    for _ in range(nsyl))
        # A rare cluster makes a clash with a real name unlikely.
        if any(c in s for c in _RARE) and 4 <= len(s) <= 8 and not any(u in s for u in _UNWANTED):
            return s.capitalize()


class NameMaker:
    def __init__(self, rng):
        self.rng = rng
        self.used: set[str] = set()

    def _unique(self, make):
        for _ in range(10_000):
            name = make()
            if name.casefold() not in self.used:
                self.used.add(name.casefold())
                return name
        raise RuntimeError("name space exhausted")

    def genus(self):
        def make():
            stem = _stem(self.rng, 2)
            end = self.rng.choice(_GENUS_END)
            if stem[-1] in "aeiouy" and end[0] in "aeiouy":
                stem = stem[:-1]
            return stem + end
        return self._unique(make)

    def higher(self, suffix):
        return self._unique(lambda: _stem(self.rng, 2) + suffix)


def genus_stem(name):
    for end in sorted(_GENUS_END, key=len, reverse=True):
        if name.endswith(end) and len(name) - len(end) >= 3:
            return name[: -len(end)]
    return name


# ---- small functions ----------------------------------------------------------------------------------
def logistic(x):
    return 1.0 / (1.0 + np.exp(-x))


def brownian_excursion(rng, n):
    """Norm of a 3-D Brownian bridge on n equally spaced points (0 at both ends)."""
    if n <= 2:
        return np.zeros(n)
    t = np.linspace(0.0, 1.0, n)
    steps = rng.normal(0.0, np.sqrt(1.0 / (n - 1)), size=(n - 1, 3))
    walk = np.vstack([np.zeros(3), np.cumsum(steps, axis=0)])
    bridge = walk - t[:, None] * walk[-1]
    return np.linalg.norm(bridge, axis=1)


def hat_shape(u, peak):
    """1 at the peak position, 0 at u = 0 and u = 1, parabolic either side."""
    left = 1.0 - ((u - peak) / peak) ** 2
    right = 1.0 - ((u - peak) / (1.0 - peak)) ** 2
    return np.clip(np.where(u < peak, left, right), 0.0, 1.0)


# ---- the simulation ----------------------------------------------------------------------------
class Demo:
    def __init__(self, seed: int, scale: float = 1.0):
        self.seed = int(seed)
        self.scale = float(scale)
        streams = np.random.SeedSequence(self.seed).spawn(8)
        (self.r_names, self.r_traits, self.r_fates, self.r_traj, self.r_loc, self.r_sample,
         self.r_modern, self.r_mask) = [np.random.default_rng(s) for s in streams]
        self.intervals = load_intervals().sort_values("oldest_ma", ascending=False).reset_index(drop=True)
        self.land, self.regions = build_geography()
        stages = load_timescale()
        self.stages = stages[stages["rank"] == "stage"].sort_values("youngest_ma").reset_index(drop=True)

    def n(self, x, low=1):
        return max(low, int(round(x * self.scale)))

    # -- taxonomy and traits --
    def make_taxa(self):
        rng, names = self.r_traits, NameMaker(self.r_names)
        n_fossil = self.n(N_FOSSIL_LINEAGES, 40)
        n_norecord = self.n(N_EXTANT_NO_RECORD, 6)
        n_total = n_fossil + n_norecord
        phyla = [names.higher("ozoa") for _ in range(3)]
        classes = [(names.higher("ata"), phyla[i // 2]) for i in range(6)]
        orders = [(names.higher("ida"), classes[i % 6]) for i in range(14)]
        n_fam = max(8, int(round(45 * min(1.0, 0.4 + 0.6 * self.scale))))
        fam_order = [orders[i % len(orders)] for i in range(n_fam)]
        fam_size = rng.dirichlet(np.full(n_fam, 1.5))
        fam_of = np.sort(rng.choice(n_fam, size=n_total, p=fam_size))
        fam_of[:n_fam] = np.arange(n_fam)  # every family gets a genus
        fam_of = np.sort(fam_of)
        # Family profiles: relatives share traits, so modern taxa have informative fossil relatives.
        dom_depth = rng.choice(3, size=n_fam, p=[0.45, 0.3, 0.25])
        fam_calc = rng.random(n_fam) < 0.5
        fam_size_mu = rng.choice(3, size=n_fam, p=[0.35, 0.4, 0.25])
        fam_therm = rng.normal(11.0, 2.5, size=n_fam)
        fam_larva = rng.choice(3, size=n_fam, p=[0.5, 0.3, 0.2])

        rows = []
        fam_names = {}
        for i in range(n_total):
            f = fam_of[i]
            gname = names.genus()
            if f not in fam_names:
                fam_names[f] = genus_stem(gname) + "idae"
                names.used.add(fam_names[f].casefold())
            depth_p = np.full(3, 0.15)
            depth_p[dom_depth[f]] = 0.7
            depth = rng.choice(3, p=depth_p)
            calc = rng.random() < (0.88 if fam_calc[f] else 0.12)
            size = int(np.clip(fam_size_mu[f] + rng.choice([-1, 0, 0, 0, 1]), 0, 2))
            therm = float(np.clip(fam_therm[f] + rng.normal(0, 2.5), 2.0, 24.0))
            larva_p = np.full(3, 0.15)
            larva_p[fam_larva[f]] = 0.7
            larva = rng.choice(3, p=larva_p)
            order, (cls, phylum) = fam_order[f]
            rows.append(dict(scientificName=gname, taxonRank="genus", kingdom="Animalia", phylum=phylum,
                             **{"class": cls}, order=order, family=fam_names[f], genus=gname,
                             depth=int(depth), calcified=int(calc), size=size, thermal=round(therm, 1),
                             larva=int(larva), has_record=True))
        # The no-record living genera are drawn across families at random.
        norecord = rng.choice(n_total, size=n_norecord, replace=False)
        for i in norecord:
            rows[i]["has_record"] = False
        taxa = pd.DataFrame(rows)
        order_ = np.argsort(taxa["scientificName"].str.casefold().to_numpy(), kind="stable")
        taxa = taxa.iloc[order_].reset_index(drop=True)
        taxa.insert(0, "taxon_id", [f"T{i + 1:03d}" for i in range(len(taxa))])
        self.therm_mean = float(taxa["thermal"].mean())
        self.therm_sd = float(taxa["thermal"].std(ddof=0))
        self.taxa = taxa

    def design_row(self, t):
        """Planted covariates of one taxon, in TERMS order."""
        return np.array([t.depth == 1, t.depth == 2, t.size, t.calcified,
                         (t.thermal - self.therm_mean) / self.therm_sd, t.larva == 1, t.larva == 2], dtype=float)

    # -- localities --
    def make_localities(self):
        rng = self.r_loc
        edges = np.arange(0.0, RECORD_START_MA + BIN_MA, BIN_MA)
        ages, window_of = [], []
        for lo in edges[:-1]:
            hi = min(lo + BIN_MA, RECORD_START_MA)
            k = self.n(LOCALITIES_PER_BIN * np.exp(rng.normal(0, 0.3)) * (hi - lo) / BIN_MA, 3)
            ages.append(rng.uniform(lo, hi, size=k))
            window_of += [""] * k
        for row in self.intervals.itertuples():
            k = self.n(WINDOW_LOCALITIES, 6)
            ages.append(rng.uniform(row.youngest_ma, row.oldest_ma, size=k))
            window_of += [row.interval_id] * k
        age = np.concatenate(ages)
        window_of = np.array(window_of, dtype=object)
        n = len(age)
        theta = rng.uniform(0, 2 * np.pi, size=n)
        r = np.sqrt(rng.uniform(0.02, 1.0, size=n)) * out_r(theta)
        lon, lat = to_lonlat(r, theta)
        # Reported ages: a range holding the true age. Window localities are dated finely (as by a
        # biozone) and their range stays inside the window, so planted last occurrences stay there.
        narrow = window_of != ""
        width = np.exp(rng.uniform(np.log(0.5), np.log(12.0), n))
        oldest = age + rng.uniform(0, 1, n) * width
        win = self.intervals.set_index("interval_id")
        for i in np.flatnonzero(narrow):
            wo, wy = win.at[window_of[i], "oldest_ma"], win.at[window_of[i], "youngest_ma"]
            width[i] = np.exp(rng.uniform(np.log(0.5), np.log(min(1.5, wo - wy))))
            lo, hi = max(age[i], wy + width[i]), min(age[i] + width[i], wo)
            oldest[i] = rng.uniform(lo, hi)
        youngest = np.maximum(oldest - width, 0.0)
        oldest = np.ceil(oldest * 1000) / 1000
        youngest = np.floor(youngest * 1000) / 1000
        loc = pd.DataFrame({"age": age, "window": window_of, "lon": np.round(lon, 4), "lat": np.round(lat, 4),
                            "oldest_ma": oldest, "youngest_ma": youngest})
        # Stage names instead of numbers for some ordinary localities (exercises stage resolution).
        named = (~narrow) & (rng.random(n) < STAGE_NAMED_SHARE)
        early, late = np.full(n, "", dtype=object), np.full(n, "", dtype=object)
        st = self.stages
        idx = np.searchsorted(st["youngest_ma"].to_numpy(), age, side="right") - 1
        for i in np.flatnonzero(named):
            j = int(idx[i])
            j_old = min(j + 1, len(st) - 1) if rng.random() < 0.3 else j
            j_young = max(j - 1, 0) if rng.random() < 0.2 else j
            early[i], late[i] = self._stage_label(st["name"].iat[j_old]), self._stage_label(st["name"].iat[j_young])
        loc["early_stage"], loc["late_stage"] = early, late
        loc.loc[named, ["oldest_ma", "youngest_ma"]] = np.nan
        # Identifiers in random order so they say nothing about age.
        perm = rng.permutation(n)
        loc["locationID"] = [f"LOC-{perm[i] + 1:04d}" for i in range(n)]
        self.localities = loc.sort_values("age", ascending=False).reset_index(drop=True)
        self.loc_age_sorted_asc = np.sort(self.localities["age"].to_numpy())

    def _stage_label(self, name):
        rng = self.r_loc
        if name == "Maastrichtian" and rng.random() < 0.3:
            name = "Maestrichtian"
        u = rng.random()
        if u < 0.03:
            return name.lower()
        if u < 0.06:
            return f"  {name} "
        return name

    # -- fates --
    def make_fates(self):
        rng = self.r_fates
        taxa = self.taxa
        iv = self.intervals
        self.effects = {}
        self.bases = {}
        for row in iv.itertuples():
            eff = {t: (0.0 if t in NULL_TERMS else MEAN_EFFECTS[t] + rng.normal(0.0, EFFECT_SD)) for t in TERMS}
            self.effects[row.interval_id] = eff
            self.bases[row.interval_id] = BASE_LOGIT.get(row.interval_id, DEFAULT_BASE)
        n = len(taxa)
        has = taxa["has_record"].to_numpy()
        origin = np.full(n, np.nan)
        n_cohort = self.n(N_COHORT, 12)
        rec = np.flatnonzero(has)
        cohort = rng.choice(rec, size=min(n_cohort, len(rec)), replace=False)
        origin[cohort] = rng.uniform(RECORD_START_MA + 1, RECORD_START_MA + 15, size=len(cohort))
        zones = [(r.youngest_ma - 3.0, r.oldest_ma) for r in iv.itertuples()]

        def in_zone(t):
            return any(lo <= t <= hi for lo, hi in zones)

        near = [(r.youngest_ma - 1.0, r.oldest_ma + 1.0) for r in iv.itertuples()]

        for i in rec:
            if np.isnan(origin[i]):
                while True:  # more origination toward the present; never inside a window
                    o = 3.0 + (RECORD_START_MA - 8.0) * rng.beta(1.2, 1.5)
                    if not any(lo <= o <= hi for lo, hi in near):
                        break
                origin[i] = o
        end = np.zeros(n)
        fate = np.full(n, "extant", dtype=object)
        lost_in = np.full(n, "", dtype=object)
        forced = {i: [] for i in range(n)}  # (kind, interval_id) forced occurrences
        at_risk = {r.interval_id: [] for r in iv.itertuples()}
        lost = {r.interval_id: [] for r in iv.itertuples()}
        X = np.vstack([self.design_row(t) for t in taxa.itertuples()])
        self.X = X
        win_locs = {wid: self.localities.index[self.localities["window"] == wid].to_numpy()
                    for wid in iv["interval_id"]}
        loc_age = self.localities["age"].to_numpy()
        windows = list(iv.itertuples())
        beta = {w: np.array([self.effects[w][t] for t in TERMS]) for w in self.effects}
        for i in rec:
            t_bg = origin[i] - rng.exponential(1.0 / BACKGROUND_HAZARD)
            while t_bg > 0 and in_zone(t_bg):  # background deaths stay clear of windows
                t_bg = t_bg + rng.uniform(3.0, 6.0)
            if t_bg >= origin[i] - 0.5:
                t_bg = origin[i] - 0.5 - rng.uniform(0, 2)
            for row in windows:
                wid = row.interval_id
                if origin[i] <= row.oldest_ma:
                    continue  # originated after this window
                if t_bg > row.oldest_ma:
                    break  # gone before the window
                at_risk[wid].append(i)
                eta = self.bases[wid] + X[i] @ beta[wid]
                if rng.random() < logistic(eta):
                    lost[wid].append(i)
                    loc = rng.choice(win_locs[wid])
                    end[i] = rng.uniform(row.youngest_ma, loc_age[loc])
                    fate[i], lost_in[i] = "lost", wid
                    forced[i].append(("at", int(loc)))
                    break
                forced[i].append(("after", wid))
            else:
                if t_bg > 0:
                    end[i], fate[i] = t_bg, "background"
                continue
            if fate[i] == "extant" and t_bg > 0:
                end[i], fate[i] = t_bg, "background"
        taxa["origin_ma"] = origin
        taxa["end_ma"] = np.where(has, end, 0.0)
        taxa["fate"] = np.where(has, fate, "extant")
        taxa["lost_in"] = lost_in
        self.forced = forced
        self.at_risk, self.lost = at_risk, lost

    # -- occupancy trajectories and sampling --
    def make_trajectories(self):
        rng = self.r_traj
        taxa = self.taxa
        kinds = np.full(len(taxa), "", dtype=object)
        self.decline = {}
        for i, t in enumerate(taxa.itertuples()):
            if not t.has_record:
                kinds[i] = "no_fossil_record"
            elif t.fate == "extant":
                high_risk = t.calcified == 1 and t.depth == 0
                p_decline = 0.9 if high_risk else 0.2
                if t.origin_ma > 55 and rng.random() < p_decline:
                    kinds[i] = "decline"
                else:
                    kinds[i] = "wander" if rng.random() < 0.5 else "stable"
            elif t.fate == "lost":
                kinds[i] = "truncated_hat" if rng.random() < 0.5 else "truncated_walk"
            else:
                kinds[i] = "hat" if rng.random() < 0.5 else "pinned_walk"
        taxa["trajectory"] = kinds
        edges = np.arange(0.0, RECORD_START_MA + BIN_MA, BIN_MA)
        self.traj = {}
        for i, t in enumerate(taxa.itertuples()):
            if not t.has_record:
                continue
            top = min(t.origin_ma, RECORD_START_MA)
            b_lo = int(np.floor(t.end_ma / BIN_MA))
            b_hi = int(np.ceil(top / BIN_MA)) - 1
            bins = np.arange(b_lo, b_hi + 1)
            mids = np.clip(edges[bins] + BIN_MA / 2, t.end_ma, top)
            nb = len(bins)
            life = max(t.origin_ma - t.end_ma, 1e-6)
            u = (t.origin_ma - mids) / life  # 0 at origin, 1 at the end
            k = kinds[i]
            if k == "stable":
                logit = rng.normal(-2.2, 0.4) + rng.normal(0, 0.15, nb)
            elif k == "wander":
                x = rng.normal(-2.6, 0.4)
                steps = rng.normal(0, 0.45, nb)
                vals = []
                for s in steps[::-1]:  # oldest bin first
                    x = x + s
                    x = -5.0 + abs(x + 5.0) if x < -5.0 else x
                    x = -0.5 - abs(x + 0.5) if x > -0.5 else x
                    vals.append(x)
                logit = np.array(vals[::-1])
            elif k == "decline":
                nk = int(rng.integers(4, min(6, int(t.origin_ma // BIN_MA) - 1) + 1))
                slope = float(rng.uniform(-0.65, -0.4))
                level = rng.normal(-1.4, 0.3)
                # Bins are youngest first; the youngest nk bins fall away toward the present.
                steps_from_start = np.clip(nk - np.arange(nb), 0, None)
                logit = level + slope * steps_from_start + rng.normal(0, 0.15, nb)
                self.decline[t.taxon_id] = {"bins": nk, "slope_per_bin": round(slope, 3)}
            else:
                L0, H = -4.0, rng.uniform(2.0, 3.5)
                if k.startswith("truncated"):
                    u = u * rng.uniform(0.45, 0.75)  # killed part-way through its would-be life
                if k.endswith("hat"):
                    logit = L0 + H * hat_shape(u, rng.uniform(0.35, 0.65)) + rng.normal(0, 0.2, nb)
                else:
                    grid = brownian_excursion(rng, 41)
                    grid = grid / max(grid.max(), 1e-9)
                    logit = L0 + H * np.interp(u, np.linspace(0, 1, 41), grid)
            self.traj[t.taxon_id] = (bins, logit)

    def sample_fossils(self):
        rng = self.r_sample
        loc = self.localities
        ages = loc["age"].to_numpy()
        rows = []
        edges_bin = np.floor(ages / BIN_MA).astype(int)
        by_bin = {b: np.flatnonzero(edges_bin == b) for b in np.unique(edges_bin)}
        taxa = self.taxa
        keep = np.ones(len(taxa), dtype=bool)
        window_young = dict(zip(self.intervals["interval_id"], self.intervals["youngest_ma"]))
        for i, t in enumerate(taxa.itertuples()):
            if not t.has_record:
                continue
            chosen = set()
            bins, logit = self.traj[t.taxon_id]
            p = logistic(logit)
            for b, pb in zip(bins, p):
                cand = by_bin.get(int(b), np.empty(0, dtype=int))
                cand = cand[(ages[cand] >= t.end_ma) & (ages[cand] <= t.origin_ma)]
                if len(cand) == 0:
                    continue
                k = rng.binomial(len(cand), pb)
                if k:
                    chosen.update(rng.choice(cand, size=k, replace=False).tolist())
            for kind, what in self.forced[i]:
                if kind == "at":
                    chosen.add(what)
                else:  # an occurrence after the window the lineage survived
                    wy = window_young[what]
                    lo = max(t.end_ma, wy - 8.0)
                    cand = np.flatnonzero((ages > lo) & (ages < wy))
                    if len(cand):
                        chosen.add(int(rng.choice(cand)))
            if t.fate == "extant" and not chosen:
                cand = np.flatnonzero((ages <= t.origin_ma) & (ages < BIN_MA * 2))
                if len(cand):
                    chosen.add(int(rng.choice(cand)))
            if not chosen:
                keep[i] = False
                continue
            rows += [(t.taxon_id, j) for j in sorted(chosen)]
        occ = pd.DataFrame(rows, columns=["taxon_id", "loc"])
        self.unsampled = taxa.loc[~keep, "taxon_id"].tolist()
        self.taxa = taxa[keep].reset_index(drop=True)
        occ = occ.join(loc, on="loc")
        occ = occ.sort_values(["locationID", "taxon_id"]).reset_index(drop=True)
        occ["occurrenceID"] = [f"FOS-{i + 1:06d}" for i in range(len(occ))]
        self.fossils = occ
        # Planted fates restricted to taxa that made it into the table.
        kept = set(self.taxa["taxon_id"])
        ids = taxa["taxon_id"].to_numpy()
        self.at_risk = {w: [ids[i] for i in v if ids[i] in kept] for w, v in self.at_risk.items()}
        self.lost = {w: [ids[i] for i in v if ids[i] in kept] for w, v in self.lost.items()}

    # -- modern occurrences --
    def sample_modern(self):
        import shapely

        rng = self.r_modern
        taxa = self.taxa
        extant = taxa[taxa["fate"] == "extant"].reset_index(drop=True)
        reg = self.regions
        inner = [i for i, r in enumerate(reg) if r[2] == "nearshore"]
        outer = [i for i, r in enumerate(reg) if r[2] == "offshore"]
        hot = [inner[k] for k in HOTSPOT_SECTORS]
        high_risk = ((extant["calcified"] == 1) & (extant["depth"] == 0) & (extant["trajectory"] == "decline"))
        self.high_risk = extant.loc[high_risk, "taxon_id"].tolist()
        records = []  # (taxon index, region index)
        for j, t in enumerate(extant.itertuples()):
            n_rec = max(5, int(round(rng.lognormal(np.log(MODERN_RECORDS_MEAN), 0.7) * self.scale)))
            if t.trajectory == "decline":
                n_rec = max(5, int(n_rec * 0.6))
            if high_risk.iat[j]:
                chosen = list(hot)
                if rng.random() < 0.4:
                    chosen.append(int(rng.choice([i for i in range(12) if i not in hot])))
                w = np.array([0.85 / len(hot)] * len(hot) + [0.15] * (len(chosen) - len(hot)))
            else:
                pref = np.ones(12)
                if t.depth == 0:
                    pref[outer] = 0.1
                elif t.depth == 2:
                    pref[inner] = 0.1
                pref[hot] *= 0.6  # hotspots are not where the other taxa cluster
                k = int(min(12, 2 + rng.binomial(6, 0.5)))
                chosen = rng.choice(12, size=k, replace=False, p=pref / pref.sum()).tolist()
                w = rng.dirichlet(np.ones(len(chosen)))
            w = w / w.sum()
            counts = rng.multinomial(n_rec, w)
            for reg_i, c in zip(chosen, counts):
                records += [(j, reg_i)] * int(c)
        rec = pd.DataFrame(records, columns=["taxon", "region"])
        lon = np.empty(len(rec))
        lat = np.empty(len(rec))
        for reg_i, idx in rec.groupby("region").indices.items():
            lon[idx], lat[idx] = self._points_in_region(reg_i, len(idx), rng, shapely)
        rec["lon"], rec["lat"] = np.round(lon, 5), np.round(lat, 5)
        rec["scientificName"] = extant["scientificName"].to_numpy()[rec["taxon"].to_numpy()]
        rec["region_id"] = [reg[i][0] for i in rec["region"]]
        # A few records in open water outside every region.
        n_out = self.n(36, 4)
        theta = rng.uniform(0, 2 * np.pi, n_out)
        r = out_r(theta) + rng.uniform(0.2, 1.2, n_out)
        olon, olat = to_lonlat(r, theta)
        out = pd.DataFrame({"taxon": rng.integers(0, len(extant), n_out), "region": -1,
                            "lon": np.round(olon, 5), "lat": np.round(olat, 5)})
        out["scientificName"] = extant["scientificName"].to_numpy()[out["taxon"].to_numpy()]
        out["region_id"] = ""
        # Names that match nothing: misspellings and invented names, 1-2 records each.
        unmatched = self._unmatched_names(rng, n_names=20)
        um_rows = []
        for name in unmatched:
            for _ in range(int(rng.integers(1, 3))):
                reg_i = int(rng.integers(0, 12))
                x, y = self._points_in_region(reg_i, 1, rng, shapely)
                um_rows.append({"taxon": -1, "region": reg_i, "lon": round(float(x[0]), 5),
                                "lat": round(float(y[0]), 5), "scientificName": name, "region_id": reg[reg_i][0]})
        allrec = pd.concat([rec, out, pd.DataFrame(um_rows)], ignore_index=True)
        # Case and whitespace variants of real names on a few records.
        n_var = self.n(60, 5)
        var_idx = rng.choice(np.flatnonzero(allrec["taxon"].to_numpy() >= 0), size=n_var, replace=False)
        styles = [str.upper, str.lower, lambda s: f" {s}", lambda s: f"{s}  ", lambda s: f"  {s.lower()} "]
        for k, i in enumerate(np.sort(var_idx)):
            allrec.at[i, "scientificName"] = styles[k % len(styles)](allrec.at[i, "scientificName"])
        n = len(allrec)
        allrec["basisOfRecord"] = rng.choice(["HumanObservation", "PreservedSpecimen", "MaterialSample"],
                                             size=n, p=[0.6, 0.25, 0.15])
        day0 = np.datetime64("1990-01-01")
        days = rng.integers(0, (np.datetime64("2025-12-31") - day0).astype(int), size=n)
        allrec["eventDate"] = (day0 + days.astype("timedelta64[D]")).astype(str)
        allrec["countryCode"] = ""
        allrec["institutionCode"] = rng.choice(["OMSC", "CVFS", "ORDB"], size=n)
        allrec["coordinateUncertaintyInMeters"] = rng.choice([10, 30, 100, 250, 1000], size=n)
        ic = rng.integers(1, 25, size=n).astype(object)
        ic[rng.random(n) < 0.3] = ""
        allrec["individualCount"] = ic
        allrec["occurrenceID"] = [f"OBS-{i + 1:06d}" for i in rng.permutation(n)]
        self.modern = allrec.sort_values("occurrenceID").reset_index(drop=True)
        self.unmatched = unmatched
        self.variant_ids = sorted(allrec.loc[var_idx, "occurrenceID"].tolist())
        hr_names = set(extant.loc[high_risk, "scientificName"])
        hr = rec[rec["scientificName"].isin(hr_names)]
        hot_ids = {reg[i][0] for i in hot}
        self.hot_share = float(hr["region_id"].isin(hot_ids).mean()) if len(hr) else float("nan")
        self.hot = [(reg[i][0], reg[i][1]) for i in hot]

    def _points_in_region(self, reg_i, n, rng, shapely):
        rid, _, ring, poly = self.regions[reg_i]
        k = int(rid[1:]) - 1
        sector = k if ring == "nearshore" else k - 6
        a0 = np.radians(SECTOR_START_DEG + 60 * sector)
        xs, ys = [], []
        need = n
        while need > 0:
            m = 2 * need + 8
            theta = rng.uniform(a0, a0 + np.radians(60), m)
            lo = coast_r(theta) if ring == "nearshore" else mid_r(theta)
            hi = mid_r(theta) if ring == "nearshore" else out_r(theta)
            r = rng.uniform(lo, hi)
            x, y = to_lonlat(r, theta)
            ok = shapely.contains_xy(poly, x, y)
            xs.append(x[ok][:need])
            ys.append(y[ok][:need])
            need -= int(min(ok.sum(), need))
        return np.concatenate(xs), np.concatenate(ys)

    def _unmatched_names(self, rng, n_names):
        known = {s.casefold() for s in self.taxa["scientificName"]}
        names = NameMaker(rng)
        names.used |= known
        out = []
        genera = self.taxa["scientificName"].to_numpy()
        while len(out) < n_names - 6:
            g = str(rng.choice(genera))
            vowels = [k for k in range(1, len(g)) if g[k] in "aeiou"]
            if rng.random() < 0.5 and vowels:  # a wrong vowel
                k = int(rng.choice(vowels))
                miss = g[:k] + str(rng.choice([v for v in "aeiou" if v != g[k]])) + g[k + 1:]
            else:  # a doubled letter
                k = int(rng.integers(1, len(g) - 1))
                miss = g[:k] + g[k] + g[k:]
            if miss.casefold() not in known and miss not in out:
                out.append(miss)
        while len(out) < n_names - 2:
            out.append(names.genus())
        out += ["indet.", "unidentified shell"]
        return out

    # -- outputs --
    def tables(self):
        t = self.taxa
        depth = np.array(["shelf", "slope", "basin"], dtype=object)[t["depth"].to_numpy()]
        size = np.array(["small", "medium", "large"], dtype=object)[t["size"].to_numpy()]
        larva = np.array(["planktotrophic", "lecithotrophic", "brooding"], dtype=object)[t["larva"].to_numpy()]
        calc = np.where(t["calcified"].to_numpy() == 1, "true", "false").astype(object)
        therm = np.array([f"{v:.1f}" for v in t["thermal"]], dtype=object)
        traits = {"depth_zone": depth, "body_size": size, "calcified": calc, "thermal_breadth_c": therm,
                  "larval_mode": larva}
        self.masked = {}
        for name, values in traits.items():
            mask = self.r_mask.random(len(t)) < MISSING_SHARE
            values[mask] = ""
            self.masked[name] = int(mask.sum())
        taxa_out = pd.DataFrame({
            "taxon_id": t["taxon_id"], "scientificName": t["scientificName"], "taxonRank": t["taxonRank"],
            "kingdom": t["kingdom"], "phylum": t["phylum"], "class": t["class"], "order": t["order"],
            "family": t["family"], "genus": t["genus"],
            "extant": np.where(t["fate"] == "extant", "true", "false"), **traits})
        f = self.fossils
        fossils_out = pd.DataFrame({
            "occurrenceID": f["occurrenceID"], "taxon_id": f["taxon_id"],
            "oldest_ma": _fmt(f["oldest_ma"], 3), "youngest_ma": _fmt(f["youngest_ma"], 3),
            "earliestAgeOrLowestStage": f["early_stage"], "latestAgeOrHighestStage": f["late_stage"],
            "decimalLatitude": _fmt(f["lat"], 4), "decimalLongitude": _fmt(f["lon"], 4),
            "locationID": f["locationID"]})
        m = self.modern
        modern_out = pd.DataFrame({
            "occurrenceID": m["occurrenceID"], "scientificName": m["scientificName"],
            "decimalLatitude": _fmt(m["lat"], 5), "decimalLongitude": _fmt(m["lon"], 5),
            "basisOfRecord": m["basisOfRecord"], "eventDate": m["eventDate"], "countryCode": m["countryCode"],
            "institutionCode": m["institutionCode"],
            "coordinateUncertaintyInMeters": m["coordinateUncertaintyInMeters"].astype(str),
            "individualCount": m["individualCount"].astype(str)})
        return taxa_out, fossils_out, modern_out

    def truth(self, taxa_out, fossils_out, modern_out):
        t = self.taxa
        iv = self.intervals
        per_interval = {}
        for row in iv.itertuples():
            w = row.interval_id
            per_interval[w] = {
                "name": row.name, "window_ma": [row.oldest_ma, row.youngest_ma], "warming_c": row.warming_c,
                "base_logit": self.bases[w], "effects": {k: round(v, 4) for k, v in self.effects[w].items()},
                "n_at_risk": len(self.at_risk[w]), "n_lost": len(self.lost[w]),
                "lost_taxa": sorted(self.lost[w]), "at_risk_taxa": sorted(self.at_risk[w])}
        mean_vec = np.array([MEAN_EFFECTS[k] for k in TERMS])
        ids = t["taxon_id"].to_numpy()
        extant = t["fate"].to_numpy() == "extant"
        lin = self.X_kept() @ mean_vec
        by_kind = {k: sorted(t.loc[t["trajectory"] == k, "taxon_id"]) for k in
                   ("stable", "wander", "no_fossil_record", "hat", "pinned_walk", "truncated_hat", "truncated_walk")}
        lost_by = {w: sorted(t.loc[t["lost_in"] == w, "taxon_id"]) for w in iv["interval_id"]}
        stage_named = (fossils_out["earliestAgeOrLowestStage"] != "").mean()
        outside = int((self.modern["region_id"] == "").sum())
        truth = {
            "about": ("Planted truth of the invented demo study. Everything is fictional. Selectivity: each taxon "
                      "at risk in a warming interval (alive when its window opens) is lost there with probability "
                      "logistic(base_logit + sum(effects[term] * x[term])); x is coded as in 'coding'. "
                      "Trait values used are the true ones; about 3% of trait cells are blanked in taxa.csv afterwards."),
            "generator": {"script": "examples/generate_demo.py", "seed": self.seed, "scale": self.scale,
                          "data_date": DATA_DATE},
            "sizes": {"taxa": int(len(t)), "fossil_genera": int(t["has_record"].sum()),
                      "extant_genera": int(extant.sum()),
                      "extant_with_fossil_record": int((extant & t["has_record"].to_numpy()).sum()),
                      "fossil_occurrences": int(len(fossils_out)),
                      "fossil_localities": int(fossils_out["locationID"].nunique()),
                      "modern_occurrences": int(len(modern_out)), "regions": len(self.regions),
                      "lineages_never_sampled_dropped": len(self.unsampled)},
            "selectivity": {
                "coding": {"depth_zone[slope]": "1 if slope else 0 (reference shelf)",
                           "depth_zone[basin]": "1 if basin else 0 (reference shelf)",
                           "body_size": "0 small, 1 medium, 2 large (per ordinal step)",
                           "calcified": "1 if calcified",
                           "thermal_breadth_c": f"(value - {self.therm_mean:.4f}) / {self.therm_sd:.4f} (per SD)",
                           "larval_mode[lecithotrophic]": "1 if lecithotrophic (reference planktotrophic)",
                           "larval_mode[brooding]": "1 if brooding (reference planktotrophic)"},
                "mean_effects": MEAN_EFFECTS, "effect_sd_between_intervals": EFFECT_SD,
                "null_terms": list(NULL_TERMS), "intervals": per_interval,
                "extant_linear_predictor": {i: round(float(v), 4) for i, v in zip(ids[extant], lin[extant])},
            },
            "trajectories": {
                "extant_decline": {k: self.decline[k] for k in sorted(self.decline) if k in set(ids)},
                "extant_wander": by_kind["wander"], "extant_stable": by_kind["stable"],
                "extant_no_fossil_record": by_kind["no_fossil_record"],
                "extinct_hat": by_kind["hat"], "extinct_pinned_walk": by_kind["pinned_walk"],
                "extinct_truncated_hat": by_kind["truncated_hat"],
                "extinct_truncated_walk": by_kind["truncated_walk"],
                "extinct_at_interval": lost_by,
                "notes": ("Occupancy per 10-Myr bin (edges at multiples of 10 Ma) is the share of the bin's "
                          "localities inside the lineage's life where it occurs, drawn binomially from "
                          "logistic(logit). decline: flat, then logit falls by slope_per_bin over the last "
                          "'bins' bins; wander: random walk without drift (sd 0.45 per bin); stable: constant "
                          "plus noise; hat: single-peaked parabola in time; pinned_walk: a Brownian "
                          "excursion (3-D bridge norm) from low to low; truncated_*: the lineage is cut off "
                          "part-way through such a history by a warming interval."),
            },
            "regions": {"hotspots": [{"region_id": r, "name": n} for r, n in self.hot],
                        "high_risk_taxa": sorted(self.high_risk),
                        "high_risk_definition": "extant, calcified, shelf, in decline",
                        "share_of_high_risk_records_in_hotspots": round(self.hot_share, 4),
                        "records_outside_all_regions": outside},
            "names": {"unmatched_names": sorted(self.unmatched),
                      "unmatched_records": int((~self.modern["scientificName"].isin(
                          self.taxa["scientificName"]) & self.modern["scientificName"].isin(self.unmatched)).sum()),
                      "variant_records": self.variant_ids},
            "ages": {"stage_named_share_of_fossil_rows": round(float(stage_named), 4),
                     "window_localities_per_interval": self.n(WINDOW_LOCALITIES, 6),
                     "notes": ("Localities made for the warming windows are dated to 0.5-1.5 Myr, always numerically and "
                               "inside the window; "
                               "other localities carry 0.5-12 Myr ranges, or ICS stage names instead. Each "
                               "planted victim has an occurrence in its interval's window and none after its "
                               "death; each survivor has one after the window.")},
            "missing_trait_cells": self.masked,
        }
        return truth

    def X_kept(self):
        return np.vstack([self.design_row(t) for t in self.taxa.itertuples()])

    def run(self):
        self.make_taxa()
        self.make_localities()
        self.make_fates()
        self.make_trajectories()
        self.sample_fossils()
        self.sample_modern()
        return self


def _fmt(values, decimals):
    arr = pd.to_numeric(pd.Series(values), errors="coerce").to_numpy(dtype=float)
    out = np.array([f"{v:.{decimals}f}" if np.isfinite(v) else "" for v in arr], dtype=object)
    return out


def write_csv(df: pd.DataFrame, path: Path):
    text = df.astype(str).to_csv(index=False, lineterminator="\n")
    path.write_text(text, encoding="utf-8", newline="")


def study_toml(seed):
    return f'''# Invented demo study: every taxon, place and number here is fictional.
# Generated by examples/generate_demo.py; the planted truth is in truth.json.

[study]
name = "Demo: invented fauna of the {SEA_NAME}"
seed = {seed}
data_date = "{DATA_DATE}"
description = "A fictional marine fauna of the {SEA_NAME} around {LAND_NAME}: fossil genera through nine past warming intervals and living genera over twelve named waters. Made by a seeded generator that records the truth it planted (truth.json)."

[inputs]
taxa = "taxa.csv"
fossil_occurrences = "fossil_occurrences.csv"
modern_occurrences = "modern_occurrences.csv"
regions = "regions.gpkg"
context = "maps:demo_coastline.gpkg"

[traits.depth_zone]
kind = "categorical"
levels = ["shelf", "slope", "basin"]
reference = "shelf"
label = "Depth zone"

[traits.body_size]
kind = "ordinal"
levels = ["small", "medium", "large"]
label = "Body size"

[traits.calcified]
kind = "binary"
label = "Calcified skeleton"

[traits.thermal_breadth_c]
kind = "numeric"
label = "Thermal breadth (°C)"

[traits.larval_mode]
kind = "categorical"
levels = ["planktotrophic", "lecithotrophic", "brooding"]
label = "Larval mode"

[scenario]
warming_c = 4.0
'''


def write_study(demo: Demo, out: Path, coastline: Path):
    import geopandas as gpd

    out.mkdir(parents=True, exist_ok=True)
    taxa_out, fossils_out, modern_out = demo.tables()
    # Every stage label must resolve through the bundled time scale.
    labels = set(fossils_out["earliestAgeOrLowestStage"]) | set(fossils_out["latestAgeOrHighestStage"])
    bad = sorted(x for x in labels if x and resolve_stage(x) is None)
    if bad:
        raise RuntimeError(f"stage labels that do not resolve: {bad}")
    write_csv(taxa_out, out / "taxa.csv")
    write_csv(fossils_out, out / "fossil_occurrences.csv")
    write_csv(modern_out, out / "modern_occurrences.csv")
    (out / "study.toml").write_text(study_toml(demo.seed), encoding="utf-8", newline="")
    truth = demo.truth(taxa_out, fossils_out, modern_out)
    (out / "truth.json").write_text(json.dumps(_round_floats(truth), indent=1, sort_keys=True,
                                               ensure_ascii=False) + "\n", encoding="utf-8", newline="")
    regions = gpd.GeoDataFrame({"region_id": [r[0] for r in demo.regions], "name": [r[1] for r in demo.regions],
                                "zone": [r[2] for r in demo.regions]},
                               geometry=[r[3] for r in demo.regions], crs="EPSG:4326")
    _write_gpkg(regions, out / "regions.gpkg", "regions")
    land = gpd.GeoDataFrame({"name": [LAND_NAME], "kind": ["land"]}, geometry=[demo.land], crs="EPSG:4326")
    coastline.parent.mkdir(parents=True, exist_ok=True)
    _write_gpkg(land, coastline, "coastline")
    return truth


def _write_gpkg(gdf, path: Path, layer: str):
    if path.exists():
        path.unlink()
    gdf.to_file(path, layer=layer, driver="GPKG", engine="pyogrio")


def _round_floats(obj, nd=4):
    if isinstance(obj, float):
        return None if not math.isfinite(obj) else round(obj, nd)
    if isinstance(obj, dict):
        return {str(k): _round_floats(v, nd) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_round_floats(v, nd) for v in obj]
    if isinstance(obj, np.generic):
        return _round_floats(obj.item(), nd)
    return obj


def main(argv=None):
    p = argparse.ArgumentParser(description="Generate the invented demo study and its planted truth.")
    p.add_argument("--seed", type=int, default=DEFAULT_SEED, help=f"random seed (default {DEFAULT_SEED})")
    p.add_argument("--out", type=Path, default=DEFAULT_OUT, help="study folder to write (default examples/demo)")
    p.add_argument("--coastline", type=Path, default=None,
                   help="where to write the context coastline (default maps/demo_coastline.gpkg when --out "
                        "is the default, else OUT/demo_coastline.gpkg)")
    p.add_argument("--scale", type=float, default=1.0, help="size factor for taxa and records (default 1.0)")
    a = p.parse_args(argv)
    if not a.scale > 0:
        p.error("--scale must be positive")
    coast = a.coastline
    if coast is None:
        coast = DEFAULT_COASTLINE if a.out.resolve() == DEFAULT_OUT.resolve() else a.out / "demo_coastline.gpkg"
    demo = Demo(a.seed, a.scale).run()
    truth = write_study(demo, a.out, coast)
    s = truth["sizes"]
    print(f"wrote {a.out}: {s['taxa']} taxa ({s['fossil_genera']} with fossils, {s['extant_genera']} extant), "
          f"{s['fossil_occurrences']} fossil and {s['modern_occurrences']} modern occurrences; coastline {coast}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
