"""The bundled geologic time scale: ICS stage, series and system names with numeric ages.

The table ``ics_stages.csv`` ships with the package. Every Phanerozoic stage of the
International Chronostratigraphic Chart is there, plus series, sub-series, sub-systems,
systems, erathems and the eonothem, so that occurrence tables may give ages as names
("Toarcian", "Late Permian", "Cretaceous") instead of numbers. Each row names its
source; see ``SOURCES.md`` beside this file.
"""
from __future__ import annotations

import difflib
import functools
import importlib.resources
import re
import unicodedata

import numpy as np
import pandas as pd

__all__ = ["CHART_VERSION", "load_timescale", "resolve_stage", "resolve_stages", "suggest_stages",
           "normalize_stage_name"]

#: Version of the ICS International Chronostratigraphic Chart the table copies.
CHART_VERSION = "v2023/09"

_COLUMNS = ["name", "rank", "parent_series", "parent_system", "oldest_ma", "youngest_ma",
            "base_uncertainty_ma", "source", "aliases"]
# Leading words that mean the same thing in time (Early) and rock (Lower) terms.
_SYNONYMS = {"early": "lower", "late": "upper", "mid": "middle"}
# Trailing rank words people add to names ("Toarcian Stage", "Jurassic Period").
_RANK_WORDS = {"stage", "age", "series", "epoch", "subseries", "subepoch", "system", "period",
               "subsystem", "subperiod", "erathem", "era"}


def normalize_stage_name(name) -> str:
    """The lookup key of a chronostratigraphic name.

    Trims, folds case and accents, unifies dashes and spaces, turns a leading
    ``Early``/``Late``/``Mid`` into ``lower``/``upper``/``middle`` and drops a
    trailing rank word (``Stage``, ``Epoch``, ``Period`` ...) unless the name is a
    numbered Cambrian unit ("Stage 4").

    Parameters
    ----------
    name : object
        The name as written; anything that is not a string gives ``""``.

    Returns
    -------
    str
        The normalized key.
    """
    if not isinstance(name, str):
        return ""
    text = unicodedata.normalize("NFKD", name)
    text = "".join(ch for ch in text if not unicodedata.combining(ch))
    text = re.sub(r"[\u2010-\u2015\-_]+", " ", text.casefold())
    words = text.split()
    if not words:
        return ""
    if words[0] in _SYNONYMS:
        words[0] = _SYNONYMS[words[0]]
    if len(words) > 1 and words[-1] in _RANK_WORDS:
        words = words[:-1]
    return " ".join(words)


@functools.lru_cache(maxsize=1)
def _table() -> pd.DataFrame:
    path = importlib.resources.files("analog.reference").joinpath("ics_stages.csv")
    with path.open("r", encoding="utf-8") as fh:
        df = pd.read_csv(fh, dtype={c: "str" for c in _COLUMNS}, keep_default_na=False)
    for col in ("oldest_ma", "youngest_ma", "base_uncertainty_ma"):
        df[col] = pd.to_numeric(df[col].replace("", np.nan), errors="raise").astype("float64")
    return df[_COLUMNS]


@functools.lru_cache(maxsize=1)
def _lookup() -> dict[str, tuple[str, float, float]]:
    """normalized name or alias -> (official name, oldest_ma, youngest_ma)."""
    out: dict[str, tuple[str, float, float]] = {}
    for row in _table().itertuples(index=False):
        entry = (row.name, float(row.oldest_ma), float(row.youngest_ma))
        keys = [row.name] + [a for a in row.aliases.split("|") if a]
        for key in keys:
            out.setdefault(normalize_stage_name(key), entry)
    return out


def load_timescale() -> pd.DataFrame:
    """The bundled time scale as a table (a fresh copy on each call; the file is read once).

    Returns
    -------
    DataFrame
        Columns ``name, rank, parent_series, parent_system, oldest_ma, youngest_ma,
        base_uncertainty_ma, source, aliases``. ``rank`` is one of ``'stage'``,
        ``'subseries'``, ``'series'``, ``'subsystem'``, ``'system'``, ``'erathem'``,
        ``'eonothem'``. Ages in Ma; ``oldest_ma`` is the unit's base, ``youngest_ma`` its
        top. ``base_uncertainty_ma`` is the chart's ± on the base (NaN where the chart
        gives none). ``aliases`` lists accepted other names, separated by ``|``.

    Notes
    -----
    Base ages are those of the ICS International Chronostratigraphic Chart, version
    :data:`CHART_VERSION`. Informal sub-series (e.g. "Middle Miocene") are bounded by
    the chart's stage bases, as is common practice; their ``source`` says so.

    References
    ----------
    Cohen, K. M., Finney, S. C., Gibbard, P. L. & Fan, J.-X. (2013, updated). The ICS
    International Chronostratigraphic Chart. Episodes 36(3): 199-204.
    """
    return _table().copy()


def resolve_stage(name) -> tuple[float, float] | None:
    """Numeric age range of a chronostratigraphic name.

    Parameters
    ----------
    name : str
        A stage, series or system name, e.g. ``"Toarcian"``, ``"early jurassic"``,
        ``" Late Permian "``, ``"Maestrichtian"``. Matching trims, folds case and
        accents, and treats Early/Lower, Late/Upper as the same.

    Returns
    -------
    tuple of float or None
        ``(oldest_ma, youngest_ma)``, or ``None`` if the name is unknown.
    """
    hit = _lookup().get(normalize_stage_name(name))
    return None if hit is None else (hit[1], hit[2])


def resolve_stages(names: pd.Series) -> pd.DataFrame:
    """Vectorized :func:`resolve_stage` over a column of names.

    Parameters
    ----------
    names : Series
        Names; missing values and unknown names give NaN ages.

    Returns
    -------
    DataFrame
        Same index as ``names``; float64 columns ``oldest_ma`` and ``youngest_ma``.
    """
    names = pd.Series(names)
    lookup = _lookup()
    codes, uniques = pd.factorize(names, use_na_sentinel=True)  # missing -> -1
    hits = [lookup.get(normalize_stage_name(u)) for u in uniques]
    table = np.array([(np.nan, np.nan) if h is None else (h[1], h[2]) for h in hits] + [(np.nan, np.nan)],
                     dtype="float64").reshape(-1, 2)
    ages = table[np.where(codes < 0, len(hits), codes)]
    oldest, youngest = ages[:, 0], ages[:, 1]
    return pd.DataFrame({"oldest_ma": oldest, "youngest_ma": youngest}, index=names.index)


def suggest_stages(name, n: int = 3, *, cutoff: float = 0.6) -> list[str]:
    """Closest official names to an unknown one, best first.

    Parameters
    ----------
    name : str
        The name that did not resolve.
    n : int, default=3
        Most suggestions to return.
    cutoff : float, default=0.6
        Least similarity (``difflib.SequenceMatcher`` ratio on normalized names) for a
        suggestion; if nothing reaches it, the bar is lowered once to ``cutoff - 0.2``.

    Returns
    -------
    list of str
        Official names (aliases are mapped to the unit they name), without repeats.
    """
    key = normalize_stage_name(name)
    if not key:
        return []
    lookup = _lookup()
    out: list[str] = []
    for bar in (cutoff, cutoff - 0.2):
        for match in difflib.get_close_matches(key, list(lookup), n=4 * n, cutoff=bar):
            official = lookup[match][0]
            if official not in out:
                out.append(official)
        if out:
            break
    return out[:n]
