"""Named process operators and causally ordered combs (workers/THEORY.md §6).

Every builder returns a :class:`Process`: the scenario it lives in, the matrix in the
documented subsystem order (P, A1_I, A1_O, ..., F), a name and its source.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from .basis import local_basis
from .scenario import Scenario, default_names
from .validity import white_noise


@dataclass(frozen=True)
class Process:
    """A process operator together with its scenario."""

    scenario: Scenario
    matrix: np.ndarray
    name: str
    source: str = ""


def _pauli(k: int) -> np.ndarray:
    return local_basis(2)[k]


def _kron(*ops: np.ndarray) -> np.ndarray:
    out = np.ones((1, 1), dtype=complex)
    for op in ops:
        out = np.kron(out, op)
    return out


def ocb_process() -> Process:
    """The OCB process, qubits, order A_I A_O B_I B_O.

    W = 1/4 [1 + (Z^{AO} Z^{BI} + Z^{AI} X^{BI} Z^{BO}) / sqrt 2].
    Source: Oreshkov, Costa, Brukner, Nat. Commun. 3, 1092 (2012).
    """
    one, X, Z = _pauli(0), _pauli(1), _pauli(3)
    W = (
        _kron(one, one, one, one)
        + (_kron(one, Z, Z, one) + _kron(Z, one, X, Z)) / np.sqrt(2)
    ) / 4
    return Process(Scenario.from_dims([2, 2, 2, 2]), W, "ocb", "Oreshkov, Costa, Brukner 2012")


def _ket(d: int, i: int) -> np.ndarray:
    v = np.zeros(d, dtype=complex)
    v[i] = 1.0
    return v


def _max_ent(d: int) -> np.ndarray:
    """|1>> = sum_i |ii> (unnormalised), as a d x d tensor."""
    return np.eye(d, dtype=complex)


def quantum_switch(d: int = 2) -> Process:
    """The quantum switch with a d-dimensional target and a control qubit.

    Global past P = (P_c, P_t) of dimension 2d, global future F = (F_t, F_c) of dimension 2d.
    |w> = |0>_{Pc}|1>>_{Pt AI}|1>>_{AO BI}|1>>_{BO Ft}|0>_{Fc}
        + |1>_{Pc}|1>>_{Pt BI}|1>>_{BO AI}|1>>_{AO Ft}|1>_{Fc},   W = |w><w|.
    Sources: Chiribella et al., PRA 88, 022318 (2013); process-matrix form in Araujo et al.,
    NJP 17, 102001 (2015).
    """
    if d < 1:
        raise ValueError(f"quantum_switch: d={d}, expected d >= 1")
    e = _max_ent(d)
    c0, c1 = _ket(2, 0), _ket(2, 1)
    # tensor indices: Pc, Pt, AI, AO, BI, BO, Ft, Fc
    t0 = np.einsum("c,ta,ob,sf,g->ctaobsfg", c0, e, e, e, c0)  # Pt-AI, AO-BI, BO-Ft
    t1 = np.einsum("c,tb,sa,of,g->ctaobsfg", c1, e, e, e, c1)  # Pt-BI, BO-AI, AO-Ft
    w = (t0 + t1).reshape(-1)
    W = np.outer(w, w.conj())
    scen = Scenario.from_dims([d, d, d, d], d_past=2 * d, d_future=2 * d)
    return Process(scen, W, f"quantum_switch(d={d})", "Chiribella et al. 2013; Araujo et al. 2015")


def lugano_process() -> Process:
    """The Lugano process on three classical bits, order A_I A_O B_I B_O C_I C_O.

    x_A = (not b) and c, x_B = (not c) and a, x_C = (not a) and b, with a, b, c the output bits;
    W = sum_{a,b,c} |x_A a x_B b x_C c><...|.
    Source: Baumeler & Wolf, NJP 18, 013036 (2016).
    """
    W = np.zeros((64, 64), dtype=complex)
    for a in (0, 1):
        for b in (0, 1):
            for c in (0, 1):
                xa, xb, xc = (1 - b) & c, (1 - c) & a, (1 - a) & b
                idx = int("".join(map(str, (xa, a, xb, b, xc, c))), 2)
                W[idx, idx] = 1.0
    return Process(Scenario.from_dims([2] * 6), W, "lugano", "Baumeler & Wolf 2016")


def haar_isometry(d_in: int, d_out: int, rng: np.random.Generator) -> np.ndarray:
    """Haar-random isometry C^{d_in} -> C^{d_out} (QR of a Ginibre matrix, phases fixed)."""
    if d_out < d_in:
        raise ValueError(f"isometry needs d_out >= d_in, got {d_in} -> {d_out}")
    G = rng.standard_normal((d_out, d_in)) + 1j * rng.standard_normal((d_out, d_in))
    Q, R = np.linalg.qr(G)
    return Q * (np.diag(R) / np.abs(np.diag(R)))


def random_comb(
    scenario: Scenario,
    order: Sequence[int],
    rng: np.random.Generator,
    memory_dim: int = 2,
) -> np.ndarray:
    """A causally ordered comb with order ``order`` built from Haar-random isometries.

    Channels P -> A_I^{k1} M, A_O^{k1} M -> A_I^{k2} M, ..., A_O^{kN} M -> F E are Haar
    isometries with a memory M of dimension ``memory_dim``; the final environment E is traced.
    The result is causally separable by construction (workers/THEORY.md §6, "any causally ordered
    comb"); its Choi operator uses the convention C = sum |x><x'| (x) V|x><x'|V^dagger.
    """
    order = list(order)
    if sorted(order) != list(range(scenario.n_parties)):
        raise ValueError(f"order={order} is not a permutation of 0..{scenario.n_parties - 1}")
    dm = int(memory_dim)
    # Pure comb vector, built step by step; ``legs`` lists its open legs (position, dim).
    # Step 0: isometry P -> A_I^{k1} (x) M; its Choi vector has legs (P, I_k1, M).
    first = order[0]
    d_i = scenario.parties[first].d_in
    dm = max(dm, -(-scenario.d_past // d_i))
    V = haar_isometry(scenario.d_past, d_i * dm, rng).reshape(d_i, dm, scenario.d_past)
    tensor = V.transpose(2, 0, 1)  # (P, I, M)
    legs = [(scenario.past_index, scenario.d_past), (scenario.input_index(first), d_i)]
    for prev, nxt in zip(order, order[1:] + [None]):
        d_o = scenario.parties[prev].d_out
        if nxt is None:
            d_next, next_pos = scenario.d_future, scenario.future_index
        else:
            d_next, next_pos = scenario.parties[nxt].d_in, scenario.input_index(nxt)
        # memory continues, or becomes the traced environment after the last step
        d_env = max(int(memory_dim), -(-(d_o * dm) // d_next))
        V = haar_isometry(d_o * dm, d_next * d_env, rng).reshape(d_next, d_env, d_o, dm)
        dm = d_env
        # contract memory leg (last axis of tensor) with V's input memory
        tensor = np.einsum("...m,nedm->...dne", tensor, V)
        legs += [(scenario.output_index(prev), d_o), (next_pos, d_next)]
    # tensor axes: legs..., E
    n_legs = len(legs)
    vec = tensor.reshape(-1, tensor.shape[-1])
    rho = vec @ vec.conj().T  # trace out E
    dims = [dd for _, dd in legs]
    positions = [p for p, _ in legs]
    perm = np.argsort(positions)
    T = rho.reshape(dims + dims).transpose(list(perm) + [n_legs + p for p in perm])
    D = scenario.dim
    T = T.reshape(D, D)
    return (T + T.conj().T) / 2  # vec vec^dagger in BLAS is Hermitian only up to rounding


def white_noise_mixture(scenario: Scenario, W: np.ndarray, p: float) -> np.ndarray:
    """``p W + (1 - p) 1°`` (workers/THEORY.md §8, ensemble 1)."""
    if not 0.0 <= p <= 1.0:
        raise ValueError(f"white-noise weight p={p}, expected 0 <= p <= 1")
    return p * np.asarray(W) + (1 - p) * white_noise(scenario)


NAMED: dict[str, Callable[..., Process]] = {
    "ocb": ocb_process,
    "quantum_switch": quantum_switch,
    "lugano": lugano_process,
}


def get_named(name: str, **params: int) -> Process:
    """Look up a named process; the error lists the known names."""
    if name not in NAMED:
        raise ValueError(f"unknown process {name!r}; known: {sorted(NAMED)}")
    return NAMED[name](**params)


__all__ = [
    "Process", "ocb_process", "quantum_switch", "lugano_process", "random_comb",
    "haar_isometry", "white_noise_mixture", "get_named", "NAMED", "default_names",
]
