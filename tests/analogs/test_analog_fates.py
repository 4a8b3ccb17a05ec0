"""Interval fates (boundary-crosser logic) on a hand-built example with known answers."""
import numpy as np
import pandas as pd
import pytest

from analog.analogs.fates import compute_fates, draw_ages, window_fates

# One window (10, 12] Ma. Each taxon's occurrences as exact ages (zero-width ranges),
# with the fate worked out by hand from the rules in window_fates' Notes.
CASES = {
    # taxon: (occurrence ages, extant, at risk 'overlap', lost, at risk 'crossers')
    "A": ([20, 11], False, True, True, True),       # crosses the old edge, last seen inside: lost
    "B": ([20, 5], False, True, False, True),       # ranges through the window: survived
    "C": ([11.5, 10.5], False, True, True, False),  # whole range inside the window (single-interval taxon)
    "D": ([11, 8], False, True, False, False),      # originates inside the window, survives
    "E": ([30, 15], False, False, False, False),    # gone before the window
    "F": ([9, 3], False, False, False, False),      # appears after the window
    "G": ([20, 12], False, True, True, True),       # last seen exactly at the old edge: inside
    "H": ([20, 10], False, True, False, True),      # last seen exactly at the young edge: survived
    "I": ([10, 5], False, False, False, False),     # first seen exactly at the young edge: after
    "J": ([20, 11], True, True, False, True),       # extant: ranges to the Recent, survived
    "K": ([11], False, True, True, False),          # single occurrence inside the window
}
SINGLETONS = {"C", "K"}  # whole range inside the window


def _tables(cases=CASES):
    rows = [(t, a, a) for t, (ages, *_rest) in cases.items() for a in ages]
    occ = pd.DataFrame(rows, columns=["taxon_id", "oldest_ma", "youngest_ma"])
    taxa = pd.DataFrame({"taxon_id": list(cases), "extant": [c[1] for c in cases.values()]})
    intervals = pd.DataFrame({"interval_id": ["W"], "oldest_ma": [12.0], "youngest_ma": [10.0]})
    return taxa, occ, intervals


def _flags(fd, field):
    arr = getattr(fd, field)[:, 0, :]
    assert (arr == arr[0]).all()  # exact ages: every draw agrees
    return dict(zip(fd.taxon_ids, arr[0]))


@pytest.mark.parametrize("drop_singletons", [False, True])
def test_overlap_rule_hand_cases(drop_singletons):
    taxa, occ, intervals = _tables()
    fd = compute_fates(taxa, occ, intervals, age_draws=3, drop_singletons=drop_singletons,
                       rng=np.random.default_rng(1))
    risk, lost = _flags(fd, "at_risk"), _flags(fd, "lost")
    for t, (_, _, exp_risk, exp_lost, _) in CASES.items():
        dropped = drop_singletons and t in SINGLETONS
        assert risk[t] == (exp_risk and not dropped), t
        assert lost[t] == (exp_lost and not dropped), t


def test_crossers_rule_hand_cases():
    taxa, occ, intervals = _tables()
    fd = compute_fates(taxa, occ, intervals, age_draws=2, at_risk_rule="crossers", drop_singletons=False,
                       rng=np.random.default_rng(1))
    risk, lost = _flags(fd, "at_risk"), _flags(fd, "lost")
    for t, (_, _, _, exp_lost, exp_cross) in CASES.items():
        assert risk[t] == exp_cross, t
        assert lost[t] == (exp_lost and exp_cross), t


def test_without_range_through_needs_an_occurrence_in_the_window():
    cases = {"B": ([20, 5], False), "B2": ([20, 11, 5], False), "A": ([20, 11], False)}
    cases = {k: (v[0], v[1], None, None, None) for k, v in cases.items()}
    taxa, occ, intervals = _tables(cases)
    fd = compute_fates(taxa, occ, intervals, age_draws=2, range_through=False, rng=np.random.default_rng(1))
    risk, lost = _flags(fd, "at_risk"), _flags(fd, "lost")
    assert risk == {"A": True, "B": False, "B2": True}
    assert lost == {"A": True, "B": False, "B2": False}


def test_age_draws_give_the_analytic_share_lost():
    # Last occurrence dated to [9, 11] Ma, uniform: inside the window (10, 12] with probability 1/2.
    taxa = pd.DataFrame({"taxon_id": ["L"], "extant": [False]})
    occ = pd.DataFrame({"taxon_id": ["L", "L"], "oldest_ma": [20.0, 11.0], "youngest_ma": [20.0, 9.0]})
    intervals = pd.DataFrame({"interval_id": ["W"], "oldest_ma": [12.0], "youngest_ma": [10.0]})
    fd = compute_fates(taxa, occ, intervals, age_draws=4000, rng=np.random.default_rng(7))
    shares = fd.shares()
    assert shares["p_at_risk"].iloc[0] == 1.0
    # binomial SE with n=4000 is 0.0079; 4 SE tolerance
    assert abs(shares["p_lost"].iloc[0] - 0.5) < 4 * 0.0079


