"""The bad-input corpus: one small study per fault, run through the real command line.

Each case spoils the tiny study of ``corpus_study.py`` in exactly one way. An error
case must exit with code 2, print one ``file:row:column: found ...; expected ...; fix: ...``
line per problem (checked one by one with a regular expression) and write nothing.
A warning case must exit 0 and print the warning naming the fallback taken. No case
may print a traceback. The table ``CASES`` reads as the list of faults covered.
"""
from __future__ import annotations

import json
import math
import os
import re
import subprocess
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from shapely.geometry import Point, Polygon

from analog.cli import main
from corpus_study import TinyStudy, tree_hashes

PROBLEM_LINE = re.compile(r"^(?P<file>.+?):(?P<row>\d+|-):(?P<column>.+?): found (?P<found>.+); "
                          r"expected (?P<expected>.+); fix: (?P<fix>.+)$")


@dataclass
class Case:
    """One fault and what the command line must say about it."""

    id: str
    spoil: Callable  # spoil(study: TinyStudy, tmp: Path) -> dict of overrides ("argv", "out") or None
    outcome: str  # 'error' (exit 2, nothing written) or 'warning'/'ok' (exit 0)
    expect: tuple[str, ...] = ()  # error: one regex per problem line; warning: regexes in the output
    pipeline: bool = False  # the fault matters to the stages: always run the whole job
    slow: bool = False
    xfail: str = ""  # a known fault outside intake, reported to the owner of that stage


# --- small editing helpers --------------------------------------------------------------------

def cell(df: pd.DataFrame, row: int, column: str, value) -> None:
    """Set a cell by its spreadsheet row (header = row 1)."""
    df.loc[row - 2, column] = value


def edit_text(path: Path, fn, *, encoding="utf-8") -> None:
    path.write_text(fn(path.read_text(encoding=encoding)), encoding=encoding)


def edit_line(path: Path, row: int, fn) -> None:
    lines = path.read_text(encoding="utf-8").split("\n")
    lines[row - 1] = fn(lines[row - 1])
    path.write_text("\n".join(lines), encoding="utf-8")


def written(s: TinyStudy, then=None):
    """Write the study, then apply ``then(study)`` to the files."""
    s.write()
    if then is not None:
        then(s)


# --- faults -----------------------------------------------------------------------------------

def unclosed_quote(s, tmp):
    s.write()
    edit_line(s.path("fossil_occurrences"), 5, lambda line: '"' + line)


def ragged_row(s, tmp):
    s.write()
    edit_line(s.path("taxa"), 7, lambda line: line + ",stray")


def pipe_delimiter(s, tmp):
    s.write()
    s.modern.to_csv(s.path("modern_occurrences"), sep="|", index=False)


def latin1(s, tmp):
    cell(s.taxa, 4, "genus", "Fenoría")  # one accented letter, saved below in Latin-1
    s.write()
    path = s.path("taxa")
    path.write_bytes(path.read_text(encoding="utf-8").encode("latin-1"))


def bom(s, tmp):
    s.encoding = "utf-8-sig"
    s.write()


def mixed_types(s, tmp):
    cell(s.fossils, 10, "oldest_ma", "ninety")
    s.write()


def blank_latitude(s, tmp):
    cell(s.fossils, 8, "decimalLatitude", "")
    s.write()


def nan_longitude(s, tmp):
    cell(s.fossils, 9, "decimalLongitude", "NaN")
    s.write()


def no_longitude_column(s, tmp):
    s.fossils = s.fossils.drop(columns="decimalLongitude")
    s.write()


def latitude_95(s, tmp):
    cell(s.fossils, 6, "decimalLatitude", "95")
    s.write()


def longitude_200(s, tmp):
    cell(s.modern, 3, "decimalLongitude", "200")
    s.write()


def swapped_ages(s, tmp):
    cell(s.fossils, 12, "oldest_ma", "50")
    cell(s.fossils, 12, "youngest_ma", "60")
    s.write()


def unknown_stage(s, tmp):
    s.fossils["earliestAgeOrLowestStage"] = ""
    s.fossils["latestAgeOrHighestStage"] = ""
    cell(s.fossils, 9, "oldest_ma", "")
    cell(s.fossils, 9, "youngest_ma", "")
    cell(s.fossils, 9, "earliestAgeOrLowestStage", "Toarcain")
    cell(s.fossils, 9, "latestAgeOrHighestStage", "Toarcian")
    s.write()


def duplicate_taxon_id(s, tmp):
    extra = s.taxa.iloc[[3]].copy()
    extra["scientificName"] = "Galtrina nova"
    s.taxa = pd.concat([s.taxa, extra], ignore_index=True)  # T04 again, on row 22
    s.write()


def duplicate_occurrence_id(s, tmp):
    cell(s.fossils, 30, "occurrenceID", "F0001")
    s.write()


def unknown_taxon_id(s, tmp):
    cell(s.fossils, 20, "taxon_id", "T99")
    s.write()


def unknown_modern_name(s, tmp):
    cell(s.modern, 4, "scientificName", "Corvala")
    s.write()


def undeclared_trait_column(s, tmp):
    s.taxa["shell_texture"] = ["smooth", "ribbed"] * 10
    s.write()


def declared_trait_without_column(s, tmp):
    s.config["traits"]["shell_texture"] = {"kind": "categorical"}
    s.write()


def trait_value_outside(s, tmp):
    cell(s.taxa, 5, "depth_zone", "shelff")
    s.write()


def one_class_trait(s, tmp):
    s.taxa["planktonic"] = "no"
    s.write()


def ordinal_without_levels(s, tmp):
    s.config["traits"]["body_size"] = {"kind": "ordinal"}
    s.write()


def unknown_trait_kind(s, tmp):
    s.config["traits"]["depth_zone"]["kind"] = "categorial"
    s.write()


