"""Causal structures: PSD leaves with per-pattern linear systems, their merged layout and
reduced leaf spaces (workers/THEORY.md §3, §4)."""
