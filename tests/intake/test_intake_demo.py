"""The shipped demo study loads, and intake finds exactly the name faults the generator planted."""
from __future__ import annotations

import json
import warnings

import pytest

from analog._resources import resource_dir
from analog.errors import AnalogWarning
from analog.intake import inventory, load_study


@pytest.fixture(scope="module")
def demo():
    folder = resource_dir("demo")
    if not (folder / "study.toml").is_file():
        pytest.skip("demo study not generated")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", AnalogWarning)
        study = load_study(folder)
    truth = json.loads((folder / "truth.json").read_text())
    return study, truth, [str(w.message) for w in caught]


def test_demo_sizes_match_the_generator(demo):
    study, truth, _ = demo
    sizes = truth["sizes"]
    assert len(study.taxa) == sizes["taxa"]
    assert int(study.taxa["extant"].sum()) == sizes["extant_genera"]
    assert len(study.fossil_occurrences) == sizes["fossil_occurrences"]
    assert study.fossil_occurrences["locationID"].nunique() == sizes["fossil_localities"]
    assert len(study.regions) == sizes["regions"]
    # every modern record is kept except the planted unmatched names
    assert len(study.modern_occurrences) == sizes["modern_occurrences"] - truth["names"]["unmatched_records"]


def test_demo_unmatched_names_are_exactly_the_planted_ones(demo):
    study, truth, caught = demo
    row = study.dropped[study.dropped["role"] == "modern_occurrences"]
    assert row["count"].sum() == truth["names"]["unmatched_records"]
    assert any("not found in the taxa table" in w for w in caught)


def test_demo_name_variants_are_matched(demo):
    study, truth, _ = demo
    # records whose names differ from taxa.csv only by case or spaces are kept
    kept = set(study.modern_occurrences["occurrenceID"])
    assert set(truth["names"]["variant_records"]) <= kept


def test_demo_stage_named_rows_get_ages(demo):
    study, _, _ = demo
    f = study.fossil_occurrences
    assert f[["oldest_ma", "youngest_ma"]].notna().all().all()
    assert (f["oldest_ma"] >= f["youngest_ma"]).all()


def test_demo_inventory(demo):
    study, truth, _ = demo
    text = inventory(study)
    assert f"taxa: {truth['sizes']['taxa']} " in text and "context" in text