def no_extant_column(s, tmp):
    s.taxa = s.taxa.drop(columns="extant")
    s.write()


def no_locality_column(s, tmp):
    s.fossils = s.fossils.drop(columns="locationID")
    s.write()


def no_modern_latitude_column(s, tmp):
    s.modern = s.modern.drop(columns="decimalLatitude")
    s.write()


def no_region_id(s, tmp):
    s.regions = s.regions.rename(columns={"region_id": "regionid"})
    s.write()


def no_taxon_reference(s, tmp):
    s.fossils = s.fossils.drop(columns="taxon_id")
    s.write()


def header_only(key, attr):
    def spoil(s, tmp):
        setattr(s, attr, getattr(s, attr).iloc[0:0])
        s.write()
    return spoil


def empty_file(s, tmp):
    s.write()
    s.path("taxa").write_bytes(b"")


def empty_region_layer(s, tmp):
    s.regions = s.regions.iloc[0:0]
    s.write()


def bow_tie(s, tmp):
    # a self-intersecting ring (figure of eight) over the first region
    s.regions.loc[0, "geometry"] = Polygon([(0, 0), (10, 10), (10, 0), (0, 10)])
    s.write()


def no_crs(s, tmp):
    s.config["inputs"]["regions"] = "regions.shp"
    s.write()
    (s.folder / "regions.prj").unlink()


def other_crs(s, tmp):
    s.regions = s.regions.to_crs("EPSG:3857")
    s.write()


def complete_separation(s, tmp):
    # every extinct taxon lives in the basin and no extant taxon does: in each interval the basin
    # class predicts loss perfectly (complete separation); profile intervals as by default
    s.taxa["depth_zone"] = np.where(s.taxa["extant"] == "true", ["shelf", "slope"] * 10, "basin")
    del s.config["analog"]["ci_method"]
    s.write()


def every_taxon_lost(s, tmp):
    # every taxon at risk in a warming interval was lost in it: the eight extinct taxa appear after
    # the end-Triassic window and die in the Toarcian one; living taxa appear after the last window
    rng = np.random.default_rng(5)
    extinct = s.taxa.loc[s.taxa["extant"] == "false", "taxon_id"].tolist()
    spans = {t: (rng.uniform(188.0, 198.0), rng.uniform(181.8, 184.2)) for t in extinct}
    first = s.fossils["taxon_id"].map(lambda t: spans.get(t, (12.0, 1.0))[0]).to_numpy()
    last = s.fossils["taxon_id"].map(lambda t: spans.get(t, (12.0, 1.0))[1]).to_numpy()
    pos = s.fossils.groupby("taxon_id").cumcount().to_numpy()
    mid = np.where(pos == 0, first, np.where(pos == 1, last, rng.uniform(last, first)))
    s.fossils["oldest_ma"] = [f"{m + 0.25:.3f}" for m in mid]
    s.fossils["youngest_ma"] = [f"{m - 0.25:.3f}" for m in mid]
    s.write()


def single_occurrence(s, tmp):
    keep = (s.fossils["taxon_id"] != "T05") | ~s.fossils["taxon_id"].duplicated()
    s.fossils = s.fossils[keep].reset_index(drop=True)
    s.write()


def no_extant(s, tmp):
    s.taxa["extant"] = "false"
    s.write()


def no_interval_overlap(s, tmp):
    # every occurrence between 140 and 125 Ma: no built-in warming window holds one
    rng = np.random.default_rng(6)
    mid = rng.uniform(126.0, 139.0, len(s.fossils))
    s.fossils["oldest_ma"] = [f"{m + 0.25:.3f}" for m in mid]
    s.fossils["youngest_ma"] = [f"{m - 0.25:.3f}" for m in mid]
    s.write()


UNICODE_NAMES = {"T01": "Corvallá señorae", "T02": "霞贝属", "T03": "Fenoria 🐚", "T04": "Ǧaltrïna"}


def unicode_names(s, tmp):
    rename = dict(zip(s.taxa["scientificName"], s.taxa["taxon_id"].map(UNICODE_NAMES).fillna(s.taxa["scientificName"])))
    s.taxa["scientificName"] = s.taxa["scientificName"].map(rename)
    s.taxa["genus"] = s.taxa["scientificName"]
    s.modern["scientificName"] = s.modern["scientificName"].map(rename)
    s.regions["name"] = ["Baie intérieure", "内湾", "Outer 🌊 Halvren"]
    s.config["study"]["name"] = "Étude 🐚 of the 北 Halvren Shelf"
    s.write()


LONG_NAME = "Galtrina " + "longissima" * 99 + "x"  # 1000 characters


def long_names(s, tmp):
    s.taxa.loc[3, "scientificName"] = LONG_NAME
    s.modern.loc[s.modern["scientificName"] == "Galtrina", "scientificName"] = LONG_NAME
    s.regions.loc[1, "name"] = "M" * 1000
    s.write()


def figures_small(spoil):
    """The same fault, with figures written (small and PNG only, to keep it quick)."""
    def spoil2(s, tmp):
        s.config["figures"] = {"dpi": 72, "formats": ["png"]}
        spoil(s, tmp)
        return {"figures": True}
    return spoil2


def missing_path(s, tmp):
    return {"argv": ["run", str(tmp / "no_such_study"), "--out", str(tmp / "out")]}


def no_study_toml(s, tmp):
    s.write()
    (s.folder / "study.toml").unlink()


def toml_syntax(s, tmp):
    s.write()
    edit_text(s.folder / "study.toml", lambda t: t.replace('seed = 11', 'seed = 11\nname2 = "unclosed'))


def unknown_section(s, tmp):
    s.config["sceanrio"] = s.config.pop("scenario")
    s.write()


def unknown_option(s, tmp):
    s.config["analog"]["n_boostrap"] = 10
    s.write()


