"""Certificates of causal (non)separability: verification of named processes and combs, and
rejection of tampered certificates.

Sources: OCB process, Oreshkov, Costa, Brukner, Nat. Commun. 3, 1092 (2012), R_r = sqrt2 - 1
(workers/THEORY.md §5, derived there); Lugano process, Baumeler & Wolf, NJP 18, 013036 (2016)
(causally nonseparable); quantum switch, Chiribella et al., PRA 88, 022318 (2013) and Araujo
et al., NJP 17, 102001 (2015) (causally nonseparable); causally ordered combs are separable
(workers/THEORY.md §6).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from workers.operators.basis import basis_element, pattern_codes
from workers.certificates.verify import Certificate, fingerprint, verify_certificate
from workers.analysis.certified import certify
from workers.certificates.exact_structure import exact_systems
from workers.operators.families import lugano_process, ocb_process, quantum_switch, random_comb
from workers.operators.scenario import Scenario
from workers.analysis.separability import analyse
from workers.operators.validity import white_noise


def _certified(process_scenario, W):
    res = analyse(process_scenario, W, ("random",), keep_certificate=True)
    return certify(process_scenario, W, res)


@pytest.fixture(scope="module")
def ocb():
    P = ocb_process()
    return P, _certified(P.scenario, P.matrix)


@pytest.fixture(scope="module")
def comb():
    sc = Scenario.from_dims([2, 2, 2, 2])
    W = random_comb(sc, [1, 0], np.random.default_rng(11))
    return sc, W, _certified(sc, W)


def _with(cert: Certificate, arrays=None, **meta) -> Certificate:
    return dataclasses.replace(cert, arrays={**cert.arrays, **(arrays or {})},
                               metadata={**cert.metadata, **meta})


def test_ocb_witness_verifies(ocb):
    """OCB is certified nonseparable with R_r >= bound, bound within 1e-6 below sqrt2 - 1
    (value from workers/THEORY.md §5, OCB 2012)."""
    P, v = ocb
    assert v.certified and v.verdict == "nonseparable"
    rep = verify_certificate(P.scenario, P.matrix, v.certificate)
    assert rep.ok and rep.verdict == "nonseparable"
    assert np.sqrt(2) - 1 - 1e-6 < rep.bound <= np.sqrt(2) - 1 + 1e-9


def test_roundtrip_through_arrays(ocb):
    """to_arrays/from_arrays keep everything the checker needs (storage for HDF5)."""
    P, v = ocb
    again = Certificate.from_arrays(v.certificate.to_arrays())
    assert again.metadata == v.certificate.metadata
    assert verify_certificate(P.scenario, P.matrix, again).ok


def test_lugano_witness_verifies():
    """Lugano is causally nonseparable (Baumeler & Wolf 2016): its witness verifies exactly."""
    P = lugano_process()
    v = _certified(P.scenario, P.matrix)
    assert v.certified and v.verdict == "nonseparable" and v.witness_bound > 0
    assert verify_certificate(P.scenario, P.matrix, v.certificate).ok


@pytest.mark.slow
def test_quantum_switch_witness_verifies():
    """The quantum switch is causally nonseparable (Araujo et al. 2015); 256 x 256, slow."""
    P = quantum_switch(2)
    v = _certified(P.scenario, P.matrix)
    assert v.certified and v.verdict == "nonseparable"
    assert verify_certificate(P.scenario, P.matrix, v.certificate).ok


def test_flipped_sign_is_rejected(ocb):
    """Negating a dual block makes it negative semidefinite: the witness must fail."""
    P, v = ocb
    Y = v.certificate.arrays["dual_blocks"].copy()
    Y[0] = -Y[0]
    rep = verify_certificate(P.scenario, P.matrix, _with(v.certificate, {"dual_blocks": Y}))
    assert not rep.ok


def test_broken_constraint_is_rejected(ocb):
    """Adding sigma on a pattern where both leaves' duals must agree (only the all-ones row)
    to one block breaks the witness constraints; the checker reports it."""
    P, v = ocb
    sc = P.scenario
    systems = exact_systems(sc, "exact")
    p = next(q for q, s in systems.items() if q and len(s.rows) == 1)
    alpha = int(np.nonzero(pattern_codes(sc.subsystem_dims) == p)[0][0])
    sigma = basis_element(np.unravel_index(alpha, [d * d for d in sc.subsystem_dims]),
                          sc.subsystem_dims)
    Y = v.certificate.arrays["dual_blocks"].copy()
    Y[0] = Y[0] + 0.3 * sigma
    rep = verify_certificate(sc, P.matrix, _with(v.certificate, {"dual_blocks": Y}))
    assert not rep.ok and "constraints" in rep.reason


def test_swapped_process_is_rejected(ocb):
    """W swapped for white noise (separable, workers/THEORY.md §5): rejected by fingerprint, and
    also by the exact inequality when the fingerprint is forged."""
    P, v = ocb
    noise = white_noise(P.scenario)
    rep = verify_certificate(P.scenario, noise, v.certificate)
    assert not rep.ok and "different process" in rep.reason
    forged = _with(v.certificate, w_sha256=fingerprint(noise))
    rep = verify_certificate(P.scenario, noise, forged)
    assert not rep.ok and "not negative" in rep.reason


def test_witness_from_sufficient_only_structure_is_rejected(ocb):
    """A witness of the fixed-order mixtures (a smaller set) proves nothing about causal
    separability (workers/THEORY.md §4: sufficient condition only)."""
    P, v = ocb
    rep = verify_certificate(P.scenario, P.matrix, _with(v.certificate, method="fixed_orders"))
    assert not rep.ok and "cannot support" in rep.reason


def test_comb_gets_small_delta(comb):
    """A comb is causally separable (workers/THEORY.md §6): certified with delta' <= 1e-7."""
    sc, W, v = comb
    assert v.certified and v.verdict == "separable"
    assert v.decomposition_delta <= 1e-7
    assert verify_certificate(sc, W, v.certificate).ok


def test_tripartite_comb_gets_small_delta():
    """A tripartite comb (order C < A < B) is separable: certified with delta' <= 1e-6."""
    sc = Scenario.from_dims([2] * 6)
    W = random_comb(sc, [2, 0, 1], np.random.default_rng(5))
    v = _certified(sc, W)
    assert v.certified and v.verdict == "separable" and v.decomposition_delta <= 1e-6


def test_tampered_decomposition_is_rejected(comb):
    """Negated leaf, or leaves checked against the OCB process (nonseparable), are rejected."""
    sc, W, v = comb
    leaves = v.certificate.arrays["leaves"].copy()
    leaves[1] = -leaves[1]
    assert not verify_certificate(sc, W, _with(v.certificate, {"leaves": leaves})).ok
    ocb_W = ocb_process().matrix
    forged = _with(v.certificate, w_sha256=fingerprint(ocb_W))
    assert not verify_certificate(sc, ocb_W, forged).ok


def test_undecided_when_nothing_to_certify(comb):
    """A separable decomposition is not offered as nonseparable: claiming the other verdict
    fails."""
    sc, W, v = comb
    rep = verify_certificate(sc, W, dataclasses.replace(v.certificate, verdict="nonseparable"))
    assert not rep.ok and "claims" in rep.reason
