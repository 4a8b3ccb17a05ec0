"""Analog risk: trait-model log odds, relatives' evidence and Beta-binomial shrinkage."""
import numpy as np
import pytest

from analog.analogs.risk import model_log_odds, relative_evidence, shrink_to_relatives


def test_posterior_mean_by_hand():
    # Beta(m p, m (1 - p)) prior updated with k losses in n trials has posterior mean
    # (m p + k) / (m + n) (conjugate Beta-binomial; Gelman et al. 2013, Bayesian Data
    # Analysis 3rd ed., sec. 2.4 -- from memory). m=10, p=0.2, k=3, n=5 -> 5/15.
    p = shrink_to_relatives(np.array([0.2]), np.array([5.0]), np.array([3.0]), prior_strength=10)
    assert p[0] == pytest.approx(1 / 3)


def test_no_evidence_returns_the_model_and_zero_strength_the_data():
    p0 = np.array([0.1, 0.7])
    assert np.allclose(shrink_to_relatives(p0, np.zeros(2), np.zeros(2), prior_strength=10), p0)
    assert np.allclose(shrink_to_relatives(p0, np.zeros(2), np.zeros(2), prior_strength=0), p0)
    assert np.allclose(shrink_to_relatives(p0, np.array([4.0, 4.0]), np.array([1.0, 3.0]), prior_strength=0),
                       [0.25, 0.75])


def test_risk_in_unit_interval_and_monotone_in_evidence():
    rng = np.random.default_rng(0)
    p0 = rng.uniform(0, 1, 200)
    trials = rng.uniform(0, 30, 200)
    losses = trials * rng.uniform(0, 1, 200)
    p = shrink_to_relatives(p0, trials, losses, prior_strength=5)
    assert ((p >= 0) & (p <= 1)).all()
    more_lost = shrink_to_relatives(p0, trials, np.minimum(losses + 1, trials), prior_strength=5)
    assert (more_lost >= p).all() and (more_lost > p)[losses + 1 <= trials].all()
    # more surviving relatives (trials up, losses fixed) lowers risk
    more_survivors = shrink_to_relatives(p0, trials + 3, losses, prior_strength=5)
    assert (more_survivors <= p + 1e-12).all()
    # a higher model prediction raises risk
    assert (shrink_to_relatives(np.minimum(p0 + 0.1, 1), trials, losses, prior_strength=5) >= p).all()


def test_relative_evidence_by_hand():
    # two intervals with weights 1 and 0.5; three fossil taxa
    at_risk = np.array([[1.0, 1.0, 0.0], [1.0, 0.5, 1.0]])
    lost = np.array([[0.0, 1.0, 0.0], [1.0, 0.0, 0.0]])
    w = np.array([1.0, 0.5])
    index = np.array([[0, 1], [2, -1], [-1, -1]])
    sim = np.array([[0.9, 0.6], [0.8, 0.0], [0.0, 0.0]])
    trials, losses = relative_evidence(index, sim, at_risk, lost, w)
    # taxon 0: 0.9*(1+0.5) + 0.6*(1+0.25); losses 0.9*(0.5) + 0.6*(1)
    assert trials == pytest.approx([0.9 * 1.5 + 0.6 * 1.25, 0.8 * 0.5, 0.0])
    assert losses == pytest.approx([0.9 * 0.5 + 0.6 * 1.0, 0.0, 0.0])
    # a relative drawn twice in a bootstrap resample counts twice
    t2, l2 = relative_evidence(index, sim, at_risk, lost, w, counts=np.array([2.0, 0.0, 1.0]))
    assert t2 == pytest.approx([0.9 * 3.0, 0.4, 0.0]) and l2 == pytest.approx([0.9 * 1.0, 0.0, 0.0])


def test_model_log_odds_fills_missing_with_average():
    X = np.array([[1.0, 1.0, 2.0], [1.0, np.nan, 0.0]])
    beta = np.array([-1.0, 0.5, 0.25])
    fill = np.array([1.0, 0.4, 1.0])
    lp, contrib = model_log_odds(X, beta, fill)
    assert lp == pytest.approx([-1 + 0.5 + 0.5, -1 + 0.5 * 0.4])
    assert contrib[1, 1] == pytest.approx(0.2)
