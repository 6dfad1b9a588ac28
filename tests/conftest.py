"""Shared fixtures. The generators of invented test data live in tests/simulate.py (``from simulate import ...``;
pyproject.toml puts tests/ on the import path, so test files in every sub-folder find it)."""

import pytest

from simulate import simulate_dna


@pytest.fixture(scope="session")
def dna_alignment():
    return simulate_dna(25, 400, seed=11)
