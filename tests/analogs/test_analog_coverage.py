"""Small simulation study: do the 95% intervals cover the planted log odds?

Replicate studies are simulated with the same planted effects in every interval
(analog_sim.simulate_study); fates are unambiguous (the age ranges never straddle a
window edge), so the check is on the estimators: Firth fits with profile intervals per
interval (Heinze & Schemper 2002) and the weighted random-effects pooling with HKSJ
(k = 4 intervals).
"""
import pytest

from analog_sim import coverage_study
from analog.analogs import AnalogParams


@pytest.mark.slow
def test_coverage_of_planted_log_odds():
    res = coverage_study(40, seed0=500, params=AnalogParams(age_draws=3, n_bootstrap=0),
                         n_taxa=400, n_intervals=4)
    # 40 replicates x 5 terms x 4 intervals = 800 interval checks (binomial SE about 0.8
    # points at 95%) and 200 pooled checks (SE about 1.5 points); the bounds leave about
    # 4 SE of room below nominal.
    assert res["interval_all"] >= 0.91, res
    assert res["pooled_all"] >= 0.88, res
    assert res["interval_all"] <= 0.99, res  # not uselessly wide either
