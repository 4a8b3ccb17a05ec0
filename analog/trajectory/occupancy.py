"""Occupancy series: occupied sampling units / sampled units, per taxon and time bin.

Everything here is vectorized over occurrences (integer codes, sorting and
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
    x, y = tr.transform(lon, lat)  # projecting every point is cheaper than finding the distinct ones
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    size = float(cell_km) * 1000.0
    ok = np.isfinite(x) & np.isfinite(y)
    ix = np.floor(np.where(ok, x, 0.0) / size).astype(np.int64)
    iy = np.floor(np.where(ok, y, 0.0) / size).astype(np.int64)
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


def _taxon_codes(column: pd.Series, taxon_ids: np.ndarray) -> np.ndarray:
    """Position of each row's taxon in ``taxon_ids`` (-1 if absent), hashing each distinct id once."""
    codes, uniques = pd.factorize(column.astype(str))
    where = pd.Index(taxon_ids).get_indexer(pd.Index(uniques).astype(str))
    return np.where(codes >= 0, where[np.maximum(codes, 0)], -1).astype(np.int64) if len(where) else \
        np.full(len(codes), -1, dtype=np.int64)


def _sorted_unique(x: np.ndarray) -> np.ndarray:
    """Sorted distinct values of an integer array (a plain sort: far faster here than ``np.unique``)."""
    s = np.sort(x)
    return s[np.r_[True, s[1:] != s[:-1]]] if len(s) else s


class _Codes:
    """Integer keys of (taxon, bin, unit) and (bin, unit) combinations."""

    def __init__(self, n_taxa: int, n_bins: int, n_units: int):
        self.n_taxa, self.n_bins, self.n_units = n_taxa, n_bins, n_units
        self.span = n_bins * n_units
        self.fits = n_taxa * self.span < 2 ** 62  # else: pairs de-duplicated through a frame

    def pairs(self, taxon, bin_, unit) -> tuple[np.ndarray, np.ndarray]:
        """Sorted distinct ``(taxon, bin, unit)`` keys and sorted distinct ``(bin, unit)`` keys."""
        keep = (bin_ >= 0) & (unit >= 0) & (taxon >= 0)
        bu = bin_[keep] * self.n_units + unit[keep]
        if self.fits:
            tbu = _sorted_unique(taxon[keep] * self.span + bu)
        else:  # very large code space
            tbu = pd.DataFrame({"t": taxon[keep], "bu": bu}).drop_duplicates().to_numpy()
        return tbu, _sorted_unique(bu)

    def split(self, tbu):
        if self.fits:
            return tbu // self.span, tbu % self.span
        return tbu[:, 0], tbu[:, 1]