def wrong_type(s, tmp):
    s.config["study"]["seed"] = "eleven"
    s.write()


def seed_missing(s, tmp):
    del s.config["study"]["seed"]
    s.write()


def out_is_file(s, tmp):
    s.write()
    (tmp / "out").write_text("a file in the way")


def out_foreign(s, tmp):
    s.write()
    (tmp / "out").mkdir()
    (tmp / "out" / "notes.docx").write_text("precious notes")


def out_earlier_output(s, tmp):
    s.write()
    (tmp / "out").mkdir()
    (tmp / "out" / "manifest.json").write_text("{}")
    (tmp / "out" / "old_table.csv").write_text("a\n1\n")


def regions_missing(s, tmp):
    s.write()
    s.path("regions").unlink()


def parquet_input(s, tmp):
    s.config["inputs"]["fossil_occurrences"] = "fossil_occurrences.parquet"
    s.fossils = s.fossils.assign(oldest_ma=s.fossils["oldest_ma"].astype(float),
                                 youngest_ma=s.fossils["youngest_ma"].astype(float),
                                 decimalLatitude=s.fossils["decimalLatitude"].astype(float),
                                 decimalLongitude=s.fossils["decimalLongitude"].astype(float))
    s.write()


def tsv_input(s, tmp):
    s.config["inputs"]["modern_occurrences"] = "modern_occurrences.tsv"
    s.modern["basisOfRecord"] = "HumanObservation"  # a raw Darwin Core export column
    s.write()


def stage_only(s, tmp):
    from analog.reference import load_timescale

    ts = load_timescale()
    st = ts[ts["rank"] == "stage"].sort_values("oldest_ma")
    tops = st["youngest_ma"].to_numpy()
    names = st["name"].to_numpy()

    def stage_of(age):
        return names[np.searchsorted(tops, age, side="right") - 1]

    old = s.fossils["oldest_ma"].astype(float).to_numpy()
    young = s.fossils["youngest_ma"].astype(float).to_numpy()
    s.fossils = s.fossils.drop(columns=["oldest_ma", "youngest_ma"]).assign(
        earliestAgeOrLowestStage=[stage_of(a) for a in old],
        latestAgeOrHighestStage=[stage_of(max(a, 0.001)) for a in young])
    s.write()


def semicolon_decimal_comma(s, tmp):
    s.sep = ";"
    s.fossils["decimalLatitude"] = s.fossils["decimalLatitude"].str.replace(".", ",", regex=False)
    s.write()


def workbook(s, tmp):
    s.config["inputs"]["taxa"] = "taxa.xlsx"
    s.write()
    (s.folder / "taxa.xlsx").write_bytes(b"PK\x03\x04 not really a workbook")


def intervals_swapped(s, tmp):
    s.config["inputs"]["intervals"] = "intervals.csv"
    s.write()
    (s.folder / "intervals.csv").write_text(
        "interval_id,name,oldest_ma,youngest_ma,warming_c,warming_low_c,warming_high_c,province,source,note\n"
        "hal1,Halvren warming,120,125,3.0,2.0,4.0,Halvren Traps,invented for a test,\n", encoding="utf-8")


def intervals_no_warming(s, tmp):
    s.config["inputs"]["intervals"] = "intervals.csv"
    s.write()
    (s.folder / "intervals.csv").write_text(
        "interval_id,name,oldest_ma,youngest_ma,warming_low_c,warming_high_c,province,source,note\n"
        "hal1,Halvren warming,125,120,2.0,4.0,Halvren Traps,invented for a test,\n", encoding="utf-8")


def bad_extant(s, tmp):
    cell(s.taxa, 8, "extant", "maybe")
    s.write()


def duplicate_header(s, tmp):
    s.write()
    lines = s.path("taxa").read_text(encoding="utf-8").rstrip("\n").split("\n")
    lines = [lines[0] + ",body_size"] + [line + ",small" for line in lines[1:]]
    s.path("taxa").write_text("\n".join(lines) + "\n", encoding="utf-8")


def point_region(s, tmp):
    s.regions = gpd.GeoDataFrame({"region_id": ["R1", "R2", "R3"], "name": ["a", "b", "c"]},
                                 geometry=[s.regions.geometry[0], Point(15, 15), s.regions.geometry[2]],
                                 crs="EPSG:4326")
    s.write()


def warming_zero(s, tmp):
    s.config["scenario"]["warming_c"] = -2.0
    s.write()


def modern_extinct_taxon(s, tmp):
    cell(s.modern, 5, "scientificName", "Pyrlitha")  # T13, extinct
    s.write()


def authorship(s, tmp):
    s.fossils = s.fossils.assign(scientificName=s.fossils["taxon_id"].map(
        dict(zip(s.taxa["taxon_id"], s.taxa["scientificName"])))).drop(columns="taxon_id")
    cell(s.fossils, 15, "scientificName", "Corvalla (Merrow, 1898)")
    s.write()


def blank_modern_coordinates(s, tmp):
    cell(s.modern, 6, "decimalLatitude", "")
    s.write()


def geojson_regions(s, tmp):
    s.config["inputs"]["regions"] = "regions.geojson"
    s.write()


def two_layers(s, tmp):
    s.write()
    s.regions.iloc[:1].to_file(s.path("regions"), layer="draft", engine="pyogrio")


def read_only_out(s, tmp):
    s.write()
    ro = tmp / "locked"
    ro.mkdir()
    ro.chmod(0o500)
    return {"argv": ["run", str(s.folder), "--out", str(ro / "out"), "--no-figures"], "out": ro / "out"}


def blank_study_name(s, tmp):
    s.config["study"]["name"] = ""
    s.write()


def header_line_only(s, tmp):
    s.write()
    path = s.path("taxa")
    path.write_text(path.read_text(encoding="utf-8").split("\n")[0], encoding="utf-8")  # no line break


