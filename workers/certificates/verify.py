"""Certificates of causal (non)separability, checked in exact arithmetic.

A certificate is a few floating-point arrays plus metadata (:class:`Certificate`), storable in
HDF5.  :func:`verify_certificate` re-derives the verdict from them using only the scenario, the
structure's pattern masks and exact integer arithmetic (:mod:`workers.certificates.exact_basis`,
:mod:`workers.certificates.exact_structure`, :mod:`workers.certificates.exact_psd`); it never calls
a solver.  Every float is read as the exact dyadic rational it is.

Witness (``kind="witness"``, verdict ``nonseparable``).  Arrays: the dual blocks ``Y_j``.
The checker projects each coefficient vector ``y_alpha = (Tr tau_alpha Y_j)_j`` exactly onto the
row space of C_p: ``y_hat_alpha = C_p^T lambda_alpha``; let ``Y'_j`` be the operators with these
coefficients and ``S`` the one with coefficients ``s_alpha = lambda_alpha . h_p``.
Proof that ``S + mu 1`` is a witness when ``Y'_j >= -mu 1`` for all j: for any decomposition
``T = sum_j W_j`` with ``W_j >= 0`` and ``C_p x_alpha = h_p t_alpha`` (x, t the coefficients of
W_j, T; Tr(A B) = sum_alpha a_alpha b_alpha / n_alpha in the orthogonal basis tau),
``sum_j Tr(Y'_j W_j) = sum_alpha lambda_alpha^T C_p x_alpha / n_alpha
= sum_alpha s_alpha t_alpha / n_alpha = Tr(S T)``, and
``sum_j Tr(Y'_j W_j) >= -mu sum_j Tr W_j = -mu Tr T``, so ``Tr((S + mu 1) T) >= 0``.
If ``W + r 1°`` is separable (r >= 0), ``Tr(S'W) + r Tr(S' 1°) >= 0`` with S' = S + mu 1, hence
``R_r(W) >= -Tr(S'W) / Tr(S'1°)`` (Tr(S'1°) >= 0 as 1° is separable; if it is 0 and
Tr(S'W) < 0, no r works).  Certified nonseparable iff the exact ``Tr(S'W) < 0``; the margin
is that lower bound on R_r (rounded down to a float).

Decomposition (``kind="decomposition"``, verdict ``separable``).  Arrays: the leaves ``W_j``
and the noise weight ``delta``.  The checker corrects the leaves' coefficients exactly onto
``C_p x = h_p t`` with target ``T = W + delta 1°`` (minimum-norm, per pattern), bounds each
corrected leaf's smallest eigenvalue by ``-mu_j`` and adds ``mu_j 1`` to it: the leaves stay
in the structure (the identity pattern is never forbidden) and sum exactly to
``W + delta' 1°`` with ``delta' = delta + d_I sum_j mu_j``.  So ``(W + delta' 1°)/(1 + delta')``
is causally separable: **R_r(W) <= max(delta', 0) is what is certified**.  The verdict
``separable`` is certified iff ``delta' <= tol_separable``; a comb on the boundary of the
separable set needs a tiny ``delta' > 0``, so "separable" means "within tol_separable of the
separable set in random robustness", never more.  W's coefficients outside the structure's
span (rounding noise of a float W, at most MAX_RESIDUAL relative) are dropped first: the
certificate is for that exact projection of W, and the reason string reports the residual.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

from workers.operators.basis import pattern_codes
from .exact_basis import exact_coefficients, exact_matrix, norm_denominator, norms
from .exact_psd import hermitian_integers, min_eigenvalue_lower_bound
from .exact_structure import exact_systems, project_affine, project_rowspace
from workers.operators.scenario import Scenario

KINDS = ("witness", "decomposition")
WITNESS_METHODS = ("exact", "necessary")  # sets containing the causally separable set
DECOMPOSITION_METHODS = ("exact", "sufficient", "fixed_orders")  # sets inside it
MAX_RESIDUAL = 1e-6


@dataclass(frozen=True)
class Certificate:
    """Everything needed to re-check a verdict: arrays and JSON-able metadata."""

    kind: str
    verdict: str
    margin: float
    arrays: dict[str, np.ndarray] = field(repr=False)
    metadata: dict[str, str | float | int] = field(default_factory=dict)

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise ValueError(f"certificate kind={self.kind!r}, expected one of {list(KINDS)}")

    def to_arrays(self) -> dict[str, np.ndarray]:
        """Flat dict of numpy arrays (HDF5-ready); inverse of :meth:`from_arrays`."""
        head = {"kind": self.kind, "verdict": self.verdict, "metadata": self.metadata}
        out = {f"array/{k}": np.asarray(v) for k, v in self.arrays.items()}
        out["header"] = np.array(json.dumps(head, sort_keys=True))
        out["margin"] = np.array(float(self.margin))
        return out

    @classmethod
    def from_arrays(cls, data: dict[str, np.ndarray]) -> "Certificate":
        if "header" not in data or "margin" not in data:
            raise ValueError(f"certificate arrays have keys {sorted(data)}, expected "
                             "'header', 'margin' and 'array/...'")
        head = json.loads(str(np.asarray(data["header"]).item()))
        arrays = {k[len("array/"):]: np.asarray(v) for k, v in data.items()
                  if k.startswith("array/")}
        return cls(head["kind"], head["verdict"], float(np.asarray(data["margin"])), arrays,
                   head["metadata"])


@dataclass(frozen=True)
class VerificationReport:
    """Outcome of :func:`verify_certificate`; ``bound`` is the certified bound on R_r."""

    ok: bool
    verdict: str
    margin: float
    reason: str
    bound: float = float("nan")


def fingerprint(W: np.ndarray) -> str:
    """sha256 of W as C-contiguous complex128 bytes (ties a certificate to its process)."""
    return hashlib.sha256(np.ascontiguousarray(W, dtype=complex).tobytes()).hexdigest()


def snap(A: np.ndarray, bits: int = 60) -> np.ndarray:
    """Hermitian part of A, rounded to a grid 2^-bits below its largest entry (keeps ints short)."""
    A = np.asarray(A, dtype=complex)
    A = (A + np.swapaxes(A, -1, -2).conj()) / 2
    peak = float(np.max(np.abs(A))) or 1.0
    k = bits - np.frexp(peak)[1]
    return np.ldexp(np.rint(np.ldexp(A.real, k)), -k) + 1j * np.ldexp(np.rint(np.ldexp(A.imag, k)), -k)


def _floor_float(q: Fraction) -> float:
    f = float(q)
    return float(np.nextafter(f, -np.inf)) if Fraction(f) > q else f


def _exact_blocks(blocks: np.ndarray, dims: tuple[int, ...], what: str = "certificate blocks"
                  ) -> tuple[np.ndarray, int]:
    """Integer coefficients (blocks x alphas) of a stack of matrices, with their denominator."""
    re, im, den = hermitian_integers(blocks)
    if np.any(re != np.swapaxes(re, -1, -2)) or np.any(im != -np.swapaxes(im, -1, -2)):
        raise ValueError(f"{what} are not exactly Hermitian (take (W + W^dagger)/2 first)")
    return np.array([exact_coefficients(re[j], im[j], dims) for j in range(len(re))]), den


def _min_eig(coeffs: np.ndarray, dims: tuple[int, ...], scale: int) -> Fraction:
    """Proven lower bound on the smallest eigenvalue of ``sum_alpha (c_alpha / n_alpha)
    tau_alpha / scale``.  A subsystem on which every nonzero coefficient is the identity is
    an exact tensor factor ``A' ⊗ 1`` (the identity's norm there is d), and ``A ⊗ 1`` has
    the eigenvalues of A: the bound is taken on the smaller matrix A'."""
    codes = pattern_codes(dims)
    used = int(np.bitwise_or.reduce(codes[np.asarray(coeffs != 0, dtype=bool)], initial=0))
    small = tuple(d if (used >> s) & 1 else 1 for s, d in enumerate(dims))
    if small != tuple(dims):
        keep = np.ones(len(coeffs), dtype=bool)
        local = np.unravel_index(np.arange(len(coeffs)), [d * d for d in dims])
        for s, (d, r) in enumerate(zip(dims, small)):
            if r != d:
                keep &= local[s] == 0
        factor = int(np.prod([d for d, r in zip(dims, small) if r != d]))
        coeffs, dims, scale = coeffs[keep], small, scale * factor
    re, im, nd = exact_matrix(coeffs, dims)
    return min_eigenvalue_lower_bound(re, im, nd * scale)


