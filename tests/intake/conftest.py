"""A tiny valid study, written to tmp_path, that each test spoils in one way."""
from __future__ import annotations

import copy
from pathlib import Path

import geopandas as gpd
import pandas as pd
import pytest
from shapely.geometry import Polygon
from study_files import StudyFiles

# Invented taxa of an invented fauna.
TAXA = pd.DataFrame({
    "taxon_id": ["t1", "t2", "t3", "t4", "t5", "t6", "t7", "t8"],
    "scientificName": ["Velloria", "Velloria minor", "Quastella", "Brumidia", "Ostrovela", "Ostrovela alta",
                       "Pennakia", "Tarsolum"],
    "taxonRank": ["genus", "species", "genus", "genus", "genus", "species", "genus", "genus"],
    "kingdom": ["Animalia"] * 8,
    "phylum": ["Mollusca"] * 6 + ["Brachiopoda"] * 2,
    "class": ["Bivalvia"] * 4 + ["Gastropoda"] * 2 + ["Rhynchonellata"] * 2,
    "order": ["Ostreida", "Ostreida", "Ostreida", "Pectinida", "Littorinimorpha", "Littorinimorpha",
              "Terebratulida", "Terebratulida"],
    "family": ["Vellidae", "Vellidae", "Vellidae", "Brumidae", "Ostrovelidae", "Ostrovelidae", "", "Tarsolidae"],
    "genus": ["Velloria", "Velloria", "Quastella", "Brumidia", "Ostrovela", "Ostrovela", "Pennakia", "Tarsolum"],
    "extant": ["true", "true", "false", "yes", "no", "1", "0", "TRUE"],
    "depth_zone": ["shelf", "shelf", "slope", "basin", "shelf", "slope", "basin", "shelf"],
    "body_size": ["small", "medium", "large", "small", "medium", "large", "small", "medium"],
    "length_mm": ["12.5", "8", "40", "22", "", "31", "15", "9.5"],
    "planktonic": ["yes", "no", "no", "yes", "no", "no", "yes", "no"],
})

FOSSILS = pd.DataFrame({
    "occurrenceID": [f"f{i}" for i in range(1, 13)],
    "taxon_id": ["t1", "t1", "t2", "t3", "t3", "t4", "t5", "t5", "t6", "t7", "t8", "t8"],
    "oldest_ma": ["185", "184", "56", "201.5", "", "190", "94", "93.9", "56", "252", "", "183"],
    "youngest_ma": ["183", "182", "55.5", "200", "", "186", "93", "93", "55", "251.9", "", "181"],
    "earliestAgeOrLowestStage": ["", "", "", "", "Toarcian", "", "", "", "", "", "Ypresian", ""],
    "latestAgeOrHighestStage": ["", "", "", "", "", "", "", "", "", "", "Lutetian", ""],
    "decimalLatitude": ["10.5", "11", "-5", "20", "21", "0", "45", "44.5", "-30", "60", "12", "13"],
    "decimalLongitude": ["20", "21.5", "100", "-40", "-41", "0", "150", "151", "-60", "10", "22", "23"],
    "locationID": ["L1", "L1", "L2", "L3", "L3", "L4", "L5", "L5", "L6", "L7", "L1", "L8"],
})

MODERN = pd.DataFrame({
    "occurrenceID": [f"m{i}" for i in range(1, 9)],
    "scientificName": ["Velloria", "velloria minor ", "Brumidia", "Ostrovela alta", "Tarsolum", "Velloria",
                       "Brumidia", "Tarsolum"],
    "decimalLatitude": ["1", "2", "3", "12", "13", "1.5", "2.5", "11"],
    "decimalLongitude": ["1", "2", "3", "12", "13", "1.5", "2.5", "11"],
})

REGIONS = gpd.GeoDataFrame(
    {"region_id": ["r1", "r2"], "name": ["Lower Bay", "Upper Bay"]},
    geometry=[Polygon([(0, 0), (10, 0), (10, 10), (0, 10)]), Polygon([(10, 10), (20, 10), (20, 20), (10, 20)])],
    crs="EPSG:4326",
)

CONFIG = {
    "study": {"name": "Tiny invented study", "seed": 7},
    "inputs": {"taxa": "taxa.csv", "fossil_occurrences": "fossil_occurrences.csv",
               "modern_occurrences": "modern_occurrences.csv", "regions": "regions.gpkg"},
    "traits": {
        "depth_zone": {"kind": "categorical", "levels": ["shelf", "slope", "basin"]},
        "body_size": {"kind": "ordinal", "levels": ["small", "medium", "large"]},
        "length_mm": {"kind": "numeric"},
        "planktonic": {"kind": "binary"},
    },
    "scenario": {"warming_c": 3.0},
}


class StudyBuilder(StudyFiles):
    """Holds the tables and config of a tiny study; ``write()`` puts them in a folder."""

    def __init__(self, folder: Path):
        self.folder = folder
        self.taxa = TAXA.copy()
        self.fossils = FOSSILS.copy()
        self.modern = MODERN.copy()
        self.regions = REGIONS.copy()
        self.config = copy.deepcopy(CONFIG)
        self.sep = ","
        self.encoding = "utf-8"


@pytest.fixture
def study(tmp_path) -> StudyBuilder:
    """A valid tiny study; change its tables or config, then call ``.write()``."""
    return StudyBuilder(tmp_path / "study")
