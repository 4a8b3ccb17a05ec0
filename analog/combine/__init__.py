"""Combine the analog and trajectory evidence: one ranking with uncertainty, tiers, and the
comparison of the two lines (rank agreement, disagreements and their drivers, weight sensitivity)."""
from __future__ import annotations

from .core import assign_tiers, combine_evidence, skill_weights
from .params import PARAMS, CombineParams
from .result import CombinedResult

__all__ = ["combine_evidence", "CombinedResult", "CombineParams", "PARAMS", "skill_weights", "assign_tiers"]
