"""Read the Table Schema descriptors in data_schemas/ and check tables against them.

The descriptors are read at run time (``analog._resources.resource_dir('schemas')``),
so the published schema and the checks are the same thing. Besides the standard
Frictionless Table Schema properties (``fields``, ``type``, ``constraints``
``required``/``unique``/``minimum``/``maximum``/``enum``/``pattern``,
``trueValues``/``falseValues``, ``missingValues``, ``primaryKey``, ``foreignKeys``)
the descriptors use a few extension properties documented in data_schemas/README.md:
``columnRequired``, ``warnIfAbsent``, ``caseInsensitive``, ``severity``,
``alternatives``, ``ignoredColumns`` and ``rules``.

All checks are vectorized over whole columns.
"""
from __future__ import annotations

import difflib
import functools
import json
from dataclasses import dataclass
from dataclasses import field as dc_field

import numpy as np
import pandas as pd

from .._resources import resource_dir
from ..errors import AnalogError
from .findings import Findings, show

__all__ = ["TableSchema", "load_table_schema", "check_columns", "check_fields", "clean_text",
           "parse_number", "parse_boolean", "close_names", "convert_fields", "concat_converted",
           "check_converted", "ConvertedTable", "as_text", "fold_case", "repeated_text_fields"]

# Frictionless types this validator understands.
_TYPES = {"string", "number", "integer", "boolean", "date", "geojson"}


@dataclass(frozen=True)
class TableSchema:
    """A Table Schema descriptor with helpers for the extension properties."""

    name: str
    descriptor: dict

    @property
    def fields(self) -> list[dict]:
        return self.descriptor["fields"]

    @property
    def field_names(self) -> list[str]:
        return [f["name"] for f in self.fields]

    def field(self, name: str) -> dict:
        for f in self.fields:
            if f["name"] == name:
                return f
        raise KeyError(name)

    @property
    def missing_values(self) -> list[str]:
        return list(self.descriptor.get("missingValues", [""]))

    @property
    def alternatives(self) -> list[dict]:
        return list(self.descriptor.get("alternatives", []))

    @property
    def foreign_keys(self) -> list[dict]:
        return list(self.descriptor.get("foreignKeys", []))

    @property
    def ignored_columns(self) -> set[str]:
        return set(self.descriptor.get("ignoredColumns", []))

    @property
    def rule_ids(self) -> list[str]:
        return [r["id"] for r in self.descriptor.get("rules", [])]

    def rule(self, rule_id: str) -> dict:
        """The rule entry; a rule the code applies must be documented in the descriptor."""
        for r in self.descriptor.get("rules", []):
            if r["id"] == rule_id:
                return r
        raise AnalogError(f"rule '{rule_id}' is applied to {self.name} but not described in "
                          f"data_schemas/{self.name}.schema.json; add it there")

    def in_alternative(self, name: str) -> bool:
        return any(name in opt for alt in self.alternatives for opt in alt["options"])

    def column_required(self, name: str) -> bool:
        f = self.field(name)
        return f.get("columnRequired", True) and not self.in_alternative(name) and f["type"] != "geojson"

    def severity(self, name: str, rule: str) -> str:
        return self.field(name).get("severity", {}).get(rule, "error")


@functools.lru_cache(maxsize=None)
def _read_descriptor(name: str) -> str:
    path = resource_dir("schemas") / f"{name}.schema.json"
    return path.read_text(encoding="utf-8")


def load_table_schema(name: str) -> TableSchema:
    """The descriptor ``data_schemas/<name>.schema.json``."""
    descriptor = json.loads(_read_descriptor(name))
    for f in descriptor["fields"]:
        if f.get("type", "string") not in _TYPES:
            raise AnalogError(f"field '{f['name']}' of {name}.schema.json has type {f.get('type')!r}; "
                              f"the validator understands {sorted(_TYPES)}")
    return TableSchema(name, descriptor)


def close_names(name: str, candidates, n: int = 1, *, cutoff: float = 0.6) -> list[str]:
    """Closest spellings of ``name`` among ``candidates``, ignoring case (difflib ratio >= cutoff)."""
    candidates = [str(c) for c in candidates]
    folded = {c.casefold(): c for c in candidates}
    hits = difflib.get_close_matches(name.casefold(), list(folded), n=n, cutoff=cutoff)
    return [folded[h] for h in hits]


