"""Loading valid studies in the file layouts users bring: contract types, encodings, separators, formats."""
from __future__ import annotations

import hashlib

import numpy as np
import pandas as pd
import pytest

from analog.errors import AnalogWarning, InputError
from analog.intake import inventory, load_study
from analog.reference import load_intervals
from analog.study import Study


def test_valid_study_follows_the_table_contract(study):
    s = load_study(study.write())
    assert isinstance(s, Study)
    t = s.taxa
    assert list(t.columns) == ["taxon_id", "scientificName", "taxonRank", "kingdom", "phylum", "class", "order",
                               "family", "genus", "extant", "depth_zone", "body_size", "length_mm", "planktonic"]
    assert t["taxon_id"].dtype == "str" and t["extant"].dtype == bool
    assert t["extant"].tolist() == [True, True, False, True, False, True, False, True]
    assert isinstance(t["depth_zone"].dtype, pd.CategoricalDtype) and not t["depth_zone"].cat.ordered
    assert list(t["depth_zone"].cat.categories) == ["shelf", "slope", "basin"]
    assert t["body_size"].cat.ordered
    assert t["length_mm"].dtype == "float64" and np.isnan(t.loc[4, "length_mm"])
    assert t["planktonic"].dtype == "float64" and t["planktonic"].tolist() == [1, 0, 0, 1, 0, 0, 1, 0]
    assert pd.isna(t.loc[6, "family"])  # blank rank stays missing
    f = s.fossil_occurrences
    assert list(f.columns) == ["occurrenceID", "taxon_id", "oldest_ma", "youngest_ma", "decimalLatitude",
                               "decimalLongitude", "locationID"]
    assert (f["oldest_ma"] >= f["youngest_ma"]).all() and (f["youngest_ma"] >= 0).all()
    m = s.modern_occurrences
    assert list(m.columns) == ["occurrenceID", "taxon_id", "decimalLatitude", "decimalLongitude"]
    # names matched after trimming and case-folding ("velloria minor " -> t2)
    assert m["taxon_id"].tolist() == ["t1", "t2", "t4", "t6", "t8", "t1", "t4", "t8"]
    assert list(s.regions.columns) == ["region_id", "name", "geometry"]
    assert s.regions.crs.to_epsg() == 4326
    assert s.config.seed == 7 and s.config.warming_c == 3.0 and s.config.name == "Tiny invented study"
    assert s.dropped.empty and list(s.dropped.columns) == ["role", "reason", "count", "examples"]
    assert s.warnings == []


def test_files_record_sha256_and_rows(study):
    folder = study.write()
    s = load_study(folder)
    by_role = {f.role: f for f in s.files}
    assert set(by_role) == {"taxa", "fossil_occurrences", "modern_occurrences", "regions"}
    # reference: hashlib.sha256 of the file bytes
    assert by_role["taxa"].sha256 == hashlib.sha256((folder / "taxa.csv").read_bytes()).hexdigest()
    assert by_role["fossil_occurrences"].rows == len(study.fossils)
    assert by_role["regions"].rows == 2


def test_progress_callback_counts_up(study):
    calls = []
    load_study(study.write(), progress=lambda label, done, total: calls.append((label, done, total)))
    assert [d for _, d, _ in calls] == list(range(1, len(calls) + 1))
    assert calls[-1][1] == calls[-1][2]


def test_byte_order_mark(study):
    study.encoding = "utf-8-sig"
    folder = study.write()
    assert (folder / "taxa.csv").read_bytes().startswith(b"\xef\xbb\xbf")
    s = load_study(folder)
    assert s.taxa.columns[0] == "taxon_id" and len(s.taxa) == 8


def test_semicolon_separator_with_decimal_commas(study):
    study.sep = ";"
    study.fossils.loc[0, ["oldest_ma", "youngest_ma"]] = ["185,5", "183,25"]
    study.taxa.loc[0, "length_mm"] = "12,75"
    s = load_study(study.write())
    assert s.fossil_occurrences.loc[0, ["oldest_ma", "youngest_ma"]].tolist() == [185.5, 183.25]
    assert s.taxa.loc[0, "length_mm"] == 12.75


