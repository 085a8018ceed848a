"""Benchmarks: speed and memory targets, with baselines measured in the same run."""