# --- columns -------------------------------------------------------------------------------

def check_columns(columns, schema: TableSchema, file: str, findings: Findings) -> bool:
    """Required columns and alternative column groups; True if all needed columns exist."""
    columns = list(columns)
    present = set(columns)
    ok = True
    seen = set()
    dups = [c for c in columns if c in seen or seen.add(c)]
    for c in sorted(set(dups)):
        findings.add(file, f"the column '{c}' more than once", "each column name once",
                     f"rename or delete the extra '{c}' column", column=c)
        ok = False
    for name in schema.field_names:
        if name in present or not schema.column_required(name):
            continue
        close = [c for c in close_names(name, [c for c in columns if c not in schema.field_names])]
        fix = (f"rename column '{close[0]}' to '{name}'" if close
               else f"add a column named '{name}' ({schema.field(name).get('description', '').split('. ')[0].rstrip('.')})")
        findings.add(file, f"no column '{name}'", f"a column '{name}' (see data_schemas/{schema.name}.schema.json)",
                     fix, row=1, column=name)
        ok = False
    for alt in schema.alternatives:
        options = alt["options"]
        if any(all(c in present for c in opt) for opt in options):
            continue
        spelled = " or ".join("+".join(opt) for opt in options)
        partial = [c for opt in options for c in opt if c in present]
        found = (f"only {', '.join(repr(p) for p in partial)} for the {alt['name']}" if partial
                 else f"no columns for the {alt['name']}")
        findings.add(file, found, f"columns {spelled}", f"add the missing column(s) for the {alt['name']}",
                     row=1, column=" / ".join("+".join(opt) for opt in options))
        ok = False
    return ok


# --- values --------------------------------------------------------------------------------

def clean_text(series: pd.Series, missing_values) -> pd.Series:
    """Text values trimmed, with the schema's missing-value spellings as NA (string dtype)."""
    if isinstance(series.dtype, pd.CategoricalDtype):
        return as_text(_clean_categorical(series, missing_values))
    if series.dtype.kind in "biuf":
        return _numbers_as_text(series)
    s = series.astype("str").str.strip()
    blank = s.isin(list(missing_values))
    return s.mask(blank) if blank.any() else s


def _whole_floats(vals: np.ndarray) -> bool:
    """Whether a float column holds whole numbers only (its finite values, at least one, within int64):
    such a column is spelled as integers ('12', not '12.0')."""
    finite = vals[np.isfinite(vals)]
    return bool(finite.size and np.all(np.mod(finite, 1) == 0) and np.all(np.abs(finite) < 2.0 ** 63))


def _numbers_as_text(series: pd.Series) -> pd.Series:
    # Identifiers stored as numbers (Parquet, GeoPackage): 12.0 -> '12', keep NaN as NA.
    if series.dtype.kind == "f":
        vals = series.to_numpy()
        finite = np.isfinite(vals)
        if _whole_floats(vals):
            out = series.where(finite).astype("Int64").astype("str")
            infinite = np.isinf(vals)
            if infinite.any():  # +-inf keep their float spelling
                out[infinite] = series[infinite].astype("str")
            return out.mask(series.isna())
    out = series.astype("str")
    return out.mask(series.isna())


def as_text(series: pd.Series) -> pd.Series:
    """A categorical text column as a plain ``str`` column (other columns unchanged)."""
    if not isinstance(series.dtype, pd.CategoricalDtype):
        return series
    import pyarrow as pa
    import pyarrow.compute as pc

    codes = np.asarray(series.cat.codes.to_numpy(), dtype=np.int64)
    cats = pa.array(series.cat.categories.astype("str").to_numpy(dtype=object), type=pa.large_string())
    taken = pc.take(cats, pa.array(codes, mask=codes < 0)) if len(cats) else pa.nulls(len(codes), pa.large_string())
    out = pa.chunked_array([taken]).to_pandas().astype("str")
    out.index = series.index
    return out


