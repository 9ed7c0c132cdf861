"""Product Hilbert-Schmidt basis and support patterns (workers/THEORY.md §2).

Each local system of dimension d gets the basis ``sigma_0 = 1`` followed by the d^2 - 1
generalised Gell-Mann matrices (symmetric, antisymmetric, diagonal), scaled so that
``Tr(sigma_a sigma_b) = d delta_ab``.  For d = 2 this is exactly (1, X, Y, Z).

An operator W on the product space is written as

    W = (1/D) sum_alpha c_alpha sigma_alpha,      c_alpha = Tr(sigma_alpha W),

with ``sigma_alpha`` the tensor product of local elements and D the total dimension.  The
*pattern* of a multi-index alpha is the bitmask of subsystems on which it is nontrivial; every
trace-and-replace map of workers/THEORY.md keeps or kills whole patterns.

All transforms are tensor contractions, one local system at a time; nothing is looped over
the D^2 product elements.
"""

from __future__ import annotations

from functools import lru_cache
from typing import Sequence

import numpy as np


@lru_cache(maxsize=None)
def local_basis(d: int) -> np.ndarray:
    """Orthogonal Hermitian basis of d x d matrices, identity first.

    Returns
    -------
    ndarray, shape (d*d, d, d)
        ``B[0] = 1``, ``B[1:]`` traceless, ``Tr(B[a] B[b]) = d * delta_ab``.
    """
    if d < 1:
        raise ValueError(f"local dimension d={d}, expected d >= 1")
    mats = [np.eye(d, dtype=complex)]
    scale = np.sqrt(d / 2.0)
    pairs = [(j, k) for j in range(d) for k in range(j + 1, d)]
    for j, k in pairs:
        m = np.zeros((d, d), dtype=complex)
        m[j, k] = m[k, j] = 1.0
        mats.append(scale * m)
    for j, k in pairs:
        m = np.zeros((d, d), dtype=complex)
        m[j, k], m[k, j] = -1j, 1j
        mats.append(scale * m)
    for l in range(1, d):
        m = np.zeros((d, d), dtype=complex)
        m[np.arange(l), np.arange(l)] = 1.0
        m[l, l] = -l
        mats.append(scale * np.sqrt(2.0 / (l * (l + 1))) * m)
    B = np.array(mats)
    B.setflags(write=False)
    return B


def _to_local_pairs(W: np.ndarray, dims: Sequence[int]) -> np.ndarray:
    """Reshape a D x D matrix to axes (i1 j1, i2 j2, ...) of sizes d_k^2."""
    n = len(dims)
    T = W.reshape(tuple(dims) + tuple(dims))
    order = [ax for k in range(n) for ax in (k, n + k)]
    return T.transpose(order).reshape([d * d for d in dims])


def _from_local_pairs(T: np.ndarray, dims: Sequence[int]) -> np.ndarray:
    n = len(dims)
    D = int(np.prod(dims))
    T = T.reshape([x for d in dims for x in (d, d)])
    order = [2 * k for k in range(n)] + [2 * k + 1 for k in range(n)]
    return T.transpose(order).reshape(D, D)


def _apply_local(T: np.ndarray, mats: Sequence[np.ndarray]) -> np.ndarray:
    """Apply ``mats[k]`` (shape (m_k, d_k^2)) along axis k of T, for every k."""
    for k, M in enumerate(mats):
        if M.shape[0] == 1 and M.shape[1] == 1 and M[0, 0] == 1:
            continue
        T = np.moveaxis(np.tensordot(M, T, axes=([1], [k])), 0, k)
    return T


def to_coefficients(W: np.ndarray, dims: Sequence[int]) -> np.ndarray:
    """Coefficients ``c_alpha = Re Tr(sigma_alpha W)``, flattened in C order over alpha.

    For Hermitian W these are exactly the expansion coefficients; for a non-Hermitian W they
    are those of its Hermitian part.
    """
    dims = tuple(int(d) for d in dims)
    D = int(np.prod(dims))
    W = np.asarray(W)
    if W.shape != (D, D):
        raise ValueError(f"dims={list(dims)} multiply to {D} but the operator is {W.shape}")
    # M[a, (i j)] = sigma_a[j, i], so that sum_ij M[a,(ij)] W[i,j] = Tr(sigma_a W)
    mats = [local_basis(d).transpose(0, 2, 1).reshape(d * d, d * d) for d in dims]
    c = _apply_local(_to_local_pairs(W.astype(complex, copy=False), dims), mats)
    return np.ascontiguousarray(c.real.reshape(-1))


