"""Causal games and causal inequalities: payoff tables, causal bounds by LP and see-saw values
(workers/THEORY.md §7)."""