def space_delimiter(s, tmp):
    s.write()
    s.fossils.to_csv(s.path("fossil_occurrences"), sep=" ", index=False)


def crlf_line_ends(s, tmp):
    s.write()
    path = s.path("fossil_occurrences")
    path.write_bytes(path.read_bytes().replace(b"\n", b"\r\n"))


def input_is_folder(s, tmp):
    s.write()
    s.path("modern_occurrences").unlink()
    s.path("modern_occurrences").mkdir()


def parquet_corrupt(s, tmp):
    s.config["inputs"]["taxa"] = "taxa.parquet"
    s.write()
    s.path("taxa").write_bytes(b"PAR1 this is not parquet")


def region_garbage(s, tmp):
    s.write()
    s.path("regions").write_bytes(b"not a geopackage at all")


def null_geometry(s, tmp):
    s.regions.loc[1, "geometry"] = None
    s.write()


def duplicate_region_id(s, tmp):
    s.regions.loc[2, "region_id"] = "R1"
    s.write()


def toml_latin1(s, tmp):
    s.config["study"]["name"] = "Étude du plateau"
    s.write()
    path = s.folder / "study.toml"
    path.write_bytes(path.read_text(encoding="utf-8").encode("latin-1"))


def repeated_levels(s, tmp):
    s.config["traits"]["body_size"]["levels"] = ["small", "medium", "medium", "large"]
    s.write()


def trait_not_a_table(s, tmp):
    s.write()
    path = s.folder / "study.toml"
    text = path.read_text(encoding="utf-8")
    start = text.index("[traits.planktonic]")
    end = text.index("[", start + 1)
    path.write_text(text[:start] + text[end:] + '\n[traits]\nplanktonic = "binary"\n', encoding="utf-8")


def reference_not_a_level(s, tmp):
    s.config["traits"]["depth_zone"]["reference"] = "abyss"
    s.write()


def intervals_mode_typo(s, tmp):
    s.config["inputs"]["intervals_mode"] = "replce"
    s.write()


def context_not_shipped(s, tmp):
    s.config["inputs"]["context"] = "maps:nowhere.gpkg"
    s.write()


def negative_age(s, tmp):
    cell(s.fossils, 5, "youngest_ma", "-1")
    s.write()


def numeric_trait_blank(s, tmp):
    s.taxa["length_mm"] = ""
    s.write()


def modern_outside_regions(s, tmp):
    s.modern["decimalLatitude"] = "-50"
    s.write()


