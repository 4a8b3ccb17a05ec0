"""Fixtures of the bad-input corpus: a fresh tiny study per test."""
from __future__ import annotations

import pytest

from corpus_study import TinyStudy


@pytest.fixture
def tiny(tmp_path) -> TinyStudy:
    """The valid tiny study (not yet written); spoil it, then call ``.write()``."""
    return TinyStudy(tmp_path / "study")