def _recode(codes: np.ndarray, uniques: pd.Series, index) -> pd.Series:
    """Categorical column from codes into ``uniques`` (which may hold NA and repeats)."""
    ucodes, cats = pd.factorize(uniques.reset_index(drop=True), use_na_sentinel=True)
    lut = np.append(ucodes.astype(np.int64), -1)   # code -1 (NA) -> last entry -> -1
    new = lut[np.asarray(codes, dtype=np.int64)]
    cats = pd.Index(cats, dtype="str")
    return pd.Series(pd.Categorical.from_codes(new, categories=cats), index=index)


def _factor(series: pd.Series) -> tuple[np.ndarray, pd.Series]:
    """Codes (-1 = NA) and distinct values (as text) of a text column."""
    if isinstance(series.dtype, pd.CategoricalDtype):
        return series.cat.codes.to_numpy(), pd.Series(series.cat.categories.astype("str"))
    codes, uniques = pd.factorize(series, use_na_sentinel=True)
    return codes, pd.Series(uniques).astype("str")


def _clean_categorical(series: pd.Series, missing_values) -> pd.Series:
    """Trim and blank the distinct values only, then map back: a categorical column."""
    codes, uniques = _factor(series)
    s = uniques.str.strip()
    return _recode(codes, s.mask(s.isin(list(missing_values))), series.index)


def fold_case(values: pd.Series) -> pd.Series:
    """Case-folded text; for a categorical column the distinct values only."""
    if isinstance(values.dtype, pd.CategoricalDtype):
        codes, uniques = _factor(values)
        return _recode(codes, uniques.str.casefold(), values.index)
    return values.str.casefold()


def parse_number(text: pd.Series, *, decimal_comma: bool = False) -> tuple[pd.Series, np.ndarray]:
    """Float values and a mask of cells that are filled but not a finite number."""
    if text.dtype.kind in "biuf":
        values = text.astype("float64")
        bad = ~np.isfinite(values.to_numpy()) & values.notna().to_numpy()
        return values.mask(bad), bad
    s = text
    if decimal_comma:
        s = s.str.replace(r"^([+-]?\d*),(\d+)$", r"\1.\2", regex=True)
    vals = _fast_float(s)
    if vals is None:
        vals = pd.to_numeric(s, errors="coerce").astype("float64").to_numpy()
    values = pd.Series(vals, index=text.index, dtype="float64")
    bad = text.notna().to_numpy() & ~np.isfinite(vals)
    return values.mask(bad), bad


def _fast_float(text: pd.Series):
    """Float array by an Arrow cast when every filled cell is a plain number; else None."""
    try:
        import pyarrow as pa
        import pyarrow.compute as pc

        arr = pa.array(text.array) if hasattr(text.array, "__arrow_array__") else None
        if arr is None:
            return None
        return np.asarray(pc.cast(arr, pa.float64()).to_numpy(zero_copy_only=False), dtype="float64")
    except Exception:  # noqa: BLE001 - any unparseable cell: fall back to the cell-by-cell parser
        return None


def parse_boolean(text: pd.Series, true_values, false_values) -> tuple[pd.Series, np.ndarray]:
    """Boolean values (``boolean`` dtype) and a mask of cells that are filled but not recognised."""
    if text.dtype.kind == "b":
        return text.astype("boolean"), np.zeros(len(text), bool)
    if text.dtype.kind in "iuf":
        text = _numbers_as_text(text)
    lookup = {str(v).casefold(): True for v in true_values}
    lookup.update({str(v).casefold(): False for v in false_values})
    mapped = text.str.casefold().map(lookup)
    bad = text.notna().to_numpy() & mapped.isna().to_numpy()
    return mapped.astype("boolean"), bad


def _first_rows(values: pd.Series, rows: np.ndarray) -> pd.Series:
    """For each value, the spreadsheet row where it first appears."""
    first = pd.Series(rows, index=values.index).groupby(values.to_numpy(), sort=False).transform("min")
    return first


# --- two passes: convert (chunk by chunk), then check (the whole table) -------------------
#
# ``convert_fields`` types one block of raw rows (a whole table, or one chunk of a large text
# file): text is trimmed, blanks found, numbers parsed. It keeps what the messages need (the
# cells as written for the first rows of each fault) but no raw text. ``concat_converted``
# joins the blocks; ``check_converted`` then applies every check to the whole table, so row
# numbers, the "first 20 rows" lists and duplicate checks are global.

_SHOWN = 50  # cells kept per block, column and fault for the messages (more than are listed)


