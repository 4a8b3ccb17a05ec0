"""Regions: modern occurrences assigned to the study's polygons, and region-by-region indices of
the combined ranking (expected losses with intervals, mean risk, top-tier counts, expected loss of
taxonomic diversity)."""
from __future__ import annotations

from .core import assess_regions
from .diversity import branch_incidence, expected_diversity_loss, expected_diversity_losses
from .params import PARAMS, RegionParams
from .result import RegionResult
from .spatial import EqualArea, assign_points, equal_area_crs, region_areas_km2

__all__ = ["assess_regions", "RegionResult", "RegionParams", "PARAMS", "assign_points", "equal_area_crs",
           "EqualArea", "region_areas_km2", "branch_incidence", "expected_diversity_loss",
           "expected_diversity_losses"]
