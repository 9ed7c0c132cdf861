"""Causal structures: decompositions W = sum_j W_j into PSD leaves with pattern constraints.

Every characterisation of workers/THEORY.md §4 has the same shape: PSD leaves W_j (one per
ordering of the parties), and for groups of leaves the condition
``_{[1-X] Y} (sum_{j in G} W_j) = 0``.  In the product basis that condition says: the summed
coefficient of every pattern that is nontrivial on X and trivial on Y vanishes.  So per
pattern the leaves' coefficients obey a small linear system, solved once per scenario by
:func:`pattern_systems`.

Structures offered (``method``):

``exact``         N <= 3: bipartite (Oreshkov-Costa-Brukner 2012; Araujo et al. 2015) and the
                  tripartite dynamical-order characterisation (Wechs, Abbott, Branciard,
                  NJP 21, 013027 (2019)).
``sufficient``    any N: prefix conditions on every partial sum (exact for N <= 3).
``necessary``     any N: the first party's systems are handed to a later party (its receiver),
                  and the remaining N-1 parties are tested recursively, down to the exact
                  tripartite form (equals ``exact`` for N <= 3).
``fixed_orders``  mixtures of fixed-order combs; a sufficient condition only.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import lru_cache
from itertools import permutations
from typing import Sequence

import numpy as np

from workers.operators.masks import party_bits
from workers.operators.scenario import Scenario

METHODS = ("exact", "sufficient", "necessary", "fixed_orders")


@dataclass(frozen=True)
class Group:
    """Condition ``_{[1-X] Y} sum_{j in leaves} W_j = 0`` as bitmasks X = x_bits, Y = y_bits."""

    leaves: tuple[int, ...]
    x_bits: int
    y_bits: int
    # A second kind of condition (``necessary`` only): the conditional process left to the
    # remaining parties after any operation of the prefix must be valid.  ``rest_parties``
    # lists (input bits, output bits) of each remaining party; a pattern whose part on the
    # remaining systems is nonempty and not valid there is forbidden.
    rest_parties: tuple[tuple[int, int], ...] = ()

    def forbids(self, pattern: int) -> bool:
        if self.rest_parties:
            return _conditional_invalid(pattern, self.rest_parties, self.y_bits)
        return bool(pattern & self.x_bits) and not (pattern & self.y_bits)


def _conditional_invalid(pattern: int, rest_parties, future_bit: int) -> bool:
    rest = future_bit
    for i_bits, o_bits in rest_parties:
        rest |= i_bits | o_bits
    r = pattern & rest
    if r == 0 or r & future_bit:
        return False
    return not any((r & i_bits) and not (r & o_bits) for i_bits, o_bits in rest_parties)


@dataclass(frozen=True)
class CausalStructure:
    """Leaves (each labelled by an ordering of the parties) and the group conditions."""

    method: str
    leaves: tuple[tuple[int, ...], ...]
    groups: tuple[Group, ...]

    @property
    def n_leaves(self) -> int:
        return len(self.leaves)


@dataclass(frozen=True)
class PatternSystem:
    """Solution of one pattern's linear system  C x = h t  over the leaf coefficients x.

    ``x = particular * t + null @ z`` for the target coefficient t and free parameters z;
    ``spanned`` is False when no x exists for t != 0 (the pattern is outside the cone's span).
    ``rows`` is C, kept for building witnesses from dual variables.
    """

    particular: np.ndarray
    null: np.ndarray
    spanned: bool
    rows: np.ndarray
    rhs: np.ndarray


def _prefix_groups(
    scenario: Scenario, leaves: list[tuple[int, ...]], rest_bits
) -> list[Group]:
    """Prefix conditions: for every prefix (k1..kn) of some leaf, on the sum of its leaves."""
    f_bit = 1 << scenario.future_index
    groups = []
    n = scenario.n_parties
    for length in range(1, n + 1):
        prefixes = sorted({leaf[:length] for leaf in leaves})
        for pre in prefixes:
            members = tuple(j for j, leaf in enumerate(leaves) if leaf[:length] == pre)
            x = 1 << scenario.output_index(pre[-1])
            groups.append(Group(members, x, rest_bits(pre) | f_bit))
    return groups


def _past_group(scenario: Scenario, n_leaves: int) -> Group:
    """``_{[1-P] A^{all} F} W = 0`` on the total (the global past comes first)."""
    everything = (1 << scenario.future_index)
    for k in range(scenario.n_parties):
        everything |= party_bits(scenario, k)
    return Group(tuple(range(n_leaves)), 1 << scenario.past_index, everything)


def _plain_rest(scenario: Scenario):
    def rest(prefix: tuple[int, ...]) -> int:
        bits = 0
        for k in range(scenario.n_parties):
            if k not in prefix:
                bits |= party_bits(scenario, k)
        return bits

    return rest


def _receiver(k: int, remaining: Sequence[int], n: int) -> int:
    """The party that receives k's systems: the next remaining party after k, cyclically."""
    for step in range(1, n + 1):
        cand = (k + step) % n
        if cand in remaining:
            return cand
    raise ValueError("no remaining party to receive systems")


def _merged_rest(scenario: Scenario):
    """Rest systems when each early party's systems travel to its receiver (``necessary``)."""
    n = scenario.n_parties

    def rest(prefix: tuple[int, ...]) -> int:
        carried = {k: party_bits(scenario, k) for k in range(n)}
        # only the parties *before* the last one have handed their systems on: the condition
        # of prefix (k1..kn) says k_n acts before the rest, with k_n's own systems still its own
        for depth, k in enumerate(prefix[:-1]):
            remaining = [j for j in range(n) if j not in prefix[: depth + 1]]
            if n - depth >= 4 and remaining:  # merging stops at the exact tripartite level
                r = _receiver(k, remaining, n)
                carried[r] |= carried[k]
        bits = 0
        for j in range(n):
            if j not in prefix:
                bits |= carried[j]
        return bits

    return rest


def _conditional_validity_groups(scenario: Scenario, leaves: list[tuple[int, ...]]) -> list[Group]:
    """For every proper prefix: what the remaining parties receive must be a valid process.

    If the prefix parties act first, every operation they perform leaves the others a
    (conditional, unnormalised) causally separable and hence valid process; so W_(prefix) has
    no pattern whose part on the remaining systems is nonempty and outside the valid subspace
    of the remaining scenario (workers/THEORY.md §2 mask, applied to the rest).  In the ``necessary``
    relaxation the remaining parties are the enlarged ones (carried systems count as inputs).
    Without this, handing k's input on to its receiver would let that input depend on a later
    party's output.
    """
    n = scenario.n_parties
    f_bit = 1 << scenario.future_index
    out = []
    for length in range(1, n):
        for pre in sorted({leaf[:length] for leaf in leaves}):
            members = tuple(j for j, leaf in enumerate(leaves) if leaf[:length] == pre)
            carried = _carried_after(scenario, pre[:-1])  # the last one's op is arbitrary
            parties = tuple(
                (carried[j] & ~(1 << scenario.output_index(j)), 1 << scenario.output_index(j))
                for j in range(n) if j not in pre)
            out.append(Group(members, 0, f_bit, parties))
    return out


def _carried_after(scenario: Scenario, prefix: tuple[int, ...]) -> dict[int, int]:
    """Systems each party holds once every prefix party has acted and handed its systems on
    (merging stops at the exact tripartite level, as in :func:`_merged_rest`)."""
    n = scenario.n_parties
    carried = {k: party_bits(scenario, k) for k in range(n)}
    for depth, k in enumerate(prefix):
        remaining = [j for j in range(n) if j not in prefix[: depth + 1]]
        if n - depth >= 4 and remaining:
            carried[_receiver(k, remaining, n)] |= carried[k]
    return carried


@lru_cache(maxsize=32)
def build_structure(scenario: Scenario, method: str) -> CausalStructure:
    """The causal structure for ``method`` (one of :data:`METHODS`)."""
    if method not in METHODS:
        raise ValueError(f"method={method!r}, expected one of {list(METHODS)}")
    n = scenario.n_parties
    if method == "exact" and n > 3:
        raise ValueError(
            f"method='exact' is known only for N <= 3 parties (got N={n}); "
            "use 'sufficient' and 'necessary' for bounds"
        )
    leaves = list(permutations(range(n)))
    rest = _merged_rest(scenario) if method == "necessary" else _plain_rest(scenario)
    groups = _prefix_groups(scenario, leaves, rest) + [_past_group(scenario, len(leaves))]
    if method == "necessary" and n >= 4:
        groups += _conditional_validity_groups(scenario, leaves)
    if method == "fixed_orders":  # every condition on every comb separately
        groups = [Group((j,), g.x_bits, g.y_bits) for g in groups for j in g.leaves]
    return CausalStructure(method, tuple(leaves), tuple(groups))


def pattern_systems(structure: CausalStructure, patterns: Sequence[int]) -> dict[int, PatternSystem]:
    """Solve the per-pattern linear system of every pattern (SVD, rank tolerance 1e-10)."""
    m = structure.n_leaves
    out = {}
    for p in patterns:
        rows = [np.ones(m)]
        for g in structure.groups:
            if g.forbids(int(p)):
                r = np.zeros(m)
                r[list(g.leaves)] = 1.0
                rows.append(r)
        C = np.array(rows)
        h = np.zeros(len(rows))
        h[0] = 1.0
        U, s, Vt = np.linalg.svd(C)
        rank = int(np.sum(s > 1e-10 * max(s[0], 1.0)))
        null = Vt[rank:].T.copy()
        part = np.linalg.pinv(C, rcond=1e-10) @ h
        part[np.abs(part) < 1e-12] = 0.0  # rounding noise on leaves the pattern forbids
        spanned = bool(np.allclose(C @ part, h, atol=1e-9))
        if not spanned:
            part = np.zeros(m)
        out[int(p)] = PatternSystem(part, null, spanned, C, h)
    return out


def active_groups(structure: CausalStructure, patterns: Sequence[int]) -> tuple[Group, ...]:
    """The groups that forbid at least one of ``patterns`` (the others constrain nothing)."""
    return tuple(g for g in structure.groups if any(g.forbids(int(p)) for p in patterns))


def leaf_classes(structure: CausalStructure, patterns: Sequence[int]) -> tuple[int, ...]:
    """Class index of every leaf: leaves with identical membership in every active group.

    Leaves of one class obey the same conditions on every pattern, so their sum can replace
    them (a sum of PSD operators is PSD, and a PSD operator splits into equal PSD parts):
    merging them leaves the set of decomposable operators unchanged.  With trivial outputs
    (d_O = 1) most conditions are empty and many leaves merge.
    """
    groups = active_groups(structure, patterns)
    signature = [tuple(j in g.leaves for g in groups) for j in range(structure.n_leaves)]
    first: dict[tuple[bool, ...], int] = {}
    return tuple(first.setdefault(sig, len(first)) for sig in signature)


def merged_structure(structure: CausalStructure, classes: Sequence[int]) -> CausalStructure:
    """The structure with one leaf per class (labelled by its first member's ordering)."""
    n_cls = max(classes) + 1
    reps = [structure.leaves[classes.index(c)] for c in range(n_cls)]
    groups = tuple(replace(g, leaves=tuple(sorted({classes[j] for j in g.leaves})))
                   for g in structure.groups)
    return CausalStructure(structure.method, tuple(reps), groups)


def sparse_null_basis(null: np.ndarray, tol: float = 1e-10) -> np.ndarray:
    """A sparse basis (columns) of the span of ``null``: the reduced row echelon form of null^T.

    Each basis vector is 1 on its own pivot leaf and 0 on the other pivots, so it touches few
    leaves; the orthonormal SVD basis touches all of them and makes the conic matrix dense.
    """
    R = np.array(null.T, dtype=float)
    q, m = R.shape
    row = 0
    for col in range(m):
        if row == q:
            break
        piv = row + int(np.argmax(np.abs(R[row:, col])))
        if abs(R[piv, col]) <= tol:
            continue
        R[[row, piv]] = R[[piv, row]]
        R[row] /= R[row, col]
        others = np.arange(q) != row
        R[others] -= np.outer(R[others, col], R[row])
        row += 1
    R[np.abs(R) <= tol] = 0.0
    return R[:row].T.copy()
