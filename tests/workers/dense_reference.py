"""Dense partial trace and trace-and-replace maps on the documented subsystem order.

These act on full matrices through tensor reshapes; the SDPs never need them (they use the
pattern masks), but they give an independent, readable statement of workers/THEORY.md §1.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np


def partial_trace(W: np.ndarray, dims: Sequence[int], traced: Sequence[int]) -> np.ndarray:
    """Trace out the subsystems at positions ``traced``; the rest keep their order."""
    dims = list(dims)
    n = len(dims)
    keep = [s for s in range(n) if s not in set(traced)]
    T = W.reshape(dims + dims)
    letters = "abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ"
    if 2 * n > len(letters):
        raise ValueError(f"partial_trace supports at most {len(letters) // 2} subsystems, got {n}")
    row = [letters[s] for s in range(n)]
    col = [letters[n + s] if s in keep else letters[s] for s in range(n)]
    out = "".join(row[s] for s in keep) + "".join(col[s] for s in keep)
    R = np.einsum("".join(row) + "".join(col) + "->" + out, T)
    dk = int(np.prod([dims[s] for s in keep])) if keep else 1
    return R.reshape(dk, dk)


def trace_replace(W: np.ndarray, dims: Sequence[int], systems: Sequence[int]) -> np.ndarray:
    """The map ``_X W = Tr_X(W) (x) 1_X / d_X`` for X = ``systems`` (workers/THEORY.md §1)."""
    dims = list(dims)
    n = len(dims)
    systems = sorted(set(systems))
    if not systems:
        return np.array(W, copy=True)
    keep = [s for s in range(n) if s not in systems]
    R = partial_trace(W, dims, systems)
    dx = int(np.prod([dims[s] for s in systems]))
    full = np.kron(R, np.eye(dx) / dx)
    # full is on (keep..., systems...); move back to the original order
    cur = keep + systems
    perm = [cur.index(s) for s in range(n)]
    cur_dims = [dims[s] for s in cur]
    T = full.reshape(cur_dims + cur_dims).transpose(perm + [n + p for p in perm])
    D = int(np.prod(dims))
    return T.reshape(D, D)
