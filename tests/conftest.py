"""Shared fixtures.

Randomness: every test draws from the ``rng`` fixture, seeded by the
environment variable ``MOTES_TEST_SEED`` (default 20261201).
Reference data: ``shared_reference`` is ``../shared/reference`` beside the
checkout; tests that need it skip with the reason when it is absent.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pytest

os.environ.setdefault("MPLBACKEND", "Agg")

REPO = Path(__file__).resolve().parents[1]
SHARED_REFERENCE = REPO.parent / "shared" / "reference"


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(int(os.environ.get("MOTES_TEST_SEED", "20261201")))


@pytest.fixture(scope="session")
def shared_reference() -> Path:
    if not SHARED_REFERENCE.is_dir():
        pytest.skip(f"external reference data not found at {SHARED_REFERENCE} (../shared/reference is provided beside the checkout in CI)")
    return SHARED_REFERENCE
