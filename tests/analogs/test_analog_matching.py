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


# --- blocks of modern taxa -------------------------------------------------------------------

def _brute_force_matches(modern, fossil, traits, *, taxonomy_weight, n_relatives, min_similarity):
    """Whole modern x fossil matrices and a full stable sort (the straightforward way)."""
    from analog import stats
    from analog.taxonomy import taxonomic_distance_matrix

    ranks = ["kingdom", "phylum", "class", "order", "family", "genus", "taxon_id"]
    tax_d, _ = taxonomic_distance_matrix(modern[ranks].reset_index(drop=True), fossil[ranks].reset_index(drop=True))
    names = list(traits)
    levels = {n: list(traits[n].levels) for n in names if traits[n].kind == "ordinal"}
    trait_d = stats.gower_distance(modern[names].reset_index(drop=True), fossil[names].reset_index(drop=True),
                                   {n: traits[n].kind for n in names}, levels=levels)
    w = taxonomy_weight
    sim = 1.0 - np.where(np.isnan(trait_d), tax_d, w * tax_d + (1 - w) * trait_d)
    mod_ids = modern["taxon_id"].astype(str).to_numpy()
    fos_ids = fossil["taxon_id"].astype(str).to_numpy()
    sim[mod_ids[:, None] == fos_ids[None, :]] = -np.inf
    sim = np.where(np.isnan(sim), -np.inf, sim)
    by_id = np.argsort(fos_ids, kind="stable")
    order = by_id[np.argsort(-sim[:, by_id], axis=1, kind="stable")][:, :n_relatives]
    top = np.take_along_axis(sim, order, axis=1)
    keep = top >= min_similarity
    return np.where(keep, order, -1), np.where(keep, top, 0.0)


def _sim_taxa():
    from analog_sim import TRAITS as SIM_TRAITS, simulate_study

    study, _ = simulate_study(11, n_taxa=300)
    taxa = study.taxa.copy()
    # coarse numeric values and a few missing traits: many exactly tied similarities
    taxa["temp_range"] = np.round(taxa["temp_range"] / 3.0)
    taxa.loc[::17, "depth_zone"] = None
    taxa.loc[::23, "temp_range"] = np.nan
    modern = taxa[taxa["extant"]].reset_index(drop=True)
    return modern, taxa, SIM_TRAITS


def test_blocked_matching_equals_whole_matrices_for_any_block_size():
    # the same relatives, order, similarities, reasons whatever the block size, and the same
    # as the straightforward whole-matrix computation with a full stable sort
    modern, fossil, traits = _sim_taxa()
    kw = dict(taxonomy_weight=0.4, n_relatives=5, min_similarity=0.3)
    index, similarity = _brute_force_matches(modern, fossil, traits, **kw)
    tables = []
    for block_pairs in (10 ** 12, None, 1, 7 * len(fossil), 50 * len(fossil) + 3):
        m = match_relatives(modern, fossil, traits, block_pairs=block_pairs, **kw)
        np.testing.assert_array_equal(m.index, index)
        np.testing.assert_array_equal(m.similarity, similarity)
        tables.append(m.table)
    assert len(tables[0]) > 0 and (tables[0]["relative_rank"] == 5).any()
    for t in tables[1:]:
        pd.testing.assert_frame_equal(t, tables[0])


def test_top_k_stable_matches_full_stable_sort():
    from analog.analogs.matching import _top_k_stable

    rng = np.random.default_rng(3)
    sim = rng.integers(0, 4, size=(40, 30)) / 4.0          # heavy ties
    sim[rng.random(sim.shape) < 0.2] = -np.inf               # and many unusable candidates
    sim[5] = -np.inf                                         # a row with none at all
    sim[6, ::2] = -0.0                                       # signed zeros tie with zeros
    sim[6, 1::2] = 0.0
    for k in (1, 3, 30):
        np.testing.assert_array_equal(_top_k_stable(sim, k), np.argsort(-sim, axis=1, kind="stable")[:, :k])


def test_shared_rank_depth_blocks_equal_whole_matrix():
    # blank higher ranks are filled from both whole tables, so blocks match the whole matrix
    from analog.taxonomy import shared_rank_depth, shared_rank_depth_blocks

    modern, fossil, _ = _sim_taxa()
    modern = modern.copy()
    modern.loc[::3, "family"] = None          # filled from other rows of the same genus
    modern.loc[::5, "order"] = ""
    whole = shared_rank_depth(modern, fossil)
    for size in (1, 9, len(modern) + 1):
        parts = list(shared_rank_depth_blocks(modern, fossil, block_rows=size))
        np.testing.assert_array_equal(np.vstack([d for _, d in parts]), whole)
    assert (whole == 6).any() and (whole == 7).any()   # same genus and same taxon both occur
