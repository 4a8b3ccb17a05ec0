"""The bundled catalogue of past warming intervals and the scenario weighting.

``warming_intervals.csv`` lists past episodes of volcanic CO2 release and warming with
their age window, estimated warming (°C), linked large igneous province and source.
See ``SOURCES.md`` beside this file.
"""
from __future__ import annotations

import functools
import importlib.resources

import numpy as np
import pandas as pd

from ..errors import AnalogError

__all__ = ["INTERVAL_COLUMNS", "load_intervals", "interval_weights"]

INTERVAL_COLUMNS = ("interval_id", "name", "oldest_ma", "youngest_ma", "warming_c", "warming_low_c",
                    "warming_high_c", "province", "source", "note")
_NUMERIC = ("oldest_ma", "youngest_ma", "warming_c", "warming_low_c", "warming_high_c")


@functools.lru_cache(maxsize=1)
def _table() -> pd.DataFrame:
    path = importlib.resources.files("analog.reference").joinpath("warming_intervals.csv")
    with path.open("r", encoding="utf-8") as fh:
        df = pd.read_csv(fh, dtype={c: "str" for c in INTERVAL_COLUMNS}, keep_default_na=False)
    for col in _NUMERIC:
        df[col] = pd.to_numeric(df[col].replace("", np.nan), errors="raise").astype("float64")
    return df[list(INTERVAL_COLUMNS)]


def load_intervals() -> pd.DataFrame:
    """The built-in warming-interval catalogue (a fresh copy on each call; the file is read once).

    Returns
    -------
    DataFrame
        One row per interval, oldest first, with columns ``interval_id, name, oldest_ma,
        youngest_ma, warming_c, warming_low_c, warming_high_c, province, source, note``.
        Ages in Ma (``oldest_ma > youngest_ma``); warming in °C, the range columns NaN
        where the cited source gives none.

    Notes
    -----
    The age windows are chosen for boundary-crosser fate analysis at genus level: each
    spans a few Myr around the event so that the last occurrences of its victims fall
    inside it (``note`` says how each was chosen). Warming estimates differ by proxy,
    region and baseline; ``source`` names the paper and marks what is from memory.
    """
    return _table().copy()


def interval_weights(warming_c, scenario_c: float, *, scale_c: float = 2.0) -> np.ndarray:
    """Similarity weights of past intervals to a warming scenario.

    ``w = exp(-0.5 * ((warming_c - scenario_c) / scale_c) ** 2)``: 1 for an interval
    that warmed exactly as much as the scenario, falling off smoothly with the gap.

    Parameters
    ----------
    warming_c : array_like
        Estimated warming of each interval (°C). NaN gives weight 0.
    scenario_c : float
        Scenario warming (°C), e.g. 4.0.
    scale_c : float, default=2.0
        Width of the kernel (°C); must be positive.

    Returns
    -------
    ndarray of float64
        Weights in [0, 1], same shape as ``warming_c``.

    Notes
    -----
    This Gaussian kernel is the project's stated weighting function. Kernel weighting by
    distance is common practice; the kernel and its width are a choice, not a published
    standard, so results should be checked for sensitivity to ``scale_c``.
    """
    if not np.isfinite(scale_c) or scale_c <= 0:
        raise AnalogError(f"`scale_c` must be a positive number of °C; got {scale_c!r}")
    w = np.asarray(warming_c, dtype="float64")
    out = np.exp(-0.5 * ((w - float(scenario_c)) / float(scale_c)) ** 2)
    return np.where(np.isnan(out), 0.0, out)
