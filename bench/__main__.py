"""``python -m bench``: run the throughput benchmarks (see bench/run.py)."""

from bench.run import main

raise SystemExit(main())