def _tally(codes: _Codes, tbu, bu_unique, *, quota: int, reps: int, rng) -> tuple[np.ndarray, np.ndarray]:
    """Occupied (n_taxa, n_bins) and sampled (n_bins,) from distinct keys.

    With ``quota > 0`` each bin's sampled units are subsampled to ``quota`` (without
    replacement) ``reps`` times and the counts averaged.
    """
    n_taxa, n_bins, n_units = codes.n_taxa, codes.n_bins, codes.n_units
    sampled = np.bincount(bu_unique // n_units, minlength=n_bins).astype(float)
    t_of, bu_of = codes.split(tbu)
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


def _count(taxon, bin_, unit, codes: _Codes, *, quota: int, reps: int, rng):
    """Occupied and sampled counts for one set of bin assignments."""
    tbu, bu = codes.pairs(taxon, bin_, unit)
    return _tally(codes, tbu, bu, quota=quota, reps=reps, rng=rng)


def _merge_sorted(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Sorted union of two sorted arrays of distinct keys (``b`` may repeat keys of ``a``)."""
    if not len(a):
        return b
    b = b[~_isin_sorted(b, a)]
    return np.insert(a, np.searchsorted(a, b), b)


def _isin_sorted(x: np.ndarray, sorted_keys: np.ndarray) -> np.ndarray:
    if not len(sorted_keys):
        return np.zeros(len(x), dtype=bool)
    pos = np.minimum(np.searchsorted(sorted_keys, x), len(sorted_keys) - 1)
    return sorted_keys[pos] == x


# Age draws counted per chunk of work. Fixed (not tied to the engine), so the chunks, their
# random streams and the order in which their counts are summed are the same on every engine.
_DRAWS_PER_CHUNK = 5


def _draw_chunk(generators, shared) -> tuple[np.ndarray, np.ndarray]:
    """Summed occupied / sampled counts of the age draws of one chunk.

    Only occurrences whose age range spans more than one bin are redrawn; the keys of the
    others (``fixed_tbu``, ``fixed_bu``) are the same in every draw and are merged in.
    """
    codes, edges, young, width, taxon, unit, fixed_tbu, fixed_bu, quota, reps = shared
    occupied = np.zeros((codes.n_taxa, codes.n_bins))
    sampled = np.zeros(codes.n_bins)
    for rng in generators:
        age = young + rng.random(len(young)) * width
        b = _bin_of_point(edges, age)
        tbu, bu = codes.pairs(taxon, b, unit)
        if quota <= 0:  # counts of the fixed keys are added once by the caller
            tbu, bu = tbu[~_isin_sorted(tbu, fixed_tbu)], bu[~_isin_sorted(bu, fixed_bu)]
        else:           # subsampling needs each bin's full set of units
            tbu, bu = _merge_sorted(fixed_tbu, tbu), _merge_sorted(fixed_bu, bu)
        o, s = _tally(codes, tbu, bu, quota=quota, reps=reps, rng=rng)
        occupied += o
        sampled += s
    return occupied, sampled


def build_occupancy(occurrences: pd.DataFrame, taxa: pd.DataFrame, *, units: str = "grid",
                    cell_km: float = 100.0, bins: str = "fixed", bin_width_ma: float = 10.0,
                    age_handling: str = "monte_carlo", age_draws: int = 20, quota: int = 0,
                    subsample_reps: int = 20, min_sampled: int = 5,
                    timescale: pd.DataFrame | None = None, rng=None, engine=None) -> OccupancyTable:
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
    engine : {'local', 'dask'} or analog.engine.Engine, optional
        Where the age draws are counted (default: in this process); results are identical.

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

    With 'monte_carlo', every age draw has its own random stream, spawned from ``rng``
    (``Generator.spawn``), and the draws are counted in fixed chunks of five, so the counts
    do not depend on where the chunks run. Occurrences whose whole age range lies in one bin
    fall in that bin in every draw; their keys are counted once and only the others are
    redrawn.

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
    tcode = _taxon_codes(occ["taxon_id"], taxon_ids)
    old = occ["oldest_ma"].to_numpy(float)
    young = occ["youngest_ma"].to_numpy(float)
    max_age = float(np.nanmax(old)) if len(old) else 0.0
    bin_df = time_bins(max_age, bins=bins, bin_width_ma=bin_width_ma, timescale=timescale)
    edges = np.append(bin_df["bin_youngest_ma"].to_numpy(), bin_df["bin_oldest_ma"].to_numpy()[-1])
    n_bins = len(bin_df)
    unit = sampling_units(occ, units=units, cell_km=cell_km)
    n_units = int(unit.max()) + 1 if len(unit) and unit.max() >= 0 else 1
    codes = _Codes(n_taxa, n_bins, n_units)

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
        occupied, sampled = _count(tcode, b, unit, codes, quota=quota, reps=subsample_reps, rng=rng)
        age_text = (f"occurrences whose age range fits in one bin only "
                    f"({int(straddle.sum())} of {len(occ)} spanning two or more bins left out)")
    else:
        occupied, sampled = _monte_carlo(codes, edges, young, old, tcode, unit, age_draws=age_draws, quota=quota,
                                         reps=subsample_reps, rng=rng, engine=engine)
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


def _monte_carlo(codes: _Codes, edges, young, old, tcode, unit, *, age_draws: int, quota: int, reps: int,
                 rng, engine) -> tuple[np.ndarray, np.ndarray]:
    """Occupied and sampled counts averaged over ``age_draws`` uniform point-age draws."""
    from ..engine import engine_scope, split_counts

    use = (tcode >= 0) & (unit >= 0)
    lo, hi = _bin_of_point(edges, young), _bin_of_point(edges, old)
    fixed = use & (lo == hi) & (lo >= 0) & codes.fits   # every point age in the range has this bin
    redraw = use & ~fixed
    fixed_tbu, fixed_bu = codes.pairs(tcode[fixed], lo[fixed], unit[fixed])
    width = old - young
    generators = rng.spawn(age_draws)
    chunks = [generators[s:e] for s, e in split_counts(age_draws, _DRAWS_PER_CHUNK)]
    shared = (codes, edges, young[redraw], width[redraw], tcode[redraw], unit[redraw], fixed_tbu, fixed_bu,
              quota, reps)
    with engine_scope(engine) as eng:
        parts = eng.map(_draw_chunk, chunks, shared=shared)
    occupied = np.zeros((codes.n_taxa, codes.n_bins))
    sampled = np.zeros(codes.n_bins)
    for o, s in parts:  # always summed in chunk order
        occupied += o
        sampled += s
    if quota <= 0:
        o, s = _tally(codes, fixed_tbu, fixed_bu, quota=0, reps=1, rng=None)
        occupied += age_draws * o
        sampled += age_draws * s
    return occupied / age_draws, sampled / age_draws


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
