"""Product-basis transforms of stacks of matrices, elementwise and in pattern order.

:func:`workers.operators.basis.to_coefficients_stack` contracts each subsystem with a small GEMM
over the whole stack, so the rounding of one matrix's coefficients may depend on how many
matrices share the call.  The batched first-order solver (:mod:`workers.sdp.splitting`) needs
every sample's arithmetic to be its own (results independent of the batch, tested bitwise),
and it transforms every iterate twice.  Here each local basis element is applied as the
short fixed sum of slices it is (a generalised Gell-Mann element has at most d nonzero
entries), so every output entry is the same few additions whatever the stack.

Coefficients are returned in *pattern order*: sorted by support pattern (stable), so that
each pattern of a space occupies one contiguous slice, in the same relative order in every
space that contains it (:class:`SpaceTransform.slices`).
"""

from __future__ import annotations

from functools import lru_cache
from typing import Sequence

import numpy as np

from workers.operators.basis import local_basis, pattern_codes


def _terms(d: int, inverse: bool) -> list[list[tuple[int, complex]]]:
    """Per output index, the (input index, coefficient) pairs of the local map.

    Forward: c_a = sum_{ij} sigma_a[j, i] X[i, j] (input index i*d + j).
    Inverse: X[i, j] = sum_a sigma_a[i, j] c_a (input index a).
    """
    B = local_basis(d)
    out = []
    if not inverse:
        for a in range(d * d):
            out.append([(i * d + j, complex(B[a][j, i])) for i in range(d) for j in range(d)
                        if abs(B[a][j, i]) > 1e-15])
    else:
        for i in range(d):
            for j in range(d):
                out.append([(a, complex(B[a][i, j])) for a in range(d * d)
                            if abs(B[a][i, j]) > 1e-15])
    return out


def _apply(T: np.ndarray, sizes: Sequence[int], dims: Sequence[int], inverse: bool) -> np.ndarray:
    """Apply the local map of every subsystem along its axis of T (shape (K, *sizes))."""
    K = T.shape[0]
    for s, d in enumerate(dims):
        if d == 1:
            continue
        pre, post = int(np.prod(sizes[:s])), int(np.prod(sizes[s + 1:]))
        T3 = T.reshape(K * pre, d * d, post)
        out = np.empty_like(T3)
        for a, terms in enumerate(_terms(d, inverse)):
            (i0, c0), rest = terms[0], terms[1:]
            acc = c0 * T3[:, i0, :]
            for i, c in rest:
                acc = acc + c * T3[:, i, :]
            out[:, a, :] = acc
        T = out
    return T


class SpaceTransform:
    """Transforms on one (reduced) space: ``dims`` with dropped subsystems of dimension 1.

    ``to_coefficients(X)`` gives ``c_alpha = Re Tr(sigma_alpha X)`` for a stack (K, n, n) in
    pattern order, ``to_matrices(c)`` the inverse ``(1/n) sum_alpha c_alpha sigma_alpha``.
    """

    def __init__(self, dims: Sequence[int]) -> None:
        self.dims = tuple(int(d) for d in dims)
        self.n = int(np.prod(self.dims))
        codes = pattern_codes(self.dims)
        self.order = np.argsort(codes, kind="stable")
        self.inverse_order = np.argsort(self.order)
        self.codes = codes[self.order]
        bounds = np.flatnonzero(np.diff(self.codes)) + 1
        starts, ends = np.r_[0, bounds], np.r_[bounds, len(codes)]
        self.slices = {int(self.codes[a]): slice(int(a), int(b)) for a, b in zip(starts, ends)}
        k = len(self.dims)
        self._pairs = [ax for j in range(k) for ax in (j, k + j)]
        self._unpairs = [2 * j for j in range(k)] + [2 * j + 1 for j in range(k)]

    def to_coefficients(self, X: np.ndarray) -> np.ndarray:
        K, dims = X.shape[0], self.dims
        T = X.reshape((K,) + dims + dims).transpose([0] + [1 + a for a in self._pairs])
        T = np.ascontiguousarray(T).reshape(K, -1).astype(complex, copy=False)
        sizes = [d * d for d in dims]
        c = _apply(T, sizes, dims, inverse=False).reshape(K, -1).real
        return np.ascontiguousarray(c[:, self.order])

    def to_matrices(self, c: np.ndarray) -> np.ndarray:
        K, dims = c.shape[0], self.dims
        T = c[:, self.inverse_order].astype(complex)
        sizes = [d * d for d in dims]
        T = _apply(T, sizes, dims, inverse=True).reshape((K,) + tuple(x for d in dims
                                                                    for x in (d, d)))
        T = T.transpose([0] + [1 + a for a in self._unpairs])
        return np.ascontiguousarray(T).reshape(K, self.n, self.n) / self.n