@dataclass
class ConvertedColumn:
    """One schema field after typing: values, blank and unreadable cells, texts for messages."""

    values: pd.Series             # typed; repeated text as a categorical column
    blank: np.ndarray             # empty cells (or a missing-value spelling)
    bad: np.ndarray               # filled, but not of the field's type (already NA in values)
    text: pd.Series | None = None  # text before case folding, where it differs from values
    shown: dict = dc_field(default_factory=dict)  # fault -> cells as written, indexed by position
    comma: bool = False           # an unreadable number looks like a decimal comma

    @property
    def as_written(self) -> pd.Series:
        return self.values if self.text is None else self.text


@dataclass
class ConvertedTable:
    """The typed schema fields of a table (see :func:`convert_fields`)."""

    fields: dict
    length: int
    index: pd.Index


def _unique_field(schema: TableSchema, f: dict) -> bool:
    return bool(f.get("constraints", {}).get("unique")) or schema.descriptor.get("primaryKey") == [f["name"]]


def repeated_text_fields(schema: TableSchema) -> list[str]:
    """Text fields whose values may repeat (not unique): worth reading as categorical columns."""
    return [f["name"] for f in schema.fields if f.get("type", "string") == "string" and not _unique_field(schema, f)]


def _range_faults(vals: np.ndarray, ok: np.ndarray, cons: dict) -> dict:
    """Cells below the minimum, then (of the rest) above the maximum."""
    out = {}
    for bound, op in (("minimum", np.less), ("maximum", np.greater)):
        if bound in cons:
            hit = ok & op(vals, cons[bound], where=ok, out=np.zeros(len(vals), bool))
            out[bound] = hit
            ok = ok & ~hit
    return out


def _keep(texts: pd.Series, mask: np.ndarray) -> pd.Series:
    """The first cells of a fault, as written, indexed by position."""
    pos = np.flatnonzero(mask)[:_SHOWN]
    return pd.Series(texts.iloc[pos].to_numpy(dtype=object), index=texts.index[pos], dtype=object)


def _number_text(raw: pd.Series, mask: np.ndarray) -> pd.Series:
    """Numeric cells shown as text, the first of ``mask``, spelled as :func:`_numbers_as_text` would."""
    pos = np.flatnonzero(mask)[:_SHOWN]
    sub = raw.iloc[pos]
    if raw.dtype.kind == "f" and len(pos):
        if _whole_floats(raw.to_numpy()):
            fin = np.isfinite(sub.to_numpy())
            text = sub.astype("str").to_numpy(dtype=object)
            text[fin] = sub[fin].astype("Int64").astype("str").to_numpy(dtype=object)
            return pd.Series(text, index=sub.index, dtype=object)
    return pd.Series(sub.astype("str").to_numpy(dtype=object), index=sub.index, dtype=object)


