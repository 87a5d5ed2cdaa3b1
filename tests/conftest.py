"""Shared test configuration: the helpers' folder on the path; matplotlib without a display;
seeded hypothesis profile."""

import os
import sys
from pathlib import Path

import matplotlib
from hypothesis import HealthCheck, settings

# shared helpers (repo.py, lawplants.py, sizingplants.py, export_helpers.py) live in tests/
sys.path.insert(0, str(Path(__file__).resolve().parent))

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
