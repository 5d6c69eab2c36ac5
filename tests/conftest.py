"""Shared test fixtures (keep this small)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import settings

# No per-example time limit: a loaded 2-core machine runs examples slowly, and speed is
# measured in benchmarks/, never asserted in tests.
settings.register_profile("stockbias", deadline=None)
settings.load_profile("stockbias")


@pytest.fixture
def rng() -> np.random.Generator:
    """A seeded generator, the same in every test that asks for it."""
    return np.random.default_rng(20260601)
