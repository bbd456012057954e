"""The cell-list bond search used for large molecules gives exactly the all-pairs answer."""

import numpy as np
from hypothesis import given, strategies as st

from basinmark.core import geometry


def _all_pairs(numbers, positions, tolerance=1.2):
    i, j = np.triu_indices(len(numbers), 1)
    d = np.linalg.norm(positions[j] - positions[i], axis=1)
    cut = (geometry.covalent_radii[numbers[i]] + geometry.covalent_radii[numbers[j]]) * tolerance
    keep = d < cut
    return np.stack([i[keep], j[keep]], axis=1)


@given(st.integers(2, 400), st.integers(0, 2**31 - 1), st.floats(0.5, 3.0))
def test_grid_equals_all_pairs(n, seed, density):
    rng = np.random.default_rng(seed)
    numbers = rng.choice([1, 6, 7, 8, 16, 35], size=n)
    positions = rng.uniform(0, density * n ** (1 / 3) * 2, size=(n, 3))
    got = geometry._bonds_grid(numbers, positions, 1.2)
    np.testing.assert_array_equal(got, _all_pairs(numbers, positions))


def test_large_molecule_uses_grid_and_agrees():
    rng = np.random.default_rng(3)
    n = 3000
    numbers = rng.choice([1, 6, 8], size=n)
    positions = rng.uniform(0, (10.0 * n) ** (1 / 3), size=(n, 3))
    assert n > geometry.GRID_ABOVE
    np.testing.assert_array_equal(geometry.bonds_in_frame(numbers, positions), _all_pairs(numbers, positions))
