"""Exact coefficients in an integer product basis, for certificates checked without rounding.

The local basis of a d-dimensional system is the *unnormalised* generalised Gell-Mann set in
the order of :func:`workers.operators.basis.local_basis`: ``tau_0 = 1``, then ``E_jk + E_kj``, then
``-i E_jk + i E_kj`` (j < k), then ``diag(1, ..., 1, -l, 0, ...)`` for l = 1..d-1.  These have
Gaussian-integer entries and are orthogonal with ``Tr(tau_a tau_b) = n_a delta_ab``, where
``n_0 = d``, ``n = 2`` for the off-diagonal elements and ``n = l(l+1)`` for the diagonal ones.
Each element is a positive multiple of the element of the same index in
:mod:`workers.operators.basis`, so support patterns (and all masks) are the same.

A Hermitian matrix with exact integer parts ``(re, im)`` (see :mod:`workers.certificates.exact_psd`)
has integer coefficients ``c_alpha = Tr(tau_alpha (re + i im))``, and
``A = sum_alpha (c_alpha / n_alpha) tau_alpha``.  Transforms contract one subsystem at a time
with small integer matrices, so no step rounds: the python integers are cut into limbs of
``b`` bits, each limb is transformed in float64 (every partial sum is an integer below
``2^b`` times the transform's growth factor, checked to stay below 2^53, so floating point
is exact there), and the limbs' results are recombined in python integers.
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


def _growth(mats) -> int:
    """Factor by which the transform can grow the largest absolute entry (per subsystem,
    the largest row sum of |real| + |imaginary| parts of its matrix, multiplied)."""
    g = 1
    for mr, mi in mats:
        g *= int(np.max(np.sum(np.abs(mr.astype(np.int64)) + np.abs(mi.astype(np.int64)),
                               axis=1)))
    return g


def _exact_transform(tr: np.ndarray, ti: np.ndarray, mats, axes) -> tuple[np.ndarray, np.ndarray]:
    """``mats[k]`` (integer (re, im) pairs) applied along ``axes[k]`` of the complex integer
    array tr + i ti (object arrays), exactly."""
    bits = 52 - max(1, _growth(mats)).bit_length() - 1
    big = int(max(np.max(np.abs(tr), initial=0), np.max(np.abs(ti), initial=0)))
    n_limbs = max(1, -(-big.bit_length() // bits))
    mask = (1 << bits) - 1
    fmats = [(mr.astype(float), mi.astype(float)) for mr, mi in mats]
    out_r = np.zeros(tr.shape, dtype=object)
    out_i = np.zeros(ti.shape, dtype=object)
    signs = [np.where(tr < 0, -1, 1), np.where(ti < 0, -1, 1)]
    mags = [np.abs(tr), np.abs(ti)]
    for t in range(n_limbs):
        parts = [((m >> (bits * t)) & mask) * sg for m, sg in zip(mags, signs)]
        pr, pi = (np.asarray(x, dtype=np.int64).astype(float) for x in parts)
        for (mr, mi), ax in zip(fmats, axes):
            pr, pi = _contract((pr, pi), (mr, mi), ax)
        out_r = out_r + (np.rint(pr).astype(np.int64).astype(object) << (bits * t))
        out_i = out_i + (np.rint(pi).astype(np.int64).astype(object) << (bits * t))
    return out_r, out_i


def exact_coefficients(re: np.ndarray, im: np.ndarray, dims: Sequence[int]) -> np.ndarray:
    """Integer coefficients ``c_alpha = Tr(tau_alpha (re + i im))``, flat in C order.

    Raises ValueError if the matrix is not exactly Hermitian (then some c_alpha is complex).
    """
    dims = tuple(int(d) for d in dims)
    T = (_to_pairs(np.asarray(re, dtype=object), dims),
         _to_pairs(np.asarray(im, dtype=object), dims))
    mats, axes = [], []
    for k, d in enumerate(dims):
        if _skip(d):
            continue
        br, bi, _ = integer_local_basis(d)
        # M[a, (i j)] = tau_a[j, i]
        mats.append((br.transpose(0, 2, 1).reshape(d * d, d * d),
                     bi.transpose(0, 2, 1).reshape(d * d, d * d)))
        axes.append(k)
    T = _exact_transform(T[0], T[1], mats, axes)
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
    mats, axes = [], []
    for k, d in enumerate(dims):
        if _skip(d):
            continue
        br, bi, nrm = integer_local_basis(d)
        w = np.array([lcm(*[int(x) for x in nrm]) // int(x) for x in nrm], dtype=np.int64)
        # K[(i j), a] = tau_a[i, j] * (lcm / n_a)
        mats.append((br.reshape(d * d, d * d).T * w[None, :],
                     bi.reshape(d * d, d * d).T * w[None, :]))
        axes.append(k)
    T = _exact_transform(T[0], T[1], mats, axes)
    return _from_pairs(T[0], dims), _from_pairs(T[1], dims), norm_denominator(dims)
