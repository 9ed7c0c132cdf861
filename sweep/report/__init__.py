"""Reports: per-point statistics and figures."""
