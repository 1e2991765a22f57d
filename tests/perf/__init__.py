"""Benchmarks (not part of the default test run): ``python -m tests.perf [--json FILE]``."""
