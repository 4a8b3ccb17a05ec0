"""The HTML briefing: one self-contained page for the study and one per region.

:func:`build_briefing` returns the pages as text; the output writer saves them.
"""
from .render import build_briefing, region_page_name

__all__ = ["build_briefing", "region_page_name"]