class QubitTransform(SpaceTransform):
    """The same transforms on a space of qubits, through one Walsh-Hadamard product.

    With sigma = i^{#Y} X^a Z^b, ``Tr(sigma M) = i^{#Y} sum_i (-1)^{b.i} M[i, i xor a]``: a
    gather of the "a-diagonals" of M and one product with the Sylvester-Hadamard matrix H,
    done as a real n x 2n product per matrix (the same BLAS call whatever the stack).
    """

    def __init__(self, dims: Sequence[int]) -> None:
        super().__init__(dims)
        kept = [d for d in self.dims if d > 1]
        q, n = len(kept), self.n
        bits = (np.arange(n)[:, None] >> np.arange(q - 1, -1, -1)[None, :]) & 1
        self.H = np.where((bits @ bits.T) % 2, -1.0, 1.0)
        i, a = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
        self._gather = (i * n + (i ^ a)).ravel()  # G[i, a] = M[i, i xor a]
        back = np.empty(n * n, dtype=np.int64)  # M[j xor a, j] = F[j, a]
        back[((i ^ a) * n + i).ravel()] = (i * n + a).ravel()
        self._scatter = back
        # per coefficient (C order over local letters 1, X, Y, Z): its (b, a) and phase
        letters = np.indices((4,) * q).reshape(q, -1)
        w = 1 << np.arange(q - 1, -1, -1)
        a_of = ((letters == 1) | (letters == 2)).T @ w
        b_of = ((letters == 2) | (letters == 3)).T @ w
        ny = (letters == 2).sum(axis=0)
        phase = (1j) ** ny
        self._pos = (b_of * n + a_of)[self.order]  # pattern-ordered coefficient -> flat (b, a)
        self._phase = phase[self.order]

    def to_coefficients(self, X: np.ndarray) -> np.ndarray:
        K, n = X.shape[0], self.n
        G = np.ascontiguousarray(X.reshape(K, n * n)[:, self._gather]).reshape(K, n, n)
        T = np.matmul(self.H, G.view(float)).view(complex)  # T[b, a], per matrix
        t = T.reshape(K, n * n)[:, self._pos]
        return np.ascontiguousarray((t * self._phase).real)

    def to_matrices(self, c: np.ndarray) -> np.ndarray:
        K, n = c.shape[0], self.n
        T = np.zeros((K, n * n), dtype=complex)
        T[:, self._pos] = c * self._phase  # T[b, a] = i^{#Y} c
        F = np.matmul(self.H, T.reshape(K, n, n).view(float)).view(complex) / n  # F[j, a]
        return np.ascontiguousarray(F.reshape(K, n * n)[:, self._scatter]).reshape(K, n, n)


@lru_cache(maxsize=64)
def space_transform(dims: tuple[int, ...]) -> SpaceTransform:
    """Cached transform for a space: the Walsh-Hadamard one when every kept subsystem is a
    qubit, else the general elementwise one."""
    if all(d in (1, 2) for d in dims) and any(d == 2 for d in dims):
        return QubitTransform(dims)
    return SpaceTransform(dims)
