"""Certified verdicts: build certificates from solves and re-solve what stays undecided.

:func:`certify` turns a solve done with ``keep_certificate=True`` into a verdict that an exact
check (:func:`workers.certificates.verify.verify_certificate`) confirms; :func:`certified_analyse`
runs :func:`workers.analysis.separability.analyse`, certifies, and re-solves uncertified samples
with a second set of solver options (by default the interior-point solver Clarabel).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from workers.certificates.verify import (Certificate, VerificationReport, fingerprint, snap,
                           verify_certificate)
from .robustness import RobustnessResult
from workers.operators.scenario import Scenario
from .separability import QUANTITIES, SeparabilityResult, analyse, analyse_many
from workers.sdp.solvers import SolverOptions


@dataclass(frozen=True)
class CertifiedVerdict:
    """A verdict with its certificate; ``certified`` False means ``verdict == 'undecided'``.

    ``witness_bound`` is the exact lower bound on R_r from the witness (nan if none),
    ``decomposition_delta`` the certified upper bound on R_r from the decomposition.
    """

    verdict: str
    certified: bool
    margin: float
    reason: str
    certificate: Certificate | None
    witness_bound: float
    decomposition_delta: float
    passes: int = 1
    analysis: SeparabilityResult | None = None


def _meta(scenario: Scenario, W: np.ndarray, r: RobustnessResult, **extra) -> dict:
    return {"dims": list(scenario.subsystem_dims), "w_sha256": fingerprint(W),
            "method": r.method, "quantity": r.kind, "solver": r.solver, **extra}


def witness_certificate(scenario: Scenario, W: np.ndarray, r: RobustnessResult) -> Certificate:
    """Witness certificate from the dual blocks of a solve (the Omega block is dropped)."""
    if r.dual_blocks is None:
        raise ValueError("result has no dual blocks; solve with keep_certificate=True")
    m = len(r.leaves) if r.leaves is not None else len(r.dual_blocks) - (r.kind == "generalized")
    Y = snap(np.array(r.dual_blocks[:m]))
    return Certificate("witness", "nonseparable", float("nan"), {"dual_blocks": Y},
                       _meta(scenario, W, r))


def decomposition_certificate(scenario: Scenario, W: np.ndarray, r: RobustnessResult,
                              tol_separable: float) -> Certificate:
    """Decomposition certificate from the primal leaves of a random-robustness solve."""
    if r.leaves is None or r.kind != "random":
        raise ValueError("decomposition needs the leaves of a random-robustness solve "
                         "(keep_certificate=True)")
    return Certificate("decomposition", "separable", float("nan"),
                       {"leaves": snap(np.array(r.leaves)), "delta": np.array(r.upper_bound)},
                       _meta(scenario, W, r, tol_separable=float(tol_separable)))


def _checked(scenario, W, cert: Certificate) -> tuple[Certificate, VerificationReport]:
    rep = verify_certificate(scenario, W, cert)
    return Certificate(cert.kind, cert.verdict, rep.margin, cert.arrays, cert.metadata), rep


def _sides(result) -> tuple[RobustnessResult | None, RobustnessResult | None]:
    if isinstance(result, RobustnessResult):
        return result, (result if result.kind == "random" else None)
    wit = result.witness_result()
    dec = result.bounds["random"].upper_from if "random" in result.bounds else None
    return wit, dec


def certify(scenario: Scenario, W: np.ndarray, result: SeparabilityResult | RobustnessResult,
            tol_separable: float = 1e-6) -> CertifiedVerdict:
    """Certified verdict from a solve kept with ``keep_certificate=True``.

    Tries the witness when the solver's lower bound is positive, the decomposition when its
    upper bound is at most ``tol_separable``; otherwise (or if the exact check fails) the
    verdict is ``undecided`` with both margins.
    """
    wit, dec = _sides(result)
    w_bound = d_delta = float("nan")
    notes = []
    analysis = result if isinstance(result, SeparabilityResult) else None
    if wit is not None and wit.ok and wit.dual_blocks is not None and wit.lower_bound > 0:
        cert, rep = _checked(scenario, W, witness_certificate(scenario, W, wit))
        if rep.ok:
            return CertifiedVerdict("nonseparable", True, rep.margin, rep.reason, cert,
                                    rep.bound, d_delta, analysis=analysis)
        notes.append(f"witness: {rep.reason}")
    if dec is not None and dec.ok and dec.leaves is not None and dec.upper_bound <= tol_separable:
        cert, rep = _checked(scenario, W, decomposition_certificate(scenario, W, dec,
                                                                    tol_separable))
        d_delta = rep.bound
        if rep.ok:
            return CertifiedVerdict("separable", True, rep.margin, rep.reason, cert,
                                    w_bound, rep.bound, analysis=analysis)
        notes.append(f"decomposition: {rep.reason}")
    if not notes:
        notes.append("solver bounds decide neither side")
    return CertifiedVerdict("undecided", False, float("nan"), "; ".join(notes), None,
                            w_bound, d_delta, analysis=analysis)


def certified_analyse(
    scenario: Scenario,
    W: np.ndarray,
    options: SolverOptions = SolverOptions(),
    second_pass: SolverOptions | None = SolverOptions(solver="CLARABEL"),
    quantities: tuple[str, ...] = ("random",),
    method: str = "auto",
) -> CertifiedVerdict:
    """:func:`analyse` + :func:`certify`, re-solving with ``second_pass`` if uncertified.

    The separable tolerance is ``options.tol`` (``second_pass.tol`` on the second pass).
    """
    bad = [q for q in quantities if q not in QUANTITIES]
    if bad:
        raise ValueError(f"quantities={list(quantities)}, expected a subset of {list(QUANTITIES)}")
    first = analyse(scenario, W, quantities, method, options, keep_certificate=True)
    out = certify(scenario, W, first, options.tol)
    if out.certified or second_pass is None:
        return out
    again = analyse(scenario, W, quantities, method, second_pass, keep_certificate=True)
    out2 = certify(scenario, W, again, second_pass.tol)
    reason = out2.reason if out2.certified else f"pass 1: {out.reason}; pass 2: {out2.reason}"
    return CertifiedVerdict(out2.verdict, out2.certified, out2.margin, reason, out2.certificate,
                            out2.witness_bound, out2.decomposition_delta, 2, again)


SECOND_PASS_MODES = ("auto", "clarabel", "tight", "none")


def second_pass_options(scenario: Scenario, options: SolverOptions, mode: str = "auto"
                        ) -> SolverOptions | None:
    """Solver options of the automatic second pass.

    ``clarabel``: the interior-point solver at the same tolerances; ``tight``: SCS with
    tolerances 100x smaller (floor 1e-12) and 5x the iteration cap; ``auto``: Clarabel up to
    32 x 32 operators, ``tight`` above (Clarabel's dense PSD blocks cost ~4 GB and minutes at
    64 x 64 on a 24 GiB machine); ``none``: no second pass.  Where the conic matrix would
    not fit in memory (four qubit parties), ``tight`` is the matrix-free solver at 10x
    smaller tolerances instead.
    """
    if mode not in SECOND_PASS_MODES:
        raise ValueError(f"second_pass={mode!r}, expected one of {list(SECOND_PASS_MODES)}")
    if mode == "none":
        return None
    if mode == "clarabel" or (mode == "auto" and scenario.dim <= 32):
        return replace(options, solver="CLARABEL")
    from workers.structures.layout import build_layout
    from workers.sdp.solver_admm import fits_in_memory

    method = "exact" if scenario.n_parties <= 3 else "sufficient"
    if not fits_in_memory(build_layout(scenario, method)):  # no conic matrix: stay matrix-free
        return replace(options, solver="ADMM", eps_abs=max(options.eps_abs / 10, 1e-12),
                       eps_rel=max(options.eps_rel / 10, 1e-12))
    eps = max(options.eps_abs / 100, 1e-12)
    return replace(options, solver="SCS", eps_abs=eps, eps_rel=max(options.eps_rel / 100, 1e-12),
                   max_iters=5 * options.max_iters)


def analyse_and_certify(
    scenario: Scenario,
    W: np.ndarray,
    quantities: tuple[str, ...],
    method: str,
    options: SolverOptions,
    second_pass: str = "auto",
    force_solve: bool = False,
) -> tuple[SeparabilityResult, CertifiedVerdict]:
    """Solve, certify, and re-solve once with :func:`second_pass_options` if uncertified.

    Returns the analysis whose certificate is reported and the certified verdict (its
    ``passes`` field says whether the second pass was needed).
    """
    return analyse_and_certify_many(scenario, [W], quantities, method, options, second_pass,
                                    force_solve)[0]


def analyse_and_certify_many(
    scenario: Scenario,
    Ws,
    quantities: tuple[str, ...],
    method: str,
    options: SolverOptions,
    second_pass: str = "auto",
    force_solve: bool = False,
    warm_start: bool = False,
) -> list[tuple[SeparabilityResult, CertifiedVerdict]]:
    """:func:`analyse_and_certify` for several processes: the first pass is one batch
    (:func:`workers.analysis.separability.analyse_many`, optionally warm-started along ``Ws``); the
    rare second pass is per process."""
    first = analyse_many(scenario, Ws, quantities, method, options, keep_certificate=True,
                         force_solve=force_solve, warm_start=warm_start)
    out = []
    for W, res in zip(Ws, first):
        cv = certify(scenario, W, res, options.tol)
        second = None if cv.certified else second_pass_options(scenario, options, second_pass)
        if second is None:
            out.append((res, cv))
            continue
        res2 = analyse(scenario, W, quantities, method, second, keep_certificate=True,
                       force_solve=force_solve)
        cv2 = certify(scenario, W, res2, second.tol)
        reason = cv2.reason if cv2.certified else f"pass 1: {cv.reason}; pass 2: {cv2.reason}"
        out.append((res2, replace(cv2, reason=reason, passes=2, analysis=res2)))
    return out
