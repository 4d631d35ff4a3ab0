"""Shared tiny fixtures. Helpers for one module live in that module's test file."""

from __future__ import annotations

import numpy as np
import pytest


@pytest.fixture
def rng() -> np.random.Generator:
    """A seeded generator: tests are deterministic."""
    return np.random.default_rng(20261202)