ROW = r"\d+"
CASES = [
    # ---- text files ----
    Case("csv_unclosed_quote", unclosed_quote, "error",
         (r'^fossil_occurrences\.csv:5:-: found a double quote \(\"\) that opens a cell and is never closed;.*'
          r"fix: close the quote",)),
    Case("csv_ragged_row", ragged_row, "error",
         (r"^taxa\.csv:7:-: found 15 comma-separated cells; expected 14 comma-separated cells as in the header "
          r"line; fix: check quoting",)),
    Case("wrong_delimiter_pipe", pipe_delimiter, "error",
         (r"^modern_occurrences\.csv:1:-: found one column in the header line, 'occurrenceID\|scientificName.*"
          r"separated by vertical bars '\|'.*fix: save the table again as CSV",)),
    Case("encoding_latin1", latin1, "error",
         (r"^taxa\.csv:4:-: found byte 0xed that is not UTF-8.*fix: re-save the file as UTF-8",)),
    Case("utf8_bom", bom, "ok"),
    Case("mixed_types_in_number_column", mixed_types, "error",
         (r"^fossil_occurrences\.csv:10:oldest_ma: found 'ninety' \(not a number\); expected a number.*fix: ",)),
    Case("blank_latitude", blank_latitude, "error",
         (r"^fossil_occurrences\.csv:8:decimalLatitude: found a blank cell; .*fix: fill column 'decimalLatitude'",)),
    Case("nan_longitude", nan_longitude, "error",
         (r"^fossil_occurrences\.csv:9:decimalLongitude: found a blank cell; .*fix: ",)),
    Case("absent_coordinate_column", no_longitude_column, "error",
         (r"^fossil_occurrences\.csv:1:decimalLongitude: found no column 'decimalLongitude'.*fix: add a column",)),
    Case("blank_modern_coordinates", blank_modern_coordinates, "warning",
         (r"modern_occurrences\.csv: 1 row\(s\) with a blank decimalLatitude left out \(row 6\)",)),
    Case("latitude_out_of_range", latitude_95, "error",
         (r"^fossil_occurrences\.csv:6:decimalLatitude: found '95'; expected a number between -90 and 90; "
          r"fix: .*swapped",)),
    Case("longitude_out_of_range", longitude_200, "error",
         (r"^modern_occurrences\.csv:3:decimalLongitude: found '200'; expected a number between -180 and 180",)),
    Case("swapped_age_bounds", swapped_ages, "error",
         (r"^fossil_occurrences\.csv:12:oldest_ma: found oldest_ma 50 < youngest_ma 60;.*fix: swap",)),
    Case("unknown_stage_name", unknown_stage, "error",
         (r"^fossil_occurrences\.csv:9:earliestAgeOrLowestStage: found unknown stage 'Toarcain' "
          r"\(closest: Toarcian.*fix: correct the spelling",)),
    Case("duplicate_taxon_id", duplicate_taxon_id, "error",
         (r"^taxa\.csv:22:taxon_id: found 'T04' again \(first in row 5\); expected each taxon_id once",)),
    Case("duplicate_occurrence_id", duplicate_occurrence_id, "warning",
         (r"fossil_occurrences\.csv: 1 row\(s\) repeat an occurrenceID .*'F0001' also in row 2.*\(row 30\)",)),
    Case("unknown_taxon_id", unknown_taxon_id, "error",
         (r"^fossil_occurrences\.csv:20:taxon_id: found 'T99'.*expected a taxon_id of the taxa table; "
          r"fix: correct the taxon_id",)),
    Case("unknown_modern_name", unknown_modern_name, "warning",
         (r"modern_occurrences\.csv: 1 record\(s\) of 1 name\(s\) not found in the taxa table left out.*"
          r"'Corvala' ~ 'Corvalla'",)),
    Case("modern_record_of_extinct_taxon", modern_extinct_taxon, "warning",
         (r"modern_occurrences\.csv: 1 record\(s\) of 1 taxa not marked extant .*left out \(T13 \(1\)\)",)),
    Case("undeclared_trait_column", undeclared_trait_column, "warning",
         (r"taxa\.csv: column 'shell_texture' not declared; ignored.*\[traits\.<column>\]",)),
    Case("declared_trait_without_column", declared_trait_without_column, "error",
         (r"^taxa\.csv:1:shell_texture: found no column 'shell_texture' for the trait declared as "
          r"\[traits\.shell_texture\].*fix: add the column, or remove \[traits\.shell_texture\]",)),
    Case("trait_value_outside_classes", trait_value_outside, "error",
         (r"^taxa\.csv:5:depth_zone: found 'shelff' \(did you mean 'shelf'\?\); expected one of the classes "
          r"\['shelf', 'slope', 'basin'\]",)),
    Case("one_class_trait", one_class_trait, "warning",
         (r"taxa\.csv: trait 'planktonic' has one class only \('false'\); it is left out of the models",)),
    Case("ordinal_trait_without_levels", ordinal_without_levels, "error",
         (r"^study\.toml:-:\[traits\.body_size\] levels: found no option 'levels'.*fix: add option 'levels'",)),
    Case("unknown_trait_kind", unknown_trait_kind, "error",
         (r"^study\.toml:-:\[traits\.depth_zone\] kind: found 'categorial'; .*did you mean 'categorical'\?",)),
    Case("bad_extant_value", bad_extant, "error",
         (r"^taxa\.csv:8:extant: found 'maybe' \(not true/false\)",)),
    Case("duplicate_column_header", duplicate_header, "error",
         (r"^taxa\.csv:-:body_size: found the column 'body_size' more than once.*fix: rename or delete",)),
    # ---- columns and tables ----
    Case("missing_column_taxa", no_extant_column, "error",
         (r"^taxa\.csv:1:extant: found no column 'extant'.*fix: add a column named 'extant'",)),
    Case("missing_column_fossils", no_locality_column, "error",
         (r"^fossil_occurrences\.csv:1:locationID: found no column 'locationID'.*fix: add a column",)),
    Case("missing_column_modern", no_modern_latitude_column, "error",
         (r"^modern_occurrences\.csv:1:decimalLatitude: found no column 'decimalLatitude'",)),
    Case("missing_column_regions", no_region_id, "error",
         (r"^regions\.gpkg:1:region_id: found no column 'region_id'.*fix: rename column 'regionid' to 'region_id'",)),
    Case("missing_taxon_reference_columns", no_taxon_reference, "error",
         (r"^fossil_occurrences\.csv:1:taxon_id / scientificName: found no columns for the taxon reference",)),
    Case("missing_column_intervals", intervals_no_warming, "error",
         (r"^intervals\.csv:1:warming_c: found no column 'warming_c'.*fix: ",)),
    Case("empty_taxa", header_only("taxa", "taxa"), "error",
         (r"^taxa\.csv:2:-: found a header but no data rows.*fix: fill the table",)),
    Case("empty_fossils", header_only("fossil_occurrences", "fossils"), "error",
         (r"^fossil_occurrences\.csv:2:-: found a header but no data rows",)),
    Case("empty_modern", header_only("modern_occurrences", "modern"), "error",
         (r"^modern_occurrences\.csv:2:-: found a header but no data rows",)),
    Case("empty_file", empty_file, "error", (r"^taxa\.csv:-:-: found an empty file.*fix: export the table again",)),
    Case("workbook_not_csv", workbook, "error",
         (r"^taxa\.xlsx:-:-: found a spreadsheet workbook; .*fix: save the sheet as 'CSV UTF-8'",)),
    Case("intervals_swapped_ages", intervals_swapped, "error",
         (r"^intervals\.csv:2:oldest_ma: found oldest_ma 120 < youngest_ma 125",)),
    # ---- region layer ----
    Case("empty_region_layer", empty_region_layer, "error",
         (r"^regions\.gpkg:-:-: found a layer without features; expected at least one region polygon",)),
    Case("self_intersecting_polygon", bow_tie, "warning",
         (r"regions\.gpkg: repaired 1 invalid polygon\(s\) with shapely make_valid: region_id R1 \(Self-intersection",)),
    Case("region_layer_without_crs", no_crs, "error",
         (r"^regions\.shp:-:-: found a layer without a coordinate reference system \(CRS\).*fix: set the layer's CRS",)),
    Case("region_layer_other_crs", other_crs, "warning",
         (r"region layer CRS kept as given: EPSG:3857",), pipeline=True),
    Case("region_of_points", point_region, "error",
         (r"^regions\.gpkg:2:geometry: found region 'R2' is a Point; expected geometry types",)),
    Case("regions_two_layers", two_layers, "warning",
         (r"regions\.gpkg holds 2 layers \(.*\); read 'regions'\. Set \[inputs\] regions_layer",)),
    Case("regions_geojson", geojson_regions, "ok"),
    # ---- what the stages see ----
    Case("complete_separation", complete_separation, "warning", (), pipeline=True, slow=True),
    Case("every_taxon_lost", every_taxon_lost, "warning", (), pipeline=True),
    Case("single_occurrence_taxon", single_occurrence, "ok", (), pipeline=True),
    Case("no_extant_taxa", no_extant, "error",
         (r"^taxa\.csv:-:extant: found no taxon marked extant \(all 20 are extant = false\);.*fix: set extant = true",)),
    Case("no_interval_overlap", no_interval_overlap, "warning", (), pipeline=True),
    Case("unicode_names", unicode_names, "ok", (), pipeline=True),
    Case("unicode_names_figures", figures_small(unicode_names), "ok", (), pipeline=True, slow=True),
    Case("long_names", long_names, "ok", (), pipeline=True),
    Case("long_names_figures", figures_small(long_names), "ok", (), pipeline=True, slow=True),
    Case("authorship_in_names", authorship, "warning",
         (r"fossil_occurrences\.csv: 1 row\(s\) matched to taxa after leaving out the authorship",)),
    # ---- study.toml and paths ----
    Case("study_path_missing", missing_path, "error",
         (r"^.*no_such_study:-:-: found no such folder; expected a study folder holding study\.toml",)),
    Case("study_toml_missing", no_study_toml, "error",
         (r"^study\.toml:-:-: found no study\.toml in .*fix: create study\.toml",)),
    Case("study_toml_syntax_error", toml_syntax, "error",
         (r"^study\.toml:4:-: found a TOML syntax error: .*\(at line 4, column \d+\); expected valid TOML",)),
    Case("unknown_section", unknown_section, "error",
         (r"^study\.toml:-:\[sceanrio\]: found an unknown section \[sceanrio\].*fix: rename it to 'scenario'",)),
    Case("unknown_option", unknown_option, "error",
         (r"^study\.toml:-:\[analog\] n_boostrap: found unknown option 'n_boostrap' in \[analog\].*"
          r"did you mean 'n_bootstrap'\?",)),
    Case("wrong_type", wrong_type, "error",
         (r"^study\.toml:-:\[study\] seed: found 'eleven' \(str\); expected a value of type integer",)),
    Case("seed_missing", seed_missing, "error",
         (r"^study\.toml:-:\[study\] seed: found no option 'seed'.*fix: add option 'seed' under \[study\]",)),
    Case("blank_study_name", blank_study_name, "error", (r"^study\.toml:-:\[study\] name: found an empty text; .*fix: fill in \[study\] name",)),
    Case("scenario_warming_negative", warming_zero, "error", (r"^study\.toml:-:\[scenario\] warming_c: found -2\.0; expected a number greater than 0 and at most 20;",)),
    Case("regions_file_missing", regions_missing, "error",
         (r"^regions\.gpkg:-:-: found no such file; expected the regions file at .*fix: check the path of 'regions'",)),
    Case("output_is_a_file", out_is_file, "error",
         (r"^.*out:-:-: found a file where the output folder should be;.*fix: choose another --out path",)),
    Case("output_with_foreign_files", out_foreign, "error",
         (r"^.*out:-:-: found a folder that already holds other files;.*fix: choose a new --out path",)),
    Case("output_read_only", read_only_out, "error", (r"^.*locked:-:-: found a folder this user cannot write to",)),
    Case("output_earlier_run_replaced", out_earlier_output, "ok", (), pipeline=True),
    # ---- formats that are fine ----
    Case("parquet_input", parquet_input, "ok"),
    Case("tsv_input", tsv_input, "ok"),
    Case("stage_names_only", stage_only, "ok"),
    Case("semicolon_decimal_comma", semicolon_decimal_comma, "ok"),
    Case("crlf_line_ends", crlf_line_ends, "ok"),
    # ---- more faults found while building the corpus ----
    Case("header_line_only_no_line_break", header_line_only, "error",
         (r"^taxa\.csv:2:-: found a header but no data rows",)),
    Case("wrong_delimiter_space", space_delimiter, "error",
         (r"^fossil_occurrences\.csv:1:-: found one column in the header line, .*separated by spaces",)),
    Case("input_path_is_a_folder", input_is_folder, "error",
         (r"^modern_occurrences\.csv:-:-: found a folder, not a file; .*fix: check the path of 'modern_occurrences'",)),
    Case("parquet_not_readable", parquet_corrupt, "error",
         (r"^taxa\.parquet:-:-: found a file that is not readable Parquet .*fix: write the table again",)),
    Case("region_file_not_readable", region_garbage, "error",
         (r"^regions\.gpkg:-:-: found a layer that could not be read .*fix: open the file in QGIS",)),
    Case("region_without_geometry", null_geometry, "error",
         (r"^regions\.gpkg:2:geometry: found region 'R2' without a geometry; .*fix: draw the region",)),
    Case("duplicate_region_id", duplicate_region_id, "error",
         (r"^regions\.gpkg:3:region_id: found 'R1' again \(first in row 1\); expected each region_id once",)),
    Case("study_toml_not_utf8", toml_latin1, "error",
         (r"^study\.toml:-:-: found bytes that are not UTF-8 .*fix: save study\.toml as UTF-8",)),
    Case("trait_levels_repeated", repeated_levels, "error",
         (r"^study\.toml:-:\[traits\.body_size\] levels: found 'medium' listed twice; expected each item once",)),
    Case("trait_not_a_table", trait_not_a_table, "error",
         (r"^study\.toml:-:\[traits\.planktonic\]: found 'binary' \(str\); expected a table of options; "
          r"fix: write it as a section: a line \[traits\.planktonic\]",)),
    Case("reference_not_a_level", reference_not_a_level, "error",
         (r"^study\.toml:-:\[traits\.depth_zone\] reference: found reference 'abyss'; expected one of the levels",)),
    Case("intervals_mode_typo", intervals_mode_typo, "error",
         (r"^study\.toml:-:\[inputs\] intervals_mode: found 'replce'; .*did you mean 'replace'\?",)),
    Case("context_layer_not_shipped", context_not_shipped, "error",
         (r"^maps:nowhere\.gpkg:-:-: found no file 'nowhere\.gpkg' in the shipped maps folder",)),
    Case("negative_age", negative_age, "error",
         (r"^fossil_occurrences\.csv:5:youngest_ma: found '-1'; expected a number at least 0",)),
    Case("numeric_trait_all_blank", numeric_trait_blank, "warning",
         (r"taxa\.csv: trait 'length_mm' has no values; it is left out of the models",)),
    Case("modern_records_outside_regions", modern_outside_regions, "warning",
         (r"regions: 120 of 120 modern occurrences fall in no region; they are listed in unassigned_occurrences\.csv",),
         pipeline=True),
]


