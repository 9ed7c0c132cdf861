"""Verdicts: robustness problems and their solves, exact shortcuts, causal separability, and
certified verdicts with the automatic second pass (workers/THEORY.md §4, §5, §9)."""
