"""One test per validation rule of the input tables; each asserts the message line."""
from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest

from analog.errors import AnalogWarning, InputError
from analog.intake import check_study, load_study


def problems_of(folder) -> str:
    with pytest.raises(InputError) as info:
        load_study(folder)
    return str(info.value)


# --- columns and types ---------------------------------------------------------------------

def test_missing_column(study):
    study.fossils = study.fossils.drop(columns="decimalLatitude")
    with pytest.raises(InputError, match=r"fossil_occurrences\.csv:1:decimalLatitude: found no column "
                                         r"'decimalLatitude'.*fix: add a column named 'decimalLatitude'"):
        load_study(study.write())


def test_missing_column_with_other_spelling_suggests_rename(study):
    study.fossils = study.fossils.rename(columns={"decimalLatitude": "DecimalLatitude"})
    with pytest.raises(InputError, match=r"fix: rename column 'DecimalLatitude' to 'decimalLatitude'"):
        load_study(study.write())


def test_neither_taxon_column_present(study):
    study.modern = study.modern.drop(columns="scientificName")
    with pytest.raises(InputError, match=r"modern_occurrences\.csv:1:taxon_id / scientificName: found no columns "
                                         r"for the taxon reference; expected columns taxon_id or scientificName"):
        load_study(study.write())


def test_wrong_type(study):
    study.fossils.loc[2, "decimalLatitude"] = "ten"
    # record index 2 is spreadsheet row 4 (header is row 1)
    with pytest.raises(InputError, match=r"fossil_occurrences\.csv:4:decimalLatitude: found 'ten' \(not a number\); "
                                         r"expected a number \(dot as decimal mark\)"):
        load_study(study.write())


def test_decimal_comma_in_comma_file_gets_hint(study):
    study.fossils.loc[0, "oldest_ma"] = "185,5"
    study.fossils["oldest_ma"] = study.fossils["oldest_ma"].astype(str)
    with pytest.raises(InputError, match=r"use a dot as the decimal mark"):
        load_study(study.write())


@pytest.mark.parametrize("column, value, bounds", [
    ("decimalLatitude", "95", "between -90 and 90"),
    ("decimalLongitude", "-200", "between -180 and 180"),
])
def test_coordinate_out_of_range(study, column, value, bounds):
    study.fossils.loc[0, column] = value
    with pytest.raises(InputError, match=rf"fossil_occurrences\.csv:2:{column}: found '{value}'; "
                                         rf"expected a number {bounds}; fix: .*not swapped"):
        load_study(study.write())


def test_blank_fossil_coordinates_are_errors_naming_rows(study):
    study.fossils.loc[[1, 4], "decimalLongitude"] = ""
    text = problems_of(study.write())
    assert re.search(r"fossil_occurrences\.csv:3:decimalLongitude: found a blank cell", text)
    assert re.search(r"fossil_occurrences\.csv:6:decimalLongitude: found a blank cell", text)


def test_blank_modern_coordinates_are_left_out_and_recorded(study):
    study.modern.loc[[0, 3], "decimalLatitude"] = ""
    with pytest.warns(AnalogWarning, match=r"modern_occurrences\.csv: 2 row\(s\) with a blank decimalLatitude "
                                           r"left out \(rows 2, 5\)"):
        s = load_study(study.write())
    assert len(s.modern_occurrences) == len(study.modern) - 2
    row = s.dropped[s.dropped["reason"] == "blank decimalLatitude"].iloc[0]
    assert row["count"] == 2 and row["role"] == "modern_occurrences"


def test_many_bad_rows_are_capped_with_a_count(study):
    fossils = pd.concat([study.fossils] * 3, ignore_index=True)
    fossils["occurrenceID"] = [f"f{i}" for i in range(len(fossils))]
    fossils["decimalLatitude"] = "99"
    study.fossils = fossils
    with pytest.raises(InputError) as info:
        load_study(study.write())
    lines = [p for p in info.value.problems if p.column == "decimalLatitude"]
    assert len(lines) == 21  # 20 rows listed, then one summary line
    assert lines[-1].row is None
    assert re.match(r"\.\.\. and 16 more rows with the same fault \(rows 22, 23, 24, 25, 26 and 11 more\)",
                    lines[-1].found)


def test_taxon_rank_outside_enum(study):
    study.taxa.loc[1, "taxonRank"] = "speceis"
    with pytest.raises(InputError, match=r"taxa\.csv:3:taxonRank: found 'speceis' \(did you mean 'species'\?\); "
                                         r"expected one of \['kingdom'"):
        load_study(study.write())


def test_taxon_rank_case_is_ignored_and_stored_lower(study):
    study.taxa.loc[0, "taxonRank"] = "Genus"
    s = load_study(study.write())
    assert s.taxa.loc[0, "taxonRank"] == "genus"


