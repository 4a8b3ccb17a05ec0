"""Check and type the fossil and modern occurrence tables: taxon links, ages, coordinates."""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import AnalogError
from .findings import Findings, show
from .schema import (ConvertedTable, TableSchema, _factor, as_text, check_columns, check_converted, close_names,
                     convert_fields)
from .taxa import name_key, on_uniques

__all__ = ["check_fossils", "check_modern", "link_taxa", "canonical_name"]

FOSSIL_COLUMNS = ["occurrenceID", "taxon_id", "oldest_ma", "youngest_ma", "decimalLatitude",
                  "decimalLongitude", "locationID"]
MODERN_COLUMNS = ["occurrenceID", "taxon_id", "decimalLatitude", "decimalLongitude"]

# Genus word, then up to two lower-case epithets; drops authorship such as "(Smith, 1850)".
_CANONICAL = r"^(\S+(?:\s+[a-z\u00d7][a-z\u00d7-]*){0,2})"


def canonical_name(names: pd.Series) -> pd.Series:
    """Names without authorship, compared like :func:`~analog.intake.taxa.name_key`."""
    core = on_uniques(names, lambda u: u.str.strip().str.extract(_CANONICAL, expand=False))
    return name_key(core)


def _unique_map(keys: pd.Series, ids: pd.Series):
    """key -> taxon_id for keys held by exactly one taxon, and the set of ambiguous keys."""
    frame = pd.DataFrame({"key": keys.to_numpy(), "id": ids.to_numpy()}).dropna()
    counts = frame.groupby("key")["id"].nunique()
    ambiguous = set(counts.index[counts > 1])
    single = frame[~frame["key"].isin(ambiguous)].drop_duplicates("key")
    return pd.Series(single["id"].to_numpy(), index=single["key"].to_numpy()), ambiguous


def _on_missing(schema: TableSchema, column: str) -> str:
    for fk in schema.foreign_keys:
        if fk["fields"] in (column, [column]):
            return fk.get("onMissing", "error")
    return "error"


def _positions(values: pd.Series, ids: pd.Index) -> np.ndarray:
    """Position in ``ids`` of each value (-1 = blank or not found), looked up once per distinct value."""
    codes, uniques = _factor(values)
    lut = np.append(ids.get_indexer(uniques), -1)
    return lut[np.asarray(codes, dtype=np.int64)]


def _ids_at(ids: pd.Index, pos: np.ndarray, index) -> pd.Series:
    """Taxon identifiers at positions ``pos`` (-1 = NA) as a ``str`` column."""
    return as_text(pd.Series(pd.Categorical.from_codes(pos, categories=ids), index=index))


def link_taxa(typed: pd.DataFrame, taxa: pd.DataFrame, schema: TableSchema, file: str, findings: Findings, *,
              role: str) -> tuple[pd.Series, np.ndarray]:
    """taxon_id of each row (by id, else by name) and the rows to leave out.

    Unknown ``taxon_id`` values are problems. Unmatched names are problems or, where the
    schema's foreign key says ``onMissing: drop``, rows left out and recorded.
    Names are compared once per distinct name; the rows follow by their codes.
    """
    ids, pos, drop = _link(typed, taxa, schema, file, findings, role=role)
    return _ids_at(ids, pos, typed.index), drop