def _params(cases, *, tier):
    out = []
    for c in cases:
        marks = [pytest.mark.slow] if (c.slow or tier == "run") else []
        if c.xfail:
            marks.append(pytest.mark.xfail(reason=c.xfail, strict=False))
        if c.id == "output_read_only":
            marks.append(pytest.mark.skipif(os.geteuid() == 0, reason="root may write to read-only folders"))
        out.append(pytest.param(c, id=c.id, marks=marks))
    return out


def problem_lines(err: str) -> list[str]:
    """The problem lines of an input error, after checking its header counts them."""
    lines = err.splitlines()
    head = [i for i, line in enumerate(lines) if re.match(r"^error: \d+ problems? in the input:$", line)]
    assert len(head) == 1, err
    n = int(re.search(r"\d+", lines[head[0]]).group())
    body = lines[head[0] + 1: head[0] + 1 + n]
    assert lines[head[0] + 1 + n] == "Nothing was written. Fix the problems above and run again."
    return body


def run_case(case: Case, tiny: TinyStudy, tmp_path: Path, capsys, *, command: str):
    overrides = case.spoil(tiny, tmp_path) or {}
    out = overrides.get("out", tmp_path / "out")
    argv = overrides.get("argv")
    if argv is None:
        argv = ["check", str(tiny.folder)] if command == "check" else ["run", str(tiny.folder), "--out", str(out)]
        if command == "run" and not overrides.get("figures"):
            argv.append("--no-figures")
    before_out = tree_hashes(out) if out.is_dir() else (out.read_bytes() if out.exists() else None)
    before_in = tree_hashes(tiny.folder)
    rc = main(argv)
    captured = capsys.readouterr()
    text = captured.out + captured.err
    assert "Traceback" not in text
    assert tree_hashes(tiny.folder) == before_in  # inputs untouched
    return rc, captured, out, before_out


