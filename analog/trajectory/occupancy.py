"""Occupancy series: occupied sampling units / sampled units, per taxon and time bin.

Everything here is vectorized over occurrences (integer codes, ``np.unique`` and
``np.bincount``); the only Python loops run over age draws and subsampling
repetitions, never over rows.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import AnalogError

__all__ = ["OccupancyTable", "time_bins", "sampling_units", "build_occupancy", "EQUAL_AREA_CRS"]

# WGS 84 / NSIDC EASE-Grid 2.0 Global: a cylindrical equal-area projection, so
# square cells of fixed side in projected metres have equal area everywhere.
EQUAL_AREA_CRS = "EPSG:6933"
_TOL = 1e-9  # Myr; guards bin-edge comparisons against float rounding


@dataclass
class OccupancyTable:
    """Occupancy counts for every taxon's series.

    Attributes
    ----------
    table : DataFrame
        One row per taxon and bin inside the taxon's series (first to last occupied
        bin; extant taxa run on to the youngest bin): ``taxon_id, bin_oldest_ma,
        bin_youngest_ma, occupied, sampled, occupancy, low_sample, empirical_logit,
        bin_index``. Counts are averages over age draws / subsamples when those are used.
        ``occupancy`` is ``occupied / sampled`` (NaN where the bin has no sampled unit).
    bins : DataFrame
        ``bin_index, bin_oldest_ma, bin_youngest_ma, bin_mid_ma, label, sampled, low_sample``;
        bin 0 is the youngest.
    dropped : DataFrame
        ``reason, count``: occurrences left out and why.
    method : str
        One sentence stating units, bins, age handling and subsampling.
    """

    table: pd.DataFrame
    bins: pd.DataFrame
    dropped: pd.DataFrame
    method: str
    step_myr: float
    notes: list[str] = field(default_factory=list)


def time_bins(max_age_ma: float, *, bins: str = "fixed", bin_width_ma: float = 10.0,
              timescale: pd.DataFrame | None = None) -> pd.DataFrame:
    """Contiguous time bins from 0 Ma back to at least ``max_age_ma``.

    Parameters
    ----------
    max_age_ma : float
        Oldest age that must be covered (fixed bins only).
    bins : {'fixed', 'stages'}, default='fixed'
        Fixed width anchored at 0 Ma, or the stages of ``timescale``.
    bin_width_ma : float
        Width of fixed bins in Myr.
    timescale : DataFrame, optional
        Stages with ``oldest_ma, youngest_ma`` (and a name column); required for
        ``bins='stages'``.

    Returns
    -------
    DataFrame
        ``bin_index, bin_oldest_ma, bin_youngest_ma, bin_mid_ma, label``; index 0 is
        the youngest bin.
    """
    if bins == "fixed":
        if not bin_width_ma > 0:
            raise AnalogError(f"`bin_width_ma` was {bin_width_ma!r} but must be > 0")
        k = max(1, int(np.ceil(max(max_age_ma, 0.0) / bin_width_ma - _TOL)))
        young = np.arange(k) * float(bin_width_ma)
        old = young + float(bin_width_ma)
        labels = [f"{o:g}–{y:g} Ma" for o, y in zip(old, young)]
    elif bins == "stages":
        if timescale is None:
            raise AnalogError("`bins` was 'stages' but no time scale was given")
        ts = _stage_rows(timescale).sort_values("youngest_ma", kind="stable")
        name_col = next((c for c in ("name", "stage", "label") if c in ts.columns), None)
        young = ts["youngest_ma"].to_numpy(float)
        old = ts["oldest_ma"].to_numpy(float)
        labels = ts[name_col].astype(str).tolist() if name_col else [f"{o:g}–{y:g} Ma" for o, y in zip(old, young)]
        # a stretch with no stage (e.g. a series not divided into stages) becomes its own bin,
        # named after the unit of the time scale that spans exactly that stretch, if there is one
        gaps = np.flatnonzero(young[1:] - old[:-1] > 1e-6)
        if np.any(old[:-1] - young[1:] > 1e-6):
            raise AnalogError("the time scale's stages overlap; cannot use them as bins")
        for g in gaps[::-1]:
            lo, hi = old[g], young[g + 1]
            match = timescale.loc[(np.abs(timescale["youngest_ma"] - lo) < 1e-6)
                                  & (np.abs(timescale["oldest_ma"] - hi) < 1e-6)]
            label = str(match[name_col].iloc[0]) if name_col and len(match) else f"{hi:g}–{lo:g} Ma"
            young = np.insert(young, g + 1, lo)
            old = np.insert(old, g + 1, hi)
            labels.insert(g + 1, label)
    else:
        raise AnalogError(f"`bins` was {bins!r} but is expected to be in {{'fixed', 'stages'}}")
    return pd.DataFrame({"bin_index": np.arange(len(young)), "bin_oldest_ma": old, "bin_youngest_ma": young,
                         "bin_mid_ma": (old + young) / 2.0, "label": labels})


def _stage_rows(timescale: pd.DataFrame) -> pd.DataFrame:
    """The finest rank of the time scale (stages / ages), whatever the table's rank column is called."""
    ts = timescale
    for col in ("rank", "level", "type"):
        if col in ts.columns:
            ranks = ts[col].astype(str).str.lower()
            pick = ranks.isin(["stage", "age"])
            if pick.any():
                return ts.loc[pick].copy()
    return ts.copy()


