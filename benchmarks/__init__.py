"""Benchmarks and the data they run on."""