def _link(typed, taxa, schema: TableSchema, file: str, findings: Findings, *, role: str):
    """As :func:`link_taxa`, with each row's taxon as a position in the distinct taxon ids (-1 = none)."""
    schema.rule("taxon_reference")
    rows = np.arange(len(typed)) + 2
    ids = pd.Index(taxa["taxon_id"].astype("str")).dropna().drop_duplicates()
    given_id = typed["taxon_id"]
    names = typed["scientificName"]
    has_id = given_id.notna().to_numpy()
    pos = _positions(given_id, ids)
    known = pos >= 0
    pos = np.where(has_id & known, pos, -1)
    drop = np.zeros(len(typed), bool)

    bad = has_id & ~known
    if bad.any():
        id_list = taxa["taxon_id"].tolist()
        findings.rows(file, "taxon_id", rows[bad],
                      [f"{show(v)}" + (f" (did you mean '{c[0]}'?)" if (c := close_names(str(v), id_list)) else "")
                       for v in given_id[bad].head(20)],
                      "a taxon_id of the taxa table", "correct the taxon_id or add the taxon to the taxa table")

    by_name = ~has_id & names.notna().to_numpy()
    none = ~has_id & ~by_name
    if none.any():
        findings.rows(file, "taxon_id / scientificName", rows[none], "no taxon_id and no scientificName",
                      "a taxon_id or a scientificName in every row", "fill one of the two columns in these rows")
    if not by_name.any():
        return ids, pos, drop

    exact, ambiguous = _unique_map(name_key(taxa["scientificName"]), taxa["taxon_id"])
    canon, ambiguous_canon = _unique_map(canonical_name(taxa["scientificName"]), taxa["taxon_id"])
    sub = names[by_name]
    codes, uniques = _factor(sub)
    codes = np.asarray(codes, dtype=np.int64)
    per_name = np.bincount(codes[codes >= 0], minlength=len(uniques))  # rows of each distinct name
    hit = name_key(uniques).map(exact)
    miss = hit.isna().to_numpy()
    n_exact = int(per_name[~miss].sum())
    if miss.any():
        ckey = canonical_name(uniques[miss])
        chit = ckey.map(canon).where(~ckey.isin(ambiguous_canon))
        by_canon = np.zeros(len(uniques), bool)
        by_canon[np.flatnonzero(miss)] = chit.notna().to_numpy()
        hit = hit.fillna(chit)
        n_canon = int(per_name[by_canon].sum())
        if n_canon:
            first = int(np.argmax(by_canon[codes]))
            findings.warn(f"{file}: {n_canon} row(s) matched to taxa after leaving out the authorship "
                          f"of scientificName (e.g. {show(sub.iloc[first])})")
    pos[by_name] = ids.get_indexer(hit)[codes]
    unmatched = by_name & (pos < 0)
    if not unmatched.any():
        return ids, pos, drop
    um_names = as_text(names[unmatched])
    is_amb = name_key(um_names).isin(ambiguous).to_numpy()
    policy = _on_missing(schema, "scientificName")
    if policy == "drop":
        drop |= unmatched
        counts = um_names.str.strip().value_counts()
        examples = [f"{n} ({c})" for n, c in counts.head(10).items()]
        reason = "scientificName not in taxa" + (" or shared by several taxa" if is_amb.any() else "")
        findings.drop(role, reason, int(unmatched.sum()), examples)
        taxa_names = taxa["scientificName"].tolist()
        # a stricter cutoff than for errors: this hint lists names that are probably misspelt
        close = [(n, c[0]) for n in counts.index[:50] if (c := close_names(str(n), taxa_names, cutoff=0.85))][:5]
        hint = ("; spelled like taxa of the table: " + ", ".join(f"{n!r} ~ {c!r}" for n, c in close)) if close else ""
        findings.warn(f"{file}: {int(unmatched.sum())} record(s) of {len(counts)} name(s) not found in the taxa "
                      f"table left out (most frequent: {', '.join(examples[:5])}); matched {n_exact} by name{hint}")
    else:
        taxa_names = taxa["scientificName"].tolist()
        shown = um_names.head(20)
        amb_shown = is_amb[:20]
        found = []
        for v, amb in zip(shown, amb_shown):
            if amb:
                found.append(f"{show(v)} (shared by several taxa)")
            else:
                c = close_names(str(v), taxa_names)
                found.append(f"{show(v)}" + (f" (did you mean '{c[0]}'?)" if c else ""))
        findings.rows(file, "scientificName", rows[unmatched], found,
                      "a scientificName of the taxa table (trimmed, case ignored)",
                      "correct the name, give the taxon_id instead, or add the taxon to the taxa table")
    return ids, pos, drop


def _has_group(schema: TableSchema, columns, name: str) -> bool:
    """Whether one option of the schema's column alternative ``name`` is present."""
    present = set(columns)
    for alt in schema.alternatives:
        if alt["name"] == name:
            return any(all(c in present for c in opt) for opt in alt["options"])
    return True


