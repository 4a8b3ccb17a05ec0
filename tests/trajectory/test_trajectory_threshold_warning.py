"""A warning when the quasi-extinction threshold sits above most living taxa's current occupancy."""
import warnings

import numpy as np
import pandas as pd
import pytest

from analog.errors import AnalogWarning
from analog.trajectory import PARAMS, _warn_if_threshold_above_most


def _risk(occupancy, p=0.99):
    n = len(occupancy)
    return pd.DataFrame({"taxon_id": [f"t{i}" for i in range(n)], "trajectory_p": np.full(n, p),
                         "current_occupancy": occupancy})


def test_warns_when_most_scored_taxa_are_below_the_threshold():
    risk = _risk([0.0004, 0.0002, 0.001, 0.05])
    with pytest.warns(AnalogWarning, match=r"3 of 4 living taxa .* threshold \(occupancy 0\.02; median current "
                                           r"occupancy 0\.0007\)"):
        _warn_if_threshold_above_most(risk, PARAMS())


def test_quiet_when_most_are_above_or_nothing_is_scored():
    with warnings.catch_warnings():
        warnings.simplefilter("error", AnalogWarning)
        _warn_if_threshold_above_most(_risk([0.1, 0.3, 0.01, 0.2]), PARAMS())   # one of four below
        _warn_if_threshold_above_most(_risk([0.001, 0.001], p=np.nan), PARAMS())  # none scored
        _warn_if_threshold_above_most(_risk([0.001, 0.2]), PARAMS(threshold_occupancy=0.0005))
