"""Reduced leaf spaces: a PSD leaf that is the identity on some subsystems is solved without them.

If every basis element a leaf W_j can carry (its particular solution and its null-space
freedom) is trivial on a set T of subsystems, then ``W_j = X ⊗ 1_T`` (interleaved in the
subsystem order) and ``W_j ⪰ 0  ⇔  X ⪰ 0``: the PSD block shrinks by the factor ``d_T``.
This is exact, not a relaxation.  It holds for every fixed-order leaf on the last party's
output when there is no global future (workers/THEORY.md §3: a comb never ends on an output), so
bipartite qubit leaves are 8 x 8 instead of 16 x 16 and tripartite ones 32 x 32 instead of
64 x 64.

A reduced space is described by the subsystem dimensions with each trivial subsystem set
to 1, which keeps the documented subsystem order: the same basis, pattern and cone-vector
code then applies unchanged.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import scipy.sparse as sp


def used_bits(codes: np.ndarray, support: np.ndarray) -> int:
    """OR of the pattern codes of the basis elements in ``support`` (a boolean mask)."""
    return int(np.bitwise_or.reduce(codes[support], initial=0))


def reduced_dims(dims: Sequence[int], bits: int) -> tuple[int, ...]:
    """``dims`` with every subsystem outside ``bits`` set to dimension 1."""
    return tuple(int(d) if (bits >> s) & 1 else 1 for s, d in enumerate(dims))


def selection(dims: Sequence[int], small: Sequence[int]) -> sp.csr_matrix:
    """Sparse 0/1 map from full coefficient vectors to those of the reduced space ``small``.

    Row ``a'`` picks the full basis element with the same local indices on the kept
    subsystems and the identity on the dropped ones (shape ``prod small^2 x prod dims^2``).
    """
    full = [int(d) ** 2 for d in dims]
    red = [int(d) ** 2 for d in small]
    multi = np.indices(red).reshape(len(red), -1)
    cols = np.ravel_multi_index(tuple(multi), full)
    n_red = multi.shape[1]
    return sp.csr_matrix((np.ones(n_red), (np.arange(n_red), cols)),
                         shape=(n_red, int(np.prod(full))))


def embed_identity(X: np.ndarray, dims: Sequence[int], small: Sequence[int],
                   scale: float = 1.0) -> np.ndarray:
    """``scale · X ⊗ 1_T`` on the full space, T the subsystems that ``small`` drops.

    ``X`` acts on the reduced space ``small`` (same subsystem order, dropped ones of
    dimension 1); the identity factors are put back in place by broadcasting.
    """
    n = len(dims)
    dims = tuple(int(d) for d in dims)
    T = np.asarray(X).reshape(tuple(small) + tuple(small)) * scale
    for s, (d, r) in enumerate(zip(dims, small)):
        if d != r:
            shape = [1] * (2 * n)
            shape[s] = shape[n + s] = d
            T = T * np.eye(d).reshape(shape)
    D = int(np.prod(dims))
    return T.reshape(D, D)
