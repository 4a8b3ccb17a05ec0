"""Analog evidence: how taxa with similar traits fared in past intervals of volcanic CO2 release and warming.

The stage entry point is :func:`run_analog`; its parts (fates, selectivity,
matching, risk) can be called one by one from a notebook.
"""
from __future__ import annotations

from .params import PARAMS, AnalogParams
from .stage import AnalogResult, run_analog

__all__ = ["run_analog", "AnalogResult", "AnalogParams", "PARAMS"]
