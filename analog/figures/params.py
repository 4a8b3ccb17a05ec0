"""Options of the figures ([figures] in study.toml)."""
from __future__ import annotations

from dataclasses import dataclass, field

from ..params import Params

__all__ = ["FigureParams", "PARAMS"]

_FORMATS = ("png", "svg", "pdf")


@dataclass(frozen=True)
class FigureParams(Params):
    """How charts and maps are drawn and saved."""

    dpi: int = field(default=300, metadata={"min": 72, "max": 1200, "doc": "Resolution of PNG files (dots per inch)."})
    formats: tuple[str, ...] = field(default=("png", "svg"), metadata={
        "doc": "File formats of every figure, from {'png', 'svg', 'pdf'}; maps are also saved as PDF."})
    width_in: float = field(default=7.0, metadata={
        "min": 3.0, "max": 20.0, "doc": "Width of full-size figures in inches."})
    map_value: str = field(default="mean_p", metadata={
        "choices": ("mean_p", "expected_losses"),
        "doc": "What the risk maps colour: 'mean_p' = mean probability of loss among a region's assessed "
               "taxa (its expected share lost); 'expected_losses' = expected number of taxa lost."})
    label_regions: bool = field(default=True, metadata={"doc": "Write region labels on maps."})
    label_field: str = field(default="name", metadata={
        "choices": ("name", "region_id"), "doc": "Which column labels the regions."})
    max_region_labels: int = field(default=20, metadata={
        "min": 0, "max": 2000,
        "doc": "Most regions labelled on one map. With more regions than this, or more than the map has "
               "room for, the regions with the highest values are labelled and the caption says so; "
               "every region is in region_summary.csv and regions.gpkg."})
    label_values: bool = field(default=True, metadata={
        "doc": "Add each region's mapped value under its label on the main risk map."})
    show_context: bool = field(default=True, metadata={
        "doc": "Draw the study's context layer (e.g. a coastline) under the regions."})
    scale_bar: bool = field(default=True, metadata={"doc": "Draw a scale bar on maps."})
    n_top_taxa: int = field(default=20, metadata={
        "min": 1, "max": 200, "doc": "Taxa in the ranked bar chart."})
    n_labelled: int = field(default=8, metadata={
        "min": 0, "max": 100, "doc": "Disagreeing taxa named on the rank scatter."})

    def __post_init__(self):
        bad = [f for f in self.formats if f not in _FORMATS]
        if bad or not self.formats:
            raise ValueError(f"formats must be chosen from {list(_FORMATS)}, got {list(self.formats)}")


PARAMS = FigureParams