def to_coefficients_stack(Ws: np.ndarray, dims: Sequence[int]) -> np.ndarray:
    """:func:`to_coefficients` of every matrix of a stack (k, D, D): shape (k, D^2)."""
    dims = tuple(int(d) for d in dims)
    k, n = Ws.shape[0], len(dims)
    T = Ws.astype(complex, copy=False).reshape((k,) + dims + dims)
    order = [0] + [1 + ax for j in range(n) for ax in (j, n + j)]
    T = T.transpose(order).reshape([k] + [d * d for d in dims])
    mats = [local_basis(d).transpose(0, 2, 1).reshape(d * d, d * d) for d in dims]
    for j, M in enumerate(mats):
        if M.shape != (1, 1):
            T = np.moveaxis(np.tensordot(M, T, axes=([1], [j + 1])), 0, j + 1)
    return np.ascontiguousarray(T.real.reshape(k, -1))


def from_coefficients_stack(cs: np.ndarray, dims: Sequence[int]) -> np.ndarray:
    """:func:`from_coefficients` of every row of ``cs`` (k, D^2): shape (k, D, D)."""
    dims = tuple(int(d) for d in dims)
    k, n, D = cs.shape[0], len(dims), int(np.prod(dims))
    T = np.asarray(cs, dtype=float).reshape([k] + [d * d for d in dims]).astype(complex)
    for j, d in enumerate(dims):
        if d > 1:
            M = local_basis(d).reshape(d * d, d * d).T
            T = np.moveaxis(np.tensordot(M, T, axes=([1], [j + 1])), 0, j + 1)
    T = T.reshape([k] + [x for d in dims for x in (d, d)])
    order = [0] + [1 + 2 * j for j in range(n)] + [2 + 2 * j for j in range(n)]
    return T.transpose(order).reshape(k, D, D) / D


def from_coefficients(c: np.ndarray, dims: Sequence[int]) -> np.ndarray:
    """Inverse of :func:`to_coefficients`: ``W = (1/D) sum_alpha c_alpha sigma_alpha``."""
    dims = tuple(int(d) for d in dims)
    D = int(np.prod(dims))
    c = np.asarray(c, dtype=float)
    if c.size != D * D:
        raise ValueError(f"coefficient vector has {c.size} entries, expected {D * D}")
    mats = [local_basis(d).reshape(d * d, d * d).T for d in dims]
    T = _apply_local(c.reshape([d * d for d in dims]).astype(complex), mats)
    return _from_local_pairs(T, dims) / D


@lru_cache(maxsize=64)
def pattern_codes(dims: tuple[int, ...]) -> np.ndarray:
    """Bitmask (bit s = nontrivial on subsystem s) of every multi-index, C order."""
    code = np.zeros([d * d for d in dims], dtype=np.int64)
    for s, d in enumerate(dims):
        shape = [1] * len(dims)
        shape[s] = d * d
        code = code | ((np.arange(d * d) > 0).astype(np.int64) << s).reshape(shape)
    out = code.reshape(-1)
    out.setflags(write=False)
    return out


def nontrivial_bits(dims: Sequence[int]) -> int:
    """Bitmask of the subsystems with dimension >= 2 (the only ones a pattern can use)."""
    return sum(1 << s for s, d in enumerate(dims) if d > 1)


def pattern_sizes(dims: Sequence[int]) -> dict[int, int]:
    """Number of basis elements with each pattern: ``prod_{s in pattern} (d_s^2 - 1)``."""
    codes, counts = np.unique(pattern_codes(tuple(dims)), return_counts=True)
    return {int(c): int(n) for c, n in zip(codes, counts)}


def bits_of(indices: Sequence[int]) -> int:
    """Bitmask with the given subsystem positions set."""
    m = 0
    for i in indices:
        m |= 1 << i
    return m


def basis_element(alpha: Sequence[int], dims: Sequence[int]) -> np.ndarray:
    """The product element ``sigma_alpha`` as a dense matrix (for tests and small cases)."""
    out = np.ones((1, 1), dtype=complex)
    for a, d in zip(alpha, dims):
        out = np.kron(out, local_basis(d)[a])
    return out
