"""Dense partial trace and trace-and-replace against an independent numpy.einsum reference."""

import numpy as np

from tests.workers.dense_reference import partial_trace, trace_replace


def test_partial_trace_matches_einsum(rng):
    """Tr_B of a 3-system operator, written directly as an einsum (common practice)."""
    dims = (2, 3, 2)
    G = rng.standard_normal((12, 12)) + 1j * rng.standard_normal((12, 12))
    ref = np.einsum("abcdbf->acdf", G.reshape(2, 3, 2, 2, 3, 2)).reshape(4, 4)
    assert np.allclose(partial_trace(G, dims, [1]), ref)
    ref0 = np.einsum("abcaef->bcef", G.reshape(2, 3, 2, 2, 3, 2)).reshape(6, 6)
    assert np.allclose(partial_trace(G, dims, [0]), ref0)


def test_trace_replace_commutes_and_is_idempotent(rng):
    """_X _Y = _Y _X and _X _X = _X (workers/THEORY.md §1; Araujo et al. 2015)."""
    dims = (2, 2, 3)
    G = rng.standard_normal((12, 12))
    a = trace_replace(trace_replace(G, dims, [0]), dims, [2])
    b = trace_replace(trace_replace(G, dims, [2]), dims, [0])
    assert np.allclose(a, b)
    assert np.allclose(trace_replace(a, dims, [0]), a)
    assert np.allclose(a, trace_replace(G, dims, [0, 2]))
    assert np.isclose(np.trace(a), np.trace(G))
