"""Regional risk as a result object."""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pandas as pd

__all__ = ["RegionResult", "SUMMARY_COLUMNS", "PRESENCE_COLUMNS", "LINE_COLUMNS"]

SUMMARY_COLUMNS = ["region_id", "name", "n_taxa", "n_records", "expected_losses", "expected_losses_low",
                   "expected_losses_high", "mean_combined_p", "n_top_tier", "data_flag"]
LINE_COLUMNS = ["n_taxa", "expected_losses", "expected_losses_low", "expected_losses_high", "mean_p",
                "n_top_tier"]
PRESENCE_COLUMNS = ["region_id", "taxon_id", "n_records", "present"]


@dataclass
class RegionResult:
    """Region-by-region view of the combined ranking.

    Attributes
    ----------
    presence : DataFrame
        ``region_taxa.csv``: ``region_id, taxon_id, n_records, present`` (+ ``scientificName,
        combined_p, tier``), one row per taxon recorded in a region.
    region_summary : DataFrame
        ``region_summary.csv``: the contract columns, then ``analog_*`` and ``trajectory_*``
        versions (``n_taxa, expected_losses(_low/_high), mean_p, n_top_tier``), ``diversity_loss``
        with its interval, ``diversity_total``, ``mean_difference`` (analog minus trajectory over
        taxa with both lines), ``n_taxa_both``, ``n_taxa_present``, ``n_taxa_unassessed``,
        ``area_km2``, ``flag_reason``.
    layer : GeoDataFrame
        The regions (original CRS) carrying the summary columns (``regions.gpkg``).
    unassigned : int
        Modern occurrences that fall in no region.
    unassigned_occurrences : DataFrame
        Those occurrences: ``occurrenceID, taxon_id, decimalLatitude, decimalLongitude``.
    projection : str
        PROJ string of the equal-area CRS used for areas and maps.
    projection_label : str
        The same in words, for figures.
    """

    presence: pd.DataFrame
    region_summary: pd.DataFrame
    layer: Any
    unassigned: int
    unassigned_occurrences: pd.DataFrame
    projection: str
    projection_label: str
    params: Any = None
    warnings: list[str] = field(default_factory=list)

    def tables(self) -> dict[str, pd.DataFrame]:
        """Output tables keyed by file name."""
        return {"region_summary.csv": self.region_summary, "region_taxa.csv": self.presence,
                "unassigned_occurrences.csv": self.unassigned_occurrences}

    def to_frame(self) -> pd.DataFrame:
        return self.region_summary

    def summary(self) -> str:
        s = self.region_summary
        flagged = s[s["data_flag"] != "ok"]
        lines = [
            "Regions",
            f"  regions: {len(s)} ({len(flagged)} flagged 'insufficient data'"
            + (f": {', '.join(flagged['name'].astype(str))}" if len(flagged) else "") + ")",
            f"  modern occurrences in no region: {self.unassigned}",
            f"  projection for areas and maps: {self.projection_label}",
        ]
        ok = s[s["data_flag"] == "ok"].sort_values("mean_combined_p", ascending=False)
        for row in ok.head(3).itertuples():
            lines.append(f"  {row.name}: {row.n_taxa} taxa, expected losses {row.expected_losses:.1f} "
                         f"({row.expected_losses_low:.1f}–{row.expected_losses_high:.1f}), "
                         f"mean risk {row.mean_combined_p:.2f}")
        return "\n".join(lines)