def sampling_units(occurrences: pd.DataFrame, *, units: str = "grid", cell_km: float = 100.0) -> np.ndarray:
    """Integer code of each occurrence's sampling unit (−1 = no unit).

    Parameters
    ----------
    occurrences : DataFrame
        With ``decimalLatitude, decimalLongitude`` (grid) or ``locationID`` (locality).
    units : {'grid', 'locality'}, default='grid'
        Equal-area grid cells of side ``cell_km`` in EPSG:6933, or localities.
    cell_km : float
        Cell side in km.

    Returns
    -------
    ndarray of int64
    """
    if units == "locality":
        codes, _ = pd.factorize(occurrences["locationID"], use_na_sentinel=True)
        return codes.astype(np.int64)
    if units != "grid":
        raise AnalogError(f"`units` was {units!r} but is expected to be in {{'grid', 'locality'}}")
    from pyproj import Transformer

    lat = occurrences["decimalLatitude"].to_numpy(float)
    lon = occurrences["decimalLongitude"].to_numpy(float)
    tr = Transformer.from_crs("EPSG:4326", EQUAL_AREA_CRS, always_xy=True)
    x, y = tr.transform(lon, lat)
    size = float(cell_km) * 1000.0
    ix = np.floor(np.asarray(x) / size).astype(np.int64)
    iy = np.floor(np.asarray(y) / size).astype(np.int64)
    ok = np.isfinite(x) & np.isfinite(y)
    key = np.where(ok, (ix - ix[ok].min(initial=0)) * 10_000_000 + (iy - iy[ok].min(initial=0)), -1)
    codes = np.full(len(key), -1, dtype=np.int64)
    codes[ok] = pd.factorize(key[ok])[0]
    return codes


def _bin_of_point(edges: np.ndarray, age: np.ndarray) -> np.ndarray:
    """Bin index of point ages (edges ascending from 0); −1 outside."""
    j = np.searchsorted(edges, age, side="right") - 1
    j = np.where(np.abs(age - edges[-1]) <= _TOL, len(edges) - 2, j)  # oldest edge closes the last bin
    return np.where((j >= 0) & (j < len(edges) - 1) & (age >= edges[0] - _TOL), j, -1)


def _bin_of_range(edges: np.ndarray, young: np.ndarray, old: np.ndarray) -> np.ndarray:
    """Bin index of age ranges that fit inside one bin; −1 otherwise."""
    jy = _bin_of_point(edges, young + _TOL)
    jy = np.where(np.abs(young - edges[-1]) <= _TOL, len(edges) - 2, jy)
    jo = np.searchsorted(edges, old - _TOL, side="left") - 1
    jo = np.maximum(jo, 0)
    return np.where((jy == jo) & (jy >= 0) & (old <= edges[-1] + _TOL), jy, -1)


