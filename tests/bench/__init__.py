"""Benchmarks and studies. ``python -m tests.bench`` prints every table; none of these assert on time."""
