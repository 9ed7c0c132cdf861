"""Vectorisation of Hermitian matrices for the solvers' PSD cones.

Formats (``fmt``):

``"scs_complex"``  SCS's complex PSD cone ``cs``: per column c, the diagonal entry X[c,c],
                   then sqrt2 Re X[r,c] and sqrt2 Im X[r,c] for each r > c (n^2 numbers).
``"lower_real"``   SCS's real cone ``s`` on the 2n x 2n real embedding
                   [[Re X, -Im X], [Im X, Re X]]: lower triangle by columns, off-diagonals
                   times sqrt2.
``"upper_real"``   Clarabel's ``PSDTriangleConeT`` on the same embedding: upper triangle by
                   columns, off-diagonals times sqrt2.

In every format the Euclidean inner product of two vectors equals Tr(X Y) (for the real
embedding: Tr of the embedded product, i.e. 2 Tr(X Y)); this is what makes dual vectors
readable as matrices.

:func:`basis_to_cone` gives the sparse matrix whose column alpha is vec(sigma_alpha), built
from the local GGM elements by index arithmetic (no dense product elements are formed).
"""

from __future__ import annotations

from functools import lru_cache
from typing import Sequence

import numpy as np
import scipy.sparse as sp

from workers.operators.basis import local_basis

FORMATS = ("scs_complex", "lower_real", "upper_real")
SQRT2 = np.sqrt(2.0)


def cone_size(n: int, fmt: str) -> int:
    """Length of the vector of an n x n Hermitian matrix in ``fmt``."""
    if fmt == "scs_complex":
        return n * n
    m = 2 * n
    return m * (m + 1) // 2


