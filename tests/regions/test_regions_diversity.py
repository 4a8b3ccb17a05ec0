"""Expected loss of taxonomic diversity on a rank tree (after Faith 2008)."""
from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest

from analog.regions import branch_incidence, expected_diversity_loss


def _small_tree():
    # root -> F1 -> G1 -> {a, b};  F1 -> G2 -> {c};  root -> F2 -> G3 -> {d}
    g = nx.DiGraph()
    g.add_edges_from([("root", "F1"), ("F1", "G1"), ("G1", "a"), ("G1", "b"), ("F1", "G2"), ("G2", "c"),
                      ("root", "F2"), ("F2", "G3"), ("G3", "d")])
    return g


P = {"a": 0.5, "b": 0.4, "c": 0.2, "d": 0.9}


def test_hand_worked_small_tree():
    """Worked by hand (unit branch lengths, independent losses, Faith 2008's expected loss =
    Σ_branches Π p over the taxa below):

    all four present: F1 .5*.4*.2 = .04, G1 .5*.4 = .2, a .5, b .4, G2 .2, c .2, F2 .9, G3 .9, d .9
                      -> 4.24 of 9 branches
    only a and c:     F1 .5*.2 = .1, G1 .5, a .5, G2 .2, c .2 -> 1.5 of 5 branches
    nothing present:  0
    """
    taxa = ["a", "b", "c", "d"]
    inc, branches = branch_incidence(_small_tree(), taxa)
    assert sorted(branches) == sorted(["F1", "F2", "G1", "G2", "G3", "a", "b", "c", "d"])
    present = np.array([[1, 1, 0], [1, 0, 0], [1, 1, 0], [1, 0, 0]], dtype=bool)
    p = np.array([P[t] for t in taxa])
    loss = expected_diversity_loss(inc, present, p)
    np.testing.assert_allclose(loss, [4.24, 1.5, 0.0], rtol=1e-12)
    total = expected_diversity_loss(inc, present, np.ones(4))
    np.testing.assert_allclose(total, [9, 5, 0])


def test_matches_enumeration_of_every_outcome():
    """Exact expectation by enumerating all 2^n joint loss outcomes (brute force, no product rule)."""
    tree = _small_tree()
    tree.add_edges_from([("G3", "e"), ("F2", "G4"), ("G4", "f")])
    taxa = ["a", "b", "c", "d", "e", "f"]
    rng = np.random.default_rng(1)
    p = rng.uniform(0.05, 0.95, len(taxa))
    present = np.array([[1], [1], [0], [1], [1], [1]], dtype=bool)
    here = [t for t, x in zip(taxa, present[:, 0]) if x]
    below = {n: (nx.descendants(tree, n) | {n}) & set(here) for n in tree.nodes if tree.in_degree(n) > 0}
    expected = 0.0
    for outcome in itertools.product([0, 1], repeat=len(here)):
        lost = {t for t, o in zip(here, outcome) if o}
        prob = np.prod([p[taxa.index(t)] if t in lost else 1 - p[taxa.index(t)] for t in here])
        n_lost = sum(1 for n, d in below.items() if d and d <= lost)
        expected += prob * n_lost
    inc, _ = branch_incidence(tree, taxa)
    assert expected_diversity_loss(inc, present, p)[0] == pytest.approx(expected, rel=1e-12)


def test_draw_columns_match_single_vectors_and_edge_probabilities():
    taxa = ["a", "b", "c", "d"]
    inc, _ = branch_incidence(_small_tree(), taxa)
    present = np.ones((4, 1), dtype=bool)
    draws = np.column_stack([[0.5, 0.4, 0.2, 0.9], np.zeros(4), np.ones(4)])
    out = expected_diversity_loss(inc, present, draws)
    np.testing.assert_allclose(out[0], [4.24, 0.0, 9.0])


def test_taxon_found_by_node_attribute_and_missing_taxon_raises():
    g = nx.DiGraph()
    g.add_edge("root", "genus:G")
    g.add_node("species:x", taxon_id="x")
    g.add_edge("genus:G", "species:x")
    inc, branches = branch_incidence(g, ["x"])
    assert inc.toarray().ravel().tolist() == [1.0, 1.0]
    with pytest.raises(KeyError, match="taxon 'y' is not in the rank tree"):
        branch_incidence(g, ["y"])


def _straightforward_loss(incidence, present, p):
    """The plain formula, region by region with the default BLAS threads: the sparse product of
    every branch the region's taxa span, exponentiated, weighted by unit lengths."""
    import scipy.sparse as sp

    with np.errstate(divide="ignore"):
        logp = np.nan_to_num(np.log(np.clip(p, 0.0, 1.0)), neginf=-1e300)
    below = sp.csr_matrix(incidence).T.tocsr()
    present = sp.csc_matrix(present, dtype=float)
    out = np.zeros((present.shape[1], p.shape[1]))
    for r in range(present.shape[1]):
        idx = present.indices[present.indptr[r]:present.indptr[r + 1]]
        if not len(idx):
            continue
        sub = below[idx]
        branches = np.unique(sub.indices)
        out[r] = np.ones(len(branches)) @ np.exp(sub[:, branches].T @ logp[idx])
    return out


def test_regions_pass_gives_the_same_numbers_as_the_straightforward_product():
    """Shared exponentials for branches with one present taxon, several probability arrays in one
    pass and one BLAS thread: the same floats, bit for bit, as the plain computation (which the
    region table and regions.gpkg stored before)."""
    from analog.regions import expected_diversity_losses

    rng = np.random.default_rng(7)
    n_taxa, n_regions, n_draws = 3000, 12, 200
    g = nx.DiGraph()
    for i in range(n_taxa):  # phylum -> class -> order -> family -> taxon, uneven family sizes
        fam = int(rng.integers(0, 300))
        g.add_edges_from([("root", f"P{fam % 4}"), (f"P{fam % 4}", f"C{fam % 20}"), (f"C{fam % 20}", f"O{fam % 60}"),
                          (f"O{fam % 60}", f"F{fam}"), (f"F{fam}", f"t{i}")])
    taxa = [f"t{i}" for i in range(n_taxa)]
    inc, _ = branch_incidence(g, taxa)
    present = rng.random((n_taxa, n_regions)) < rng.uniform(0.02, 0.5, n_regions)
    present[:, -1] = False                                       # a region without taxa
    draws = rng.beta(0.7, 2.0, (n_taxa, n_draws))
    draws[rng.random(draws.shape) < 0.01] = 0.0                  # certain survival (log p = -inf)
    draws[rng.random(draws.shape) < 0.01] = 1.0
    p = draws.mean(axis=1)
    loss, total, per_draw = expected_diversity_losses(inc, present, [p, np.ones(n_taxa), draws])
    assert np.array_equal(per_draw, _straightforward_loss(inc, present, draws))
    assert np.array_equal(loss, _straightforward_loss(inc, present, p[:, None])[:, 0])
    assert np.array_equal(total, _straightforward_loss(inc, present, np.ones((n_taxa, 1)))[:, 0])
    assert np.array_equal(expected_diversity_loss(inc, present, draws), per_draw)
    assert per_draw[-1].tolist() == [0.0] * n_draws
