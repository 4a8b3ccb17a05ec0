"""Matching modern taxa to fossil relatives: similarity, top-k order, reasons."""
import numpy as np
import pandas as pd

from analog.analogs.matching import match_relatives
from analog.study import TraitSpec

TRAITS = {"depth": TraitSpec("depth", "categorical", ("shelf", "slope"), label="Depth zone"),
          "skeleton": TraitSpec("skeleton", "categorical", ("aragonite", "calcite"), label="Skeleton")}


def _taxa(rows):
    df = pd.DataFrame(rows, columns=["taxon_id", "phylum", "family", "genus", "depth", "skeleton"])
    df["kingdom"] = "Animalia"
    mollusc = df["phylum"] == "Mollusca"
    df["class"] = np.where(mollusc, "Bivalvia", "Rhynchonellata")
    df["order"] = np.where(mollusc, "O1", "O9")
    for c in ("depth", "skeleton"):
        df[c] = pd.Categorical(df[c], categories=list(TRAITS[c].levels))
    return df


MODERN = _taxa([("M1", "Mollusca", "F1", "G1", "shelf", "calcite")])
FOSSIL = _taxa([
    ("M1", "Mollusca", "F1", "G1", "shelf", "calcite"),     # itself: never its own relative
    ("Fa", "Mollusca", "F1", "G1", "shelf", "calcite"),     # same genus, same traits
    ("Fb", "Mollusca", "F1", "G2", "slope", "calcite"),     # same family, depth differs
    ("Fc", "Mollusca", "F1", "G1", "slope", "calcite"),     # same genus, depth differs
    ("Fd", "Brachiopoda", "F9", "G9", "shelf", "calcite"),  # only the kingdom shared, same traits
    ("Fe", "Mollusca", "F1", "G1", None, "aragonite"),      # same genus, depth unknown, skeleton differs
])


def test_similarity_by_hand_and_order():
    m = match_relatives(MODERN, FOSSIL, TRAITS, taxonomy_weight=0.5, n_relatives=10, min_similarity=0.55)
    t = m.table
    # hand values: taxonomic distance = levels climbed / 7 (genus 1/7, family 2/7, kingdom 6/7);
    # Gower on two categorical traits = share of traits that differ among those known for both
    expected = {"Fa": 1 - 0.5 * (1 / 7) - 0.5 * 0.0,
                "Fc": 1 - 0.5 * (1 / 7) - 0.5 * 0.5,
                "Fb": 1 - 0.5 * (2 / 7) - 0.5 * 0.5,
                "Fd": 1 - 0.5 * (6 / 7) - 0.5 * 0.0,
                "Fe": 1 - 0.5 * (1 / 7) - 0.5 * 1.0}
    kept = {k: v for k, v in expected.items() if v >= 0.55}
    order = sorted(kept, key=lambda k: -kept[k])
    assert t["relative_id"].tolist() == order
    assert t["relative_rank"].tolist() == list(range(1, len(order) + 1))
    assert np.allclose(t["similarity"], [kept[k] for k in order])
    assert "M1" not in set(t["relative_id"])
    assert m.n_relatives.tolist() == [len(order)]


def test_top_k_and_threshold():
    m = match_relatives(MODERN, FOSSIL, TRAITS, taxonomy_weight=0.5, n_relatives=2, min_similarity=0.0)
    assert m.table["relative_id"].tolist() == ["Fa", "Fc"]
    m = match_relatives(MODERN, FOSSIL, TRAITS, taxonomy_weight=0.5, n_relatives=5, min_similarity=0.99)
    assert m.table.empty and m.n_relatives.tolist() == [0] and (m.index == -1).all()


def test_reasons_name_shared_rank_and_differing_traits():
    m = match_relatives(MODERN, FOSSIL, TRAITS, taxonomy_weight=0.5, n_relatives=10, min_similarity=0.0)
    reason = dict(zip(m.table["relative_id"], m.table["reason"]))
    shared = dict(zip(m.table["relative_id"], m.table["shared_rank"]))
    assert reason["Fa"] == "same genus; same traits"
    assert reason["Fc"] == "same genus; differs in Depth zone"
    assert reason["Fb"] == "same family; differs in Depth zone"
    assert reason["Fd"] == "same kingdom; same traits"
    assert reason["Fe"] == "same genus; differs in Skeleton; unknown: Depth zone"
    assert shared == {"Fa": "genus", "Fc": "genus", "Fb": "family", "Fd": "kingdom", "Fe": "genus"}


def test_ties_broken_by_taxon_id_and_taxonomy_only_weight():
    fossil = _taxa([("Z2", "Mollusca", "F1", "G1", "shelf", "calcite"),
                    ("Z1", "Mollusca", "F1", "G1", "slope", "aragonite")])
    m = match_relatives(MODERN, fossil, TRAITS, taxonomy_weight=1.0, n_relatives=2, min_similarity=0.0)
    assert m.table["relative_id"].tolist() == ["Z1", "Z2"]        # equal similarity: id order
    assert np.allclose(m.table["similarity"], 1 - 1 / 7)


def test_no_candidates():
    m = match_relatives(MODERN, FOSSIL.iloc[:0], TRAITS, n_relatives=3)
    assert m.table.empty and m.n_relatives.tolist() == [0]