def convert_fields(df: pd.DataFrame, schema: TableSchema, *, decimal_comma: bool = False,
                   start: int = 0) -> ConvertedTable:
    """Type the schema fields present in a block of raw rows (first pass).

    Parameters
    ----------
    df : DataFrame
        Raw rows: text columns (plain or categorical), or typed columns from Parquet.
    start : int, default=0
        Position of the block's first row in the file (0 = first record).

    Notes
    -----
    Numeric columns are taken as numbers (no text round trip); text is trimmed and
    compared with the missing-value spellings once per distinct value for repeated
    text. A number column read as numbers must come in one block (its spelling in
    messages depends on the whole column).
    """
    n = len(df)
    index = pd.RangeIndex(start, start + n)
    missing = schema.missing_values
    out = {}
    for f in schema.fields:
        name, kind = f["name"], f.get("type", "string")
        if kind == "geojson" or name not in df.columns:
            continue
        raw = df[name]
        if not isinstance(raw, pd.Series):  # repeated column name: the first one counts
            raw = raw.iloc[:, 0]
        raw = raw.set_axis(index)
        cons = f.get("constraints", {})
        numeric = raw.dtype.kind in "biuf" and not isinstance(raw.dtype, pd.CategoricalDtype)
        if kind == "string":
            if numeric:
                codes, uniques = pd.factorize(raw, use_na_sentinel=True)
                text = _recode(codes, _numbers_as_text(pd.Series(uniques)), index)
            elif _unique_field(schema, f) and not isinstance(raw.dtype, pd.CategoricalDtype):
                text = clean_text(raw, missing)  # distinct values by design: no point in coding them
            else:
                text = _clean_categorical(raw, missing)
            col = ConvertedColumn(text, text.isna().to_numpy(), np.zeros(n, bool))
            if f.get("caseInsensitive"):
                col.values, col.text = fold_case(text), text
        elif kind in ("number", "integer"):
            if numeric:
                values = raw.astype("float64")
                blank = values.isna().to_numpy()
                text = None
            else:
                text = clean_text(raw, missing)
                blank = text.isna().to_numpy()
            values, bad = parse_number(values if numeric else text, decimal_comma=decimal_comma)
            if kind == "integer":
                frac = values.notna().to_numpy() & (np.mod(values.fillna(0).to_numpy(), 1) != 0)
                bad = bad | frac
                values = values.mask(frac)
            col = ConvertedColumn(values, blank, bad)
            vals = values.to_numpy(dtype="float64", na_value=np.nan)
            faults = {"type": bad, **_range_faults(vals, ~np.isnan(vals), cons)}
            for fault, mask in faults.items():
                if mask.any():
                    col.shown[fault] = _number_text(raw, mask) if numeric else _keep(text, mask)
            if bad.any() and not numeric and not decimal_comma:
                col.comma = bool(text[bad].str.contains(r"^[+-]?\d*,\d+$", regex=True).any())
            if kind == "integer":
                col.values = values.astype("Int64")
        elif kind == "boolean":
            text = clean_text(raw, missing)
            values, bad = parse_boolean(raw if raw.dtype.kind == "b" else text,
                                        f.get("trueValues", ["true"]), f.get("falseValues", ["false"]))
            col = ConvertedColumn(values.set_axis(index), text.isna().to_numpy(), bad)
            if bad.any():
                col.shown["type"] = _keep(text, bad)
        elif kind == "date":
            text = clean_text(raw, missing)
            blank = text.isna().to_numpy()
            values = pd.to_datetime(text, format="%Y-%m-%d", errors="coerce")
            bad = ~blank & values.isna().to_numpy()
            col = ConvertedColumn(values, blank, bad)
            if bad.any():
                col.shown["type"] = _keep(text, bad)
        out[name] = col
    return ConvertedTable(out, n, index)


def _concat_series(parts: list[pd.Series]) -> pd.Series:
    if len(parts) == 1:
        return parts[0]
    if all(isinstance(p.dtype, pd.CategoricalDtype) for p in parts):
        from pandas.api.types import union_categoricals

        return pd.Series(union_categoricals([p.array for p in parts]), index=pd.RangeIndex(sum(map(len, parts))))
    return pd.concat(parts, ignore_index=True)


def concat_converted(parts: list[ConvertedTable]) -> ConvertedTable:
    """Join blocks of one table (in file order) typed by :func:`convert_fields`."""
    if len(parts) == 1:
        return parts[0]
    n = sum(p.length for p in parts)
    fields = {}
    for name in parts[0].fields:
        cols = [p.fields[name] for p in parts]
        col = ConvertedColumn(_concat_series([c.values for c in cols]),
                              np.concatenate([c.blank for c in cols]), np.concatenate([c.bad for c in cols]),
                              comma=any(c.comma for c in cols))
        if any(c.text is not None for c in cols):
            col.text = _concat_series([c.as_written for c in cols])
        for fault in dict.fromkeys(k for c in cols for k in c.shown):
            col.shown[fault] = pd.concat([c.shown[fault] for c in cols if fault in c.shown])
        fields[name] = col
    return ConvertedTable(fields, n, pd.RangeIndex(n))


