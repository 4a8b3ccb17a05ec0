"""The published descriptors in data_schemas/ are well formed and are the ones the checks use."""
from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest

from analog._resources import resource_dir
from analog.intake.config import study_schema
from analog.intake.schema import load_table_schema
from analog.params import SECTION_MODULES
from analog.study import RANK_COLUMNS

TABLES = ["taxa", "fossil_occurrences", "modern_occurrences", "regions", "intervals"]

# Frictionless Table Schema v1 specification, sections "Types and formats" and "Constraints"
# (specs.frictionlessdata.io/table-schema; lists from memory).
SPEC_TYPES = {"string", "number", "integer", "boolean", "object", "array", "date", "time", "datetime", "year",
              "yearmonth", "duration", "geopoint", "geojson", "any"}
SPEC_CONSTRAINTS = {"required", "unique", "minLength", "maxLength", "minimum", "maximum", "pattern", "enum"}
SPEC_FIELD_KEYS = {"name", "title", "type", "format", "description", "rdfType", "constraints", "trueValues",
                   "falseValues", "bareNumber", "decimalChar", "groupChar", "example"}
# Extension properties of this project, documented in data_schemas/README.md.
OWN_FIELD_KEYS = {"columnRequired", "warnIfAbsent", "caseInsensitive", "severity", "geometryTypes"}
SPEC_TOP_KEYS = {"fields", "primaryKey", "foreignKeys", "missingValues", "name", "title", "description", "$comment"}
OWN_TOP_KEYS = {"alternatives", "ignoredColumns", "rules", "traitColumns"}


@pytest.mark.parametrize("name", TABLES)
def test_table_descriptor_uses_known_properties(name):
    d = json.loads((resource_dir("schemas") / f"{name}.schema.json").read_text())
    assert set(d) <= SPEC_TOP_KEYS | OWN_TOP_KEYS
    names = [f["name"] for f in d["fields"]]
    assert len(names) == len(set(names))
    for f in d["fields"]:
        assert set(f) <= SPEC_FIELD_KEYS | OWN_FIELD_KEYS, f["name"]
        assert f["type"] in SPEC_TYPES
        assert set(f.get("constraints", {})) <= SPEC_CONSTRAINTS
        assert set(f.get("severity", {})) <= set(f.get("constraints", {})), f["name"]
        assert set(f.get("severity", {}).values()) <= {"error", "warning", "drop"}
    for key in d.get("primaryKey", []):
        assert key in names
    for fk in d.get("foreignKeys", []):
        assert fk["fields"] in names and fk["reference"]["resource"] in TABLES
    for alt in d.get("alternatives", []):
        assert all(c in names for opt in alt["options"] for c in opt)


def test_documented_columns_match_the_study_contract():
    assert load_table_schema("taxa").field_names == ["taxon_id", "scientificName", "taxonRank", *RANK_COLUMNS,
                                                     "extant"]
    assert set(load_table_schema("fossil_occurrences").field_names) >= {
        "occurrenceID", "taxon_id", "scientificName", "oldest_ma", "youngest_ma", "earliestAgeOrLowestStage",
        "latestAgeOrHighestStage", "decimalLatitude", "decimalLongitude", "locationID"}
    from analog.reference import INTERVAL_COLUMNS
    assert load_table_schema("intervals").field_names == list(INTERVAL_COLUMNS)


def test_study_schema_is_valid_draft_2020_12():
    schema = study_schema()
    # reference: jsonschema's own meta-schema check for draft 2020-12
    jsonschema.Draft202012Validator.check_schema(schema)
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"


def test_every_stage_section_is_allowed_in_study_toml():
    assert set(SECTION_MODULES) <= set(study_schema()["properties"])


def test_format_example_validates():
    # the example of the study format (all sections, every optional input)
    example = {
        "study": {"name": "Demo", "seed": 4242, "data_date": "2026-11-01", "description": "x"},
        "inputs": {"taxa": "taxa.csv", "fossil_occurrences": "f.csv", "modern_occurrences": "m.csv",
                   "regions": "regions.gpkg", "intervals": "intervals.csv", "intervals_mode": "extend",
                   "context": "maps:demo_coastline.gpkg"},
        "traits": {"depth_zone": {"kind": "categorical", "levels": ["shelf", "slope", "basin"],
                                  "reference": "shelf", "label": "Depth zone"}},
        "scenario": {"warming_c": 4.0},
        "analog": {}, "trajectory": {}, "combine": {}, "regions": {}, "figures": {},
    }
    errors = list(jsonschema.Draft202012Validator(study_schema(), format_checker=jsonschema.FormatChecker())
                  .iter_errors(example))
    assert errors == []


def test_rule_the_code_applies_must_be_documented():
    from analog.errors import AnalogError

    schema = load_table_schema("taxa")
    assert schema.rule("trait_values")["description"]
    with pytest.raises(AnalogError, match=r"rule 'no_such_rule' is applied to taxa but not described"):
        schema.rule("no_such_rule")


def test_readme_documents_every_extension_property():
    # the README sits in the source tree (package data ships only the .json descriptors)
    text = (Path(__file__).resolve().parents[2] / "data_schemas" / "README.md").read_text()
    for key in sorted(OWN_FIELD_KEYS | OWN_TOP_KEYS):
        assert f"`{key}`" in text, key
