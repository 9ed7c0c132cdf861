"""Small dense linear algebra over a batch axis, never raising for one bad sample.

LAPACK through numpy handles a stack of small matrices well, but one matrix that is not
positive definite (or is singular) makes the whole call raise.  The functions here try the
fast stacked call first and fall back to one sample at a time, flagging the failures.
Every sample's arithmetic is independent of the others in its batch, so results do not
depend on how samples are grouped into tasks.
"""

from __future__ import annotations

import numpy as np


def herm(M: np.ndarray) -> np.ndarray:
    """Hermitian part of every matrix in the stack."""
    return (M + np.swapaxes(M, -1, -2).conj()) / 2


def dagger(M: np.ndarray) -> np.ndarray:
    return np.swapaxes(M, -1, -2).conj()


def cholesky(A: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lower Cholesky factors of a stack and a mask of the samples that have none.

    One stacked LAPACK call; if it refuses, the samples are factored one by one (the same
    LAPACK routine, so a sample's factor never depends on the rest of its batch).  Failed
    samples get the identity as their factor, so later arithmetic stays finite.
    """
    try:
        return np.linalg.cholesky(A), np.zeros(A.shape[0], dtype=bool)
    except np.linalg.LinAlgError:
        pass
    L = np.empty_like(A)
    bad = np.zeros(A.shape[0], dtype=bool)
    for i in range(A.shape[0]):
        try:
            L[i] = np.linalg.cholesky(A[i])
        except np.linalg.LinAlgError:
            L[i] = np.eye(A.shape[-1])
            bad[i] = True
    return L, bad


def spd_solve(M: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Solve M x = b for a stack of symmetric positive (semi)definite M; mask of failures.

    The system is scaled to unit diagonal first (Jacobi), which tames the ill-conditioned
    Schur complements near an interior-point optimum, then solved by LU with partial
    pivoting (one stacked LAPACK call, faster here than Cholesky plus triangular solves);
    if LAPACK refuses one sample, each is solved alone and the singular ones are flagged.
    """
    d = np.sqrt(np.maximum(np.diagonal(M, axis1=-2, axis2=-1), 1e-300))
    Ms = M / d[:, :, None] / d[:, None, :]
    rhs = (b / d)[..., None]
    bad = np.zeros(M.shape[0], dtype=bool)
    try:
        x = np.linalg.solve(Ms, rhs)[..., 0]
    except np.linalg.LinAlgError:
        x = np.zeros_like(b)
        for i in range(M.shape[0]):
            try:
                x[i] = np.linalg.solve(Ms[i], rhs[i])[:, 0]
            except np.linalg.LinAlgError:
                bad[i] = True
    bad |= ~np.isfinite(x).all(axis=1)
    return np.where(bad[:, None], 0.0, x / d), bad


def max_steps(L_inv: np.ndarray, D: np.ndarray) -> np.ndarray:
    """Largest alpha with X + alpha D ⪰ 0 for X = L L^H (inf when D ⪰ 0), per sample:
    -1 / lambda_min(L^-1 D L^-H)."""
    lam = np.linalg.eigvalsh(herm(L_inv @ D @ dagger(L_inv)))[:, 0]
    with np.errstate(divide="ignore"):
        return np.where(lam < 0, -1.0 / np.minimum(lam, -1e-300), np.inf)
