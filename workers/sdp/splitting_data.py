"""The data of the matrix-free splitting solver: blocks, stacks and per-pattern projections.

The variables are the PSD blocks of a causal structure (the merged leaves on their reduced
spaces, :mod:`workers.structures.layout`) and, for the generalised robustness, Omega on the full
space. Each block is held as its coefficient vector in pattern order
(:mod:`workers.sdp.stack_transforms`), ``X_j = (1/D) sum_alpha c_alpha sigma'_alpha``, so its
Frobenius norm is ``sqrt(n_j) / D |c|``.  All blocks of a sample form one real state vector.

The affine set (workers/THEORY.md §§2-5 in the product basis) constrains, for each basis
element alpha of pattern p, the blocks' coefficients at alpha to ``a_p t_alpha + F_p u``:
``a_p`` the particular solution, u the null-space parameters plus the free noise (r on the
identity, or Omega's coefficient on a valid pattern).  The weighted projection onto it is the
small linear map ``c -> G_p c + g_p w_alpha`` per pattern (the same for every alpha of p), and
patterns with equal maps are grouped so that one gather and one product serve them all.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workers.operators.basis import to_coefficients
from workers.structures.layout import Layout
from workers.operators.masks import valid_mask
from .stack_transforms import SpaceTransform, space_transform
from workers.operators.validity import white_noise


@dataclass(frozen=True)
class Block:
    """One PSD block: its space, side n, offset in the state, coefficient weight n/D^2, and
    the global basis-element index of each of its pattern-ordered coefficients."""

    space: tuple[int, ...]
    n: int
    offset: int
    weight: float
    alphas: np.ndarray


@dataclass(frozen=True)
class PatternGroup:
    """Patterns sharing one projection: state gather indices (m, k), the processes'
    coefficient indices (k,) in pattern order, and the map (G, g)."""

    gather: np.ndarray
    alphas: np.ndarray
    G: np.ndarray
    g: np.ndarray


@dataclass(frozen=True)
class IdentityPart:
    """The identity element carries the objective: ``x_0 = a w_0 + F u`` with
    ``u = K (v_0 - a w_0) - k / rho`` and objective ``q . u``."""

    positions: np.ndarray
    a: np.ndarray
    F: np.ndarray
    K: np.ndarray
    k: np.ndarray
    q: np.ndarray


@dataclass(frozen=True)
class SplitProblem:
    """Everything the iteration needs for one (layout, kind)."""

    layout: Layout
    kind: str
    blocks: tuple[Block, ...]
    stacks: tuple[tuple[SpaceTransform, slice | np.ndarray], ...]
    groups: tuple[PatternGroup, ...]
    identity: IdentityPart
    size: int
    weights: np.ndarray
    order: np.ndarray

    @property
    def n_leaf_blocks(self) -> int:
        return self.layout.n_blocks


def _blocks(layout: Layout, kind: str) -> list[Block]:
    dims, D = layout.scenario.subsystem_dims, layout.scenario.dim
    spaces = list(layout.spaces) + ([tuple(dims)] if kind == "generalized" else [])
    full = [int(d) ** 2 for d in dims]
    out, off = [], 0
    for small in spaces:
        tr = space_transform(tuple(small))
        red = [int(r) ** 2 for r in small]
        local = np.unravel_index(np.arange(tr.n ** 2), red)
        alphas = np.ravel_multi_index(tuple(local), full)[tr.order]
        out.append(Block(tuple(small), tr.n, off, tr.n / D ** 2, alphas))
        off += tr.n ** 2
    return out


def _columns(blocks: list[Block], members: list[int]) -> slice | np.ndarray:
    """State columns of a stack of blocks: a slice when they are contiguous."""
    cols = np.concatenate([blocks[j].offset + np.arange(blocks[j].n ** 2) for j in members])
    if np.array_equal(cols, np.arange(cols[0], cols[0] + len(cols))):
        return slice(int(cols[0]), int(cols[0]) + len(cols))
    return cols


def _pattern_frame(layout: Layout, kind: str, p: int, members: list[int]):
    """(a, F) of pattern p over ``members`` (leaf blocks, then Omega if present)."""
    sysm, N = layout.systems[p], layout.nulls[p]
    m = layout.n_blocks
    leaves = [j for j in members if j < m]
    a = np.array([sysm.particular[j] for j in leaves] + [0.0] * (len(members) - len(leaves)))
    cols = [np.array([N[j, c] for j in leaves] + [0.0] * (len(members) - len(leaves)))
            for c in range(N.shape[1])]
    if kind == "generalized":
        valid = bool(valid_mask(layout.scenario)[np.flatnonzero(layout.codes == p)[0]])
        if valid:  # t = w + omega and the Omega block's own coefficient is omega
            cols.insert(0, np.array([sysm.particular[j] for j in leaves] + [1.0]))
    return a, (np.column_stack(cols) if cols else np.zeros((len(members), 0)))


def build_split_problem(layout: Layout, kind: str) -> SplitProblem:
    """Compile the splitting data of ``kind`` ("random" or "generalized")."""
    if kind not in ("random", "generalized"):
        raise ValueError(f"kind={kind!r}, expected 'random' or 'generalized'")
    scen = layout.scenario
    dims, D = scen.subsystem_dims, scen.dim
    blocks = _blocks(layout, kind)
    size = blocks[-1].offset + blocks[-1].n ** 2
    weights = np.concatenate([np.full(b.n ** 2, b.weight) for b in blocks])
    stacks: dict[tuple[int, ...], list[int]] = {}
    for j, b in enumerate(blocks):
        stacks.setdefault(tuple(d for d in b.space if d > 1), []).append(j)
    stack_list = tuple((space_transform(blocks[js[0]].space), _columns(blocks, js))
                       for js in stacks.values())
    codes = layout.codes
    order = np.argsort(codes, kind="stable")
    grouped: dict = {}
    identity = None
    for p in np.unique(codes):
        p = int(p)
        members = [j for j, b in enumerate(blocks) if p in space_transform(b.space).slices]
        if not members:
            continue
        a, F = _pattern_frame(layout, kind, p, members)
        Wt = np.diag([blocks[j].weight for j in members])
        gather = np.array([blocks[j].offset + np.arange(
            space_transform(blocks[j].space).slices[p].start,
            space_transform(blocks[j].space).slices[p].stop) for j in members])
        alphas = np.flatnonzero(codes == p)
        if p == 0:
            noise = to_coefficients(white_noise(scen), dims)[0]
            q = np.zeros(F.shape[1] + (kind == "random"))
            if kind == "random":
                F = np.column_stack([a * noise, F])
                q[0] = 1.0
            else:
                q[0] = 1.0 / scen.d_out_total
            Minv = np.linalg.pinv(F.T @ Wt @ F)
            identity = IdentityPart(gather[:, 0], a, F, Minv @ F.T @ Wt, Minv @ q, q)
            continue
        if F.shape[1]:
            G = F @ np.linalg.pinv(F.T @ Wt @ F) @ F.T @ Wt
        else:
            G = np.zeros((len(members), len(members)))
        g = (np.eye(len(members)) - G) @ a
        key = (tuple(members), np.round(G, 12).tobytes(), np.round(g, 12).tobytes())
        if key in grouped:
            gathers, alist, _, _ = grouped[key]
            gathers.append(gather)
            alist.append(alphas)
        else:
            grouped[key] = ([gather], [alphas], G, g)
    groups = tuple(PatternGroup(np.concatenate(ga, axis=1), np.concatenate(al), G, g)
                   for ga, al, G, g in grouped.values())
    return SplitProblem(layout, kind, tuple(blocks), stack_list, groups, identity, size,
                        weights, order)