def _num(value) -> str:
    return "blank" if pd.isna(value) else f"{value:g}"


def _stage_ages(typed, schema: TableSchema, rows, file, findings: Findings):
    """Fill blank numeric ages from stage names; report unknown needed stage names."""
    schema.rule("stage_names")
    old, young = typed["oldest_ma"], typed["youngest_ma"]
    early, late = typed["earliestAgeOrLowestStage"], typed["latestAgeOrHighestStage"]
    has_stage = early.notna() | late.notna()
    reported = np.zeros(len(typed), bool)
    if not has_stage.any():
        return old, young, reported
    early, late = as_text(early), as_text(late)
    try:
        from ..reference import resolve_stages, suggest_stages
    except ImportError as exc:  # pragma: no cover - packaging fault
        raise AnalogError("the bundled time scale (analog.reference) is not available; reinstall analog") from exc
    names = pd.unique(pd.concat([early.dropna(), late.dropna()]).to_numpy())
    resolved = resolve_stages(pd.Series(names, dtype="str"))
    base = pd.Series(resolved["oldest_ma"].to_numpy(dtype=float), index=names)
    top = pd.Series(resolved["youngest_ma"].to_numpy(dtype=float), index=names)
    e_old, e_young = early.map(base), early.map(top)
    l_old, l_young = late.map(base), late.map(top)
    need = (old.isna() | young.isna()).to_numpy()
    for column, stage, value in (("earliestAgeOrLowestStage", early, e_old),
                                 ("latestAgeOrHighestStage", late, l_old)):
        unknown = stage.notna().to_numpy() & value.isna().to_numpy()
        bad = unknown & need
        reported |= bad
        if bad.any():
            suggestions = {}
            found = []
            for v in stage[bad].head(20):
                if v not in suggestions:
                    suggestions[v] = list(suggest_stages(v, n=3))
                s = suggestions[v]
                found.append(f"unknown stage {show(v)}" + (f" (closest: {', '.join(s)})" if s else ""))
            findings.rows(file, column, rows[bad], found,
                          "a stage or age name of the ICS chart (see analog.reference)",
                          "correct the spelling, or give oldest_ma and youngest_ma in Ma")
        idle = unknown & ~need
        if idle.any():
            findings.row_warning(f"{file}: {int(idle.sum())} unknown name(s) in {column} ignored because "
                                 f"the numeric ages are given", rows[idle])
    old = old.fillna(e_old.fillna(l_old))
    young = young.fillna(l_young.fillna(e_young))
    return old, young, reported


def _converted(table, schema: TableSchema, decimal_comma: bool) -> ConvertedTable:
    if isinstance(table, ConvertedTable):
        return table
    return convert_fields(table.reset_index(drop=True), schema, decimal_comma=decimal_comma)


