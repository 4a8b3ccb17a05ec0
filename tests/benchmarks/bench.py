"""Benchmark harness for analog: a synthetic national-scale study, timed stage by stage.

Run it as a script (it is not a test):

    python tests/benchmarks/bench.py --scale small
    python tests/benchmarks/bench.py --scale national --stages floor,intake,spatial,occupancy

It writes an invented study (Parquet tables and a GeoParquet region layer) into a cache
folder, reuses it on later runs (``--regenerate`` rebuilds it), then runs every stage in a
fresh Python process and reports, per stage: wall time, throughput (input rows per second),
peak memory (the process's maximum resident set size, inputs included) and two ratios
measured in the same run: against a straightforward pandas/geopandas version of the stage
written below, and against the time to read the inputs once with pyarrow (the floor).
The output is a Markdown table (printed, and saved with ``--out``).

Everything in the generated study is made up: taxa, places and numbers come from a seeded
generator.
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

SCALES = {
    "national": dict(n_fossil=2_000_000, n_modern=10_000_000, n_taxa=20_000, n_regions=500, n_localities=200_000),
    "small": dict(n_fossil=200_000, n_modern=1_000_000, n_taxa=2_000, n_regions=50, n_localities=20_000),
}
GENERATOR_VERSION = 3
STAGES = ("floor", "intake", "spatial", "spatial_naive", "occupancy", "occupancy_naive", "trajectory",
          "bootstrap_naive", "analog", "whole")
DEFAULT_CACHE = Path(os.environ.get("ANALOG_BENCH_DATA", Path.home() / ".cache" / "analog-bench"))
EXTENT = (110.0, -40.0, 150.0, -10.0)  # lon/lat box of the invented country and its seas


# ============================================================ the invented study

def _names(n: int, rng: np.random.Generator) -> np.ndarray:
    """Unique invented genus names from syllables (e.g. 'Korabetina')."""
    syl = np.array(["ka", "ro", "be", "ti", "nu", "sa", "vel", "dor", "mi", "qua", "lo", "pe", "tra", "zu",
                    "gri", "ho", "fen", "cal", "mor", "ixa", "ul", "dre", "sko", "ny", "bra", "ese", "vo", "tul",
                    "ama", "pri"])
    ends = np.array(["ina", "ella", "ites", "opsis", "aria", "ulus", "onia", "ax"])
    k = len(syl)
    i = np.arange(n)
    parts = [syl[(i // k ** p) % k] for p in range(3)]
    words = [f"{a}{b}{c}{ends[j % len(ends)]}" for j, (a, b, c) in enumerate(zip(*parts))]
    words = [w[0].upper() + w[1:] for w in words]
    return np.array(rng.permutation(words), dtype=object)


def _outline(rng) -> "shapely.Polygon":
    import shapely

    theta = np.linspace(0, 2 * np.pi, 721)[:-1]
    ph = rng.uniform(0, 2 * np.pi, 3)
    r = 1 + 0.08 * np.sin(3 * theta + ph[0]) + 0.05 * np.sin(7 * theta + ph[1]) + 0.03 * np.sin(13 * theta + ph[2])
    return shapely.Polygon(np.column_stack([130 + 18 * r * np.cos(theta), -25 + 13 * r * np.sin(theta)]))


def generate(folder: Path, *, n_fossil: int, n_modern: int, n_taxa: int, n_regions: int, n_localities: int,
             seed: int = 20261) -> dict:
    """Write the invented study into ``folder``; return its sizes."""
    import geopandas as gpd
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.parquet as pq
    import shapely

    rng = np.random.default_rng(seed)
    folder.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()

    # regions: Voronoi cells inside an irregular coastline, boundaries densified to 0.02°
    outline = _outline(rng)
    seeds = []
    while len(seeds) < n_regions:
        p = np.column_stack([rng.uniform(EXTENT[0], EXTENT[2], n_regions),
                             rng.uniform(EXTENT[1], EXTENT[3], n_regions)])
        seeds.extend(p[shapely.contains_xy(outline, p[:, 0], p[:, 1])])
    seeds = np.array(seeds[:n_regions])
    cells = shapely.get_parts(shapely.voronoi_polygons(shapely.multipoints(seeds), extend_to=shapely.box(*EXTENT)))
    cells = shapely.segmentize(shapely.intersection(cells, outline), 0.02)
    order = np.argsort(shapely.get_coordinates(shapely.centroid(cells))[:, 0])
    cells = cells[order]
    rid = [f"R{i + 1:04d}" for i in range(len(cells))]
    regions = gpd.GeoDataFrame({"region_id": rid, "name": [f"District {i + 1}" for i in range(len(cells))]},
                               geometry=cells, crs="EPSG:4326")
    regions.to_parquet(folder / "regions.parquet")

    # taxa: invented names and ranks, 60 % living, four traits
    names = _names(n_taxa, rng)
    tid = np.array([f"T{i + 1:05d}" for i in range(n_taxa)], dtype=object)
    extant = rng.random(n_taxa) < 0.6
    fam = rng.integers(0, max(n_taxa // 20, 1), n_taxa)
    taxa = pa.table({
        "taxon_id": tid, "scientificName": names, "taxonRank": np.full(n_taxa, "genus", dtype=object),
        "kingdom": np.full(n_taxa, "Animalia", dtype=object),
        "phylum": np.array([f"Phylozoa{p}" for p in fam % 4], dtype=object),
        "class": np.array([f"Classida{c}" for c in fam % 20], dtype=object),
        "order": np.array([f"Ordinida{o}" for o in fam % 100], dtype=object),
        "family": np.array([f"Familidae{f}" for f in fam], dtype=object),
        "genus": names, "extant": extant,
        "depth_zone": np.array(["shelf", "slope", "basin"], dtype=object)[rng.integers(0, 3, n_taxa)],
        "body_size": np.array(["small", "medium", "large"], dtype=object)[rng.integers(0, 3, n_taxa)],
        "calcified": rng.random(n_taxa) < 0.5,
        "thermal_breadth_c": np.round(rng.normal(15, 5, n_taxa), 1),
    })
    pq.write_table(taxa, folder / "taxa.parquet")

    # fossil record: each taxon a hat-shaped history between its first and last appearance
    first = rng.uniform(10, 250, n_taxa)
    last = np.where(extant, 0.0, rng.uniform(0, 1, n_taxa) * (first - 5))
    weight = (first - last) * rng.lognormal(0, 0.8, n_taxa)
    counts = rng.multinomial(n_fossil, weight / weight.sum())
    taxon = np.repeat(np.arange(n_taxa), counts)
    target = last[taxon] + (first[taxon] - last[taxon]) * rng.beta(2, 2, n_fossil)
    # localities: 70 % dated within one 10-Myr bin (stage-like ranges), 30 % with wider ranges
    mid = np.sort(rng.uniform(0, 252, n_localities))
    narrow = rng.random(n_localities) < 0.7
    w = np.where(narrow, rng.uniform(1, 5, n_localities), rng.uniform(5, 25, n_localities))
    b = np.floor(mid / 10) * 10
    young = np.where(narrow, b + rng.uniform(0, 1, n_localities) * (10 - w), np.maximum(mid - w / 2, 0))
    old = young + w
    lat = np.round(rng.uniform(-75, 75, n_localities), 4)
    lon = np.round(rng.uniform(-180, 180, n_localities), 4)
    loc = np.clip(np.searchsorted(mid, target) + rng.integers(-30, 31, n_fossil), 0, n_localities - 1)
    fossils = pa.table({
        "occurrenceID": _ids("F", n_fossil), "taxon_id": pa.array(tid[taxon]),
        "oldest_ma": np.round(old[loc], 3), "youngest_ma": np.round(young[loc], 3),
        "decimalLatitude": lat[loc], "decimalLongitude": lon[loc],
        "locationID": pc.take(_ids("LOC", n_localities), pa.array(loc)),
    })
    pq.write_table(fossils, folder / "fossil_occurrences.parquet", row_group_size=1 << 20)
    del fossils, taxon, target, loc

    # modern records of living taxa: clouds around each taxon's home, Darwin Core columns
    living = np.flatnonzero(extant)
    minx, miny, maxx, maxy = EXTENT
    home = np.column_stack([rng.uniform(minx + 3, maxx - 3, len(living)), rng.uniform(miny + 3, maxy - 3, len(living))])
    spread = rng.uniform(0.3, 4.0, len(living))
    mw = rng.lognormal(0, 1.0, len(living))
    counts = rng.multinomial(n_modern, mw / mw.sum())
    who = np.repeat(np.arange(len(living)), counts)
    x = np.clip(home[who, 0] + rng.normal(0, 1, n_modern) * spread[who], minx, maxx)
    y = np.clip(home[who, 1] + rng.normal(0, 1, n_modern) * spread[who], miny, maxy)
    digits = rng.choice([4, 3, 2], n_modern, p=[0.7, 0.2, 0.1])  # coarse records repeat coordinates
    scale = 10.0 ** digits
    x, y = np.round(x * scale) / scale, np.round(y * scale) / scale
    perm = rng.permutation(n_modern)  # exports are not grouped by taxon
    name_idx = pa.array(living[who][perm].astype(np.int32))
    dates = pa.array([f"{yr}-{m:02d}-{d:02d}" for yr in range(1950, 2026) for m in range(1, 13) for d in (1, 15)])
    modern = pa.table({
        "occurrenceID": _ids("M", n_modern),
        "scientificName": pa.DictionaryArray.from_arrays(name_idx, pa.array(names)).cast(pa.string()),
        "decimalLatitude": y[perm], "decimalLongitude": x[perm],
        "basisOfRecord": pa.DictionaryArray.from_arrays(
            pa.array(rng.integers(0, 3, n_modern).astype(np.int32)),
            pa.array(["HumanObservation", "PreservedSpecimen", "MaterialSample"])).cast(pa.string()),
        "eventDate": pa.DictionaryArray.from_arrays(pa.array(rng.integers(0, len(dates), n_modern).astype(np.int32)),
                                                    dates).cast(pa.string()),
    })
    pq.write_table(modern, folder / "modern_occurrences.parquet", row_group_size=1 << 20)
    (folder / "study.toml").write_text(_STUDY_TOML.format(n=n_taxa, seed=seed), encoding="utf-8")
    meta = {"version": GENERATOR_VERSION, "seed": seed, "n_fossil": n_fossil, "n_modern": n_modern,
            "n_taxa": n_taxa, "n_regions": len(regions), "n_localities": n_localities,
            "seconds": round(time.perf_counter() - t0, 1)}
    (folder / "meta.json").write_text(json.dumps(meta, indent=1))
    return meta


def _ids(prefix: str, n: int):
    import pyarrow as pa
    import pyarrow.compute as pc

    width = len(str(n))
    digits = pc.utf8_lpad(pc.cast(pa.array(np.arange(1, n + 1)), pa.string()), width, "0")
    return pc.binary_join_element_wise(pa.scalar(prefix), digits, "")


_STUDY_TOML = '''# Invented benchmark study: every taxon, place and number here is made up by a seeded generator
# (tests/benchmarks/bench.py).

[study]
name = "Benchmark: invented national study ({n} taxa)"
seed = {seed}

[inputs]
taxa = "taxa.parquet"
fossil_occurrences = "fossil_occurrences.parquet"
modern_occurrences = "modern_occurrences.parquet"
regions = "regions.parquet"

[traits.depth_zone]
kind = "categorical"
levels = ["shelf", "slope", "basin"]
reference = "shelf"

[traits.body_size]
kind = "ordinal"
levels = ["small", "medium", "large"]

[traits.calcified]
kind = "binary"

[traits.thermal_breadth_c]
kind = "numeric"

[scenario]
warming_c = 4.0
'''


def ensure_data(scale: str, cache: Path, regenerate: bool) -> Path:
    folder = cache / scale
    meta = folder / "meta.json"
    want = dict(SCALES[scale])
    if not regenerate and meta.is_file():
        got = json.loads(meta.read_text())
        if got.get("version") == GENERATOR_VERSION and all(got.get(k) == v for k, v in want.items()
                                                           if k != "n_regions"):
            return folder
    print(f"generating the {scale} study in {folder} ...", file=sys.stderr, flush=True)
    info = generate(folder, **want)
    print(f"  done in {info['seconds']} s", file=sys.stderr, flush=True)
    return folder


# ============================================================ inputs as the stages receive them

def _read(folder: Path, name: str, columns=None):
    import pyarrow.parquet as pq

    return pq.read_table(folder / f"{name}.parquet", columns=columns).to_pandas()


def _fossils_and_taxa(folder: Path):
    occ = _read(folder, "fossil_occurrences", ["occurrenceID", "taxon_id", "oldest_ma", "youngest_ma",
                                               "decimalLatitude", "decimalLongitude", "locationID"])
    taxa = _read(folder, "taxa")
    return occ, taxa


def _modern(folder: Path):
    """Modern records with taxon_id (linked by name, as intake does) and the regions."""
    import geopandas as gpd
    import pandas as pd

    occ = _read(folder, "modern_occurrences", ["occurrenceID", "scientificName", "decimalLatitude", "decimalLongitude"])
    taxa = _read(folder, "taxa", ["taxon_id", "scientificName"])
    lookup = pd.Index(taxa["scientificName"]).get_indexer(occ["scientificName"])
    occ["taxon_id"] = pd.array(taxa["taxon_id"].to_numpy()[lookup], dtype="str")
    occ = occ.drop(columns="scientificName")
    return occ, gpd.read_parquet(folder / "regions.parquet")


# ============================================================ stages (each runs in its own process)

def stage_floor(folder, args):
    """Read every input once with pyarrow: the columns the tool needs, nothing else."""
    import pyarrow.parquet as pq

    pq.read_table(folder / "taxa.parquet", columns=["taxon_id"])  # one-time library start-up, not reading
    t0 = time.perf_counter()
    n = 0
    for name, cols in (("taxa", None),
                       ("fossil_occurrences", ["occurrenceID", "taxon_id", "oldest_ma", "youngest_ma",
                                               "decimalLatitude", "decimalLongitude", "locationID"]),
                       ("modern_occurrences", ["occurrenceID", "scientificName", "decimalLatitude",
                                               "decimalLongitude"]),
                       ("regions", None)):
        n += pq.read_table(folder / f"{name}.parquet", columns=cols).num_rows
    return {"seconds": time.perf_counter() - t0, "rows": n}


def stage_intake(folder, args):
    import warnings

    from analog.intake import load_study

    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        study = load_study(folder)
    rows = len(study.taxa) + len(study.fossil_occurrences) + len(study.modern_occurrences) + len(study.regions)
    return {"seconds": time.perf_counter() - t0, "rows": rows}


def stage_spatial(folder, args):
    from analog.engine import get_engine
    from analog.regions.core import _region_records
    from analog.regions.spatial import assign_points

    occ, regions = _modern(folder)
    with get_engine(args.engine) as engine:
        t0 = time.perf_counter()
        pos = assign_points(occ["decimalLongitude"].to_numpy(), occ["decimalLatitude"].to_numpy(), regions,
                            engine=engine)
        t1 = time.perf_counter()
        records = _region_records(pos, occ["taxon_id"], regions["region_id"].astype(str).to_numpy())
        t2 = time.perf_counter()
    return {"seconds": t2 - t0, "rows": len(occ), "detail": {"assign": t1 - t0, "presence counts": t2 - t1},
            "check": {"assigned": int((pos >= 0).sum()), "pairs": len(records)}}


def stage_spatial_naive(folder, args):
    """Straightforward: geopandas.sjoin of every point (no de-duplication), then a pandas count."""
    import geopandas as gpd

    occ, regions = _modern(folder)
    n = len(occ)
    k = min(n, args.naive_points)
    sample = occ.sample(n=k, random_state=1) if k < n else occ
    t0 = time.perf_counter()
    pts = gpd.GeoDataFrame({"taxon_id": sample["taxon_id"].to_numpy()},
                           geometry=gpd.points_from_xy(sample["decimalLongitude"], sample["decimalLatitude"]),
                           crs="EPSG:4326")
    j = gpd.sjoin(pts, regions[["region_id", "geometry"]], how="inner", predicate="intersects")
    j = j.sort_values("region_id", kind="stable")
    j = j[~j.index.duplicated(keep="first")]     # lowest region_id for points on shared edges
    counts = j.groupby(["region_id", "taxon_id"]).size()
    sec = time.perf_counter() - t0
    return {"seconds": sec * n / k, "measured_seconds": sec, "rows": n, "sample_rows": k,
            "check": {"pairs_in_sample": len(counts)},
            "note": f"measured on {k:,} of {n:,} points, scaled linearly" if k < n else "all points"}


def _occupancy_params():
    from analog.trajectory import PARAMS

    return PARAMS()


def stage_occupancy(folder, args):
    from analog.engine import get_engine
    from analog.trajectory.occupancy import build_occupancy

    occ, taxa = _fossils_and_taxa(folder)
    p = _occupancy_params()
    with get_engine(args.engine) as engine:
        t0 = time.perf_counter()
        res = build_occupancy(occ, taxa, units=p.units, cell_km=p.cell_km, bins=p.bins, bin_width_ma=p.bin_width_ma,
                              age_handling=p.age_handling, age_draws=p.age_draws, quota=p.quota,
                              subsample_reps=p.subsample_reps, min_sampled=p.min_sampled,
                              rng=np.random.default_rng(1), engine=engine)
        sec = time.perf_counter() - t0
    return {"seconds": sec, "rows": len(occ), "check": {"series_rows": len(res.table)}}


def stage_occupancy_naive(folder, args):
    """Straightforward: the same counts with pandas, one taxon at a time in a Python loop.

    Per age draw: point ages, bins, sampled cells per bin (drop_duplicates + groupby on the whole
    table), then for each taxon its occupied cells per bin. The per-taxon loop runs for a sample of
    taxa and is scaled by the number of taxa; the whole-table parts run in full.
    """
    import pandas as pd
    from pyproj import Transformer

    occ, taxa = _fossils_and_taxa(folder)
    p = _occupancy_params()
    rng = np.random.default_rng(1)
    all_taxa = occ["taxon_id"].unique()
    k = min(len(all_taxa), args.naive_taxa)
    chosen = set(rng.choice(all_taxa, k, replace=False)) if k < len(all_taxa) else set(all_taxa)
    t0 = time.perf_counter()
    tr = Transformer.from_crs("EPSG:4326", "EPSG:6933", always_xy=True)
    x, y = tr.transform(occ["decimalLongitude"].to_numpy(), occ["decimalLatitude"].to_numpy())
    size = p.cell_km * 1000.0
    df = pd.DataFrame({"taxon_id": occ["taxon_id"], "cx": np.floor(x / size).astype(int),
                       "cy": np.floor(y / size).astype(int)})
    young, width = occ["youngest_ma"].to_numpy(), (occ["oldest_ma"] - occ["youngest_ma"]).to_numpy()
    loop = 0.0
    results = []
    for _ in range(p.age_draws):
        df["bin"] = np.floor((young + rng.random(len(df)) * width) / p.bin_width_ma).astype(int)
        sampled = df.drop_duplicates(["bin", "cx", "cy"]).groupby("bin").size()
        t1 = time.perf_counter()
        for taxon_id, g in df[df["taxon_id"].isin(chosen)].groupby("taxon_id"):
            occupied = g.drop_duplicates(["bin", "cx", "cy"]).groupby("bin").size()
            results.append((taxon_id, occupied / sampled.reindex(occupied.index)))
        loop += time.perf_counter() - t1
    total = time.perf_counter() - t0
    scaled = (total - loop) + loop * len(all_taxa) / k
    return {"seconds": scaled, "measured_seconds": total, "rows": len(occ), "sample_taxa": k,
            "note": (f"per-taxon loop measured on {k:,} of {len(all_taxa):,} taxa, scaled linearly; "
                     "whole-table parts in full") if k < len(all_taxa) else "all taxa"}


def _trajectory_study(folder):
    import pandas as pd

    from analog.reference import load_intervals
    from analog.study import Study, StudyConfig

    occ, taxa = _fossils_and_taxa(folder)
    cfg = StudyConfig(name="bench", seed=1, folder=folder)
    return Study(config=cfg, taxa=taxa, fossil_occurrences=occ, modern_occurrences=pd.DataFrame(), regions=None,
                 intervals=load_intervals())


def stage_trajectory(folder, args):
    import warnings

    from analog.engine import get_engine
    from analog.trajectory import PARAMS, run_trajectory

    study = _trajectory_study(folder)
    marks = {}

    def progress(label, done, total):
        marks.setdefault(label, time.perf_counter())

    with get_engine(args.engine) as engine, warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t0 = time.perf_counter()
        res = run_trajectory(study, PARAMS(), rng=np.random.default_rng(1), progress=progress, engine=engine)
        t_end = time.perf_counter()
    order = ["occupancy", "model fits", "extinction probability", "noise null", "hindcast", "done"]
    detail = {a: marks[b] - marks[a] for a, b in zip(order, order[1:]) if a in marks and b in marks}
    n_ext = int(res.risk["trajectory_p"].notna().sum())
    return {"seconds": t_end - t0, "rows": len(study.fossil_occurrences), "detail": detail,
            "check": {"extant_with_estimate": n_ext, "series": int(res.occupancy["taxon_id"].nunique())}}


def _analog_study(folder):
    """The Study the analog stage reads, built without the (slow) validation of every input.

    Taxa are typed as intake types them (categorical and ordinal traits as pandas
    Categoricals in the declared order, binary traits as float 0/1, numeric as float);
    modern occurrences are not read (the analog stage does not use them).
    """
    import pandas as pd

    from analog.intake.config import read_config
    from analog.intake.findings import Findings
    from analog.reference import load_intervals
    from analog.study import RANK_COLUMNS, Study

    config, _ = read_config(folder, Findings())
    occ, taxa = _fossils_and_taxa(folder)
    for c in ("taxon_id", "scientificName", "taxonRank", *RANK_COLUMNS):
        taxa[c] = taxa[c].astype("str")
    taxa["extant"] = taxa["extant"].astype(bool)
    for name, spec in config.traits.items():
        if spec.kind in ("categorical", "ordinal"):
            taxa[name] = pd.Categorical(taxa[name].astype(object), categories=list(spec.levels),
                                        ordered=spec.kind == "ordinal")
        else:
            taxa[name] = pd.to_numeric(taxa[name]).astype(float)
    occ["taxon_id"] = occ["taxon_id"].astype("str")
    return Study(config=config, taxa=taxa, fossil_occurrences=occ, modern_occurrences=pd.DataFrame(),
                 regions=None, intervals=load_intervals())


def _peak_rss_reset() -> bool:
    """Reset this process's peak resident set size (Linux ``clear_refs``); False if not possible."""
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return True
    except OSError:
        return False


