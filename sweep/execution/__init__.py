"""Execution: clusters (local, address, jobqueue, allocation), TLS, the worker plugin and
preload, limits and preflight checks, the run loop, signals and the monitor."""
