"""Gower's general distance for mixed-type variables, with Podani's ordinal extension."""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from analog.errors import AnalogError

__all__ = ["gower_distance", "gower_blocks"]

_KINDS = ("categorical", "ordinal", "numeric", "binary")
_ORDINAL = ("podani", "ranks")
_BLOCK = 1_000_000   # pairs per block: bounds the temporary arrays to a few MB


def gower_distance(a, b, kinds, *, levels=None, weights=None, ranges=None, ordinal="podani"):
    """Gower distance between every row of ``a`` and every row of ``b``.

    Parameters
    ----------
    a, b : DataFrame
        Objects to compare, holding (at least) the columns named in ``kinds``.
        Pass the same DataFrame twice for a square within-set matrix.
    kinds : dict
        Column name -> ``{'categorical', 'ordinal', 'numeric', 'binary'}``.
        Only these columns are used.
    levels : dict, optional
        Ordinal column -> list of its classes from lowest to highest. Without
        an entry the order of an ordered pandas Categorical is used, or the
        numeric order of numeric values.
    weights : dict, optional
        Column -> non-negative weight (default 1 for every column).
    ranges : dict, optional
        Numeric column -> range used to scale differences (default: the range
        over the rows of ``a`` and ``b`` together).
    ordinal : {'podani', 'ranks'}, default='podani'
        ``'podani'``: Podani's (1999) rank distance with his correction for
        tied ranks (his eqs. 2a-b). ``'ranks'``: ``|r_i - r_j| / (r_max -
        r_min)`` on the same ranks (his eq. 3).

    Returns
    -------
    ndarray, shape (len(a), len(b))
        Distances in [0, 1]; NaN for a pair that shares no non-missing
        variable with positive weight.

    Raises
    ------
    AnalogError
        Unknown kind or option, a column missing from ``a`` or ``b``,
        non-numeric values in a numeric column, more than two values in a
        binary column, ordinal values outside ``levels`` or without an order,
        or a negative weight or non-positive range.

    Notes
    -----
    ``d_ij = sum_k w_k delta_ijk d_ijk / sum_k w_k delta_ijk`` (Gower 1971),
    where ``delta_ijk = 0`` when variable ``k`` is missing in ``i`` or ``j``:
    a missing variable drops out of that pair's average and the remaining
    weights are renormalized. Per variable:

    - numeric: ``|x_i - x_j| / R_k``, ``R_k`` the range (a constant variable
      contributes 0);
    - categorical and binary: 0 if equal, 1 otherwise (binary variables are
      symmetric: a shared absence counts as agreement);
    - ordinal (Podani 1999): classes are replaced by ranks ``r`` over the rows
      of ``a`` and ``b`` together (``a`` alone when ``b is a``), ties getting
      the mean rank. For different classes
      ``d = (|r_i - r_j| - (T_i - 1)/2 - (T_j - 1)/2) /
      (r_max - r_min - (T_max - 1)/2 - (T_min - 1)/2)``,
      with ``T_i`` the number of objects tied with ``i`` and ``T_max``,
      ``T_min`` those at the highest and lowest rank; equal classes give 0.
      The rank steps make the distance depend on how many objects hold each
      class, as Podani intends.

    Numeric ranges and ordinal ranks are taken over ``a`` and ``b``
    together, so the distance between two given rows depends on the sample
    they sit in; pass ``ranges`` to fix the numeric scale.

    References
    ----------
    Gower, J. C. (1971). A general coefficient of similarity and some of its
    properties. Biometrics 27, 857-871.

    Podani, J. (1999). Extending Gower's general coefficient of similarity to
    ordinal characters. Taxon 48, 331-340.
    """
    plan = _plan(a, b, kinds, levels=levels, weights=weights, ranges=ranges, ordinal=ordinal)
    n, m = len(a), len(b)
    out = np.empty((n, m))
    block = max(1, _BLOCK // max(m, 1))
    for start in range(0, n, block):
        rows = slice(start, min(n, start + block))
        out[rows] = _rows(plan, rows)
    return out


def gower_blocks(a, b, kinds, *, block_rows, levels=None, weights=None, ranges=None, ordinal="podani"):
    """Gower distances of :func:`gower_distance`, one block of rows of ``a`` at a time.

    Parameters
    ----------
    a, b, kinds, levels, weights, ranges, ordinal
        As in :func:`gower_distance`.
    block_rows : int
        Rows of ``a`` per block (at least 1).

    Yields
    ------
    rows : slice
        The rows of ``a`` in this block.
    distance : ndarray, shape (rows.stop - rows.start, len(b))
        The same numbers as ``gower_distance(a, b, kinds, ...)[rows]``.

    Notes
    -----
    Numeric ranges and ordinal ranks are fixed once from all rows of ``a`` and ``b``,
    so the block size does not change any distance; only one block is held at a time.
    """
    plan = _plan(a, b, kinds, levels=levels, weights=weights, ranges=ranges, ordinal=ordinal)
    n = len(a)
    step = max(1, int(block_rows))
    for start in range(0, n, step):
        rows = slice(start, min(n, start + step))
        yield rows, _rows(plan, rows)


def _plan(a, b, kinds, *, levels, weights, ranges, ordinal):
    """Checked inputs, encoded columns and weights: ``(encoded, col_weights, m)``."""
    if not isinstance(a, pd.DataFrame) or not isinstance(b, pd.DataFrame):
        raise AnalogError(f"`a` and `b` must be DataFrames; got {type(a).__name__} and "
                          f"{type(b).__name__} instead")
    if not isinstance(kinds, dict) or not kinds:
        raise AnalogError("`kinds` must be a non-empty dict of column -> kind")
    if ordinal not in _ORDINAL:
        raise AnalogError(f"`ordinal` was {ordinal!r} but is expected to be in {set(_ORDINAL)}")
    levels = dict(levels or {})
    weights = dict(weights or {})
    ranges = dict(ranges or {})
    for col, kind in kinds.items():
        if kind not in _KINDS:
            raise AnalogError(f"kind of column {col!r} was {kind!r} but is expected to be in "
                              f"{set(_KINDS)}")
        missing = [name for name, frame in (("a", a), ("b", b)) if col not in frame.columns]
        if missing:
            raise AnalogError(f"column {col!r} named in `kinds` is not in {' and '.join(missing)}")
    for col, w in weights.items():
        if col not in kinds:
            raise AnalogError(f"`weights` names column {col!r}, which is not in `kinds`")
        if not (np.isfinite(w) and w >= 0):
            raise AnalogError(f"weight of column {col!r} must be finite and >= 0; got {w}")

    same = b is a
    encoded = [_encode(a[col], b[col], col, kind, same, levels.get(col), ranges.get(col), ordinal)
               for col, kind in kinds.items()]
    col_weights = [float(weights.get(col, 1.0)) for col in kinds]
    classed = [kind != "numeric" for kind in kinds.values()]
    return encoded, col_weights, len(b), _class_tables(encoded, col_weights, classed)


_MAX_COMBOS = 1 << 40        # mixed-radix codes of the leading class variables must fit an int64
_MAX_TABLE = 1 << 22         # distinct combinations of a x of b tabulated (32 MB per table)


def _class_tables(encoded, col_weights, classed):
    """Pairwise sums of the leading class variables, tabulated over their distinct combinations.

    Categorical, binary and ordinal variables take few distinct values, so their terms of
    ``num`` and ``den`` depend only on the pair of value combinations. For the longest run of
    such variables at the start (numeric variables break it; zero-weight ones are skipped, as
    in the sums), the running sums are computed once per pair of distinct combinations, with
    the same operations in the same order as row by row, and later looked up: the same numbers.

    Returns None or ``(n_leading, codes_a, codes_b, num, den, dist)`` (``dist`` when every
    variable is in the run).
    """
    lead = 0
    parts = []          # (codes_a, codes_b, values incl. missing last, dist, w) of each leading variable
    combos = 1
    for (dist, va, vb), w, is_class in zip(encoded, col_weights, classed):
        if w == 0:
            lead += 1
            continue
        if not is_class:
            break
        both = np.concatenate([va, vb])
        values = np.unique(both[~np.isnan(both)])
        if combos * (values.size + 1) > _MAX_COMBOS:
            break
        fill = values[0] if values.size else 0.0
        ca = np.where(np.isnan(va), values.size, np.searchsorted(values, np.where(np.isnan(va), fill, va)))
        cb = np.where(np.isnan(vb), values.size, np.searchsorted(values, np.where(np.isnan(vb), fill, vb)))
        missing = np.array([np.nan], dtype=values.dtype)
        parts.append((ca, cb, np.concatenate([values, missing]), dist, w))
        combos *= values.size + 1
        lead += 1
    if not parts:
        return None
    stride = 1
    ja = np.zeros(parts[0][0].size, dtype=np.int64)
    jb = np.zeros(parts[0][1].size, dtype=np.int64)
    strides = []
    for ca, cb, values, _, _ in parts:
        strides.append(stride)
        ja += ca * stride
        jb += cb * stride
        stride *= values.size
    ua, codes_a = np.unique(ja, return_inverse=True)
    ub, codes_b = np.unique(jb, return_inverse=True)
    if ua.size * ub.size > _MAX_TABLE:
        return None
    num = np.zeros((ua.size, ub.size))
    den = np.zeros_like(num)
    for (_, _, values, dist, w), st in zip(parts, strides):
        xa = values[(ua // st) % values.size]
        xb = values[(ub // st) % values.size]
        valid = ~np.isnan(xa)[:, None] & ~np.isnan(xb)[None, :]
        with np.errstate(invalid="ignore"):
            d = dist(xa[:, None], xb[None, :])
        num += w * np.where(valid, d, 0.0)
        den += w * valid
    full = None
    if lead == len(encoded):
        with np.errstate(invalid="ignore", divide="ignore"):
            full = np.where(den > 0, num / den, np.nan)
    return lead, codes_a.ravel(), codes_b.ravel(), num, den, full


def _rows(plan, rows: slice) -> np.ndarray:
    """Distances of the rows ``rows`` of ``a`` to every row of ``b``."""
    encoded, col_weights, m, tables = plan
    lead = 0
    if tables is not None:
        lead, codes_a, codes_b, num_t, den_t, full = tables
        ia = codes_a[rows]
        if full is not None:
            return full[ia][:, codes_b]
        num = num_t[ia][:, codes_b]
        den = den_t[ia][:, codes_b]
    else:
        num = np.zeros((rows.stop - rows.start, m))
        den = np.zeros_like(num)
    for (dist, va, vb), w in zip(encoded[lead:], col_weights[lead:]):
        if w == 0:
            continue
        xa = va[rows]
        valid = ~np.isnan(xa)[:, None] & ~np.isnan(vb)[None, :]
        with np.errstate(invalid="ignore"):
            d = dist(xa[:, None], vb[None, :])
        num += w * np.where(valid, d, 0.0)
        den += w * valid
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / den, np.nan)


def _encode(sa, sb, col, kind, same, order, scale, ordinal):
    """Turn one column into (pairwise distance function, values for a, values for b)."""
    pooled = sa if same else pd.concat([sa, sb], ignore_index=True)
    if kind == "numeric":
        try:
            va = pd.to_numeric(sa).to_numpy(dtype=float, na_value=np.nan)
            vb = pd.to_numeric(sb).to_numpy(dtype=float, na_value=np.nan)
        except (ValueError, TypeError):
            raise AnalogError(f"numeric column {col!r} holds non-numeric values") from None
        if scale is None:
            both = va if same else np.concatenate([va, vb])
            scale = np.nanmax(both) - np.nanmin(both) if np.any(~np.isnan(both)) else 0.0
        elif not (np.isfinite(scale) and scale > 0):
            raise AnalogError(f"range of column {col!r} must be finite and > 0; got {scale}")
        if scale == 0:
            return (lambda x, y: np.zeros(np.broadcast_shapes(x.shape, y.shape))), va, vb
        return (lambda x, y, r=scale: np.abs(x - y) / r), va, vb

    if kind in ("categorical", "binary"):
        codes, uniques = pd.factorize(pooled, use_na_sentinel=True)
        if kind == "binary" and len(uniques) > 2:
            raise AnalogError(f"binary column {col!r} holds {len(uniques)} distinct values "
                              f"({', '.join(map(str, uniques[:5]))}); declare it 'categorical'")
        codes = np.where(codes < 0, np.nan, codes.astype(float))
        va, vb = (codes, codes) if same else (codes[: len(sa)], codes[len(sa):])
        return (lambda x, y: (x != y).astype(float)), va, vb

    # ordinal: class positions, then ranks over the pooled sample
    pos = _ordinal_positions(pooled, col, order, sa, sb)
    ok = ~np.isnan(pos)
    ranks = np.full(pos.shape, np.nan)
    ties_half = np.full(pos.shape, np.nan)
    if ok.any():
        ranks[ok] = stats.rankdata(pos[ok], method="average")
        _, inverse, counts = np.unique(pos[ok], return_inverse=True, return_counts=True)
        ties_half[ok] = (counts[inverse] - 1) / 2.0
    if ok.sum() == 0 or np.nanmax(ranks) == np.nanmin(ranks):
        dist_ord = (lambda x, y: np.zeros(np.broadcast_shapes(x.shape, y.shape)))
        va = ranks if same else ranks[: len(sa)]
        vb = ranks if same else ranks[len(sa):]
        return dist_ord, va, vb
    r_max, r_min = np.nanmax(ranks), np.nanmin(ranks)
    if ordinal == "ranks":
        span = r_max - r_min
        dist_ord = (lambda x, y: np.abs(x - y) / span)
        values = ranks
    else:
        span = r_max - r_min - ties_half[ranks == r_max][0] - ties_half[ranks == r_min][0]
        # carry rank and tie correction in one complex number so the pairwise
        # function sees both without a per-row loop
        values = ranks + 1j * ties_half

        def dist_ord(x, y):
            gap = np.abs(x.real - y.real) - x.imag - y.imag
            return np.where(x.real == y.real, 0.0, gap / span)
    if same:
        return dist_ord, values, values
    return dist_ord, values[: len(sa)], values[len(sa):]


def _ordinal_positions(pooled, col, order, sa, sb):
    """Numeric position of each ordinal value (NaN when missing)."""
    if order is not None:
        index = pd.Index(list(order), dtype=object)
        if not index.is_unique:
            raise AnalogError(f"levels of ordinal column {col!r} repeat a class")
        pos = index.get_indexer(pooled.astype(object)).astype(float)
        present = pooled.notna().to_numpy()
        unknown = present & (pos < 0)
        if unknown.any():
            bad = sorted({str(v) for v in pooled[unknown].unique()})
            raise AnalogError(f"ordinal column {col!r} holds values not in its levels: "
                              f"{', '.join(bad[:5])}")
        pos[~present] = np.nan
        return pos
    for series in (sa, sb):
        if isinstance(series.dtype, pd.CategoricalDtype) and series.dtype.ordered:
            return _ordinal_positions(pooled.astype(object), col, list(series.cat.categories),
                                      sa, sb)
    if pd.api.types.is_numeric_dtype(pooled) and not pd.api.types.is_bool_dtype(pooled):
        return pooled.to_numpy(dtype=float, na_value=np.nan)
    raise AnalogError(f"ordinal column {col!r} has no order: give `levels[{col!r}]` (lowest to "
                      "highest) or make it an ordered pandas Categorical")
