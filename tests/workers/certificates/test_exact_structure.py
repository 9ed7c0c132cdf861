"""Tests of the exact per-pattern projections (identities of orthogonal projection)."""

from __future__ import annotations

import numpy as np

from workers.operators.basis import pattern_codes
from workers.certificates.exact_structure import exact_systems, project_affine, project_rowspace
from workers.operators.families import ocb_process


def test_projections_are_exact_and_idempotent():
    """Row-space projection is idempotent and its residual is orthogonal to the rows; the
    affine correction meets C_p x = h_p t exactly (linear algebra identities)."""
    sc = ocb_process().scenario
    systems = exact_systems(sc, "exact")
    codes = pattern_codes(sc.subsystem_dims)
    rng = np.random.default_rng(3)
    y = rng.integers(-50, 50, size=(2, codes.size)).astype(object)
    y_hat, s, L = project_rowspace(y, codes, systems)
    y2, _, L2 = project_rowspace(y_hat, codes, systems)
    assert np.all(y2 == y_hat * L2)
    for p, sysm in systems.items():
        idx = codes == p
        assert np.all(sysm.rows.dot(y[:, idx] * L - y_hat[:, idx]) == 0)
    t = rng.integers(-50, 50, size=codes.size).astype(object)
    for p, sysm in systems.items():
        if not sysm.spanned:
            t[codes == p] = 0
    x_hat, L = project_affine(y, t, codes, systems)
    for p, sysm in systems.items():
        idx = codes == p
        assert np.all(sysm.rows.dot(x_hat[:, idx]) == np.outer(sysm.h, t[idx]) * L)
