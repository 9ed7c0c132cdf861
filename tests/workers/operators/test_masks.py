"""Pattern masks against the dense trace-and-replace maps they encode."""

import numpy as np

from workers.operators.basis import from_coefficients, to_coefficients
from tests.workers.dense_reference import trace_replace
from workers.operators.masks import comb_mask, valid_mask
from workers.operators.scenario import Scenario

# subsystem positions for two parties, no P/F: 0=P, 1=AI, 2=AO, 3=BI, 4=BO, 5=F
AI, AO, BI, BO = 1, 2, 3, 4


def _LV_bipartite(W, dims):
    """The bipartite L_V expansion of workers/THEORY.md §2 (Araujo et al., NJP 17, 102001 (2015),
    appendix), written with dense trace-and-replace maps."""
    t = lambda X: trace_replace(W, dims, X)  # noqa: E731
    return (t([AO]) + t([BO]) - t([AO, BO]) - t([BI, BO]) + t([AO, BI, BO]) - t([AI, AO])
            + t([AI, AO, BO]))


def test_valid_mask_is_LV(rng):
    """Zeroing the forbidden patterns equals applying L_V (dense) to a random operator."""
    s = Scenario.from_dims([2, 3, 2, 2])
    dims = s.subsystem_dims
    G = rng.standard_normal((s.dim, s.dim)) + 1j * rng.standard_normal((s.dim, s.dim))
    H = G + G.conj().T
    c = to_coefficients(H, dims)
    c[~valid_mask(s)] = 0
    assert np.allclose(from_coefficients(c, dims), _LV_bipartite(H, dims))


def test_pattern_counts_two_qubit_parties():
    """88 of 256 Pauli strings valid, 52 in each fixed order, 16 in both (workers/THEORY.md §2, 5
    counting checks)."""
    s = Scenario.from_dims([2, 2, 2, 2])
    v, ab, ba = valid_mask(s), comb_mask(s, (0, 1)), comb_mask(s, (1, 0))
    assert (v.sum(), ab.sum(), ba.sum(), (ab & ba).sum()) == (88, 52, 52, 16)
    assert np.array_equal(v, ab | ba)


def test_comb_mask_is_order_constraint(rng):
    """A<B comb conditions W = _{BO} W and _{BI BO} W = _{AO BI BO} W (workers/THEORY.md §3,
    Araujo et al. 2015): the masked projection satisfies them, and the mask keeps exactly the
    operators that satisfy them (checked on the projection of a random operator)."""
    s = Scenario.from_dims([2, 2, 3, 2])
    dims = s.subsystem_dims
    G = rng.standard_normal((s.dim, s.dim))
    c = to_coefficients(G + G.T, dims)
    c[~comb_mask(s, (0, 1))] = 0
    W = from_coefficients(c, dims)
    assert np.allclose(W, trace_replace(W, dims, [BO]))
    assert np.allclose(trace_replace(W, dims, [BI, BO]), trace_replace(W, dims, [AO, BI, BO]))
    assert np.allclose(W, trace_replace(W, dims, []))


def test_valid_dimension_formula():
    """dim of the valid subspace (workers/THEORY.md §4, derived formula; 1900 for three qubit
    parties)."""
    for dims, dp, df in [([2] * 6, 1, 1), ([2, 3, 2, 2], 2, 1), ([2, 2, 3, 1], 1, 2)]:
        s = Scenario.from_dims(dims, dp, df)
        prod_all = dp**2 * df**2 * np.prod([(p.d_in * p.d_out) ** 2 for p in s.parties])
        prod_k = np.prod([(p.d_in * p.d_out) ** 2 - p.d_in**2 + 1 for p in s.parties])
        expected = prod_all - dp**2 * prod_k + 1
        assert valid_mask(s).sum() == expected
    assert valid_mask(Scenario.from_dims([2] * 6)).sum() == 1900
