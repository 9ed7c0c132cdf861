"""Exact arithmetic and certificates: rigorous PSD decisions, the integer product basis, exact
per-pattern projections, and verification of witness and decomposition certificates with no
solver involved (workers/THEORY.md §9)."""
