"""Property-based tests of study intake (analog.intake.load_study).

Arbitrary tables written as study files must either load or fail with the project's
``InputError``, each problem naming its file (and, for cell faults, the row and column);
no other exception may escape. Loading must not depend on the order of the occurrence
rows (beyond row numbers in messages), nor on the file format (CSV or Parquet) of the
same table. All taxa, places and values are invented. Profiles: conftest.py.
"""
from __future__ import annotations

import math
import tempfile
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import Polygon

from analog.errors import InputError
from analog.intake import load_study

# ---------------------------------------------------------------------------------------
# an invented valid study to spoil

TAXA = pd.DataFrame({
    "taxon_id": ["q1", "q2", "q3", "q4", "q5"],
    "scientificName": ["Ambrevia", "Ambrevia tola", "Cruspeta", "Dolvinia", "Erkasma"],
    "taxonRank": ["genus", "species", "genus", "genus", "genus"],
    "kingdom": ["Animalia"] * 5, "phylum": ["Mollusca"] * 5, "class": ["Bivalvia"] * 5,
    "order": ["Ostreida"] * 5, "family": ["Ambrevidae"] * 5,
    "genus": ["Ambrevia", "Ambrevia", "Cruspeta", "Dolvinia", "Erkasma"],
    "extant": ["true", "true", "false", "true", "false"],
    "size_class": ["small", "large", "small", "large", "small"],
})
FOSSILS = pd.DataFrame({
    "occurrenceID": [f"fo{i}" for i in range(8)],
    "taxon_id": ["q1", "q2", "q3", "q4", "q5", "q1", "q3", "q4"],
    "oldest_ma": ["56", "57.5", "94", "183", "201.4", "56", "95", "184"],
    "youngest_ma": ["55", "56", "93.9", "182", "200", "55.8", "94", "183"],
    "decimalLatitude": ["10", "11.5", "-20", "30", "0", "10", "-21", "31"],
    "decimalLongitude": ["20", "21", "100", "-40", "5", "20", "101", "-41"],
    "locationID": ["L1", "L1", "L2", "L3", "L4", "L1", "L2", "L3"],
})
MODERN = pd.DataFrame({
    "occurrenceID": [f"mo{i}" for i in range(7)],
    "scientificName": ["Ambrevia", "ambrevia tola ", "Dolvinia", "Dolvinia", "Ambrevia", "Cruspeta", "Nulloria"],
    "decimalLatitude": ["1", "2", "3", "12", "1.5", "2", "3"],
    "decimalLongitude": ["1", "2", "3", "12", "1.5", "2", "3"],
})
REGIONS = gpd.GeoDataFrame({"region_id": ["r1", "r2"], "name": ["Inner Sound", "Outer Sound"]},
                           geometry=[Polygon([(0, 0), (10, 0), (10, 10), (0, 10)]),
                                     Polygon([(10, 10), (20, 10), (20, 20), (10, 20)])], crs="EPSG:4326")
STUDY_TOML = """[study]
name = "Fuzzed invented study"
seed = 3

[inputs]
taxa = "taxa.{ext}"
fossil_occurrences = "fossil_occurrences.{ext}"
modern_occurrences = "modern_occurrences.{ext}"
regions = "regions.gpkg"

[traits.size_class]
kind = "categorical"
"""
FILES = {"taxa": TAXA, "fossil_occurrences": FOSSILS, "modern_occurrences": MODERN}


