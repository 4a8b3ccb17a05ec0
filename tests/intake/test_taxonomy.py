"""analog.taxonomy: rank tree and vectorized taxonomic distance, checked against networkx."""
from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd
import pytest

from analog.errors import AnalogWarning, InputError
from analog.taxonomy import (RANK_LEVELS, build_rank_tree, lowest_shared_rank, shared_rank_depth,
                             taxonomic_distance_matrix)
from analog.study import RANK_COLUMNS


@pytest.fixture
def taxa(study):
    # the rank columns of the tiny invented study in conftest.py
    return study.taxa[["taxon_id", "scientificName", "taxonRank", *RANK_COLUMNS]].replace({"": None})


def test_tree_structure(taxa):
    g = build_rank_tree(taxa)
    assert nx.is_arborescence(g)
    assert g.nodes["family:Vellidae"]["rank"] == "family"
    assert list(g.predecessors("taxon:t2")) == ["genus:Velloria"]
    # Pennakia (t7) has a blank family: its genus links straight to the order
    assert list(g.predecessors("genus:Pennakia")) == ["order:Terebratulida"]
    assert g.nodes["taxon:t2"]["name"] == "Velloria minor"


def test_rank_prefix_keeps_same_spelling_apart(taxa):
    t = taxa
    t.loc[2, "family"] = "Velloria"  # a family spelled like a genus (of other taxa)
    g = build_rank_tree(t)
    assert "family:Velloria" in g and "genus:Velloria" in g


def test_homonym_warns(taxa):
    t = taxa
    t.loc[7, "genus"] = "Velloria"  # a genus of the same name in another phylum
    with pytest.warns(AnalogWarning, match=r"genus:Velloria"):
        build_rank_tree(t)


def test_lowest_shared_rank_examples(taxa):
    g = build_rank_tree(taxa)
    assert lowest_shared_rank(g, "t1", "t2") == "genus"
    assert lowest_shared_rank(g, "t1", "t3") == "family"
    assert lowest_shared_rank(g, "t1", "t4") == "class"
    assert lowest_shared_rank(g, "t1", "t5") == "phylum"
    assert lowest_shared_rank(g, "t1", "t7") == "kingdom"
    assert lowest_shared_rank(g, "t7", "t8") == "order"
    assert lowest_shared_rank(g, "t3", "t3") == "taxon"


def _random_taxa(rng, n, prefix):
    # nested invented ranks: each child name includes its parent's, so there are no homonyms
    k = rng.integers(0, 2, n)
    p = rng.integers(0, 3, n)
    c = rng.integers(0, 3, n)
    o = rng.integers(0, 3, n)
    f = rng.integers(0, 4, n)
    g = rng.integers(0, 4, n)
    cols = {"kingdom": [f"K{a}" for a in k]}
    cols["phylum"] = [f"{x}P{a}" for x, a in zip(cols["kingdom"], p)]
    cols["class"] = [f"{x}C{a}" for x, a in zip(cols["phylum"], c)]
    cols["order"] = [f"{x}O{a}" for x, a in zip(cols["class"], o)]
    cols["family"] = [f"{x}F{a}" for x, a in zip(cols["order"], f)]
    cols["genus"] = [f"{x}G{a}" for x, a in zip(cols["family"], g)]
    t = pd.DataFrame(cols)
    blank = rng.random((n, 6)) < 0.15
    for j, col in enumerate(RANK_COLUMNS[1:5], start=1):  # blank some middle ranks
        t.loc[blank[:, j], col] = None
    t.insert(0, "taxon_id", [f"{prefix}{i}" for i in range(n)])
    t.insert(1, "scientificName", t["taxon_id"])
    return t


def test_matrix_matches_networkx_lowest_common_ancestor():
    rng = np.random.default_rng(3)
    a, b = _random_taxa(rng, 40, "a"), _random_taxa(rng, 25, "b")
    b.loc[:4, "taxon_id"] = a.loc[:4, "taxon_id"].to_numpy()  # a few shared taxa
    b.loc[:4, RANK_COLUMNS] = a.loc[:4, RANK_COLUMNS].to_numpy()
    both = pd.concat([a, b.iloc[5:]], ignore_index=True)
    g = build_rank_tree(both)
    distance, shared = taxonomic_distance_matrix(a, b)
    pairs = [(i, j) for i in range(len(a)) for j in range(len(b))]
    # reference: networkx.lowest_common_ancestor on the rank tree
    lca = dict(nx.tree_all_pairs_lowest_common_ancestor(
        g, root="root", pairs=[(f"taxon:{a.taxon_id[i]}", f"taxon:{b.taxon_id[j]}") for i, j in pairs]))
    for i, j in pairs:
        node = lca[(f"taxon:{a.taxon_id[i]}", f"taxon:{b.taxon_id[j]}")]
        rank = "taxon" if node.startswith("taxon:") else g.nodes[node]["rank"]
        assert shared[i, j] == rank, (i, j)
        assert distance[i, j] == pytest.approx((7 - RANK_LEVELS.index(rank)) / 7)


def test_distance_values_and_shapes(taxa):
    t = taxa
    d, s = taxonomic_distance_matrix(t, t)
    assert d.shape == (8, 8) and s.shape == (8, 8)
    assert np.allclose(np.diag(d), 0) and (s.diagonal() == "taxon").all()
    assert d[0, 1] == pytest.approx(1 / 7) and s[0, 1] == "genus"
    assert d[0, 6] == pytest.approx(6 / 7) and s[0, 6] == "kingdom"
    assert np.allclose(d, d.T)
    assert ((d >= 0) & (d <= 1)).all()


def test_nothing_shared_is_distance_one(taxa):
    t = taxa
    other = t.copy()
    other["taxon_id"] = [f"x{i}" for i in range(8)]
    other["kingdom"] = "Plantae"
    for col in RANK_COLUMNS[1:]:
        other[col] = other[col].radd("z")
    d, s = taxonomic_distance_matrix(t, other, dtype=np.float32)
    assert d.dtype == np.float32 and np.all(d == 1) and (s == "root").all()


def test_large_matrix_depth_is_int8():
    rng = np.random.default_rng(5)
    a, b = _random_taxa(rng, 2000, "a"), _random_taxa(rng, 300, "b")
    depth = shared_rank_depth(a, b)
    assert depth.dtype == np.int8 and depth.shape == (2000, 300)
    # invariance: swapping the tables transposes the result
    assert np.array_equal(shared_rank_depth(b, a), depth.T)


def test_missing_rank_columns_are_an_input_error(taxa):
    with pytest.raises(InputError, match=r"taxa_b:-:-: found no column\(s\) \['genus'\]"):
        shared_rank_depth(taxa, taxa.drop(columns="genus"))
