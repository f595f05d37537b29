"""Shared fixtures: a seeded generator. Subfolders add their own conftest.py."""

from __future__ import annotations

import numpy as np
import pytest


@pytest.fixture
def rng() -> np.random.Generator:
    """A local, seeded generator (never the global NumPy state)."""
    return np.random.default_rng(20261201)
