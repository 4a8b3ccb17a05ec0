"""Figures: functions that return matplotlib Figures; only the output writer saves them."""