def check_error(case, rc, captured, out, before_out):
    assert rc == 2, captured.err
    lines = problem_lines(captured.err)
    assert len(lines) == len(case.expect), "\n".join(lines)
    for line in lines:
        assert PROBLEM_LINE.match(line), line
    unmatched = list(lines)
    for pattern in case.expect:
        hits = [line for line in unmatched if re.search(pattern, line)]
        assert hits, f"no problem line matches {pattern!r} in:\n" + "\n".join(lines)
        unmatched.remove(hits[0])
    # nothing written: the output folder is absent, or exactly as it was
    if before_out is None:
        assert not out.exists()
    elif isinstance(before_out, bytes):
        assert out.read_bytes() == before_out
    else:
        assert tree_hashes(out) == before_out
    assert not list(out.parent.glob(f".{out.name}.*"))


def check_accepted(case, rc, captured):
    text = captured.out + captured.err
    assert rc == 0, text
    for pattern in case.expect:
        assert re.search(pattern, text), f"{pattern!r} not in output:\n{text}"


@pytest.mark.parametrize("case", _params([c for c in CASES if not c.pipeline], tier="intake"))
def test_intake_case(case, tiny, tmp_path, capsys):
    """Faults found by intake: errors through ``run`` (nothing written), warnings through ``check``."""
    command = "run" if case.outcome == "error" else "check"
    rc, captured, out, before = run_case(case, tiny, tmp_path, capsys, command=command)
    if case.outcome == "error":
        check_error(case, rc, captured, out, before)
    else:
        check_accepted(case, rc, captured)
        if case.outcome == "ok":
            assert "Warnings (" not in captured.out
        assert re.search(r"taxa: 20 \(12 extant, 8 extinct\)", captured.out)


@pytest.mark.parametrize("case", _params([c for c in CASES if not c.pipeline and c.outcome != "error"], tier="run"))
def test_intake_warning_case_runs_through(case, tiny, tmp_path, capsys):
    """Where intake only warns, the whole job goes on and writes its outputs."""
    rc, captured, out, _ = run_case(case, tiny, tmp_path, capsys, command="run")
    check_accepted(case, rc, captured)
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    for pattern in case.expect:
        assert any(re.search(pattern, w) for w in manifest["warnings"]), manifest["warnings"]


@pytest.mark.parametrize("case", _params([c for c in CASES if c.pipeline], tier="pipeline"))
def test_pipeline_case(case, tiny, tmp_path, capsys):
    """Faults that reach the stages: the whole job runs (or stops with a clear input error)."""
    rc, captured, out, before = run_case(case, tiny, tmp_path, capsys, command="run")
    if case.outcome == "error":
        check_error(case, rc, captured, out, before)
        return
    check_accepted(case, rc, captured)
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    # every warning kept in the manifest was also shown to the user
    shown = {line[len("warning: "):] for line in captured.err.splitlines() if line.startswith("warning: ")}
    assert set(manifest["warnings"]) <= shown, set(manifest["warnings"]) - shown
    CHECKS.get(case.id, lambda *a: None)(out, manifest, captured)


# --- what each pipeline case must produce -------------------------------------------------------

