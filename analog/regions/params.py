"""Options of the regions stage ([regions] in study.toml)."""
from __future__ import annotations

from dataclasses import dataclass, field

from ..params import Params

__all__ = ["RegionParams", "PARAMS"]

_TIERS = ("highest", "high", "moderate", "lower")  # analog.figures.style.TIER_NAMES


@dataclass(frozen=True)
class RegionParams(Params):
    """How modern occurrences are assigned to regions and how regions are summarised."""

    min_records: int = field(default=1, metadata={
        "min": 1, "max": 10000,
        "doc": "A taxon counts as present in a region when it has at least this many modern records "
               "there (1 = any record)."})
    min_taxa: int = field(default=5, metadata={
        "min": 1, "max": 100000,
        "doc": "Regions with fewer assessed taxa present are flagged 'insufficient data' (hatched on maps)."})
    min_region_records: int = field(default=20, metadata={
        "min": 1, "max": 10000000,
        "doc": "Regions with fewer modern records in all are flagged 'insufficient data'."})
    interval: float = field(default=0.9, metadata={
        "min": 0.5, "max": 0.999,
        "doc": "Coverage of the expected-loss intervals (central percentiles of the summed draws)."})
    top_tier: str = field(default="highest", metadata={
        "choices": _TIERS, "doc": "Tiers at or above this one count toward n_top_tier."})
    projection: str = field(default="auto", metadata={
        "doc": "Equal-area CRS for areas and maps: 'auto' = Lambert azimuthal equal-area centred on the "
               "centre of the regions' extent; otherwise any CRS string pyproj reads (e.g. 'EPSG:3035')."})


PARAMS = RegionParams