def test_shares_table_lists_only_pairs_ever_at_risk():
    taxa, occ, intervals = _tables()
    fd = compute_fates(taxa, occ, intervals, age_draws=2, rng=np.random.default_rng(1))
    tab = fd.shares()
    assert list(tab.columns) == ["interval_id", "taxon_id", "p_at_risk", "p_lost"]
    assert set(tab["taxon_id"]) == {"A", "B", "D", "G", "H", "J"}
    assert (tab["p_lost"] <= tab["p_at_risk"]).all()


def test_midpoints_with_one_draw_and_uniform_within_range():
    old, young = np.array([12.0, 5.0]), np.array([10.0, 5.0])
    assert np.allclose(draw_ages(old, young, n_draws=1, rng=None), [[11.0, 5.0]])
    ages = draw_ages(old, young, n_draws=500, rng=np.random.default_rng(0))
    assert ages.shape == (500, 2)
    assert (ages[:, 0] >= 10).all() and (ages[:, 0] <= 12).all() and (ages[:, 1] == 5).all()


def test_unknown_rule_is_rejected():
    with pytest.raises(ValueError, match="`at_risk_rule` was 'x'"):
        window_fates(np.ones((1, 1)), np.ones((1, 1)), [2.0], [0.5], at_risk_rule="x")


def test_coarsely_dated_occurrences_are_left_out():
    # B's only young occurrence is dated to [1, 15] Ma (14 Myr wide): with a 10 Myr limit its
    # last appearance is 11 Ma, inside the window, so it counts as lost there.
    taxa = pd.DataFrame({"taxon_id": ["A", "B", "C"], "extant": [False, False, False]})
    occ = pd.DataFrame({"taxon_id": ["A", "A", "B", "B", "B", "C"],
                        "oldest_ma": [20.0, 11.0, 20.0, 11.0, 15.0, 40.0],
                        "youngest_ma": [20.0, 11.0, 20.0, 11.0, 1.0, 10.0]})
    intervals = pd.DataFrame({"interval_id": ["W"], "oldest_ma": [12.0], "youngest_ma": [10.0]})
    fd = compute_fates(taxa, occ, intervals, age_draws=1, max_age_range=10.0, rng=None)
    assert list(fd.taxon_ids) == ["A", "B"] and fd.coarse_only_taxa == ("C",) and fd.coarse_occurrences == 2
    assert fd.lost[0, 0].tolist() == [True, True]
    everything = compute_fates(taxa, occ, intervals, age_draws=1, max_age_range=0.0, rng=None)
    assert everything.lost[0, 0].tolist() == [True, False, False]   # B's midpoint 8 Ma: survived


@pytest.mark.parametrize("range_through", [True, False])
def test_draw_blocks_give_the_same_fates_and_leave_the_generator_in_the_same_state(range_through):
    # age draws computed in blocks of draws use the generator's numbers in the same order as
    # one array of every draw: fates, appearances and the generator's next numbers agree
    from analog_sim import simulate_study

    study, _ = simulate_study(5, n_taxa=200)
    occ = study.fossil_occurrences.sample(frac=1.0, random_state=3)   # not grouped by taxon
    occ.loc[occ.index[::9], "oldest_ma"] += 30.0                        # some too coarse to use
    results, after = [], []
    for block in (None, 1, 3, 7, 50):
        rng = np.random.default_rng(42)
        fd = compute_fates(study.taxa, occ, study.intervals, age_draws=7, range_through=range_through,
                           max_age_range=10.0, rng=rng, draw_block=block)
        results.append(fd)
        after.append(rng.random(3))
    ref = results[0]
    assert ref.coarse_occurrences > 0 and ref.at_risk.any() and ref.lost.any()
    for fd, nxt in zip(results[1:], after[1:]):
        np.testing.assert_array_equal(fd.taxon_ids, ref.taxon_ids)
        for name in ("at_risk", "lost", "first", "last"):
            np.testing.assert_array_equal(getattr(fd, name), getattr(ref, name))
        assert fd.coarse_only_taxa == ref.coarse_only_taxa
        np.testing.assert_array_equal(nxt, after[0])


def test_taxon_order_and_coarse_only_taxa():
    # taxa are sorted by id whatever the row order; a taxon known only from coarse ranges has no fates
    taxa = pd.DataFrame({"taxon_id": ["b", "a", "c", "d"], "extant": False})
    occ = pd.DataFrame({"taxon_id": ["c", "b", "a", "c", "d", "b"],
                        "oldest_ma": [20.0, 15.0, 40.0, 11.0, 30.0, 11.0],
                        "youngest_ma": [20.0, 15.0, 5.0, 11.0, 30.0, 11.0]})
    intervals = pd.DataFrame({"interval_id": ["W"], "oldest_ma": [12.0], "youngest_ma": [10.0]})
    fd = compute_fates(taxa, occ, intervals, age_draws=2, max_age_range=10.0, rng=np.random.default_rng(1))
    assert fd.taxon_ids.tolist() == ["b", "c", "d"]
    assert fd.coarse_only_taxa == ("a",) and fd.coarse_occurrences == 1
    np.testing.assert_array_equal(fd.first[0], [15.0, 20.0, 30.0])
    np.testing.assert_array_equal(fd.last[0], [11.0, 11.0, 30.0])
