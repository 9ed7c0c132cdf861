"""Rigorous positive-semidefiniteness tests for Hermitian matrices given exactly.

Every IEEE double is a dyadic rational, so a floating-point matrix *is* an exact rational
matrix; these tests decide questions about that exact matrix, never about a rounded copy.

Exact integer representation: a Hermitian matrix is a pair of integer object arrays
``(re, im)`` and a positive integer ``denom`` with ``A = (re + i im) / denom``.  Its real
embedding ``[[re, -im], [im, re]]`` is real symmetric with every eigenvalue of A, doubled.

:func:`min_eigenvalue_lower_bound` proves ``lambda_min(A) >= c - ||E||_F`` from a
floating-point Cholesky factor L of ``A - c 1``: the residual ``E = A - c 1 - L L^T`` is
computed exactly in integers (python-flint), and for real symmetric matrices
``A = L L^T + c 1 + E  =>  lambda_min(A) >= c + lambda_min(E) >= c - ||E||_2 >= c - ||E||_F``
(Weyl's inequality; L L^T >= 0).  :func:`is_psd` turns that into an exact decision, falling
back on an exact pivoted LDL^T (rational arithmetic) when the matrix is numerically singular.
"""

from __future__ import annotations

import math
from fractions import Fraction

import flint
import numpy as np

MANTISSA_BITS = 53


def exact_integers(x: np.ndarray) -> tuple[np.ndarray, int]:
    """Integers n (object array) and an exponent e with ``x == n * 2**e`` exactly."""
    x = np.asarray(x, dtype=float)
    if not np.all(np.isfinite(x)):
        raise ValueError("exact_integers: array has non-finite entries (nan or inf)")
    mant, exp = np.frexp(x)
    m = (mant * 2.0**MANTISSA_BITS).astype(np.int64)  # exact: |mant| < 1
    exp = exp.astype(np.int64) - MANTISSA_BITS
    nz = m != 0
    e0 = int(exp[nz].min()) if nz.any() else 0
    shift = np.where(nz, exp - e0, 0)
    ints = np.array([int(a) << int(s) for a, s in zip(m.ravel(), shift.ravel())], dtype=object)
    return ints.reshape(x.shape), e0