def check_fields(df: pd.DataFrame, schema: TableSchema, file: str, findings: Findings, *,
                 row_offset: int = 2, decimal_comma: bool = False, role: str | None = None):
    """Check and type every schema field present in ``df``.

    Parameters
    ----------
    df : DataFrame
        Raw table (text columns, or typed columns from Parquet). Its index must be
        the 0-based position of each record in the file.
    row_offset : int, default=2
        Added to the position to give the row number shown (2 = header on row 1).
    decimal_comma : bool, default=False
        Accept ``12,5`` as 12.5 in number columns (files separated by semicolons).

    Returns
    -------
    typed : DataFrame
        One column per schema field (absent optional ones filled with NA), typed:
        string -> ``str``, number -> float64, integer -> Int64, boolean -> ``boolean``.
        Cells that failed a check are NA.
    drop : ndarray of bool
        Rows to leave out because a check with severity ``"drop"`` failed.
    """
    conv = convert_fields(df, schema, decimal_comma=decimal_comma)
    conv.index = df.index
    return check_converted(conv, schema, file, findings, row_offset=row_offset, decimal_comma=decimal_comma,
                           role=role)


def _no_repeats(values: pd.Series, ok: np.ndarray) -> bool:
    """True when the filled text values are strictly increasing or decreasing (so all distinct).

    A cheap test that spares hashing millions of identifiers, which exports often sort.
    """
    arr = values.array
    if not hasattr(arr, "__arrow_array__") or isinstance(values.dtype, pd.CategoricalDtype):
        return False
    import pyarrow as pa
    import pyarrow.compute as pc

    a = arr.__arrow_array__()
    if not isinstance(a, pa.ChunkedArray):
        a = pa.chunked_array([a])
    if not ok.all():
        a = pc.filter(a, pa.array(ok))
    m = len(a)
    if m < 2:
        return True
    head, tail = a.slice(0, m - 1), a.slice(1)
    return bool(pc.all(pc.greater(tail, head)).as_py()) or bool(pc.all(pc.less(tail, head)).as_py())


def check_converted(conv: ConvertedTable, schema: TableSchema, file: str, findings: Findings, *,
                    row_offset: int = 2, decimal_comma: bool = False, role: str | None = None,
                    compact: bool = False):
    """Check a table typed by :func:`convert_fields` (second pass); returns ``(typed, drop)``.

    ``compact=True`` leaves repeated text as categorical columns (convert with
    :func:`as_text`); otherwise text columns are ``str``. See :func:`check_fields`.
    """
    n = conv.length
    pos = pd.RangeIndex(n)
    rows = np.arange(n) + row_offset
    typed = {}
    drop = np.zeros(n, bool)
    for f in schema.fields:
        name, kind = f["name"], f.get("type", "string")
        if kind == "geojson":
            continue
        if name not in conv.fields:
            typed[name] = _empty_column(kind, pos)
            if f.get("warnIfAbsent"):
                findings.warn(f"{file}: no column '{name}'; treated as blank")
            continue
        col = conv.fields[name]
        values = col.values.set_axis(pos)
        text = col.as_written.set_axis(pos)
        blank, bad = col.blank, col.bad
        cons = f.get("constraints", {})
        if bad.any():
            expected = _type_words(f, decimal_comma)
            fix = f"correct these cells in column '{name}' (or leave them blank if allowed)"
            if kind in ("number", "integer") and col.comma:
                fix += "; use a dot as the decimal mark (or separate columns with semicolons)"
            shown = _shown(col, "type", bad)
            _report(findings, schema, name, "type", file, rows[bad],
                    [f"{show(v)} (not {_a(kind)})" for v in shown], expected, fix)
        ok = values.notna().to_numpy()
        # constraints
        if cons.get("required"):
            sev = schema.severity(name, "required")
            if blank.any():
                if sev == "drop":
                    drop |= blank
                    findings.drop(role or schema.name, f"blank {name}", blank.sum(),
                                  [f"row {r}" for r in rows[blank][:10]])
                    findings.row_warning(f"{file}: {blank.sum()} row(s) with a blank {name} left out", rows[blank])
                else:
                    _report(findings, schema, name, "required", file, rows[blank], "a blank cell",
                            f"a value in every row of '{name}'",
                            f"fill column '{name}' in these rows or delete the rows")
        if kind in ("number", "integer") and ("minimum" in cons or "maximum" in cons):
            vals = values.to_numpy(dtype="float64", na_value=np.nan)
            for bound, out in _range_faults(vals, ok, cons).items():
                if out.any():
                    lo, hi = cons.get("minimum"), cons.get("maximum")
                    rng = (f"between {lo:g} and {hi:g}" if lo is not None and hi is not None
                           else f"at least {lo:g}" if lo is not None else f"at most {hi:g}")
                    fix = f"correct the values in '{name}'"
                    if name in ("decimalLatitude", "decimalLongitude"):
                        fix += "; check that latitude and longitude are not swapped and are decimal degrees"
                    _report(findings, schema, name, bound, file, rows[out],
                            [show(v) for v in _shown(col, bound, out)], f"a number {rng}", fix)
                    values = values.mask(out)
                    ok = ok & ~out
        if "enum" in cons:
            allowed = list(cons["enum"])
            folded = [a.casefold() for a in allowed] if f.get("caseInsensitive") else allowed
            out = ok & ~values.isin(folded).to_numpy()
            if out.any():
                _report(findings, schema, name, "enum", file, rows[out],
                        [f"{show(v)}" + _suggest(v, allowed) for v in text[out].head(50)],
                        f"one of {allowed}" + (" (case ignored)" if f.get("caseInsensitive") else ""),
                        f"use one of the allowed values in '{name}'")
                values = values.mask(out)
                ok = ok & ~out
        if "pattern" in cons and kind == "string":
            out = ok & ~values.str.fullmatch(cons["pattern"]).fillna(False).to_numpy(bool)
            if out.any():
                _report(findings, schema, name, "pattern", file, rows[out], [show(v) for v in text[out].head(50)],
                        f"text matching {cons['pattern']!r}", f"correct the values in '{name}'")
                values = values.mask(out)
                ok = ok & ~out
        unique = cons.get("unique") or schema.descriptor.get("primaryKey") == [name]
        if unique and ok.any() and not _no_repeats(values, ok):
            dup = ok & values.duplicated(keep="first").to_numpy()
            if dup.any():
                first = _first_rows(values[ok], rows[ok]).reindex(values.index).to_numpy()
                sev = schema.severity(name, "unique")
                if sev == "warning":
                    n_dup = int(dup.sum())
                    findings.row_warning(
                        f"{file}: {n_dup} row(s) repeat an {name} of an earlier row (kept; "
                        f"e.g. {show(text[dup].iloc[0])} also in row {int(first[dup][0])})", rows[dup])
                else:
                    found = [f"{show(v)} again (first in row {int(r)})"
                             for v, r in zip(text[dup].head(50), first[dup][:50])]
                    _report(findings, schema, name, "unique", file, rows[dup], found,
                            f"each {name} once", f"give each row its own {name} or merge the duplicates")
        typed[name] = values if compact else as_text(values)
    out = pd.DataFrame(typed, index=pos, copy=False)
    out.index = conv.index
    return out, drop