def _count(taxon: np.ndarray, bin_: np.ndarray, unit: np.ndarray, n_taxa: int, n_bins: int,
           n_units: int, *, quota: int, reps: int, rng) -> tuple[np.ndarray, np.ndarray]:
    """Occupied (n_taxa, n_bins) and sampled (n_bins,) for one set of bin assignments.

    With ``quota > 0`` each bin's sampled units are subsampled to ``quota`` (without
    replacement) ``reps`` times and the counts averaged.
    """
    keep = (bin_ >= 0) & (unit >= 0)
    b, u, t = bin_[keep], unit[keep], taxon[keep]
    bu = b * n_units + u
    bu_unique = np.unique(bu)
    sampled = np.bincount(bu_unique // n_units, minlength=n_bins).astype(float)
    span = n_bins * n_units
    if n_taxa * span < 2 ** 62:
        tbu = np.unique(t * span + bu)
        t_of, bu_of = tbu // span, tbu % span
    else:  # very large code space: fall back to a frame de-duplication
        pairs = pd.DataFrame({"t": t, "bu": bu}).drop_duplicates()
        t_of, bu_of = pairs["t"].to_numpy(), pairs["bu"].to_numpy()
    cell = t_of * n_bins + bu_of // n_units
    if quota <= 0:
        occupied = np.bincount(cell, minlength=n_taxa * n_bins).astype(float)
        return occupied.reshape(n_taxa, n_bins), sampled
    bin_of_unit = bu_unique // n_units
    start = np.searchsorted(bin_of_unit, np.arange(n_bins))
    where = np.searchsorted(bu_unique, bu_of)
    occupied = np.zeros(n_taxa * n_bins)
    for _ in range(reps):
        order = np.lexsort((rng.random(len(bu_unique)), bin_of_unit))
        rank = np.empty(len(order), dtype=np.int64)
        rank[order] = np.arange(len(order)) - start[bin_of_unit[order]]
        kept = rank < quota
        occupied += np.bincount(cell[kept[where]], minlength=n_taxa * n_bins)
    return (occupied / reps).reshape(n_taxa, n_bins), np.minimum(sampled, quota)


def build_occupancy(occurrences: pd.DataFrame, taxa: pd.DataFrame, *, units: str = "grid",
                    cell_km: float = 100.0, bins: str = "fixed", bin_width_ma: float = 10.0,
                    age_handling: str = "monte_carlo", age_draws: int = 20, quota: int = 0,
                    subsample_reps: int = 20, min_sampled: int = 5,
                    timescale: pd.DataFrame | None = None, rng=None) -> OccupancyTable:
    """Occupancy per taxon and time bin (Foote et al. 2007; Liow & Stenseth 2007).

    Parameters
    ----------
    occurrences : DataFrame
        Fossil occurrences after intake: ``taxon_id, oldest_ma, youngest_ma,
        decimalLatitude, decimalLongitude, locationID``.
    taxa : DataFrame
        ``taxon_id, extant``; fixes the taxon order and which series run to the present.
    units : {'grid', 'locality'}, default='grid'
    cell_km : float, default=100
    bins : {'fixed', 'stages'}, default='fixed'
    bin_width_ma : float, default=10
    age_handling : {'single_bin', 'monte_carlo'}, default='monte_carlo'
        'single_bin' keeps only occurrences whose age range fits in one bin;
        'monte_carlo' draws ``age_draws`` uniform point ages per occurrence and
        averages the counts over draws.
    age_draws : int, default=20
    quota : int, default=0
        Subsample each bin to this many sampled units (0 = off).
    subsample_reps : int, default=20
    min_sampled : int, default=5
        Bins with fewer sampled units are flagged ``low_sample``.
    timescale : DataFrame, optional
        Needed for ``bins='stages'``.
    rng : numpy.random.Generator, optional
        Needed for age draws and subsampling.

    Returns
    -------
    OccupancyTable

    Notes
    -----
    The sampled units of a bin are the units holding any occurrence (of any taxon) in
    that bin; a taxon's occupied units are those holding it. Averaged over repeated
    subsamples, the expected occupancy of a bin equals its raw occupancy (the
    hypergeometric mean); subsampling puts every well-sampled bin on the same
    denominator, which evens the weight the logit transform and the models give to
    bins of very different sampling. Coordinates are used as given (no plate
    rotation), so grid cells are present-day cells.

    References
    ----------
    Foote, M., Crampton, J. S., Beu, A. G., Marshall, B. A., Cooper, R. A., Maxwell,
    P. A. & Matcham, I. (2007). Rise and fall of species occupancy in Cenozoic fossil
    mollusks. Science 318, 1131-1134.

    Liow, L. H. & Stenseth, N. C. (2007). The rise and fall of species: implications
    for macroevolutionary and macroecological studies. Proc. R. Soc. B 274, 2745-2752.
    """
    if age_handling not in ("single_bin", "monte_carlo"):
        raise AnalogError(f"`age_handling` was {age_handling!r} but is expected to be in "
                          "{'single_bin', 'monte_carlo'}")
    if (age_handling == "monte_carlo" or quota > 0) and rng is None:
        raise AnalogError("a numpy Generator `rng` is needed for age draws and subsampling")
    occ = occurrences
    taxon_ids = taxa["taxon_id"].astype(str).to_numpy()
    n_taxa = len(taxon_ids)
    tcode = pd.Categorical(occ["taxon_id"].astype(str), categories=taxon_ids).codes.astype(np.int64)
    old = occ["oldest_ma"].to_numpy(float)
    young = occ["youngest_ma"].to_numpy(float)
    max_age = float(np.nanmax(old)) if len(old) else 0.0
    bin_df = time_bins(max_age, bins=bins, bin_width_ma=bin_width_ma, timescale=timescale)
    edges = np.append(bin_df["bin_youngest_ma"].to_numpy(), bin_df["bin_oldest_ma"].to_numpy()[-1])
    n_bins = len(bin_df)
    unit = sampling_units(occ, units=units, cell_km=cell_km)
    n_units = int(unit.max()) + 1 if len(unit) and unit.max() >= 0 else 1

    dropped = []
    if (unit < 0).any():
        dropped.append(("no sampling unit (blank locationID)", int((unit < 0).sum())))
    if (tcode < 0).any():
        dropped.append(("taxon not in the taxa table", int((tcode < 0).sum())))
    outside = (young > edges[-1] + _TOL) | (old > edges[-1] + _TOL) | (young < edges[0] - _TOL)
    if outside.any():
        dropped.append(("age outside the time bins", int(outside.sum())))
    tcode = np.where(outside, -1, tcode)
    unit = np.where(tcode < 0, -1, unit)

    if age_handling == "single_bin":
        b = _bin_of_range(edges, young, old)
        straddle = (b < 0) & (unit >= 0)
        if straddle.any():
            dropped.append(("age range spans more than one bin (single_bin)", int(straddle.sum())))
        occupied, sampled = _count(tcode, b, unit, n_taxa, n_bins, n_units,
                                   quota=quota, reps=subsample_reps, rng=rng)
        age_text = (f"occurrences whose age range fits in one bin only "
                    f"({int(straddle.sum())} of {len(occ)} spanning two or more bins left out)")
    else:
        occupied = np.zeros((n_taxa, n_bins))
        sampled = np.zeros(n_bins)
        width = old - young
        for _ in range(age_draws):
            age = young + rng.random(len(young)) * width
            b = _bin_of_point(edges, age)
            o, s = _count(tcode, b, unit, n_taxa, n_bins, n_units, quota=quota, reps=subsample_reps, rng=rng)
            occupied += o
            sampled += s
        occupied /= age_draws
        sampled /= age_draws
        age_text = f"point ages drawn uniformly within each age range, counts averaged over {age_draws} draws"

    unit_text = (f"equal-area grid cells of {cell_km:g} km ({EQUAL_AREA_CRS})" if units == "grid"
                 else "localities (locationID)")
    bin_text = (f"fixed {bin_width_ma:g}-Myr bins from 0 Ma" if bins == "fixed" else "ICS stages")
    sub_text = (f"; each bin subsampled to {quota} sampled units, {subsample_reps} repetitions averaged"
                if quota > 0 else "")
    method = f"Occupancy = occupied / sampled {unit_text}, {bin_text}; {age_text}{sub_text}."

    bin_df["sampled"] = sampled
    bin_df["low_sample"] = sampled < min_sampled
    step = float(bin_width_ma) if bins == "fixed" else float(np.median(
        bin_df.loc[sampled > 0, "bin_oldest_ma"] - bin_df.loc[sampled > 0, "bin_youngest_ma"])
        if (sampled > 0).any() else 1.0)
    table = _series_rows(occupied, sampled, bin_df, taxon_ids, taxa["extant"].to_numpy(bool), min_sampled)
    drop_df = pd.DataFrame(dropped, columns=["reason", "count"])
    return OccupancyTable(table=table, bins=bin_df, dropped=drop_df, method=method, step_myr=step)


def _series_rows(occupied, sampled, bin_df, taxon_ids, extant, min_sampled) -> pd.DataFrame:
    """Long table of every taxon's bins from its first occupied bin to its last (or to the present)."""
    n_taxa, n_bins = occupied.shape
    present = occupied > 0
    has = present.any(axis=1)
    idx = np.arange(n_bins)
    oldest = np.where(present, idx, -1).max(axis=1)            # first occupied bin (oldest)
    youngest = np.where(present, idx, n_bins).min(axis=1)       # last occupied bin (youngest)
    youngest = np.where(extant, 0, youngest)
    taxa_with = np.flatnonzero(has)
    lengths = oldest[taxa_with] - youngest[taxa_with] + 1
    row_taxon = np.repeat(taxa_with, lengths)
    offset = np.arange(lengths.sum()) - np.repeat(np.cumsum(lengths) - lengths, lengths)
    row_bin = np.repeat(oldest[taxa_with], lengths) - offset   # old -> young within a taxon
    occ = occupied[row_taxon, row_bin]
    samp = sampled[row_bin]
    with np.errstate(invalid="ignore", divide="ignore"):
        occupancy = np.where(samp > 0, occ / samp, np.nan)
        # empirical logit with the +0.5 continuity correction (common practice)
        logit = np.where(samp > 0, np.log((occ + 0.5) / (samp - occ + 0.5)), np.nan)
    return pd.DataFrame({
        "taxon_id": pd.array(taxon_ids[row_taxon], dtype="str"),
        "bin_oldest_ma": bin_df["bin_oldest_ma"].to_numpy()[row_bin],
        "bin_youngest_ma": bin_df["bin_youngest_ma"].to_numpy()[row_bin],
        "occupied": occ,
        "sampled": samp,
        "occupancy": occupancy,
        "low_sample": samp < min_sampled,
        "empirical_logit": logit,
        "bin_index": row_bin.astype(np.int64),
    })
