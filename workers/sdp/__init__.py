"""The SDP back-ends: compilation of the robustness problems into conic form, the SCS and
Clarabel registry, the batched interior point, the matrix-free splitting solver, and the
symmetry-reduced (commutant) problem (workers/THEORY.md §5)."""
