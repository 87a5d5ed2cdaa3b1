"""Shared test configuration: matplotlib without a display; seeded hypothesis profile."""

import os

import matplotlib
from hypothesis import HealthCheck, settings

os.environ.setdefault("MPLBACKEND", "Agg")
matplotlib.use("Agg")

settings.register_profile(
    "dampctl",
    max_examples=40,
    deadline=None,
    derandomize=True,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.load_profile("dampctl")
