"""Shared test configuration: headless plotting and derandomised property tests."""

import os

import matplotlib

matplotlib.use("Agg")

from hypothesis import settings  # noqa: E402

# Derandomised everywhere so CI is reproducible; more examples when asked for locally.
settings.register_profile("ci", derandomize=True, max_examples=60, deadline=None)
settings.register_profile("thorough", derandomize=False, max_examples=500, deadline=None)
settings.load_profile(os.environ.get("GQSIM_HYPOTHESIS_PROFILE", "ci"))
