"""The validated study: the one object every stage reads.

Intake (``analog.intake.load_study``) builds a :class:`Study`; after that the
tables are trusted and no stage re-validates them.

Table contracts after intake
----------------------------
taxa : DataFrame, one row per taxon, index is a RangeIndex
    ``taxon_id`` (str, unique), ``scientificName`` (str), ``taxonRank`` (str, lower case),
    ``kingdom, phylum, class, order, family, genus`` (str or <NA>), ``extant`` (bool),
    then one column per declared trait: categorical/ordinal traits as pandas
    ``Categorical`` (ordinal ones ordered, categories in the declared order),
    numeric traits as float64, binary traits as float64 0/1 (NaN = missing).
fossil_occurrences : DataFrame
    ``occurrenceID`` (str), ``taxon_id`` (str, present in taxa), ``oldest_ma``,
    ``youngest_ma`` (float64, oldest_ma >= youngest_ma >= 0), ``decimalLatitude``,
    ``decimalLongitude`` (float64, in range), ``locationID`` (str).
modern_occurrences : DataFrame
    ``occurrenceID`` (str), ``taxon_id`` (str, present in taxa and extant),
    ``decimalLatitude``, ``decimalLongitude`` (float64, in range).
regions : GeoDataFrame
    ``region_id`` (str, unique), ``name`` (str), ``geometry`` (valid (Multi)Polygons), with a CRS.
intervals : DataFrame (the warming-interval catalogue in use)
    ``interval_id`` (str), ``name``, ``oldest_ma``, ``youngest_ma`` (float64),
    ``warming_c`` (float64), ``warming_low_c``, ``warming_high_c`` (float64, may be NaN),
    ``province`` (str), ``source`` (str), ``note`` (str).
context : GeoDataFrame or None
    Optional context layer (for example a coastline) drawn under maps.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import pandas as pd

__all__ = ["TraitSpec", "StudyConfig", "InputFile", "Study", "RANK_COLUMNS", "TRAIT_KINDS"]

RANK_COLUMNS = ("kingdom", "phylum", "class", "order", "family", "genus")
TRAIT_KINDS = ("categorical", "ordinal", "numeric", "binary")


@dataclass(frozen=True)
class TraitSpec:
    """How one trait column is read and compared.

    ``levels``: for ordinal traits the classes from low to high (required);
    for categorical traits the allowed classes (optional; ``None`` = any).
    ``reference``: the class other classes are compared against in the
    selectivity model (categorical only; default = the most common class).
    """

    name: str
    kind: Literal["categorical", "ordinal", "numeric", "binary"]
    levels: tuple[str, ...] | None = None
    reference: str | None = None
    label: str | None = None  # human-readable name for figures and the briefing

    @property
    def display(self) -> str:
        return self.label or self.name.replace("_", " ")


@dataclass(frozen=True)
class InputFile:
    """Provenance of one input file."""

    role: str
    path: Path
    sha256: str
    rows: int


@dataclass(frozen=True)
class StudyConfig:
    """study.toml after parsing; stage sections are built into their Params dataclasses."""

    name: str
    seed: int
    folder: Path
    warming_c: float = 4.0
    data_date: str | None = None
    description: str = ""
    traits: dict[str, TraitSpec] = field(default_factory=dict)
    inputs: dict[str, Path] = field(default_factory=dict)
    sections: dict[str, Any] = field(default_factory=dict)  # section name -> Params instance

    def params(self, section: str):
        """The Params instance for a stage section (defaults if the section was absent)."""
        return self.sections[section]


@dataclass
class Study:
    """A validated study. See the module docstring for the table contracts."""

    config: StudyConfig
    taxa: pd.DataFrame
    fossil_occurrences: pd.DataFrame
    modern_occurrences: pd.DataFrame
    regions: Any  # geopandas.GeoDataFrame
    intervals: pd.DataFrame
    context: Any = None  # geopandas.GeoDataFrame | None
    files: list[InputFile] = field(default_factory=list)
    # records dropped or unmatched at intake: columns role, reason, count, examples
    dropped: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(
        columns=["role", "reason", "count", "examples"]))
    warnings: list[str] = field(default_factory=list)

    @property
    def traits(self) -> dict[str, TraitSpec]:
        return self.config.traits

    def summary(self) -> str:
        t = self.taxa
        ages = self.fossil_occurrences
        span = (f"{ages['oldest_ma'].max():.1f}–{ages['youngest_ma'].min():.1f} Ma"
                if len(ages) else "no fossil occurrences")
        covered = []
        for row in self.intervals.itertuples():
            n = ((ages["oldest_ma"] >= row.youngest_ma) & (ages["youngest_ma"] <= row.oldest_ma)).sum()
            if n:
                covered.append(row.interval_id)
        lines = [
            f"Study: {self.config.name}",
            f"  taxa: {len(t)} ({int(t['extant'].sum())} extant, {int((~t['extant']).sum())} extinct)",
            f"  traits: {', '.join(f'{s.name} ({s.kind})' for s in self.traits.values()) or 'none'}",
            f"  fossil occurrences: {len(ages)} at {ages['locationID'].nunique()} localities, {span}",
            f"  modern occurrences: {len(self.modern_occurrences)}",
            f"  regions: {len(self.regions)} (CRS {self.regions.crs.to_string() if self.regions.crs else 'none'})",
            f"  warming intervals with fossil data: {len(covered)} of {len(self.intervals)}"
            + (f" ({', '.join(covered)})" if covered else ""),
            f"  scenario warming: +{self.config.warming_c:g} °C",
        ]
        return "\n".join(lines)