def hermitian_integers(A: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
    """Exact ``(re, im, denom)`` of a complex floating-point matrix (see module docstring)."""
    A = np.asarray(A, dtype=complex)
    both, e = exact_integers(np.stack([A.real, A.imag]))
    if e >= 0:
        scale = 1 << e
        return both[0] * scale, both[1] * scale, 1
    return both[0], both[1], 1 << (-e)


def real_embedding(re: np.ndarray, im: np.ndarray) -> np.ndarray:
    """``[[re, -im], [im, re]]`` (object arrays stay exact)."""
    return np.block([[re, -im], [im, re]])


def _check_hermitian(re: np.ndarray, im: np.ndarray) -> None:
    if re.ndim != 2 or re.shape[0] != re.shape[1] or re.shape != im.shape:
        raise ValueError(f"matrix has shape {re.shape}, expected a square matrix")
    if np.any(re != re.T) or np.any(im != -im.T):
        raise ValueError("matrix is not exactly Hermitian; symmetrise it before the PSD test")


def _to_fmpz(M: np.ndarray) -> flint.fmpz_mat:
    return flint.fmpz_mat(M.shape[0], M.shape[1], np.asarray(M).ravel().tolist())


def _float_approx(M: np.ndarray, denom: int) -> np.ndarray:
    if denom < 2 ** 1000:  # float(int) rounds correctly; only the approximation L needs it
        return np.asarray(M, dtype=float) / float(denom)
    return np.array([v / denom for v in M.ravel()], dtype=float).reshape(M.shape)


def _sum_of_squares_bound(values) -> Fraction:
    """A rational number >= sum v^2 over exact integers v.

    Each v converts to a float within a relative 2^-52 (flint truncates, python rounds), so
    |v| <= |f| (1 + 2^-51); math.fsum rounds the exact sum of the rounded squares once; the
    factor 1 + 2^-40 covers every one of these relative errors with room to spare.
    """
    floats = [float(v) for v in values]
    if not all(abs(f) < 1e150 for f in floats):  # squares beyond float range: exact
        return Fraction(sum(int(v) ** 2 for v in values))
    return Fraction(math.fsum(f * f for f in floats)) * Fraction(2 ** 40 + 1, 2 ** 40)


def _cholesky_with_shift(F: np.ndarray) -> tuple[np.ndarray, float]:
    """Float Cholesky factor of ``F - c 1`` with c just below F's smallest eigenvalue."""
    evals = np.linalg.eigvalsh(F)
    scale = max(float(np.max(np.abs(evals))), np.finfo(float).tiny)
    tau = 4.0 * F.shape[0] * np.finfo(float).eps * scale
    for _ in range(12):
        c = float(evals[0] - tau)
        try:
            return np.linalg.cholesky(F - c * np.eye(F.shape[0])), c
        except np.linalg.LinAlgError:
            tau *= 16.0
    raise ArithmeticError("shifted Cholesky failed repeatedly; matrix may be badly scaled")


def _residual_norm_bound(M: np.ndarray, denom: int, L: np.ndarray, c: float) -> Fraction:
    """A rational upper bound on ``||M/denom - c 1 - L L^T||_F``: E is computed exactly in
    integers, the sum of its squares bounded from above (:func:`_sum_of_squares_bound`)."""
    peak = float(np.max(np.abs(L))) or 1.0
    q = MANTISSA_BITS - 3 - math.frexp(peak)[1]
    Li = np.rint(np.ldexp(L, q)).astype(np.int64)  # any L is fine: E is computed exactly
    cn, cd = c.as_integer_ratio()
    n = M.shape[0]
    # L = Li 2^{-q}; multiply E by denom * cd * a, where a, b make every term an integer
    a, b = (1 << (2 * q), 1) if q >= 0 else (1, 1 << (-2 * q))
    LLt = _to_fmpz(Li.astype(object))
    LLt = LLt * LLt.transpose()
    E = _to_fmpz(M) * (a * cd) - LLt * (denom * cd * b)
    shift = cn * denom * a
    for i in range(n):
        E[i, i] = E[i, i] - shift
    sumsq = _sum_of_squares_bound(E.entries())
    num, den = sumsq.numerator, sumsq.denominator  # sqrt(num / den) <= ceil_sqrt(num den) / den
    prod = num * den
    root = math.isqrt(prod)
    if root * root < prod:
        root += 1
    return Fraction(root, den * denom * cd * a)


def min_eigenvalue_lower_bound(re: np.ndarray, im: np.ndarray, denom: int = 1) -> Fraction:
    """A proven lower bound on the smallest eigenvalue of ``(re + i im) / denom``.

    Parameters
    ----------
    re, im
        Integer object arrays of an exactly Hermitian matrix.
    denom
        Positive integer denominator.

    Returns
    -------
    Fraction
        ``mu`` with ``lambda_min >= mu``; typically within ~n * 1e-16 * ||A|| of the truth.
    """
    _check_hermitian(re, im)
    M = real_embedding(re, im) if np.any(im != 0) else re
    L, c = _cholesky_with_shift(_float_approx(M, denom))
    return Fraction(c) - _residual_norm_bound(M, denom, L, c)


def psd_lower_bound(A: np.ndarray) -> Fraction:
    """Proven lower bound on lambda_min of an exactly Hermitian floating-point matrix A."""
    re, im, d = hermitian_integers(A)
    return min_eigenvalue_lower_bound(re, im, d)


def ldl_is_psd(M: list[list[Fraction]]) -> bool:
    """Exact PSD decision for a real symmetric rational matrix by pivoted LDL^T.

    Eliminate on a positive diagonal pivot (Schur complement of a PSD matrix is PSD); a
    negative diagonal entry, or a zero diagonal entry with a nonzero row, proves indefiniteness.
    """
    M = [list(map(Fraction, row)) for row in M]
    while M:
        diag = [M[i][i] for i in range(len(M))]
        if min(diag) < 0:
            return False
        zero = [i for i, d in enumerate(diag) if d == 0]
        if zero:
            i = zero[0]
            if any(v != 0 for v in M[i]):
                return False
            M = [row[:i] + row[i + 1:] for k, row in enumerate(M) if k != i]
            continue
        p = diag.index(max(diag))
        piv, col = M[p][p], [M[k][p] for k in range(len(M))]
        M = [[M[a][b] - col[a] * col[b] / piv for b in range(len(M)) if b != p]
             for a in range(len(M)) if a != p]
    return True


def _negative_direction(M: np.ndarray, denom: int) -> bool:
    """True if an eigenvector of the float copy proves ``v^T M v < 0`` exactly."""
    evals, vecs = np.linalg.eigh(_float_approx(M, denom))
    if evals[0] >= 0:
        return False
    v = np.rint(np.ldexp(vecs[:, 0], 40)).astype(np.int64).astype(object)
    return int(v @ M @ v) < 0


def is_psd(A: np.ndarray) -> bool:
    """Exact decision: is the Hermitian floating-point matrix A positive semidefinite?

    First a proven eigenvalue lower bound (PSD if > 0), then a proven negative direction
    (not PSD), and only for the numerically singular rest an exact rational LDL^T.
    """
    re, im, d = hermitian_integers(A)
    _check_hermitian(re, im)
    if min_eigenvalue_lower_bound(re, im, d) > 0:
        return True
    M = real_embedding(re, im)
    if _negative_direction(M, d):
        return False
    return ldl_is_psd([[Fraction(int(v)) for v in row] for row in M])
