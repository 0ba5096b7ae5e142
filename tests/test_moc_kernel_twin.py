"""The compiled interior update agrees with its plain numpy twin (generated states)."""

import numpy as np
import pytest

from models.moc_kernel import advance_interior
from models.moc_reference import reference_advance_interior


def random_pipes(seed, unsteady):
    rng = np.random.default_rng(seed)
    reaches = np.array([7, 1, 30, 12], dtype=np.int64)
    first = np.concatenate([[0], np.cumsum(reaches + 1)[:-1]]).astype(np.int64)
    n = int(np.sum(reaches + 1))
    b = rng.uniform(500.0, 5000.0, reaches.size)
    r = rng.uniform(0.0, 50.0, reaches.size)
    kb = 0.5 * rng.uniform(0.003, 0.03, reaches.size) * b if unsteady else np.zeros(reaches.size)
    h = rng.uniform(-5.0, 60.0, n)
    q = rng.uniform(-0.05, 0.05, n)
    hv = np.full(n, -10.0) + rng.uniform(-1.0, 1.0, n)
    return first, reaches, b, r, kb, hv, h, q


@pytest.mark.parametrize("unsteady", [False, True])
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_kernel_matches_numpy_twin(seed, unsteady):
    first, reaches, b, r, kb, hv, h, q = random_pipes(seed, unsteady)
    compiled = advance_interior(40, first, reaches, b, r, kb, hv, h.copy(), q.copy(), q.copy(), 0.01)
    twin = reference_advance_interior(40, first, reaches, b, r, kb, hv, h.copy(), q.copy(), q.copy(),
                                      0.01)
    assert np.all(np.isfinite(compiled))
    np.testing.assert_allclose(compiled, twin, rtol=1e-12, atol=1e-9)


def test_random_states_do_cavitate():
    first, reaches, b, r, kb, hv, h, q = random_pipes(4, False)
    h[5] = -30.0
    compiled = advance_interior(3, first, reaches, b, r, kb, hv, h.copy(), q.copy(), q.copy(), 0.01)
    twin = reference_advance_interior(3, first, reaches, b, r, kb, hv, h.copy(), q.copy(), q.copy(), 0.01)
    np.testing.assert_allclose(compiled, twin, rtol=1e-12, atol=1e-9)