def test_extant_not_a_boolean(study):
    study.taxa.loc[2, "extant"] = "maybe"
    with pytest.raises(InputError, match=r"taxa\.csv:4:extant: found 'maybe' \(not true/false\); expected one of "
                                         r"\['true', 't', 'yes', 'y', '1'\]"):
        load_study(study.write())


# --- ages and stages -----------------------------------------------------------------------

def test_oldest_younger_than_youngest(study):
    study.fossils.loc[3, ["oldest_ma", "youngest_ma"]] = ["10", "20"]
    with pytest.raises(InputError, match=r"fossil_occurrences\.csv:5:oldest_ma: found oldest_ma 10 < youngest_ma 20; "
                                         r"expected oldest_ma >= youngest_ma"):
        load_study(study.write())


def test_negative_age(study):
    study.fossils.loc[0, "youngest_ma"] = "-1"
    with pytest.raises(InputError, match=r"fossil_occurrences\.csv:2:youngest_ma: found '-1'; expected a number at least 0"):
        load_study(study.write())


def test_unknown_stage_with_suggestion(study):
    study.fossils.loc[4, "earliestAgeOrLowestStage"] = "Toarcain"
    with pytest.raises(InputError, match=r"fossil_occurrences\.csv:6:earliestAgeOrLowestStage: found unknown stage "
                                         r"'Toarcain' \(closest: Toarcian"):
        load_study(study.write())


def test_unknown_stage_is_only_a_warning_when_numeric_ages_are_given(study):
    study.fossils.loc[0, "earliestAgeOrLowestStage"] = "Nowhereian"
    with pytest.warns(AnalogWarning, match=r"1 unknown name\(s\) in earliestAgeOrLowestStage ignored"):
        load_study(study.write())


def test_stage_names_fill_blank_ages(study):
    s = load_study(study.write())
    f = s.fossil_occurrences.set_index("occurrenceID")
    # ICS International Chronostratigraphic Chart v2023/09: Toarcian 184.2-174.7 Ma,
    # Ypresian base 56.0 Ma, Lutetian top 41.2 Ma (from memory; same chart version as
    # analog/reference/ics_stages.csv).
    assert f.loc["f5", ["oldest_ma", "youngest_ma"]].tolist() == pytest.approx([184.2, 174.7])
    assert f.loc["f11", ["oldest_ma", "youngest_ma"]].tolist() == pytest.approx([56.0, 41.2])


def test_row_without_any_age(study):
    study.fossils.loc[0, ["oldest_ma", "youngest_ma"]] = ["", ""]
    with pytest.raises(InputError, match=r"fossil_occurrences\.csv:2:oldest_ma / youngest_ma: found oldest_ma blank, "
                                         r"youngest_ma blank, no stage name"):
        load_study(study.write())


# --- taxon references ----------------------------------------------------------------------

def test_unknown_taxon_id_in_fossils(study):
    study.fossils.loc[0, "taxon_id"] = "t99"
    with pytest.raises(InputError, match=r"fossil_occurrences\.csv:2:taxon_id: found 't99'.*; expected a taxon_id "
                                         r"of the taxa table"):
        load_study(study.write())


def test_unknown_scientific_name_in_fossils_is_an_error(study):
    fossils = study.fossils.drop(columns="taxon_id")
    fossils.insert(1, "scientificName", ["Velloria"] * len(fossils))
    fossils.loc[2, "scientificName"] = "Velloria minr"
    study.fossils = fossils
    with pytest.raises(InputError, match=r"fossil_occurrences\.csv:4:scientificName: found 'Velloria minr' "
                                         r"\(did you mean 'Velloria minor'\?\)"):
        load_study(study.write())


def test_unmatched_modern_names_are_counted_listed_and_warned(study):
    study.modern.loc[[1, 2], "scientificName"] = ["Nonesuch bivalvia", "Nonesuch bivalvia"]
    with pytest.warns(AnalogWarning, match=r"2 record\(s\) of 1 name\(s\) not found in the taxa table left out "
                                           r"\(most frequent: Nonesuch bivalvia \(2\)\)"):
        s = load_study(study.write())
    row = s.dropped[s.dropped["role"] == "modern_occurrences"].iloc[0]
    assert row["count"] == 2 and "Nonesuch bivalvia (2)" in row["examples"]
    assert len(s.modern_occurrences) == len(study.modern) - 2
    assert any("Nonesuch bivalvia" in w for w in s.warnings)


def test_unknown_taxon_id_in_modern_is_an_error(study):
    study.modern.insert(1, "taxon_id", ["t1"] * len(study.modern))
    study.modern.loc[0, "taxon_id"] = "zz"
    with pytest.raises(InputError, match=r"modern_occurrences\.csv:2:taxon_id: found 'zz'"):
        load_study(study.write())


