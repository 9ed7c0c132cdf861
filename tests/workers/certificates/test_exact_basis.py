"""Tests of the integer product basis (identities of the basis definition)."""

from __future__ import annotations

import numpy as np

from workers.operators.basis import to_coefficients
from workers.certificates.exact_basis import exact_coefficients, exact_matrix, norms
from workers.certificates.exact_psd import hermitian_integers


def test_exact_basis_matches_float_basis():
    rng = np.random.default_rng(7)
    """Integer GGM coefficients are the float ones times sqrt(n_alpha / d) (same elements,
    different normalisation; identity of the basis definition), and the inverse is exact."""
    dims = (2, 3, 1, 2)
    D = 12
    G = rng.standard_normal((D, D)) + 1j * rng.standard_normal((D, D))
    A = G + G.conj().T
    re, im, den = hermitian_integers(A)
    c = exact_coefficients(re, im, dims)
    local_d = np.array([float(n) for n in norms(dims)])
    scale = np.sqrt(local_d / D)
    assert np.allclose(np.array([float(v) / den for v in c]), to_coefficients(A, dims) * scale)
    r2, i2, d2 = exact_matrix(c, dims)
    assert np.all(r2 == re * d2) and np.all(i2 == im * d2)


