"""Intake: read a study folder, check it against data_schemas/, and build a validated Study.

The only part of ``analog`` that reads user files. Every problem found is
collected and raised together as one :class:`~analog.errors.InputError`.
"""
from .inventory import inventory
from .load import check_study, load_study

__all__ = ["load_study", "check_study", "inventory"]
