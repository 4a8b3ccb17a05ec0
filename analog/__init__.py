"""analog: relative vulnerability of living taxa to warming, from deep-time fossil evidence.

The scores are relative vulnerability rankings built from how similar taxa fared
in past warming intervals and from each lineage's own occupancy history. They are
not forecasts and not formal threat assessments.
"""
from ._version import __version__
from .errors import AnalogError, AnalogWarning, InputError, Problem

__all__ = ["__version__", "AnalogError", "AnalogWarning", "InputError", "Problem"]