def _vm_hwm_bytes() -> int:
    """Peak resident set size since the last reset (``VmHWM``), 0 if unknown."""
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return 0


def stage_analog(folder, args):
    """The analog-evidence stage alone (fates, selectivity, pooling, matching, analog risk)."""
    import gc
    import warnings

    from analog.analogs import run_analog
    from analog.rng import stage_generators

    study = _analog_study(folder)
    params = study.config.params("analog")
    gc.collect()
    reset = _peak_rss_reset()
    inputs_rss = _vm_hwm_bytes()
    marks = {}

    def progress(label, done, total):
        marks[label] = time.perf_counter()   # the last call: when that step finished
        _say_step(f"the analog stage ({label} {done}/{total})")

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t0 = time.perf_counter()
        marks["start"] = t0
        res = run_analog(study, params, rng=stage_generators(study.config.seed)["analog"], progress=progress)
        t_end = time.perf_counter()
    marks["done"] = t_end
    order = [k for k in ("start", "fates", "selectivity", "matching", "bootstrap", "done") if k in marks]
    names = {"fates": "fates", "selectivity": "selectivity fits", "matching": "pooling, leave-one-out, matching",
             "bootstrap": "point risk and bootstrap", "done": "tables"}
    detail = {names[b]: marks[b] - marks[a] for a, b in zip(order, order[1:])}
    out = {"seconds": t_end - t0, "rows": len(study.fossil_occurrences), "detail": detail,
           "check": {"scored": int(res.risk["analog_p"].notna().sum()), "matches": len(res.matches),
                     "intervals_used": int(res.interval_weights["used"].sum())}}
    if reset:
        out["stage_peak_rss_bytes"] = _vm_hwm_bytes()
        out["inputs_rss_bytes"] = inputs_rss
        out["memory_note"] = (f"peak RSS during the stage alone {out['stage_peak_rss_bytes'] / 2 ** 30:.2f} GiB "
                       f"(inputs in memory before it {inputs_rss / 2 ** 30:.2f} GiB)")
    return out