def test_modern_records_of_extinct_taxa_are_left_out(study):
    study.modern.loc[0, "scientificName"] = "Quastella"  # t3, extant = false
    with pytest.warns(AnalogWarning, match=r"1 record\(s\) of 1 taxa not marked extant .* left out \(t3 \(1\)\)"):
        s = load_study(study.write())
    assert "t3" not in set(s.modern_occurrences["taxon_id"])
    assert (s.dropped["reason"] == "taxon not marked extant").any()


def test_names_with_authorship_match(study):
    study.modern.loc[0, "scientificName"] = "Velloria minor (Ardent, 1901)"
    with pytest.warns(AnalogWarning, match="after leaving out the authorship"):
        s = load_study(study.write())
    assert s.modern_occurrences.loc[0, "taxon_id"] == "t2"


def test_duplicate_taxon_id(study):
    study.taxa.loc[1, "taxon_id"] = "t1"
    with pytest.raises(InputError, match=r"taxa\.csv:3:taxon_id: found 't1' again \(first in row 2\); "
                                         r"expected each taxon_id once"):
        load_study(study.write())


def test_duplicate_occurrence_id_is_a_warning(study):
    study.fossils.loc[3, "occurrenceID"] = "f1"
    with pytest.warns(AnalogWarning, match=r"fossil_occurrences\.csv: 1 row\(s\) repeat an occurrenceID of an "
                                           r"earlier row \(kept; e\.g\. 'f1' also in row 2\) \(row 5\)"):
        s = load_study(study.write())
    assert len(s.fossil_occurrences) == len(study.fossils)


def test_blank_modern_occurrence_ids_are_named(study):
    study.modern.loc[2, "occurrenceID"] = ""
    with pytest.warns(AnalogWarning, match="1 row\\(s\\) without occurrenceID"):
        s = load_study(study.write())
    assert s.modern_occurrences.loc[2, "occurrenceID"] == "modern_occurrences.csv:row4"


# --- traits --------------------------------------------------------------------------------

def test_declared_trait_missing_from_taxa(study):
    study.config["traits"]["shell_mass"] = {"kind": "numeric"}
    with pytest.raises(InputError, match=r"taxa\.csv:1:shell_mass: found no column 'shell_mass' for the trait "
                                         r"declared as \[traits\.shell_mass\]"):
        load_study(study.write())


def test_undeclared_trait_like_column_is_ignored_with_warning(study):
    study.taxa["reef_dweller"] = ["yes", "no"] * 4
    study.taxa["subfamily"] = ""  # a Darwin Core term: ignored silently
    with pytest.warns(AnalogWarning, match=r"taxa\.csv: column 'reef_dweller' not declared; ignored"):
        s = load_study(study.write())
    assert "reef_dweller" not in s.taxa.columns
    assert not any("subfamily" in w for w in s.warnings)


def test_trait_value_outside_declared_classes(study):
    study.taxa.loc[4, "depth_zone"] = "abyss"
    with pytest.raises(InputError, match=r"taxa\.csv:6:depth_zone: found 'abyss'; expected one of the classes "
                                         r"\['shelf', 'slope', 'basin'\] declared in \[traits\.depth_zone\]"):
        load_study(study.write())


def test_trait_classes_match_ignoring_case(study):
    study.taxa.loc[0, "body_size"] = " Large "
    s = load_study(study.write())
    assert s.taxa.loc[0, "body_size"] == "large"
    assert s.taxa["body_size"].cat.ordered
    assert list(s.taxa["body_size"].cat.categories) == ["small", "medium", "large"]


def test_numeric_trait_wrong_type(study):
    study.taxa.loc[1, "length_mm"] = "long"
    with pytest.raises(InputError, match=r"taxa\.csv:3:length_mm: found 'long' \(not a number\); expected a number "
                                         r"\(numeric trait \[traits\.length_mm\]\)"):
        load_study(study.write())


def test_binary_trait_wrong_value(study):
    study.taxa.loc[0, "planktonic"] = "sometimes"
    with pytest.raises(InputError, match=r"taxa\.csv:2:planktonic: found 'sometimes'; expected one of "):
        load_study(study.write())


def test_one_class_trait_is_dropped_with_warning(study):
    study.taxa["depth_zone"] = "shelf"
    with pytest.warns(AnalogWarning, match=r"trait 'depth_zone' has one class only \('shelf'\); it is left out"):
        s = load_study(study.write())
    assert "depth_zone" not in s.traits
    assert "body_size" in s.traits
    assert (s.dropped["reason"] == "fewer than two classes").any()


def test_categorical_reference_defaults_to_most_common_class(study):
    s = load_study(study.write())
    # shelf 4, slope 2, basin 2 in the fixture
    assert s.traits["depth_zone"].reference == "shelf"


