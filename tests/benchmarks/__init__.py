"""Benchmarks, run by hand (not collected by pytest); results in docs/benchmarks.md."""
