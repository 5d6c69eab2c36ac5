"""Shared test fixtures (keep this small)."""

from __future__ import annotations

import numpy as np
import pytest


@pytest.fixture
def rng() -> np.random.Generator:
    """A seeded generator, the same in every test that asks for it."""
    return np.random.default_rng(20260601)
