"""The numerical core: pure functions on numpy arrays (never imports dask, h5py or yaml).

The pipeline, one subpackage per stage:

``operators``     a scenario, its product basis and pattern masks, validity, named processes,
                  random ensembles (workers/THEORY.md §1, §2, §6, §8);
``structures``    the causal structures: PSD leaves and per-pattern linear systems, merged
                  into a layout (§3, §4);
``sdp``           the compiled conic problem and the back-ends that solve it (§5);
``analysis``      robustness problems, verdicts, certified verdicts (§4, §5);
``certificates``  exact arithmetic and certificates checked with no solver involved (§9);
``games``         causal games, causal bounds by LP, see-saw values (§7).

The public entry points are one import away (``from workers import analyse, get_problem``);
they are imported on first use, so ``import workers`` itself costs nothing.
"""

from __future__ import annotations

import importlib

# public name -> the module that defines it
_ENTRY_POINTS = {
    "workers.operators.scenario": ("Party", "Scenario"),
    "workers.operators.validity": ("ValidityReport", "check_validity", "project_valid",
                                   "white_noise"),
    "workers.operators.families": ("Process", "NAMED", "get_named", "ocb_process",
                                   "quantum_switch", "lugano_process", "random_comb",
                                   "white_noise_mixture"),
    "workers.operators.ensembles": ("Sample", "SAMPLERS", "get_sampler", "valid_direction",
                                    "wishart", "hs_volume", "comb", "comb_mixture"),
    "workers.sdp.solvers": ("SolverOptions",),
    "workers.analysis.robustness": ("RobustnessProblem", "RobustnessResult", "get_problem"),
    "workers.analysis.separability": ("SeparabilityResult", "analyse", "analyse_many"),
    "workers.analysis.certified": ("CertifiedVerdict", "certify", "analyse_and_certify",
                                   "analyse_and_certify_many"),
    "workers.certificates.verify": ("Certificate", "VerificationReport", "verify_certificate"),
    "workers.games.causal_games": ("Game", "get_game", "list_games"),
    "workers.games.causal_bound": ("CausalBound", "causal_bound"),
    "workers.games.seesaw": ("SeesawResult", "seesaw"),
}
_WHERE = {name: module for module, names in _ENTRY_POINTS.items() for name in names}

__all__ = sorted(_WHERE)


def __getattr__(name: str):
    """Import the module of a public entry point on first use (PEP 562)."""
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module 'workers' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