def check_fossils(table, columns, schema: TableSchema, taxa: pd.DataFrame | None, file: str,
                  findings: Findings, *, decimal_comma: bool = False) -> pd.DataFrame | None:
    """Typed fossil occurrences (columns as in analog.study), or ``None`` if columns are missing.

    ``table`` is the raw table (DataFrame) or its chunks typed by
    :func:`~analog.intake.schema.convert_fields` and joined.
    """
    ok = check_columns(columns, schema, file, findings)
    conv = _converted(table, schema, decimal_comma)
    typed, _ = check_converted(conv, schema, file, findings, decimal_comma=decimal_comma, compact=True)
    rows = np.arange(conv.length) + 2
    # rows whose numeric age cells were filled but unreadable are already reported
    unreadable = np.zeros(conv.length, bool)
    for c in ("oldest_ma", "youngest_ma"):
        if c in conv.fields:
            unreadable |= ~conv.fields[c].blank & typed[c].isna().to_numpy()
    old, young, stage_bad = _stage_ages(typed, schema, rows, file, findings)
    schema.rule("age_present")
    # without the age columns every row would repeat the one missing-column problem
    has_age = _has_group(schema, columns, "age")
    no_age = (old.isna() | young.isna()).to_numpy() & ~unreadable & ~stage_bad & has_age
    if no_age.any():
        found = [f"oldest_ma {_num(o)}, youngest_ma {_num(y)}, no stage name"
                 for o, y in zip(old[no_age].head(20), young[no_age].head(20))]
        findings.rows(file, "oldest_ma / youngest_ma", rows[no_age], found,
                      "an age in every row: oldest_ma and youngest_ma (Ma), or stage names",
                      "fill the ages or the stage names of these rows")
    schema.rule("age_order")
    o, y = old.to_numpy(dtype=float, na_value=np.nan), young.to_numpy(dtype=float, na_value=np.nan)
    with np.errstate(invalid="ignore"):
        wrong = o < y
    if wrong.any():
        findings.rows(file, "oldest_ma", rows[wrong],
                      [f"oldest_ma {a:g} < youngest_ma {b:g}" for a, b in zip(o[wrong][:20], y[wrong][:20])],
                      "oldest_ma >= youngest_ma (ages in Ma count back from today)",
                      "swap the two ages (or the two stage names) in these rows")
    typed["oldest_ma"], typed["youngest_ma"] = old, young
    if taxa is not None and _has_group(schema, columns, "taxon reference"):
        typed["taxon_id"], _ = link_taxa(typed, taxa, schema, file, findings, role="fossil_occurrences")
    if not ok:
        return None
    return pd.DataFrame({c: as_text(typed[c]) for c in FOSSIL_COLUMNS}).reset_index(drop=True)


def check_modern(table, columns, schema: TableSchema, taxa: pd.DataFrame | None, file: str,
                 findings: Findings, *, decimal_comma: bool = False) -> pd.DataFrame | None:
    """Typed modern occurrences of extant taxa (columns as in analog.study), or ``None``.

    ``table`` as for :func:`check_fossils`.
    """
    ok = check_columns(columns, schema, file, findings)
    conv = _converted(table, schema, decimal_comma)
    typed, drop = check_converted(conv, schema, file, findings, decimal_comma=decimal_comma,
                                  role="modern_occurrences", compact=True)
    rows = np.arange(conv.length) + 2
    blank_id = typed["occurrenceID"].isna().to_numpy()
    if blank_id.any():
        typed["occurrenceID"] = as_text(typed["occurrenceID"])
        typed.loc[blank_id, "occurrenceID"] = [f"{file}:row{r}" for r in rows[blank_id]]
        findings.warn(f"{file}: {int(blank_id.sum())} row(s) without occurrenceID; named '<file>:row<n>'")
    if taxa is not None and ok:
        ids, pos, unmatched = _link(typed, taxa, schema, file, findings, role="modern_occurrences")
        typed["taxon_id"] = _ids_at(ids, pos, typed.index)
        drop |= unmatched
        schema.rule("extant_only")
        extant_ids = set(taxa.loc[taxa["extant"], "taxon_id"])
        living = np.append(ids.isin(extant_ids), False)  # by position; -1 (no taxon) -> False
        gone = (pos >= 0) & ~living[pos] & ~drop
        if gone.any():
            counts = typed.loc[gone, "taxon_id"].value_counts()
            examples = [f"{t} ({c})" for t, c in counts.head(10).items()]
            findings.drop("modern_occurrences", "taxon not marked extant", int(gone.sum()), examples)
            findings.warn(f"{file}: {int(gone.sum())} record(s) of {len(counts)} taxa not marked extant in the "
                          f"taxa table left out ({', '.join(examples[:5])}); set extant = true if they live today")
            drop |= gone
    if not ok:
        return None
    kept = typed[MODERN_COLUMNS] if not drop.any() else typed.loc[~drop, MODERN_COLUMNS]
    if len(typed) and not len(kept) and taxa is not None and taxa["extant"].any():
        # (with no extant taxon at all the taxa table carries the one problem)
        findings.add(file, f"no usable rows (all {len(typed)} left out; see the warnings)",
                     "modern occurrences of extant taxa of the taxa table",
                     "check that taxon_id / scientificName match the taxa table and that extant is set")
    return pd.DataFrame({c: as_text(kept[c]) for c in MODERN_COLUMNS}).reset_index(drop=True)
