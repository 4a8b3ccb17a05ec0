"""Hypothesis profiles for the property-based tests in this folder.

``fuzz`` (the default) is small and deterministic so the suite stays quick and
CI sees the same examples on every run; ``fuzz-deep`` is for a longer local
search (``HYPOTHESIS_PROFILE=fuzz-deep pytest tests/fuzz``).
"""
import os

from hypothesis import HealthCheck, settings

settings.register_profile(
    "fuzz",
    max_examples=30,
    deadline=None,
    derandomize=True,
    database=None,   # derandomized runs need no example database; keep the checkout clean
    print_blob=True,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.register_profile(
    "fuzz-deep",
    max_examples=2000,
    deadline=None,
    derandomize=False,
    print_blob=True,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "fuzz"))
