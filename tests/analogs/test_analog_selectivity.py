"""Selectivity: trait coding, Firth fits per interval, combination over age draws."""
import numpy as np
import pandas as pd

from analog_sim import BETA, simulate_study
from analog.analogs.fates import compute_fates
from analog.analogs.selectivity import build_design, fit_design, fit_intervals
from analog.study import TraitSpec


def _taxa():
    return pd.DataFrame({
        "zone": pd.Categorical(["a", "b", "b", "c", None, "b"], categories=["a", "b", "c"]),
        "size": pd.Categorical(["s", "m", "l", "s", "m", None], categories=["s", "m", "l"], ordered=True),
        "temp": [1.0, 2.0, 3.0, 4.0, 5.0, np.nan],
        "flag": [0.0, 1.0, 1.0, 0.0, np.nan, 1.0],
    })


SPECS = {"zone": TraitSpec("zone", "categorical", ("a", "b", "c")),
         "size": TraitSpec("size", "ordinal", ("s", "m", "l")),
         "temp": TraitSpec("temp", "numeric"),
         "flag": TraitSpec("flag", "binary")}


def test_design_coding_by_trait_kind():
    taxa = _taxa()
    d = build_design(taxa, SPECS)
    assert d.names == ["intercept", "zone[a]", "zone[c]", "size", "temp", "flag"]
    assert d.reference == {"zone": "b"}                  # most common class
    X, missing = d.encode(taxa)
    assert np.array_equal(X[:, 1], [1, 0, 0, 0, np.nan, 0], equal_nan=True)
    assert np.array_equal(X[:, 2], [0, 0, 0, 1, np.nan, 0], equal_nan=True)
    assert np.array_equal(X[:, 3], [0, 1, 2, 0, 1, np.nan], equal_nan=True)   # ordinal: level position
    mean, sd = 3.0, np.std([1, 2, 3, 4, 5], ddof=1)
    assert np.allclose(X[:5, 4], (np.arange(1, 6) - mean) / sd) and np.isnan(X[5, 4])
    assert missing.any(axis=1).tolist() == [False, False, False, False, True, True]


def test_declared_reference_and_unseen_class():
    specs = dict(SPECS, zone=TraitSpec("zone", "categorical", ("a", "b", "c", "d"), reference="a"))
    d = build_design(_taxa(), specs)
    assert d.reference == {"zone": "a"}
    assert [t.name for t in d.terms if t.trait == "zone"] == ["zone[b]", "zone[c]"]
    modern = pd.DataFrame({"zone": ["d", "c"], "size": ["s", "s"], "temp": [1.0, 1.0], "flag": [0.0, 0.0]})
    X, missing = d.encode(modern)
    assert missing["zone"].tolist() == [True, False]   # class never seen among fossil taxa
    assert X[1, 2] == 1.0


def test_constant_trait_is_left_out():
    taxa = _taxa().assign(flag=1.0)
    d = build_design(taxa, SPECS)
    assert "flag" not in d.names and "flag" in d.dropped


def test_fit_design_drops_columns_that_cannot_be_estimated():
    rng = np.random.default_rng(3)
    n = 60
    x = rng.normal(size=n)
    X = np.column_stack([np.ones(n), x, np.zeros(n), 2 * x])   # all-zero and collinear columns
    y = (rng.random(n) < 1 / (1 + np.exp(-x))).astype(float)
    b, v, lo, hi = fit_design(X, y, ci="wald")
    assert np.isnan(b[2]) and np.isnan(b[3]) and np.isfinite(b[:2]).all()
    from analog.stats import firth_logit
    ref = firth_logit(X[:, :2], y)
    assert np.allclose(b[:2], ref.params) and np.allclose(v[:2], ref.bse ** 2)


def test_separated_class_gives_finite_estimate():
    # every taxon in the class is lost: quasi-complete separation; Firth stays finite
    X = np.column_stack([np.ones(20), np.r_[np.ones(5), np.zeros(15)]])
    y = np.r_[np.ones(5), np.zeros(12), np.ones(3)]
    b, v, lo, hi = fit_design(X, y, ci="profile")
    assert np.isfinite(b).all() and np.isfinite(lo).all() and b[1] > 0
    assert lo[1] < b[1] < hi[1]


def _interval_fits(study, draws=1, ci="profile", seed=0):
    fd = compute_fates(study.taxa, study.fossil_occurrences, study.intervals, age_draws=draws,
                       rng=np.random.default_rng(seed))
    design = build_design(study.taxa.set_index("taxon_id").loc[fd.taxon_ids].reset_index(), study.traits)
    X, missing = design.encode(study.taxa.set_index("taxon_id").loc[fd.taxon_ids].reset_index())
    complete = ~missing.any(axis=1).to_numpy()
    fits = fit_intervals(X, complete, fd.at_risk, fd.lost, fd.interval_ids, design, ci_method=ci)
    return fits, design


def test_planted_effects_recovered_with_their_sign():
    # one large interval: every planted non-zero effect comes out with its sign and
    # the 95% profile interval covers the planted value
    study, truth = simulate_study(11, n_taxa=1500, n_intervals=1, intercepts=[-0.5])
    fits, design = _interval_fits(study)
    for j, name in enumerate(design.names[1:], start=1):
        planted = BETA[name]
        if planted != 0:
            assert np.sign(fits.estimate[0, j]) == np.sign(planted), name
        assert fits.low[0, j] < planted < fits.high[0, j], name


def test_counts_and_thin_class_flags():
    study, truth = simulate_study(5, n_taxa=300, n_intervals=2)
    fits, design = _interval_fits(study)
    j = design.names.index("depth_zone[basin]")
    taxa = study.taxa.set_index("taxon_id")
    # hand count from the planted fates: taxa of the class at risk in the first interval
    risk0 = (truth["origin"] <= 0)
    basin = (taxa["depth_zone"] == "basin").to_numpy()
    assert fits.n_at_risk[0, j] == (risk0 & basin).sum()
    assert fits.n_lost[0, j] == ((truth["lost_in"] == 0) & basin).sum()
    assert fits.n_at_risk[0, 0] == risk0.sum()
    # a class with no losses is flagged
    flagged = fit_intervals(np.array([[1.0, 1.0]] * 6 + [[1.0, 0.0]] * 10), np.ones(16, bool),
                            np.ones((1, 1, 16), bool), np.r_[np.zeros(6), np.r_[np.ones(5), np.zeros(5)]]
                            .astype(bool)[None, None, :], np.array(["W"]),
                            build_design(pd.DataFrame({"c": pd.Categorical(["x"] * 6 + ["y"] * 10)}),
                                         {"c": TraitSpec("c", "categorical")}), ci_method="wald")
    assert "c[x]" in flagged.flags[0] and "none lost" in flagged.flags[0]["c[x]"]


def test_identical_draws_give_the_plain_profile_interval():
    study, _ = simulate_study(2, n_taxa=250, n_intervals=1, age_halfwidth=0.0)
    one, _ = _interval_fits(study, draws=1)
    many, _ = _interval_fits(study, draws=5)
    assert np.allclose(one.estimate, many.estimate) and np.allclose(one.low, many.low)
    assert np.allclose(one.high, many.high)
