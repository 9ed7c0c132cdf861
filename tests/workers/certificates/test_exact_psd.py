"""Tests of the rigorous PSD checks against sympy (a general-purpose reference)."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
import sympy

from workers.certificates.exact_psd import (exact_integers, hermitian_integers, is_psd, ldl_is_psd,
                               psd_lower_bound)


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(20240611)


def _sympy_psd(A: np.ndarray) -> bool:
    """sympy's exact PSD decision on the real embedding of the exact rational matrix."""
    R = np.block([[A.real, -A.imag], [A.imag, A.real]])
    M = sympy.Matrix([[sympy.Rational(Fraction(float(v))) for v in row] for row in R])
    return bool(M.is_positive_semidefinite)


def _cases(rng: np.random.Generator) -> list[np.ndarray]:
    """PD, singular PSD (integer Gram of low rank), barely indefinite and indefinite, real
    and complex, small integer/dyadic entries so that the exact matrix is what it looks like."""
    out = []
    for n, rank in ((3, 3), (4, 2), (5, 1), (4, 4)):
        G = rng.integers(-3, 4, size=(n, rank)) + 1j * rng.integers(-2, 3, size=(n, rank))
        P = G @ G.conj().T
        out.append(P)                                     # PSD (singular if rank < n)
        E = np.zeros((n, n))
        E[0, 0] = 2.0 ** -40
        out.append(P - E)                                 # barely indefinite if singular
        out.append(P + E)
        out.append(P - (np.trace(P).real + 1) * np.eye(n) / n)  # indefinite or negative
    return out


def test_is_psd_agrees_with_sympy(rng):
    """Exact decisions equal sympy's Matrix.is_positive_semidefinite (reference library),
    including singular PSD and barely indefinite (-2^-40 on a diagonal of a singular) cases."""
    cases = _cases(rng)
    ours = [is_psd(A) for A in cases]
    ref = [_sympy_psd(A) for A in cases]
    assert ours == ref
    assert True in ours and False in ours


def test_ldl_agrees_with_sympy(rng):
    """The exact pivoted LDL^T agrees with sympy on random small rational symmetric matrices
    of low rank plus a signed diagonal perturbation (reference: sympy)."""
    for _ in range(20):
        n, r = int(rng.integers(2, 6)), int(rng.integers(1, 4))
        G = rng.integers(-2, 3, size=(n, r))
        M = G @ G.T
        M[0, 0] += int(rng.integers(-1, 2))
        S = sympy.Matrix(M.tolist())
        assert ldl_is_psd(M.tolist()) == bool(S.is_positive_semidefinite)


def test_lower_bound_is_below_and_close_to_eigenvalue(rng):
    """lambda_min >= bound (Weyl's inequality), and the bound is within 1e-12 relative of
    numpy's eigenvalue (common practice: backward-stable Cholesky error ~ n u ||A||)."""
    for n in (5, 32, 64):
        G = rng.standard_normal((n, n)) + 1j * rng.standard_normal((n, n))
        A = G @ G.conj().T - 0.5 * n * np.eye(n)
        A = (A + A.conj().T) / 2
        lam = np.linalg.eigvalsh(A)[0]
        lb = float(psd_lower_bound(A))
        scale = np.max(np.abs(np.linalg.eigvalsh(A)))
        assert lb <= lam + 1e-13 * scale
        assert lam - lb < 1e-12 * scale


def test_lower_bound_exact_small_case():
    """diag(1, 2) has lambda_min = 1 exactly; the bound lies in [1 - 1e-14, 1] (closed form)."""
    lb = psd_lower_bound(np.diag([1.0, 2.0]).astype(complex))
    assert Fraction(1) - Fraction(1, 10**14) <= lb <= 1


def test_exact_integers_roundtrip(rng):
    """Every float equals n * 2^e exactly (IEEE doubles are dyadic rationals)."""
    x = rng.standard_normal(50) * 10.0 ** rng.integers(-30, 30, size=50)
    n, e = exact_integers(x)
    assert all(Fraction(int(a)) * Fraction(2) ** e == Fraction(float(b)) for a, b in zip(n, x))


def test_not_hermitian_is_rejected():
    """A non-Hermitian input gets a one-line ValueError (project rule for bad input)."""
    with pytest.raises(ValueError, match="not exactly Hermitian"):
        is_psd(np.array([[1.0, 2.0], [0.0, 1.0]]))
