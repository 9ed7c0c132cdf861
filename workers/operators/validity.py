"""Validity of process operators (workers/THEORY.md §2) and the projector onto the valid subspace.

W is a valid process operator iff W >= 0, Tr W = d_O and L_V(W) = W (Araujo et al., NJP 17,
102001 (2015), appendix).  In the product basis L_V is the mask of
:func:`workers.operators.masks.valid_patterns`, so the projector zeroes coefficients.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .basis import from_coefficients, to_coefficients
from .masks import valid_mask
from .scenario import Scenario

DEFAULT_TOL = 1e-8


@dataclass(frozen=True)
class ValidityReport:
    """Each condition with its residual; ``valid`` is their conjunction at ``tol``.

    Attributes
    ----------
    hermiticity_residual
        Frobenius norm of ``W - W^dagger`` over that of W.
    min_eigenvalue
        Smallest eigenvalue of the Hermitian part of W.
    trace_residual
        ``|Tr W - d_O|``.
    linear_residual
        Frobenius norm of ``W - L_V(W)`` over that of W.
    """

    valid: bool
    hermitian: bool
    positive: bool
    trace_ok: bool
    linear_ok: bool
    hermiticity_residual: float
    min_eigenvalue: float
    trace: float
    expected_trace: int
    trace_residual: float
    linear_residual: float
    tol: float

    def problems(self) -> list[str]:
        """One short sentence per failed condition."""
        out = []
        if not self.hermitian:
            out.append(f"not Hermitian (relative residual {self.hermiticity_residual:.2e})")
        if not self.positive:
            out.append(f"not positive semidefinite (min eigenvalue {self.min_eigenvalue:.3e})")
        if not self.trace_ok:
            out.append(f"trace {self.trace:.6g}, expected {self.expected_trace}")
        if not self.linear_ok:
            out.append(
                "violates the linear validity conditions L_V(W) = W "
                f"(relative residual {self.linear_residual:.2e})"
            )
        return out


def hermitian_part(W: np.ndarray) -> np.ndarray:
    """(W + W^dagger) / 2: exactly Hermitian, removing the rounding asymmetry of a matrix
    built in floating point or read from a file (check the asymmetry first)."""
    W = np.asarray(W)
    return (W + W.conj().T) / 2


def check_shape(scenario: Scenario, W: np.ndarray) -> np.ndarray:
    """Return W as a complex 2-D array, or raise a one-line error naming the mismatch."""
    W = np.asarray(W)
    D = scenario.dim
    if W.ndim != 2 or W.shape[0] != W.shape[1]:
        raise ValueError(f"operator has shape {W.shape}, expected a square {D}x{D} matrix")
    if W.shape[0] != D:
        dims = list(scenario.subsystem_dims)
        raise ValueError(f"dims={dims} multiply to {D} but the operator is {W.shape[0]}x{W.shape[1]}")
    if not np.all(np.isfinite(W)):
        raise ValueError("operator has non-finite entries (nan or inf)")
    return W.astype(complex, copy=False)


def check_validity(scenario: Scenario, W: np.ndarray, tol: float = DEFAULT_TOL) -> ValidityReport:
    """Check every validity condition of W and report its residual.

    Tolerances are relative to the scale of W (its Frobenius norm), except the trace
    (relative to d_O) and the eigenvalue (relative to the largest eigenvalue magnitude).
    """
    W = check_shape(scenario, W)
    scale = max(np.linalg.norm(W), 1e-300)
    herm_res = float(np.linalg.norm(W - W.conj().T) / scale)
    H = (W + W.conj().T) / 2
    eig = np.linalg.eigvalsh(H)
    min_eig = float(eig[0])
    d_o = scenario.d_out_total
    tr = float(np.trace(H).real)
    c = to_coefficients(H, scenario.subsystem_dims)
    forbidden = c[~valid_mask(scenario)]
    lin_res = float(np.sqrt(np.sum(forbidden**2) / scenario.dim) / scale)
    eig_scale = max(abs(eig[0]), abs(eig[-1]), 1e-300)
    hermitian = herm_res <= tol
    positive = min_eig >= -tol * eig_scale
    trace_ok = abs(tr - d_o) <= tol * d_o
    linear_ok = lin_res <= tol
    return ValidityReport(
        valid=hermitian and positive and trace_ok and linear_ok,
        hermitian=hermitian,
        positive=positive,
        trace_ok=trace_ok,
        linear_ok=linear_ok,
        hermiticity_residual=herm_res,
        min_eigenvalue=min_eig,
        trace=tr,
        expected_trace=d_o,
        trace_residual=abs(tr - d_o),
        linear_residual=lin_res,
        tol=tol,
    )


def project_valid(scenario: Scenario, W: np.ndarray) -> np.ndarray:
    """Orthogonal projection of the Hermitian part of W onto the subspace L_V(W) = W.

    Idempotent and trace-preserving (the identity pattern is always allowed).  Positivity is
    not enforced: the projection of a PSD operator need not be PSD.
    """
    W = check_shape(scenario, W)
    dims = scenario.subsystem_dims
    c = to_coefficients(W, dims)
    c[~valid_mask(scenario)] = 0.0
    return from_coefficients(c, dims)


def white_noise(scenario: Scenario) -> np.ndarray:
    """The white-noise process 1° = 1 / d_I (d_I includes F), valid in every scenario."""
    return np.eye(scenario.dim, dtype=complex) / scenario.d_in_total
