"""Benchmarks: speed and accuracy targets, printed as ratios against a baseline in the same run."""
