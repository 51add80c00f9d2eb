"""Shared test settings: a deterministic hypothesis profile for CI and everyday runs."""

from hypothesis import settings

settings.register_profile("ci", deadline=None, derandomize=True, database=None, max_examples=40)
settings.load_profile("ci")