def test_tab_separated_darwin_core_export_with_extra_columns(study):
    # An export shaped like a Darwin Core occurrence download: many extra terms, names with authorship,
    # blank coordinates on some rows, and a name that is not in the taxa table.
    n = len(study.modern)
    dwc = pd.DataFrame({
        "gbifID": [str(1000 + i) for i in range(n)],
        "datasetKey": ["d0c5"] * n,
        "occurrenceID": study.modern["occurrenceID"],
        "kingdom": ["Animalia"] * n,
        "scientificName": study.modern["scientificName"],
        "verbatimScientificName": study.modern["scientificName"],
        "countryCode": ["XX"] * n,
        "decimalLatitude": study.modern["decimalLatitude"],
        "decimalLongitude": study.modern["decimalLongitude"],
        "coordinateUncertaintyInMeters": ["250"] * n,
        "eventDate": ["2024-05-01T10:00:00"] * n,
        "basisOfRecord": ["HUMAN_OBSERVATION"] * n,
        "issue": ["COORDINATE_ROUNDED;GEODETIC_DATUM_ASSUMED_WGS84"] * n,
    })
    dwc.loc[2, "scientificName"] = "Brumidia Ardent, 1899"
    dwc.loc[5, "scientificName"] = "Nonesuch alba"
    study.modern = dwc
    study.config["inputs"]["modern_occurrences"] = "occurrence.txt"
    study.sep = "\t"
    dwc.loc[6, "verbatimScientificName"] = '"Tarsolum sp.'  # a stray quote: Darwin Core text is not quoted
    folder = study.write()
    lines = ["\t".join(dwc.columns)] + ["\t".join(row) for row in dwc.astype(str).to_numpy()]
    (folder / "occurrence.txt").write_text("\n".join(lines) + "\n", encoding="utf-8")
    with pytest.warns(AnalogWarning, match=r"occurrence\.txt: 1 row\(s\) matched to taxa after leaving out"), \
            pytest.warns(AnalogWarning, match=r"occurrence\.txt: 1 record\(s\) of 1 name\(s\) not found"):
        s = load_study(folder)
    m = s.modern_occurrences
    assert len(m) == n - 1
    assert list(m.columns) == ["occurrenceID", "taxon_id", "decimalLatitude", "decimalLongitude"]
    assert m.set_index("occurrenceID").loc["m3", "taxon_id"] == "t4"  # authorship left out
    assert "Nonesuch alba (1)" in s.dropped["examples"].iloc[0]


def test_parquet_tables(study):
    study.config["inputs"].update(taxa="taxa.parquet", fossil_occurrences="fossils.parquet",
                                  modern_occurrences="modern.parquet")
    study.fossils["decimalLatitude"] = study.fossils["decimalLatitude"].astype(float)
    study.fossils["oldest_ma"] = pd.to_numeric(study.fossils["oldest_ma"])
    study.fossils["youngest_ma"] = pd.to_numeric(study.fossils["youngest_ma"])
    study.taxa["extant"] = study.taxa["extant"].str.lower().isin(["true", "yes", "1"])
    study.taxa["taxon_id"] = np.arange(1, 9)  # numeric ids become text
    study.fossils["taxon_id"] = study.fossils["taxon_id"].str[1:].astype(int)
    s = load_study(study.write())
    assert s.taxa["taxon_id"].tolist() == [str(i) for i in range(1, 9)]
    assert s.fossil_occurrences["taxon_id"].iloc[0] == "1"
    assert s.taxa["extant"].dtype == bool
    assert s.fossil_occurrences.loc[4, "oldest_ma"] == pytest.approx(184.2)  # stage fills a NaN age


def test_parquet_wrong_type_is_reported(study):
    study.config["inputs"]["fossil_occurrences"] = "fossils.parquet"
    study.fossils.loc[1, "decimalLatitude"] = "north"
    with pytest.raises(InputError, match=r"fossils\.parquet:3:decimalLatitude: found 'north' \(not a number\)"):
        load_study(study.write())


def test_builtin_intervals_by_default(study):
    s = load_study(study.write())
    pd.testing.assert_frame_equal(s.intervals.reset_index(drop=True),
                                  load_intervals()[s.intervals.columns].reset_index(drop=True), check_dtype=False)


