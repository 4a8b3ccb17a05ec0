"""Check and type the taxa table and its trait columns."""
from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from ..study import RANK_COLUMNS, TraitSpec
from .findings import Findings, show
from .schema import TableSchema, check_columns, check_fields, clean_text, close_names, parse_boolean, parse_number

__all__ = ["check_taxa", "name_key", "on_uniques"]

_FIXED = ("taxon_id", "scientificName", "taxonRank") + RANK_COLUMNS + ("extant",)


def on_uniques(values: pd.Series, func) -> pd.Series:
    """Apply a text function to the distinct values only (names repeat across millions of rows)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    done = func(pd.Series(uniques, dtype="str"))
    done = pa.array(done.to_numpy(dtype=object, na_value=None), type=pa.large_string())
    taken = pc.take(done, pa.array(codes, mask=codes < 0)) if len(done) else pa.nulls(len(codes), pa.large_string())
    out = pa.chunked_array([taken]).to_pandas()
    out.index = values.index
    return out.astype("str")


def name_key(names: pd.Series) -> pd.Series:
    """Names as compared between tables: trimmed, inner spaces collapsed, case-folded."""
    return on_uniques(names, lambda u: u.str.strip().str.replace(r"\s+", " ", regex=True).str.casefold())


def check_taxa(df: pd.DataFrame, columns, schema: TableSchema, traits: dict[str, TraitSpec], file: str,
               findings: Findings, *, decimal_comma: bool = False):
    """Typed taxa table and the traits kept for the models.

    Returns
    -------
    taxa : DataFrame or None
        Contract columns (see analog.study) then one column per declared trait.
        ``None`` if the fixed columns are missing.
    traits : dict of TraitSpec
        Declared traits that can be used: categorical references filled in,
        traits with fewer than two observed classes dropped (with a warning).
    """
    ok = check_columns(columns, schema, file, findings)
    typed, _ = check_fields(df, schema, file, findings, decimal_comma=decimal_comma)
    rows = df.index.to_numpy() + 2
    kept: dict[str, TraitSpec] = {}
    trait_cols = {}
    for name, spec in traits.items():
        schema.rule("trait_declared")
        if name not in df.columns:
            close = close_names(name, [c for c in df.columns if c not in _FIXED])
            findings.add(file, f"no column '{name}' for the trait declared as [traits.{name}]",
                         f"a column '{name}' in the taxa table",
                         (f"rename column '{close[0]}' to '{name}'" if close
                          else f"add the column, or remove [traits.{name}] from study.toml"),
                         row=1, column=name)
            continue
        values, spec = _trait_column(df[name], spec, schema, rows, file, findings, decimal_comma)
        if values is None:
            continue
        trait_cols[name] = values
        if spec is not None:
            kept[name] = spec
    keys = name_key(typed["scientificName"])
    shared = keys.notna() & keys.duplicated(keep=False)
    if shared.any():
        names = typed.loc[shared.to_numpy(), "scientificName"].drop_duplicates().head(5).tolist()
        findings.warn(f"{file}: {int(shared.sum())} taxa share a scientificName with another taxon "
                      f"({', '.join(repr(n) for n in names)}); occurrences must name them by taxon_id")
    schema.rule("undeclared_columns")
    extra = [c for c in columns if c not in _FIXED and c not in traits and c not in schema.ignored_columns]
    if extra:
        findings.warn(f"{file}: column{'s' if len(extra) > 1 else ''} {', '.join(repr(c) for c in extra)} "
                      f"not declared; ignored (to use one as a trait add [traits.<column>] with its kind "
                      f"to study.toml)")
    if not ok:
        return None, kept
    out = typed[list(_FIXED)].copy()
    out["extant"] = out["extant"].fillna(False).astype(bool)
    schema.rule("extant_present")
    if not out["extant"].any() and not typed["extant"].isna().any():  # unreadable cells are reported already
        findings.add(file, f"no taxon marked extant (all {len(out)} are extant = false)",
                     "at least one living taxon: the tool ranks living taxa",
                     "set extant = true (or yes, 1) for the taxa that live today", column="extant")
    for name, values in trait_cols.items():
        out[name] = values
    return out.reset_index(drop=True), kept


def _trait_column(raw: pd.Series, spec: TraitSpec, schema: TableSchema, rows, file, findings: Findings,
                  decimal_comma: bool):
    name = spec.name
    text = clean_text(raw, schema.missing_values)
    schema.rule("trait_values")
    if spec.kind == "numeric":
        values, bad = parse_number(raw if raw.dtype.kind in "biuf" else text, decimal_comma=decimal_comma)
        if bad.any():
            findings.rows(file, name, rows[bad], [f"{show(v)} (not a number)" for v in text[bad].head(50)],
                          f"a number (numeric trait [traits.{name}])", f"correct these cells in '{name}' or leave them blank")
        n_classes = values.dropna().nunique()
    elif spec.kind == "binary":
        extant = schema.field("extant")
        tv, fv = extant.get("trueValues", ["true"]), extant.get("falseValues", ["false"])
        flags, bad = parse_boolean(raw if raw.dtype.kind == "b" else text, tv, fv)
        if bad.any():
            findings.rows(file, name, rows[bad], [show(v) for v in text[bad].head(50)],
                          f"one of {tv} or {fv} (binary trait [traits.{name}], case ignored)",
                          f"correct these cells in '{name}' or leave them blank")
        values = pd.Series(flags.astype("Float64").to_numpy(dtype="float64", na_value=np.nan), index=raw.index)
        n_classes = values.dropna().nunique()
    else:
        values, spec = _classes(text, spec, rows, file, findings)
        if values is None:
            return None, None
        n_classes = values.dropna().nunique()
    schema.rule("trait_informative")
    if n_classes < 2:
        only = values.dropna().iloc[0] if n_classes else None
        if spec.kind == "binary" and n_classes:
            only = "true" if only else "false"  # stored as 1/0
        what = "no values" if n_classes == 0 else f"one class only ({show(only)})"
        findings.warn(f"{file}: trait '{name}' has {what}; it is left out of the models")
        findings.drop("traits", "fewer than two classes", 1, [name])
        return values.reset_index(drop=True), None
    return values.reset_index(drop=True), spec


def _classes(text: pd.Series, spec: TraitSpec, rows, file, findings: Findings):
    """Categorical/ordinal values as a pandas Categorical in declared order."""
    name = spec.name
    if spec.levels is not None:
        lookup = {lv.casefold(): lv for lv in spec.levels}
        mapped = text.str.casefold().map(lookup)
        bad = text.notna().to_numpy() & mapped.isna().to_numpy()
        if bad.any():
            allowed = list(spec.levels)
            findings.rows(file, name, rows[bad],
                          [f"{show(v)}" + (f" (did you mean '{c[0]}'?)" if (c := close_names(str(v), allowed)) else "")
                           for v in text[bad].head(50)],
                          f"one of the classes {allowed} declared in [traits.{name}] (case ignored)",
                          f"correct these cells, or add the class to levels in [traits.{name}]")
        categories = list(spec.levels)
    else:
        mapped = text
        categories = sorted(text.dropna().unique().tolist())
    values = pd.Series(pd.Categorical(mapped, categories=categories, ordered=spec.kind == "ordinal"),
                       index=text.index)
    if spec.kind == "categorical":
        counts = values.value_counts(sort=False)
        if spec.reference is not None:
            if counts.get(spec.reference, 0) == 0:
                findings.add("study.toml", f"reference class {show(spec.reference)} that no taxon has",
                             f"a class present in column '{name}' of {file}",
                             f"set [traits.{name}] reference to a class that occurs "
                             f"(present: {[c for c in categories if counts.get(c, 0)]})",
                             column=f"[traits.{name}] reference")
        elif counts.sum():
            # most common class; ties go to the first in category order
            spec = dataclasses.replace(spec, reference=str(counts.idxmax()))
    if spec.levels is None and spec.kind == "categorical":
        spec = dataclasses.replace(spec, levels=tuple(categories))
    return values, spec