def test_categorical_reference_absent_from_data(study):
    study.taxa["depth_zone"] = ["shelf", "slope"] * 4
    study.config["traits"]["depth_zone"]["reference"] = "basin"
    with pytest.raises(InputError, match=r"study\.toml:-:\[traits\.depth_zone\] reference: found reference class "
                                         r"'basin' that no taxon has"):
        load_study(study.write())


# --- files ---------------------------------------------------------------------------------

def test_empty_table(study):
    study.fossils = study.fossils.iloc[:0]
    with pytest.raises(InputError, match=r"fossil_occurrences\.csv:2:-: found a header but no data rows"):
        load_study(study.write())


def test_empty_file(study):
    folder = study.write()
    (folder / "taxa.csv").write_bytes(b"")
    with pytest.raises(InputError, match=r"taxa\.csv:-:-: found an empty file"):
        load_study(folder)


def test_missing_file(study):
    study.config["inputs"]["taxa"] = "traits.csv"
    study.write()
    (study.folder / "traits.csv").unlink()
    with pytest.raises(InputError, match=r"traits\.csv:-:-: found no such file; .*fix: check the path of 'taxa'"):
        load_study(study.folder)


def test_bytes_that_are_not_utf8(study):
    study.taxa.loc[2, "scientificName"] = "Quastellé"
    study.encoding = "latin-1"
    with pytest.raises(InputError, match=r"taxa\.csv:4:-: found byte 0xe9 that is not UTF-8 text .*"
                                         r"fix: re-save the file as UTF-8"):
        load_study(study.write())


def test_spreadsheet_workbook_is_refused_with_fix(study):
    study.config["inputs"]["taxa"] = "taxa.xlsx"
    folder = study.write()
    (folder / "taxa.xlsx").write_bytes(b"PK\x03\x04")
    with pytest.raises(InputError, match=r"taxa\.xlsx:-:-: found a spreadsheet workbook.*'CSV UTF-8'"):
        load_study(folder)


def test_several_faults_reported_together(study):
    study.fossils.loc[0, "decimalLatitude"] = "123"           # bad latitude
    study.fossils.loc[4, "earliestAgeOrLowestStage"] = "Toarcain"  # unknown stage
    study.fossils.loc[5, "taxon_id"] = "t404"                 # dangling taxon reference
    study.modern = study.modern.drop(columns="decimalLongitude")  # missing column
    with pytest.raises(InputError) as info:
        load_study(study.write())
    text = str(info.value)
    assert text.startswith("4 problems in the input:")
    expected = [
        r"fossil_occurrences\.csv:2:decimalLatitude: found '123'",
        r"fossil_occurrences\.csv:6:earliestAgeOrLowestStage: found unknown stage 'Toarcain'",
        r"fossil_occurrences\.csv:7:taxon_id: found 't404'",
        r"modern_occurrences\.csv:1:decimalLongitude: found no column 'decimalLongitude'",
    ]
    lines = text.splitlines()[1:]
    assert len(lines) == 4
    for pattern in expected:
        assert sum(bool(re.match(pattern, line)) for line in lines) == 1, pattern


def test_check_study_returns_problems_without_raising(study):
    study.taxa.loc[1, "taxon_id"] = "t1"
    problems, warns = check_study(study.write())
    # the duplicate in taxa, and the fossil row that named the taxon now gone (t2)
    assert [(p.file, p.row, p.column) for p in problems] == [("taxa.csv", 3, "taxon_id"),
                                                             ("fossil_occurrences.csv", 4, "taxon_id")]


def test_vectorized_checks_on_many_rows(study):
    # 50,000 modern rows: the checks run on whole columns (no timing asserted)
    rng = np.random.default_rng(11)
    n = 50_000
    names = np.array(["Velloria", "Brumidia", "Tarsolum", "Unlisted one"])
    study.modern = pd.DataFrame({
        "occurrenceID": [f"m{i}" for i in range(n)],
        "scientificName": names[rng.integers(0, 4, n)],
        "decimalLatitude": rng.uniform(-80, 80, n).round(4).astype(str),
        "decimalLongitude": rng.uniform(-170, 170, n).round(4).astype(str),
    })
    with pytest.warns(AnalogWarning, match="Unlisted one"):
        s = load_study(study.write())
    n_unlisted = int((study.modern["scientificName"] == "Unlisted one").sum())
    assert len(s.modern_occurrences) == n - n_unlisted
    assert int(s.dropped.loc[s.dropped["role"] == "modern_occurrences", "count"].sum()) == n_unlisted


def test_unmatched_modern_name_close_to_a_taxon_gets_a_spelling_hint(study):
    study.modern.loc[1, "scientificName"] = "Velloria minr"
    with pytest.warns(AnalogWarning, match=r"spelled like taxa of the table: 'Velloria minr' ~ 'Velloria minor'"):
        load_study(study.write())