def _interval_table():
    return pd.DataFrame({
        "interval_id": ["xe1", "petm"], "name": ["Invented pulse", "PETM (user values)"],
        "oldest_ma": ["120.5", "56.1"], "youngest_ma": ["120.0", "55.8"], "warming_c": ["3", "5.5"],
        "warming_low_c": ["2", "4"], "warming_high_c": ["4", "8"], "province": ["Nowhere LIP", ""],
        "source": ["invented for a test", "test"], "note": ["", ""],
    })


def test_intervals_extend_replaces_same_id(study):
    study.config["inputs"]["intervals"] = "intervals.csv"
    folder = study.write()
    _interval_table().to_csv(folder / "intervals.csv", index=False)
    with pytest.warns(AnalogWarning, match=r"rows for petm replace the built-in"):
        s = load_study(folder)
    builtin = load_intervals()
    assert len(s.intervals) == len(builtin) + 1
    assert s.intervals.set_index("interval_id").loc["petm", "warming_c"] == 5.5
    assert (np.diff(s.intervals["oldest_ma"].to_numpy()) <= 0).all()
    assert any(f.role == "intervals" for f in s.files)


def test_intervals_replace(study):
    study.config["inputs"].update(intervals="intervals.csv", intervals_mode="replace")
    folder = study.write()
    _interval_table().to_csv(folder / "intervals.csv", index=False)
    s = load_study(folder)
    assert s.intervals["interval_id"].tolist() == ["xe1", "petm"]
    assert s.intervals["warming_low_c"].dtype == "float64"


def test_interval_table_faults(study):
    study.config["inputs"]["intervals"] = "intervals.csv"
    folder = study.write()
    bad = _interval_table()
    bad.loc[0, ["oldest_ma", "youngest_ma"]] = ["100", "110"]
    bad.loc[1, "warming_low_c"] = "9"
    bad.to_csv(folder / "intervals.csv", index=False)
    with pytest.raises(InputError) as info:
        load_study(folder)
    text = str(info.value)
    assert "intervals.csv:2:oldest_ma: found oldest_ma 100 < youngest_ma 110" in text
    assert "intervals.csv:3:warming_c: found warming_low_c 9, warming_c 5.5, warming_high_c 8" in text


def test_context_layer_from_the_shipped_maps_folder_must_exist(study):
    study.config["inputs"]["context"] = "maps:no_such_layer.gpkg"
    with pytest.raises(InputError, match=r"maps:no_such_layer\.gpkg:-:-: found no file 'no_such_layer\.gpkg' "
                                         r"in the shipped maps folder"):
        load_study(study.write())


def test_context_layer_in_study_folder(study):
    study.config["inputs"]["context"] = "coast.geojson"
    folder = study.write()
    study.regions.to_file(folder / "coast.geojson", engine="pyogrio")
    s = load_study(folder)
    assert len(s.context) == 2 and s.context.crs.to_epsg() == 4326


def test_inventory_lists_files_and_what_was_left_out(study):
    study.modern.loc[0, "scientificName"] = "Nonesuch alba"
    with pytest.warns(AnalogWarning, match="Nonesuch alba"):
        s = load_study(study.write())
    text = inventory(s)
    assert text.startswith("Study: Tiny invented study")
    assert "taxa: 8 (5 extant, 3 extinct)" in text
    assert "modern_occurrences: 1 (scientificName not in taxa; e.g. Nonesuch alba (1))" in text
    assert "Warnings (1):" in text
    assert "fossil_occurrences  fossil_occurrences.csv" in text


def test_ragged_line_is_reported(study):
    folder = study.write()
    path = folder / "fossil_occurrences.csv"
    path.write_text(path.read_text() + "f99,t1,10,9,,,1,1,L1,extra cell\n")
    with pytest.raises(InputError, match=r"fossil_occurrences\.csv:14:-: found 10 comma-separated cells; "
                                         r"expected 9 comma-separated cells as in the header line"):
        load_study(folder)


def test_names_shared_by_two_taxa_warn(study):
    study.taxa.loc[2, "scientificName"] = "velloria"  # same as t1 after case-folding
    study.modern = study.modern[study.modern["scientificName"] != "Velloria"]
    with pytest.warns(AnalogWarning, match=r"taxa\.csv: 2 taxa share a scientificName with another taxon "
                                           r"\('Velloria', 'velloria'\)"):
        load_study(study.write())