def _check_separation(out, manifest, captured):
    sel = pd.read_csv(out / "selectivity.csv")
    depth = sel[(sel["trait"] == "depth_zone") & (sel["scope"] != "pooled")]
    assert len(depth) >= 4
    # Firth's penalty keeps estimates and profile limits finite under complete separation ...
    assert np.isfinite(depth[["log_odds", "se", "ci_low", "ci_high"]].to_numpy()).all()
    # ... on the side of the planted truth: shelf and slope taxa (vs basin, the commonest class) fared better
    assert (depth["log_odds"] < 0).all()
    # ... and the thin classes are named in a warning
    assert any(re.search(r"too thin to estimate well: depth_zone\[shelf\].*Firth estimates are kept \(finite\)", w)
               for w in manifest["warnings"]), manifest["warnings"]
    ranks = pd.read_csv(out / "rankings.csv")
    assert ranks["combined_p"].between(0, 1).all()


def _check_every_lost(out, manifest, captured):
    fates = pd.read_csv(out / "fates.csv")
    toa = fates[fates["interval_id"] == "toa"]
    assert len(toa) == 8 and (toa["p_lost"] == toa["p_at_risk"]).all()  # the fault is as planted
    # with no survivor selectivity cannot be estimated: said in warnings, and no number invented
    warned = "\n".join(manifest["warnings"])
    assert re.search(r"toa \(no taxon survived, 8 at risk\)", warned), warned
    assert re.search(r"analog risk is not estimated", warned), warned
    assert "Traceback" not in warned
    ranks = pd.read_csv(out / "rankings.csv")
    assert ranks["analog_p"].isna().all()
    assert ranks["combined_p"].dropna().between(0, 1).all()


def _check_single(out, manifest, captured):
    ranks = pd.read_csv(out / "rankings.csv")
    assert ranks["combined_p"].between(0, 1).all()
    assert len(ranks) == 12 and "T05" in set(ranks["taxon_id"])
    occupancy = pd.read_csv(out / "occupancy.csv")
    assert occupancy.loc[occupancy["taxon_id"] == "T05", "occupied"].max() <= 1


def _check_no_overlap(out, manifest, captured):
    warned = "\n".join(manifest["warnings"])
    assert re.search(r"no warming interval has enough fossil data .*analog risk is not estimated", warned), warned
    assert pd.read_csv(out / "rankings.csv")["analog_p"].isna().all()  # nothing invented


def _check_unicode(out, manifest, captured):
    ranks = pd.read_csv(out / "rankings.csv", encoding="utf-8")
    assert set(UNICODE_NAMES.values()) - {"Fenoria 🐚"} <= set(ranks["scientificName"]) | {"Fenoria 🐚"}
    assert {"Corvallá señorae", "霞贝属", "Ǧaltrïna"} <= set(ranks["scientificName"])
    html = (out / "briefing.html").read_text(encoding="utf-8")
    assert "霞贝属" in html and "Étude 🐚 of the 北 Halvren Shelf" in manifest["study"]
    regions = pd.read_csv(out / "region_summary.csv", encoding="utf-8")
    assert "内湾" in set(regions["name"])


def _check_long(out, manifest, captured):
    ranks = pd.read_csv(out / "rankings.csv", encoding="utf-8")
    assert LONG_NAME in set(ranks["scientificName"])
    regions = pd.read_csv(out / "region_summary.csv", encoding="utf-8")
    assert "M" * 1000 in set(regions["name"])
    from PIL import Image

    for png in (out / "figures").glob("*.png"):
        # figures are 7 inches wide at 72 dpi here; a long label may widen them a little, not tenfold
        assert Image.open(png).size[0] <= 3 * 7 * 72, png.name


def _check_crs(out, manifest, captured):
    regions = pd.read_csv(out / "region_summary.csv")
    # every modern record lies in one of the squares: none lost to a CRS mix-up
    assert regions["n_records"].sum() == 120


def _check_replaced(out, manifest, captured):
    assert not (out / "old_table.csv").exists()
    assert (out / "rankings.csv").exists()


CHECKS = {"complete_separation": _check_separation, "every_taxon_lost": _check_every_lost,
          "single_occurrence_taxon": _check_single, "no_interval_overlap": _check_no_overlap,
          "unicode_names": _check_unicode, "unicode_names_figures": _check_unicode,
          "long_names": _check_long, "long_names_figures": _check_long,
          "region_layer_other_crs": _check_crs, "output_earlier_run_replaced": _check_replaced}


def test_corpus_has_at_least_40_faults():
    assert len(CASES) >= 40
    assert len({c.id for c in CASES}) == len(CASES)


# --- a handful through a real process: exit code and no traceback ----------------------------------

SUBPROCESS_CASES = ["csv_unclosed_quote", "latitude_out_of_range", "study_toml_syntax_error",
                    "output_is_a_file", "duplicate_occurrence_id"]


@pytest.mark.slow
@pytest.mark.parametrize("case_id", SUBPROCESS_CASES)
def test_case_in_a_process(case_id, tiny, tmp_path):
    case = next(c for c in CASES if c.id == case_id)
    overrides = case.spoil(tiny, tmp_path) or {}
    command = ["run", str(tiny.folder), "--out", str(tmp_path / "out"), "--no-figures"]
    if case.outcome != "error":
        command = ["check", str(tiny.folder)]
    proc = subprocess.run([sys.executable, "-m", "analog", *overrides.get("argv", command)],
                          capture_output=True, text=True, timeout=600, cwd=tmp_path,
                          env={**os.environ, "PYTHONWARNINGS": "default"})
    assert "Traceback" not in proc.stderr + proc.stdout
    if case.outcome == "error":
        assert proc.returncode == 2, proc.stderr
        assert len(problem_lines(proc.stderr)) == len(case.expect)
        assert not (tmp_path / "out").is_dir()
    else:
        assert proc.returncode == 0, proc.stderr
        assert re.search(case.expect[0], proc.stdout)
