"""Exact coefficients in an integer product basis, for certificates checked without rounding.

The local basis of a d-dimensional system is the *unnormalised* generalised Gell-Mann set in
the order of :func:`workers.basis.local_basis`: ``tau_0 = 1``, then ``E_jk + E_kj``, then
``-i E_jk + i E_kj`` (j < k), then ``diag(1, ..., 1, -l, 0, ...)`` for l = 1..d-1.  These have
Gaussian-integer entries and are orthogonal with ``Tr(tau_a tau_b) = n_a delta_ab``, where
``n_0 = d``, ``n = 2`` for the off-diagonal elements and ``n = l(l+1)`` for the diagonal ones.
Each element is a positive multiple of the element of the same index in
:mod:`workers.basis`, so support patterns (and all masks) are the same.

A Hermitian matrix with exact integer parts ``(re, im)`` (see :mod:`workers.exact_psd`) has
integer coefficients ``c_alpha = Tr(tau_alpha (re + i im))``, and
``A = sum_alpha (c_alpha / n_alpha) tau_alpha``.  Transforms contract one subsystem at a time
on object arrays of python integers, so no step rounds.
"""

from __future__ import annotations

from functools import lru_cache
from math import lcm
from typing import Sequence

import numpy as np


@lru_cache(maxsize=None)
def integer_local_basis(d: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Real parts, imaginary parts (shape (d*d, d, d), int) and norms n_a of the local basis."""
    if d < 1:
        raise ValueError(f"local dimension d={d}, expected d >= 1")
    re = np.zeros((d * d, d, d), dtype=np.int64)
    im = np.zeros((d * d, d, d), dtype=np.int64)
    norms = [d]
    re[0] = np.eye(d, dtype=np.int64)
    pairs = [(j, k) for j in range(d) for k in range(j + 1, d)]
    a = 1
    for j, k in pairs:
        re[a, j, k] = re[a, k, j] = 1
        norms.append(2)
        a += 1
    for j, k in pairs:
        im[a, j, k], im[a, k, j] = -1, 1
        norms.append(2)
        a += 1
    for l in range(1, d):
        re[a, np.arange(l), np.arange(l)] = 1
        re[a, l, l] = -l
        norms.append(l * (l + 1))
        a += 1
    return re, im, np.array(norms, dtype=np.int64)


def _to_pairs(M: np.ndarray, dims: Sequence[int]) -> np.ndarray:
    n = len(dims)
    T = M.reshape(tuple(dims) + tuple(dims))
    return T.transpose([ax for k in range(n) for ax in (k, n + k)]).reshape([d * d for d in dims])


def _from_pairs(T: np.ndarray, dims: Sequence[int]) -> np.ndarray:
    n = len(dims)
    D = int(np.prod(dims))
    T = T.reshape([x for d in dims for x in (d, d)])
    return T.transpose([2 * k for k in range(n)] + [2 * k + 1 for k in range(n)]).reshape(D, D)


def _contract(T: tuple[np.ndarray, np.ndarray], M: tuple[np.ndarray, np.ndarray], axis: int):
    """Complex ``M @ T`` along ``axis`` with (real, imaginary) pairs of object arrays."""
    def dot(A, B):
        return np.moveaxis(np.tensordot(A, B, axes=([1], [axis])), 0, axis)
    tr, ti = T
    mr, mi = M
    re = dot(mr, tr) - dot(mi, ti)
    im = dot(mr, ti) + dot(mi, tr)
    return re, im


def _skip(d: int) -> bool:
    return d == 1


def exact_coefficients(re: np.ndarray, im: np.ndarray, dims: Sequence[int]) -> np.ndarray:
    """Integer coefficients ``c_alpha = Tr(tau_alpha (re + i im))``, flat in C order.

    Raises ValueError if the matrix is not exactly Hermitian (then some c_alpha is complex).
    """
    dims = tuple(int(d) for d in dims)
    T = (_to_pairs(np.asarray(re, dtype=object), dims),
         _to_pairs(np.asarray(im, dtype=object), dims))
    for k, d in enumerate(dims):
        if _skip(d):
            continue
        br, bi, _ = integer_local_basis(d)
        # M[a, (i j)] = tau_a[j, i]
        M = (br.transpose(0, 2, 1).reshape(d * d, d * d).astype(object),
             bi.transpose(0, 2, 1).reshape(d * d, d * d).astype(object))
        T = _contract(T, M, k)
    if np.any(T[1] != 0):
        raise ValueError("matrix is not exactly Hermitian: its coefficients are not all real")
    return T[0].reshape(-1)


def norm_denominator(dims: Sequence[int]) -> int:
    """``prod_k lcm(local norms of subsystem k)``: clears every 1/n_alpha."""
    out = 1
    for d in dims:
        out *= lcm(*[int(x) for x in integer_local_basis(int(d))[2]])
    return out


def norms(dims: Sequence[int]) -> np.ndarray:
    """The norms ``n_alpha = Tr(tau_alpha^2)`` of all product elements (object ints, C order)."""
    out = np.ones(1, dtype=object)
    for d in dims:
        out = np.multiply.outer(out, integer_local_basis(int(d))[2].astype(object)).reshape(-1)
    return out


def exact_matrix(c: np.ndarray, dims: Sequence[int]) -> tuple[np.ndarray, np.ndarray, int]:
    """Inverse transform: ``(re, im, denom)`` with ``sum_alpha (c_alpha/n_alpha) tau_alpha``.

    ``denom`` is :func:`norm_denominator` times 1; entries are exact integers.
    """
    dims = tuple(int(d) for d in dims)
    T = (np.asarray(c, dtype=object).reshape([d * d for d in dims]),
         np.zeros([d * d for d in dims], dtype=object))
    for k, d in enumerate(dims):
        if _skip(d):
            continue
        br, bi, nrm = integer_local_basis(d)
        w = np.array([lcm(*[int(x) for x in nrm]) // int(x) for x in nrm], dtype=object)
        # K[(i j), a] = tau_a[i, j] * (lcm / n_a)
        K = (br.reshape(d * d, d * d).T.astype(object) * w[None, :],
             bi.reshape(d * d, d * d).T.astype(object) * w[None, :])
        T = _contract(T, K, k)
    return _from_pairs(T[0], dims), _from_pairs(T[1], dims), norm_denominator(dims)