def _write(folder: Path, tables: dict, ext: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    for key, df in tables.items():
        path = folder / f"{key}.{ext}"
        if ext == "parquet":
            df.to_parquet(path, index=False)
        else:
            df.to_csv(path, index=False, encoding="utf-8")
    REGIONS.to_file(folder / "regions.gpkg", engine="pyogrio")
    (folder / "study.toml").write_text(STUDY_TOML.format(ext=ext), encoding="utf-8")
    return folder


def _load(folder: Path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_study(folder)


# ---------------------------------------------------------------------------------------
# strategies

_text = st.text(st.characters(blacklist_categories=("Cs",)), max_size=12)
cells = st.one_of(
    _text,
    st.sampled_from(["", " ", "NA", "NaN", "null", "nan", "inf", "-inf", "1e400", "-1e400", "1e308",
                     "99999999999999999999", "12,5", " 7 ", "0x10", "true", "Ambrevia", "AMBREVIA", "q1",
                     "q9", "Toarcian", "small", "\n", '"', "é", "名"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-10**30, 10**30).map(str),
)


@st.composite
def spoiled_tables(draw):
    """The valid tables with random cells replaced, columns dropped or added, and bounds swapped."""
    tables = {k: v.copy() for k, v in FILES.items()}
    for _ in range(draw(st.integers(0, 6))):
        key = draw(st.sampled_from(sorted(tables)))
        df = tables[key]
        action = draw(st.sampled_from(["cell", "cell", "cell", "drop", "add", "swap"]))
        if action == "cell" and len(df.columns):
            col = draw(st.sampled_from(list(df.columns)))
            df.loc[draw(st.integers(0, len(df) - 1)), col] = draw(cells)
        elif action == "drop" and len(df.columns) > 1:
            tables[key] = df.drop(columns=draw(st.sampled_from(list(df.columns))))
        elif action == "add":
            name = draw(st.one_of(_text, st.sampled_from(["basisOfRecord", "oldest_ma", "scientificName"])))
            if name not in df.columns:
                df[name] = [draw(cells) for _ in range(len(df))]
        elif action == "swap" and {"oldest_ma", "youngest_ma"} <= set(df.columns):
            i = draw(st.integers(0, len(df) - 1))
            df.loc[i, ["oldest_ma", "youngest_ma"]] = df.loc[i, ["youngest_ma", "oldest_ma"]].to_numpy()
    return tables


def _typed_parquet(tables: dict) -> dict:
    """Number columns stored as numbers (unreadable cells become NaN), as a Parquet export would."""
    out = {}
    for key, df in tables.items():
        df = df.copy()
        for c in ("oldest_ma", "youngest_ma", "decimalLatitude", "decimalLongitude"):
            if c in df.columns:
                df[c] = pd.to_numeric(df[c], errors="coerce")
        out[key] = df
    return out


# ---------------------------------------------------------------------------------------
# properties

@settings(max_examples=25)
@given(spoiled_tables(), st.sampled_from(["csv", "parquet", "parquet typed"]))
def test_any_table_loads_or_raises_input_error_naming_the_place(tables, fmt):
    ext = "csv" if fmt == "csv" else "parquet"
    if fmt == "parquet typed":
        tables = _typed_parquet(tables)
    with tempfile.TemporaryDirectory() as tmp:
        folder = _write(Path(tmp) / "study", tables, ext)
        try:
            study = _load(folder)
        except InputError as exc:
            files = {f"{k}.{ext}" for k in FILES} | {"study.toml", "regions.gpkg"}
            assert exc.problems
            for p in exc.problems:
                assert p.file in files, str(p)
                assert str(p).startswith(f"{p.file}:")
                assert p.expected and p.fix
                if p.row is not None:
                    assert p.row >= 1
                    if p.file != "study.toml" and p.row > 1 and not p.found.startswith("byte"):
                        assert p.column, str(p)  # a cell fault names its column
        else:
            fossils = study.fossil_occurrences
            assert (fossils["oldest_ma"] >= fossils["youngest_ma"]).all()
            assert fossils["decimalLatitude"].between(-90, 90).all()
            assert set(study.modern_occurrences["taxon_id"]) <= set(study.taxa.loc[study.taxa["extant"], "taxon_id"])


def _counts(study) -> dict:
    return {
        "fossils": study.fossil_occurrences.groupby("taxon_id").size().to_dict(),
        "localities": study.fossil_occurrences.groupby("taxon_id")["locationID"].nunique().to_dict(),
        "modern": study.modern_occurrences.groupby("taxon_id").size().to_dict(),
        "age_sum": {t: round(v, 9) for t, v in
                    study.fossil_occurrences.groupby("taxon_id")["oldest_ma"].sum().items()},
        "dropped": sorted(zip(study.dropped["role"], study.dropped["reason"], study.dropped["count"])),
    }


@settings(max_examples=15)
@given(st.randoms(use_true_random=False), st.integers(1, 4))
def test_row_order_of_occurrences_does_not_change_derived_counts(rnd, repeat):
    fossils = pd.concat([FOSSILS] * repeat, ignore_index=True)
    fossils["occurrenceID"] = [f"fo{i}" for i in range(len(fossils))]
    modern = pd.concat([MODERN] * repeat, ignore_index=True)
    modern["occurrenceID"] = [f"mo{i}" for i in range(len(modern))]
    order_f = list(range(len(fossils)))
    order_m = list(range(len(modern)))
    rnd.shuffle(order_f)
    rnd.shuffle(order_m)
    with tempfile.TemporaryDirectory() as tmp:
        a = _load(_write(Path(tmp) / "a", {"taxa": TAXA, "fossil_occurrences": fossils,
                                           "modern_occurrences": modern}, "csv"))
        b = _load(_write(Path(tmp) / "b", {"taxa": TAXA, "fossil_occurrences": fossils.iloc[order_f],
                                           "modern_occurrences": modern.iloc[order_m]}, "csv"))
    assert _counts(a) == _counts(b)
    assert len(a.fossil_occurrences) == len(b.fossil_occurrences)
    # the same records, in the file's order
    key = ["occurrenceID"]
    pd.testing.assert_frame_equal(a.fossil_occurrences.sort_values(key).reset_index(drop=True),
                                  b.fossil_occurrences.sort_values(key).reset_index(drop=True))
    pd.testing.assert_frame_equal(a.modern_occurrences.sort_values(key).reset_index(drop=True),
                                  b.modern_occurrences.sort_values(key).reset_index(drop=True))


coordinates = st.floats(-89.9, 89.9, allow_nan=False, allow_subnormal=False)
names = st.sampled_from(["Ambrevia", " Ambrevia", "AMBREVIA tola", "Dolvinia ", "dolvinia", "Nulloria", ""])


@settings(max_examples=20)
@given(st.lists(st.tuples(names, coordinates, coordinates, st.booleans()), min_size=1, max_size=30),
       st.booleans())
def test_csv_and_parquet_of_the_same_table_load_to_equal_frames(records, numbers_as_numbers):
    """The same modern table as CSV text, Parquet text, or Parquet numbers gives the same study."""
    modern = pd.DataFrame({
        "occurrenceID": [f"mo{i}" for i in range(len(records))],
        "scientificName": [r[0] for r in records],
        # repr keeps every digit, so the text and the number are the same value
        "decimalLatitude": ["" if r[3] else repr(r[1]) for r in records],
        "decimalLongitude": [repr(r[2]) for r in records],
    })
    loaded, errors = [], []
    with tempfile.TemporaryDirectory() as tmp:
        for i, ext in enumerate(("csv", "parquet")):
            tables = {"taxa": TAXA, "fossil_occurrences": FOSSILS, "modern_occurrences": modern}
            if ext == "parquet" and numbers_as_numbers:
                tables = _typed_parquet(tables)
            folder = _write(Path(tmp) / f"s{i}", tables, ext)
            try:
                loaded.append(_load(folder))
            except InputError as exc:
                errors.append([(p.row, p.column, p.found) for p in exc.problems])
    if errors:
        # both fail (e.g. no usable record), with the same faults in the same places
        assert len(errors) == 2 and errors[0] == errors[1]
        return
    a, b = loaded
    for name in ("taxa", "fossil_occurrences", "modern_occurrences", "dropped"):
        pd.testing.assert_frame_equal(getattr(a, name), getattr(b, name), check_exact=True)
    assert [w.replace(".csv", ".parquet") for w in a.warnings] == b.warnings
    assert not any(math.isnan(v) for v in b.modern_occurrences["decimalLatitude"])
