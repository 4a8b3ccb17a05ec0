"""The warming-interval catalogue in use: built-in, extended or replaced by a user table."""
from __future__ import annotations

import numpy as np
import pandas as pd

from .findings import Findings
from .schema import TableSchema, check_columns, check_fields

__all__ = ["check_intervals", "merge_intervals", "INTERVAL_COLUMNS"]

INTERVAL_COLUMNS = ["interval_id", "name", "oldest_ma", "youngest_ma", "warming_c", "warming_low_c",
                    "warming_high_c", "province", "source", "note"]
_TEXT = ("interval_id", "name", "province", "source", "note")
_NUMBERS = ("oldest_ma", "youngest_ma", "warming_c", "warming_low_c", "warming_high_c")


def _typed(df: pd.DataFrame) -> pd.DataFrame:
    out = pd.DataFrame(index=range(len(df)))
    for c in INTERVAL_COLUMNS:
        col = df[c] if c in df.columns else pd.Series([None] * len(df))
        col = pd.Series(col.to_numpy(), index=out.index)
        if c in _NUMBERS:
            out[c] = pd.to_numeric(col, errors="coerce").astype("float64")
        else:
            out[c] = col.astype("str").where(col.notna(), "")
    return out


def check_intervals(df: pd.DataFrame, columns, schema: TableSchema, file: str, findings: Findings, *,
                    decimal_comma: bool = False) -> pd.DataFrame | None:
    """Typed user interval table, or ``None`` if columns are missing."""
    ok = check_columns(columns, schema, file, findings)
    typed, _ = check_fields(df, schema, file, findings, decimal_comma=decimal_comma)
    rows = df.index.to_numpy() + 2
    schema.rule("age_order")
    o = typed["oldest_ma"].to_numpy(dtype=float, na_value=np.nan)
    y = typed["youngest_ma"].to_numpy(dtype=float, na_value=np.nan)
    with np.errstate(invalid="ignore"):
        wrong = o < y
    if wrong.any():
        findings.rows(file, "oldest_ma", rows[wrong],
                      [f"oldest_ma {a:g} < youngest_ma {b:g}" for a, b in zip(o[wrong][:20], y[wrong][:20])],
                      "oldest_ma >= youngest_ma", "swap the two ages in these rows")
    schema.rule("warming_bounds")
    w = typed["warming_c"].to_numpy(dtype=float, na_value=np.nan)
    lo = typed["warming_low_c"].to_numpy(dtype=float, na_value=np.nan)
    hi = typed["warming_high_c"].to_numpy(dtype=float, na_value=np.nan)
    with np.errstate(invalid="ignore"):
        out = (lo > w) | (hi < w)
    if out.any():
        findings.rows(file, "warming_c", rows[out],
                      [f"warming_low_c {a:g}, warming_c {b:g}, warming_high_c {c:g}"
                       for a, b, c in zip(lo[out][:20], w[out][:20], hi[out][:20])],
                      "warming_low_c <= warming_c <= warming_high_c", "correct the warming estimate or its bounds")
    if not ok:
        return None
    return _typed(typed)


def merge_intervals(builtin: pd.DataFrame, user: pd.DataFrame | None, *, mode: str, file: str,
                    findings: Findings) -> pd.DataFrame:
    """Catalogue in use. ``mode``: {'extend', 'replace'}."""
    base = _typed(builtin)
    if user is None:
        return base
    if mode == "replace":
        return user.reset_index(drop=True)
    replaced = sorted(set(base["interval_id"]) & set(user["interval_id"]))
    if replaced:
        findings.warn(f"{file}: rows for {', '.join(replaced)} replace the built-in catalogue rows with "
                      f"the same interval_id")
    kept = base[~base["interval_id"].isin(replaced)]
    return pd.concat([kept, user], ignore_index=True).sort_values(
        "oldest_ma", ascending=False, kind="stable").reset_index(drop=True)
