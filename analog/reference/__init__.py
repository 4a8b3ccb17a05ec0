"""Bundled reference tables: the ICS geologic time scale and the warming-interval catalogue.

Both ship as package data with a source on every row (see ``SOURCES.md`` in this folder).
"""
from .intervals import INTERVAL_COLUMNS, interval_weights, load_intervals
from .timescale import (CHART_VERSION, load_timescale, normalize_stage_name, resolve_stage,
                        resolve_stages, suggest_stages)

__all__ = ["CHART_VERSION", "load_timescale", "resolve_stage", "resolve_stages", "suggest_stages",
           "normalize_stage_name", "INTERVAL_COLUMNS", "load_intervals", "interval_weights"]
