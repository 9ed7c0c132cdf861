"""``orderless check`` step by step: each robustness solve, the certification and the second
pass are announced on stderr as they start, with the time each took, so a check that runs
for minutes (the quantum switch) shows what it is doing.

The steps are those of :func:`workers.analysis.certified.analyse_and_certify`, one quantity at a
time; the verdict comes from the random robustness when it is computed (as there).
"""

from __future__ import annotations

import sys
import time
from dataclasses import replace
from typing import Callable

import numpy as np

from workers.analysis.certified import certify, second_pass_options
from workers.operators.scenario import Scenario
from workers.analysis.separability import SeparabilityResult, analyse, decide, methods_for
from workers.sdp.solvers import SolverOptions

from sweep.execution.limits import sample_seconds, solves_for
from sweep.units import human_seconds

SHOW_ABOVE_S = 10.0  # without a terminal, steps are shown when the estimate exceeds this


def announcer(quiet: bool, scenario: Scenario, quantities, method: str,
              options: SolverOptions) -> Callable[[str], None]:
    """A function printing ``orderless check: ...`` lines on stderr, or doing nothing (quiet,
    or no terminal and a quick check); it first prints the size and the estimate."""
    solves = solves_for(scenario, quantities, method, options.solver)
    estimate = sample_seconds(scenario.dim, solves)
    if quiet or not (sys.stderr.isatty() or estimate > SHOW_ABOVE_S):
        return lambda text: None

    def say(text: str) -> None:
        print(f"orderless check: {text}", file=sys.stderr, flush=True)

    say(f"D = {scenario.dim}, " + "; ".join(s.describe() for s in solves)
        + f": about {human_seconds(estimate)} (order of magnitude)")
    return say


def _analyse(scenario: Scenario, W: np.ndarray, quantities, method: str,
             options: SolverOptions, force_solve: bool, say) -> SeparabilityResult:
    bounds = {}
    for kind in quantities:
        say(f"solving the {kind} robustness ({'/'.join(methods_for(scenario, method))}, "
            f"{options.solver}, eps {options.eps_abs:g}) ...")
        t0 = time.perf_counter()
        res = analyse(scenario, W, (kind,), method, options, keep_certificate=True,
                      force_solve=force_solve)
        b = res.bounds[kind]
        say(f"{kind} robustness: {b.lower_from.solver} {b.lower_from.status}, "
            f"{human_seconds(time.perf_counter() - t0)}")
        bounds[kind] = b
    deciding = bounds["random"] if "random" in bounds else bounds[quantities[0]]
    verdict, margin, reason = decide(deciding, options.tol)
    return SeparabilityResult(verdict, margin, reason, methods_for(scenario, method), bounds)


def analyse_and_certify_steps(scenario: Scenario, W: np.ndarray, quantities, method: str,
                              options: SolverOptions, second_pass: str, force_solve: bool,
                              say: Callable[[str], None]):
    """(analysis, certified verdict) as :func:`workers.analysis.certified.analyse_and_certify`."""
    res = _analyse(scenario, W, quantities, method, options, force_solve, say)
    say("certifying the verdict in exact arithmetic ...")
    cv = certify(scenario, W, res, options.tol)
    second = None if cv.certified else second_pass_options(scenario, options, second_pass)
    if second is None:
        return res, cv
    say(f"not certified ({cv.reason[:80]}); second pass with {second.solver} at eps "
        f"{second.eps_abs:g} ...")
    res2 = _analyse(scenario, W, quantities, method, second, force_solve, say)
    cv2 = certify(scenario, W, res2, second.tol)
    reason = cv2.reason if cv2.certified else f"pass 1: {cv.reason}; pass 2: {cv2.reason}"
    return res2, replace(cv2, reason=reason, passes=2, analysis=res2)