def _relative(a: np.ndarray, b: np.ndarray, floor: np.ndarray | None = None) -> float:
    """||a - b|| / max(||b||, ||floor||) on exact integers (floats only for the ratio)."""
    num = sum(float(v) ** 2 for v in (a - b).ravel())
    den = max(sum(float(v) ** 2 for v in b.ravel()),
              0.0 if floor is None else sum(float(v) ** 2 for v in floor.ravel()))
    return float(np.sqrt(num / den)) if den > 0 else float(np.sqrt(num))


def _trace_pair(a: np.ndarray, b: np.ndarray, dims: tuple[int, ...]) -> Fraction:
    """Tr(A B) from integer coefficients a, b: sum a b / n_alpha, times norm_denominator."""
    N = norm_denominator(dims)
    weights = np.array([N // int(n) for n in norms(dims)], dtype=object)
    return Fraction(int(np.sum(a * b * weights)), N)


def _drop_outside(t: np.ndarray, codes: np.ndarray, systems: dict) -> tuple[np.ndarray, float]:
    """Zero the target's coefficients outside the structure's span; relative size removed."""
    out = np.array(t, copy=True)
    for p, sysm in systems.items():
        if not sysm.spanned:
            out[codes == p] = 0
    return out, _relative(t, out)


def _check_header(scenario: Scenario, W: np.ndarray, cert: Certificate) -> str:
    meta = cert.metadata
    if list(meta.get("dims", [])) != list(scenario.subsystem_dims):
        return f"certificate dims {meta.get('dims')} differ from the scenario's"
    if meta.get("w_sha256") != fingerprint(W):
        return "certificate was issued for a different process operator W"
    allowed = WITNESS_METHODS if cert.kind == "witness" else DECOMPOSITION_METHODS
    if meta.get("method") not in allowed and not (scenario.n_parties <= 3
                                                   and meta.get("method") in METHODS_N3):
        return f"method {meta.get('method')!r} cannot support a {cert.kind} certificate"
    return ""


METHODS_N3 = ("exact", "necessary", "sufficient")  # all equal the exact set for N <= 3


def verify_witness(scenario: Scenario, W: np.ndarray, cert: Certificate) -> VerificationReport:
    """Check a witness certificate exactly (see module docstring for the inequality)."""
    dims = scenario.subsystem_dims
    systems = exact_systems(scenario, str(cert.metadata["method"]))
    codes = pattern_codes(dims)
    y, den = _exact_blocks(cert.arrays["dual_blocks"], dims)
    y_hat, s, L = project_rowspace(y, codes, systems)
    resid = _relative(y * L, y_hat)
    if resid > MAX_RESIDUAL:
        return VerificationReport(False, "undecided", float("nan"), f"dual blocks violate the "
                                  f"witness constraints (relative residual {resid:.2e})")
    mu = max(Fraction(0), -min(_min_eig(y_hat[j], dims, den * L) for j in range(len(y))))
    wc, wden = _exact_blocks(np.asarray(W)[None], dims, "W's entries")
    tr_sw = _trace_pair(s, wc[0], dims) / (den * L * wden)
    tr_w = Fraction(int(wc[0][0]), wden)  # tau_0 = 1
    d_i = scenario.d_in_total
    value = tr_sw + mu * tr_w
    norm = Fraction(int(s[0]), den * L * d_i) + mu * Fraction(scenario.dim, d_i)
    if value >= 0:
        return VerificationReport(False, "undecided", float("nan"),
                                  f"Tr(S'W) = {float(value):.3e} is not negative (shift mu = "
                                  f"{float(mu):.2e})")
    bound = _floor_float(-value / norm) if norm > 0 else float("inf")
    return VerificationReport(True, "nonseparable", bound,
                              f"exact witness: R_r >= {bound:.6e} (shift mu = {float(mu):.2e})",
                              bound)


def verify_decomposition(scenario: Scenario, W: np.ndarray, cert: Certificate,
                         ) -> VerificationReport:
    """Check a decomposition certificate exactly (see module docstring)."""
    dims = scenario.subsystem_dims
    systems = exact_systems(scenario, str(cert.metadata["method"]))
    codes = pattern_codes(dims)
    delta = float(np.asarray(cert.arrays["delta"]))
    tol = float(cert.metadata["tol_separable"])
    x, den = _exact_blocks(cert.arrays["leaves"], dims)
    wc, wden = _exact_blocks(np.asarray(W)[None], dims, "W's entries")
    d_i = scenario.d_in_total
    noise = Fraction(delta) * Fraction(scenario.dim, d_i)  # Tr(tau_0 delta 1°)
    scale = int(np.lcm.reduce([den, wden, noise.denominator], dtype=object))
    t = wc[0] * (scale // wden)
    t[0] += int(noise * scale)
    t, outside = _drop_outside(t, codes, systems)
    if outside > MAX_RESIDUAL:
        return VerificationReport(False, "undecided", float("nan"), f"W is not in the "
                                  f"structure's span (relative residual {outside:.2e})")
    x_hat, L = project_affine(x * (scale // den), t, codes, systems)
    x_scaled = x * (scale // den) * L
    resid = _relative(x_scaled, x_hat, floor=wc[0] * (scale // wden) * L)
    if resid > MAX_RESIDUAL:
        return VerificationReport(False, "undecided", float("nan"), f"leaves violate the causal"
                                  f" constraints (relative residual {resid:.2e})")
    mus = [max(Fraction(0), -_min_eig(x_hat[j], dims, scale * L)) for j in range(len(x))]
    delta_cert = Fraction(delta) + d_i * sum(mus)
    bound = float(max(delta_cert, Fraction(0)))
    bound = float(np.nextafter(bound, np.inf)) if Fraction(bound) < delta_cert else bound
    if delta_cert > Fraction(tol):
        return VerificationReport(False, "undecided", tol - bound, f"decomposition needs "
                                  f"delta' = {bound:.3e} > tol_separable {tol:.1e}", bound)
    return VerificationReport(True, "separable", tol - bound, f"exact decomposition: R_r <= "
                              f"{bound:.3e} <= tol_separable {tol:.1e} (for W projected onto "
                              f"the span; relative residual removed {outside:.1e})", bound)


def verify_certificate(scenario: Scenario, W: np.ndarray, certificate: Certificate
                       ) -> VerificationReport:
    """Re-check a certificate against (scenario, W) without any solver.

    ``ok`` is True only when the exact check reproduces the certificate's verdict.
    """
    bad = _check_header(scenario, W, certificate)
    if bad:
        return VerificationReport(False, "undecided", float("nan"), bad)
    check = verify_witness if certificate.kind == "witness" else verify_decomposition
    try:
        report = check(scenario, W, certificate)
    except (KeyError, ValueError) as err:
        return VerificationReport(False, "undecided", float("nan"), f"malformed certificate: {err}")
    if report.ok and report.verdict != certificate.verdict:
        return VerificationReport(False, report.verdict, report.margin,
                                  f"certificate claims {certificate.verdict!r}, check gives "
                                  f"{report.verdict!r}", report.bound)
    return report