def _shown(col: ConvertedColumn, fault: str, mask: np.ndarray) -> list:
    """Cells as written for the first rows of a fault (kept by :func:`convert_fields`)."""
    pos = np.flatnonzero(mask)[:_SHOWN]
    kept = col.shown.get(fault)
    if kept is None:
        return [None] * len(pos)
    return list(kept.reindex(pos).to_numpy(dtype=object))


def _report(findings, schema, name, rule, file, rows, found, expected, fix):
    findings.rows(file, name, rows, found, expected, fix)


def _suggest(value, allowed) -> str:
    close = close_names(str(value), allowed)
    return f" (did you mean '{close[0]}'?)" if close else ""


def _a(kind: str) -> str:
    return {"number": "a number", "integer": "a whole number", "boolean": "true/false",
            "date": "a date YYYY-MM-DD"}.get(kind, kind)


def _type_words(f: dict, decimal_comma: bool) -> str:
    kind = f.get("type", "string")
    if kind == "number":
        return "a number" + (" (dot or comma as decimal mark)" if decimal_comma else " (dot as decimal mark)")
    if kind == "integer":
        return "a whole number"
    if kind == "boolean":
        return f"one of {list(f.get('trueValues', ['true']))} or {list(f.get('falseValues', ['false']))} (case ignored)"
    if kind == "date":
        return "a date written YYYY-MM-DD"
    return kind


def _empty_column(kind: str, index) -> pd.Series:
    dtype = {"string": "str", "number": "float64", "integer": "Int64", "boolean": "boolean"}.get(kind, "object")
    return pd.Series(np.nan if dtype in ("str", "float64") else None, index=index, dtype=dtype)