def stage_bootstrap_naive(folder, args):
    """Straightforward parametric bootstrap, timed two ways on a sample of living series.

    (1) one taxon at a time, each taxon's replicates simulated and refitted together;
    (2) one taxon and one replicate at a time (simulate one series, refit every model).
    Both use the package's own model code, so only the looping differs; both are scaled
    linearly to all living series.
    """
    import warnings

    from analog.trajectory import PARAMS
    from analog.trajectory.extinction import _bootstrap_chunk, bootstrap_probabilities
    from analog.trajectory.models import FitSet, SeriesBatch, fit_models
    from analog.trajectory.occupancy import build_occupancy

    study = _trajectory_study(folder)
    p = PARAMS()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        occ = build_occupancy(study.fossil_occurrences, study.taxa, rng=np.random.default_rng(1))
    table = occ.table
    table["bin_mid_ma"] = (table["bin_oldest_ma"] + table["bin_youngest_ma"]) / 2.0
    batch = SeriesBatch.from_table(table)
    fitset = fit_models(batch, models=p.models, min_series_bins=p.min_series_bins)
    extant = set(study.taxa.loc[study.taxa["extant"].astype(bool), "taxon_id"])
    idx = [i for i, key in enumerate(batch.key) if key in extant and fitset.weights[i].sum() > 0]
    rng = np.random.default_rng(2)
    thr = float(np.log(p.threshold_occupancy / (1 - p.threshold_occupancy)))
    kw = dict(threshold=thr, horizon_bins=p.horizon_bins, step_myr=occ.step_myr, rng=rng,
              min_series_bins=p.min_series_bins)

    def one(i):
        return FitSet(batch.take([i]), {m: f.take([i]) for m, f in fitset.fits.items()}, fitset.weights[[i]],
                      fitset.models)

    k1 = min(len(idx), args.naive_series)
    t0 = time.perf_counter()
    for i in rng.choice(idx, k1, replace=False):
        bootstrap_probabilities(one(i), n_boot=p.n_bootstrap, **kw)
    per_taxon = time.perf_counter() - t0
    k2 = min(len(idx), max(args.naive_series // 10, 1))
    t0 = time.perf_counter()
    for i in rng.choice(idx, k2, replace=False):
        shared = (one(i), thr, p.horizon_bins, occ.step_myr, p.min_series_bins)
        for _ in range(p.n_bootstrap):  # simulate one series, refit every model, score it
            _bootstrap_chunk((np.array([0]), (0, 1), rng), shared)
    per_replicate = time.perf_counter() - t0
    n = len(idx)
    return {"seconds": per_replicate * n / k2, "measured_seconds": per_replicate,
            "per_taxon_seconds": per_taxon * n / k1, "rows": len(study.fossil_occurrences),
            "note": (f"one taxon and one replicate at a time, measured on {k2:,} of {n:,} living series, scaled "
                     f"linearly; one taxon at a time with its {p.n_bootstrap} replicates together: "
                     f"{per_taxon * n / k1:,.1f} s (measured on {k1:,} series)")}


def stage_whole(folder, args):
    import warnings

    from analog.engine import get_engine
    from analog.intake import load_study
    from analog.pipeline import STAGE_ORDER, run_study, write_outputs

    stages = tuple(s for s in STAGE_ORDER if s not in set(args.skip_stages))

    def progress(stage):
        def step(label, done, total):
            _say_step(f"the {stage} stage ({label})")
        return step

    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        _say_step("intake")
        study = load_study(folder)
        t_intake = time.perf_counter() - t0
        with get_engine(args.engine) as engine:
            run = run_study(study, stages=stages, engine=engine, progress=progress)
        _say_step("writing the outputs")
        t1 = time.perf_counter()
        with tempfile.TemporaryDirectory() as tmp:
            write_outputs(run, Path(tmp) / "out", figures=False)
        t2 = time.perf_counter()
    detail = {"intake": t_intake, **run.timings, "write (tables, briefing, no figures)": t2 - t1}
    rows = len(study.taxa) + len(study.fossil_occurrences) + len(study.modern_occurrences) + len(study.regions)
    return {"seconds": t2 - t0, "rows": rows, "detail": detail, "stages": list(run.stages_done),
            "skipped": dict(run.skipped)}


# ============================================================ driver

_STEP_FILE = "ANALOG_BENCH_STEP_FILE"  # the worker writes what it is doing here, for the memory guard


def _say_step(text: str) -> None:
    path = os.environ.get(_STEP_FILE)
    if path:
        Path(path).write_text(text)


def _worker(args) -> None:
    folder = Path(args.data)
    out = globals()[f"stage_{args.worker}"](folder, args)
    ru = resource.getrusage(resource.RUSAGE_SELF)
    out["peak_rss_bytes"] = ru.ru_maxrss * 1024   # kilobytes on Linux
    out["children_peak_rss_bytes"] = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss * 1024
    print("RESULT " + json.dumps(out), flush=True)


def _guard(child: subprocess.Popen, cap_bytes: float, timeout: float) -> str:
    """Wait for ``child``; stop it if its resident memory passes ``cap_bytes`` or time runs out.

    The machine is shared: a stage that runs away must be stopped before the kernel's
    out-of-memory killer picks a process, possibly another user's. Returns why it was
    stopped ('' when it finished by itself).
    """
    page = os.sysconf("SC_PAGE_SIZE")
    start = time.perf_counter()
    while child.poll() is None:
        try:
            with open(f"/proc/{child.pid}/statm") as fh:
                rss = int(fh.read().split()[1]) * page
        except OSError:
            rss = 0
        why = ""
        if rss > cap_bytes:
            why = f"stopped at {rss / 2 ** 30:.1f} GiB resident memory (cap {cap_bytes / 2 ** 30:g} GiB)"
        elif time.perf_counter() - start > timeout:
            why = f"did not finish within {timeout:.0f} s (stopped)"
        if why:
            child.kill()
            child.wait()
            return why
        time.sleep(0.05)
    return ""


def _run_stage(stage: str, folder: Path, args) -> dict:
    cmd = [sys.executable, str(Path(__file__).resolve()), "--worker", stage, "--data", str(folder),
           "--engine", args.engine, "--naive-points", str(args.naive_points), "--naive-taxa", str(args.naive_taxa),
           "--naive-series", str(args.naive_series)]
    if args.skip_stages:
        cmd += ["--skip-stages", ",".join(args.skip_stages)]
    cmd += ["--memory-cap", str(args.memory_cap)]
    print(f"[{time.strftime('%H:%M:%S')}] {stage} ...", file=sys.stderr, flush=True)
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        step_file = Path(tmp) / "step"
        out_file, err_file = Path(tmp) / "out", Path(tmp) / "err"
        with open(out_file, "w") as out, open(err_file, "w") as err:
            child = subprocess.Popen(cmd, stdout=out, stderr=err, env={**os.environ, _STEP_FILE: str(step_file)})
            stopped = _guard(child, args.memory_cap * 2 ** 30, args.timeout)
        if stopped:
            step = step_file.read_text() if step_file.exists() else ""
            return {"error": stopped + (f" during {step}" if step else ""), "wall_process": time.perf_counter() - t0}
        proc = subprocess.CompletedProcess(cmd, child.returncode, out_file.read_text(), err_file.read_text())
    lines = [ln for ln in proc.stdout.splitlines() if ln.startswith("RESULT ")]
    if proc.returncode != 0 or not lines:
        tail = (proc.stderr or proc.stdout).strip().splitlines()[-3:]
        return {"error": f"exit {proc.returncode}: {' | '.join(tail)}"}
    res = json.loads(lines[-1][len("RESULT "):])
    res["wall_process"] = time.perf_counter() - t0
    print(f"    {res['seconds']:.1f} s", file=sys.stderr, flush=True)
    return res


def _fmt_s(x):
    return f"{x:,.1f}" if x >= 10 else f"{x:,.2f}"


def report(scale: str, folder: Path, results: dict, args, load: tuple) -> str:
    meta = json.loads((folder / "meta.json").read_text())
    floor = results.get("floor", {}).get("seconds")
    naive_of = {"spatial": "spatial_naive", "occupancy": "occupancy_naive", "trajectory": "bootstrap_naive"}
    labels = {"floor": "read floor (pyarrow, needed columns)", "intake": "intake (read + validate)",
              "spatial": "spatial assignment + presence counts",
              "spatial_naive": "  straightforward: sjoin every point",
              "occupancy": "occupancy binning (20 age draws)",
              "occupancy_naive": "  straightforward: per-taxon loop",
              "trajectory": "trajectory stage (whole)", "bootstrap_naive": "  straightforward bootstrap: loops",
              "analog": "analog stage (whole)",
              "whole": "whole run, no figures"}
    lines = [f"### analog benchmark, {scale} scale",
             "",
             f"{meta['n_fossil']:,} fossil occurrences, {meta['n_modern']:,} modern occurrences, "
             f"{meta['n_taxa']:,} taxa, {meta['n_regions']:,} regions; engine `{args.engine}`; "
             f"{os.cpu_count()} CPU cores, Python {platform.python_version()}; "
             f"load average {load[0]:.1f} at start, {load[1]:.1f} at end (machine shared).",
             "",
             "| stage | rows | wall s | rows/s | peak RSS GiB | vs straightforward | vs read floor |",
             "|---|---:|---:|---:|---:|---:|---:|"]
    notes = []
    for stage in [s for s in STAGES if s in results]:
        r = results[stage]
        if "error" in r:
            lines.append(f"| {labels[stage]} | | {r['error']} (after {r.get('wall_process', 0):,.0f} s) | | | | |")
            continue
        sec, rows = r["seconds"], r["rows"]
        gib = r["peak_rss_bytes"] / 2 ** 30
        vs_naive = ""
        if stage in naive_of and naive_of[stage] in results and "error" not in results[naive_of[stage]]:
            base = results[naive_of[stage]]["seconds"]
            ours = r["detail"]["extinction probability"] if stage == "trajectory" else sec
            vs_naive = f"{base / ours:,.1f}x faster"
            if stage == "trajectory":
                per_taxon = results[naive_of[stage]]["per_taxon_seconds"]
                vs_naive = (f"bootstrap step: {base / ours:,.1f}x faster than per-replicate loop, "
                            f"{per_taxon / ours:,.1f}x than per-taxon loop")
        vs_floor = f"{sec / floor:,.1f}x" if floor and stage != "floor" else ""
        extra = " (est.)" if "measured_seconds" in r else ""
        lines.append(f"| {labels[stage]} | {rows:,} | {_fmt_s(sec)}{extra} | {rows / sec:,.0f} | {gib:.2f} | "
                     f"{vs_naive} | {vs_floor} |")
        if r.get("note"):
            notes.append(f"- {labels[stage].strip()}: {r['note']} (measured {r['measured_seconds']:.1f} s).")
        if r.get("memory_note"):
            notes.append(f"- {labels[stage].strip()}: {r['memory_note']}.")
        if r.get("detail"):
            parts = ", ".join(f"{k} {v:.1f} s" for k, v in r["detail"].items())
            notes.append(f"- {labels[stage].strip()}: {parts}.")
        if r.get("skipped"):
            notes.append(f"- whole run: stages not run: {r['skipped']}.")
    lines += ["", "Notes:"] + notes + [
        "- Peak RSS: maximum resident set size of the fresh process that ran the stage (Python, libraries and "
        "the stage's inputs included; `resource.getrusage`).",
        "- Ratios are measured in this run. 'vs read floor' = stage time / time to read the needed input columns "
        "once with pyarrow."]
    return "\n".join(lines)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description="Time analog's stages on an invented national-scale study.")
    p.add_argument("--scale", choices=tuple(SCALES), default="small")
    p.add_argument("--cache", default=str(DEFAULT_CACHE), help="folder for the generated studies")
    p.add_argument("--regenerate", action="store_true", help="rebuild the study even if cached")
    p.add_argument("--stages", default=",".join(STAGES), help=f"comma-separated subset of {','.join(STAGES)}")
    p.add_argument("--engine", choices=("local", "dask"), default="local")
    p.add_argument("--skip-stages", default="", help="pipeline stages the whole run leaves out (e.g. analog)")
    p.add_argument("--naive-points", type=int, default=1_000_000, help="points the straightforward join runs on")
    p.add_argument("--naive-taxa", type=int, default=200, help="taxa the straightforward occupancy loop runs on")
    p.add_argument("--naive-series", type=int, default=100, help="series the straightforward bootstrap runs on")
    p.add_argument("--timeout", type=float, default=3 * 3600, help="seconds before a stage is stopped")
    p.add_argument("--memory-cap", type=float, default=12.0,
                   help="GiB of resident memory at which a stage is stopped (protects a shared machine)")
    p.add_argument("--out", help="also write the Markdown table here")
    p.add_argument("--worker", help=argparse.SUPPRESS)
    p.add_argument("--data", help=argparse.SUPPRESS)
    args = p.parse_args(argv)
    args.skip_stages = [s for s in args.skip_stages.split(",") if s]
    if args.worker:
        _worker(args)
        return 0
    folder = ensure_data(args.scale, Path(args.cache), args.regenerate)
    stages = [s.strip() for s in args.stages.split(",") if s.strip()]
    bad = [s for s in stages if s not in STAGES]
    if bad:
        p.error(f"unknown stage(s) {bad}; choose from {list(STAGES)}")
    load0 = os.getloadavg()[0]
    results = {s: _run_stage(s, folder, args) for s in stages}
    text = report(args.scale, folder, results, args, (load0, os.getloadavg()[0]))
    print(text)
    if args.out:
        Path(args.out).write_text(text + "\n\n<!-- raw -->\n<!-- " + json.dumps(results) + " -->\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