def _local_entries(d: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Nonzeros of each local element, padded to d per element: rows, cols, values."""
    B = local_basis(d)
    rows = np.zeros((d * d, d), dtype=np.int64)
    cols = np.zeros((d * d, d), dtype=np.int64)
    vals = np.zeros((d * d, d), dtype=complex)
    for a in range(d * d):
        r, c = np.nonzero(np.abs(B[a]) > 1e-15)
        rows[a, : len(r)], cols[a, : len(r)], vals[a, : len(r)] = r, c, B[a][r, c]
    return rows, cols, vals


def product_entries(dims: Sequence[int]) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """All nonzero entries of all product elements: (alpha, row, col, value), flat arrays."""
    alpha = np.zeros(1, dtype=np.int64)
    rows = np.zeros((1, 1), dtype=np.int64)
    cols = np.zeros((1, 1), dtype=np.int64)
    vals = np.ones((1, 1), dtype=complex)
    for d in dims:
        lr, lc, lv = _local_entries(d)
        alpha = (alpha[:, None] * (d * d) + np.arange(d * d)[None, :]).reshape(-1)
        rows = (rows[:, None, :, None] * d + lr[None, :, None, :]).reshape(len(alpha), -1)
        cols = (cols[:, None, :, None] * d + lc[None, :, None, :]).reshape(len(alpha), -1)
        vals = (vals[:, None, :, None] * lv[None, :, None, :]).reshape(len(alpha), -1)
    a = np.repeat(alpha, rows.shape[1])
    r, c, v = rows.reshape(-1), cols.reshape(-1), vals.reshape(-1)
    keep = np.abs(v) > 1e-15
    return a[keep], r[keep], c[keep], v[keep]


def _complex_index(r: np.ndarray, c: np.ndarray, n: int) -> np.ndarray:
    """Position of entry (r, c), r >= c, in the ``scs_complex`` layout (of its real part)."""
    offset = c + 2 * c * (n - 1) - c * (c - 1)
    return np.where(r == c, offset, offset + 1 + 2 * (r - c - 1))


def _tri_index(i: np.ndarray, j: np.ndarray, m: int, fmt: str) -> np.ndarray:
    """Position of (i, j) in a real triangle layout of an m x m matrix."""
    if fmt == "upper_real":  # i <= j, by columns
        return j * (j + 1) // 2 + i
    # lower_real: i >= j, by columns
    return j * m - j * (j - 1) // 2 + (i - j)


def vec_entries(
    r: np.ndarray, c: np.ndarray, v: np.ndarray, n: int, fmt: str
) -> tuple[np.ndarray, np.ndarray]:
    """Map nonzero entries (r, c, v) of a Hermitian n x n matrix to (positions, values).

    Only entries with r >= c are read (the matrix is Hermitian).
    """
    low = r >= c
    r, c, v = r[low], c[low], v[low]
    diag = r == c
    if fmt == "scs_complex":
        base = _complex_index(r, c, n)
        pos = np.concatenate([base[diag], base[~diag], base[~diag] + 1])
        val = np.concatenate([v[diag].real, SQRT2 * v[~diag].real, SQRT2 * v[~diag].imag])
        return pos, val
    m = 2 * n
    # blocks of [[A, -B], [B, A]] with A = Re X, B = Im X; entries (i, j) of the triangle
    rd, cd, vd = r[diag], c[diag], v[diag]
    ro, co, vo = r[~diag], c[~diag], v[~diag]
    if fmt == "upper_real":
        i_list = [rd, rd + n, co, co + n, ro, co]
        j_list = [cd, cd + n, ro, ro + n, co + n, ro + n]
        # A[c, r] (upper), A again in the lower-right block, then the off-diagonal block
        # R[i, j+n] = -Im X[i, j]: at (r, c+n) value -Im v and at (c, r+n) value +Im v
        v_list = [vd.real, vd.real, SQRT2 * vo.real, SQRT2 * vo.real,
                  -SQRT2 * vo.imag, SQRT2 * vo.imag]
    elif fmt == "lower_real":
        i_list = [rd, rd + n, ro, ro + n, ro + n, co + n]
        j_list = [cd, cd + n, co, co + n, co, ro]
        # lower-left block R[i+n, j] = Im X[i, j]: at (r+n, c) value Im v, at (c+n, r) -Im v
        v_list = [vd.real, vd.real, SQRT2 * vo.real, SQRT2 * vo.real,
                  SQRT2 * vo.imag, -SQRT2 * vo.imag]
    else:
        raise ValueError(f"fmt={fmt!r}, expected one of {list(FORMATS)}")
    # the diagonal of the off-diagonal block would carry -Im X[r, r] = 0: nothing to add
    i, j, val = np.concatenate(i_list), np.concatenate(j_list), np.concatenate(v_list)
    return _tri_index(i, j, m, fmt), val


@lru_cache(maxsize=16)
def basis_to_cone(dims: tuple[int, ...], fmt: str) -> sp.csc_matrix:
    """Sparse matrix whose column alpha is vec(sigma_alpha) in ``fmt`` (cached per dims)."""
    n = int(np.prod(dims))
    a, r, c, v = product_entries(dims)
    low = r >= c
    a, r, c, v = a[low], r[low], c[low], v[low]
    diag = r == c
    pos, val = vec_entries(r, c, v, n, fmt)
    # vec_entries lists diagonal entries first, then the off-diagonal ones once per slot
    # they fill (2 in the complex layout, 4 in the real embeddings): repeat alpha likewise
    if fmt == "scs_complex":
        col = np.concatenate([a[diag], a[~diag], a[~diag]])
    else:
        col = np.concatenate([a[diag], a[diag]] + [a[~diag]] * 4)
    M = sp.csc_matrix((val, (pos, col)), shape=(cone_size(n, fmt), n * n))
    M.eliminate_zeros()
    return M


def matrix_to_cone(X: np.ndarray, fmt: str) -> np.ndarray:
    """Dense Hermitian matrix -> cone vector (for warm starts and tests)."""
    n = X.shape[0]
    r, c = np.tril_indices(n)
    pos, val = vec_entries(r, c, X[r, c], n, fmt)
    out = np.zeros(cone_size(n, fmt))
    np.add.at(out, pos, val)
    return out


def complex_cone_to_matrices(vecs: np.ndarray, n: int) -> np.ndarray:
    """``scs_complex`` vectors (..., n^2) -> Hermitian matrices (..., n, n), the inverse of
    :func:`matrices_to_complex_cone` (the layout is an isometry: <vec X, vec Y> = Tr(X Y))."""
    vecs = np.asarray(vecs, dtype=float)
    r, c = np.tril_indices(n)
    base = _complex_index(r, c, n)
    diag = r == c
    Y = np.zeros(vecs.shape[:-1] + (n, n), dtype=complex)
    Y[..., r[diag], c[diag]] = vecs[..., base[diag]]
    ro, co, bo = r[~diag], c[~diag], base[~diag]
    # <vec(X), y> = sum_diag X y + sum_off sqrt2 (Re X y_re + Im X y_im) = Tr(X Y) when
    # Y[r, c] = (y_re + i y_im) / sqrt2 for r > c (Hermitian completion)
    Y[..., ro, co] = (vecs[..., bo] + 1j * vecs[..., bo + 1]) / SQRT2
    Y[..., co, ro] = np.conj(Y[..., ro, co])
    return Y


def matrices_to_complex_cone(M: np.ndarray) -> np.ndarray:
    """Hermitian matrices (..., n, n) -> ``scs_complex`` vectors (..., n^2) (lower triangle)."""
    M = np.asarray(M)
    n = M.shape[-1]
    r, c = np.tril_indices(n)
    base = _complex_index(r, c, n)
    diag = r == c
    out = np.zeros(M.shape[:-2] + (n * n,))
    out[..., base[diag]] = M[..., r[diag], c[diag]].real
    low = M[..., r[~diag], c[~diag]]
    out[..., base[~diag]] = SQRT2 * low.real
    out[..., base[~diag] + 1] = SQRT2 * low.imag
    return out


def cone_to_matrix(vec: np.ndarray, n: int, fmt: str) -> np.ndarray:
    """Cone vector -> Hermitian matrix Y with <vec(X), vec> = Tr(X Y) for all Hermitian X."""
    vec = np.asarray(vec, dtype=float)
    if fmt == "scs_complex":
        return complex_cone_to_matrices(vec, n)
    m = 2 * n
    i, j = (np.triu_indices(m) if fmt == "upper_real" else np.tril_indices(m))
    R = np.zeros((m, m))
    scale = np.where(i == j, 1.0, 1.0 / SQRT2)
    R[i, j] = vec[_tri_index(i, j, m, fmt)] * scale
    R[j, i] = R[i, j]
    # Tr(R(X) R) = Tr(X Y) with Y = (R11 + R22) + i (R21 - R12)
    return (R[:n, :n] + R[n:, n:]) + 1j * (R[n:, :n] - R[:n, n:])
