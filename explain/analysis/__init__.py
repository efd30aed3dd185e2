"""Compute: pure functions on a model's arrays that return frozen result objects."""
