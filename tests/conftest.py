"""Shared test fixtures: one seeded random generator, paths to the repository's data."""

from pathlib import Path

import numpy as np
import pytest

REPO = Path(__file__).resolve().parent.parent
RECORDINGS = REPO / "recordings"
LEXICON_DIR = REPO / "lexicon"


@pytest.fixture
def rng():
    """A random generator with a fixed seed, so every run sees the same numbers."""
    return np.random.default_rng(20261201)


@pytest.fixture
def repo_root():
    return REPO
