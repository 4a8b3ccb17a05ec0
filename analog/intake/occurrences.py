"""Check and type the fossil and modern occurrence tables: taxon links, ages, coordinates."""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import AnalogError
from .findings import Findings, show
from .schema import TableSchema, check_columns, check_fields, clean_text, close_names
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


def link_taxa(typed: pd.DataFrame, taxa: pd.DataFrame, schema: TableSchema, file: str, findings: Findings, *,
              role: str) -> tuple[pd.Series, np.ndarray]:
    """taxon_id of each row (by id, else by name) and the rows to leave out.

    Unknown ``taxon_id`` values are problems. Unmatched names are problems or, where the
    schema's foreign key says ``onMissing: drop``, rows left out and recorded.
    """
    schema.rule("taxon_reference")
    rows = typed.index.to_numpy() + 2
    given_id = typed["taxon_id"]
    names = typed["scientificName"]
    has_id = given_id.notna().to_numpy()
    known = given_id.isin(set(taxa["taxon_id"])).to_numpy()
    out = given_id.where(has_id & known)
    drop = np.zeros(len(typed), bool)

    bad = has_id & ~known
    if bad.any():
        ids = taxa["taxon_id"].tolist()
        findings.rows(file, "taxon_id", rows[bad],
                      [f"{show(v)}" + (f" (did you mean '{c[0]}'?)" if (c := close_names(str(v), ids)) else "")
                       for v in given_id[bad].head(20)],
                      "a taxon_id of the taxa table", "correct the taxon_id or add the taxon to the taxa table")

    by_name = ~has_id & names.notna().to_numpy()
    none = ~has_id & ~by_name
    if none.any():
        findings.rows(file, "taxon_id / scientificName", rows[none], "no taxon_id and no scientificName",
                      "a taxon_id or a scientificName in every row", "fill one of the two columns in these rows")
    if not by_name.any():
        return out, drop

    exact, ambiguous = _unique_map(name_key(taxa["scientificName"]), taxa["taxon_id"])
    canon, ambiguous_canon = _unique_map(canonical_name(taxa["scientificName"]), taxa["taxon_id"])
    sub = names[by_name]
    key = name_key(sub)
    hit = key.map(exact)
    miss = hit.isna()
    n_exact = int((~miss).sum())
    if miss.any():
        ckey = canonical_name(sub[miss])
        chit = ckey.map(canon).where(~ckey.isin(ambiguous_canon))
        hit = hit.fillna(chit)
        n_canon = int(chit.notna().sum())
        if n_canon:
            findings.warn(f"{file}: {n_canon} row(s) matched to taxa after leaving out the authorship "
                          f"of scientificName (e.g. {show(sub[miss][chit.notna()].iloc[0])})")
    out = out.copy()
    out.loc[hit.index] = hit
    unmatched = by_name.copy()
    unmatched[by_name] = hit.isna().to_numpy()
    if not unmatched.any():
        return out, drop
    um_names = names[unmatched]
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
    return out, drop


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


def check_fossils(df: pd.DataFrame, columns, schema: TableSchema, taxa: pd.DataFrame | None, file: str,
                  findings: Findings, *, decimal_comma: bool = False) -> pd.DataFrame | None:
    """Typed fossil occurrences (columns as in analog.study), or ``None`` if columns are missing."""
    ok = check_columns(columns, schema, file, findings)
    typed, _ = check_fields(df, schema, file, findings, decimal_comma=decimal_comma)
    rows = df.index.to_numpy() + 2
    # rows whose numeric age cells were filled but unreadable are already reported
    unreadable = np.zeros(len(df), bool)
    for c in ("oldest_ma", "youngest_ma"):
        if c in df.columns:
            unreadable |= clean_text(df[c], schema.missing_values).notna().to_numpy() & typed[c].isna().to_numpy()
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
    return typed[FOSSIL_COLUMNS].reset_index(drop=True)


def check_modern(df: pd.DataFrame, columns, schema: TableSchema, taxa: pd.DataFrame | None, file: str,
                 findings: Findings, *, decimal_comma: bool = False) -> pd.DataFrame | None:
    """Typed modern occurrences of extant taxa (columns as in analog.study), or ``None``."""
    ok = check_columns(columns, schema, file, findings)
    typed, drop = check_fields(df, schema, file, findings, decimal_comma=decimal_comma, role="modern_occurrences")
    rows = df.index.to_numpy() + 2
    blank_id = typed["occurrenceID"].isna().to_numpy()
    if blank_id.any():
        typed.loc[blank_id, "occurrenceID"] = [f"{file}:row{r}" for r in rows[blank_id]]
        findings.warn(f"{file}: {int(blank_id.sum())} row(s) without occurrenceID; named '<file>:row<n>'")
    if taxa is not None and ok:
        typed["taxon_id"], unmatched = link_taxa(typed, taxa, schema, file, findings, role="modern_occurrences")
        drop |= unmatched
        schema.rule("extant_only")
        extant_ids = set(taxa.loc[taxa["extant"], "taxon_id"])
        gone = typed["taxon_id"].notna().to_numpy() & ~typed["taxon_id"].isin(extant_ids).to_numpy() & ~drop
        if gone.any():
            counts = typed.loc[gone, "taxon_id"].value_counts()
            examples = [f"{t} ({c})" for t, c in counts.head(10).items()]
            findings.drop("modern_occurrences", "taxon not marked extant", int(gone.sum()), examples)
            findings.warn(f"{file}: {int(gone.sum())} record(s) of {len(counts)} taxa not marked extant in the "
                          f"taxa table left out ({', '.join(examples[:5])}); set extant = true if they live today")
            drop |= gone
    if not ok:
        return None
    kept = typed.loc[~drop, MODERN_COLUMNS]
    if len(typed) and not len(kept) and taxa is not None and taxa["extant"].any():
        # (with no extant taxon at all the taxa table carries the one problem)
        findings.add(file, f"no usable rows (all {len(typed)} left out; see the warnings)",
                     "modern occurrences of extant taxa of the taxa table",
                     "check that taxon_id / scientificName match the taxa table and that extant is set")
    return kept.reset_index(drop=True)
