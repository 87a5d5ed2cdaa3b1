"""Shared test configuration: the helpers' folder on the path; matplotlib without a display;
seeded hypothesis profile; the demo run once per session."""

import io
import os
import sys
from pathlib import Path
from types import SimpleNamespace

import matplotlib
import pytest
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


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory):
    """``dampctl demo --json`` run once for the whole session (about 10 s): its exit code,
    stdout, stderr and folder (the only thing inside ``folder.parent``)."""
    from dampctl.commands.cli import main

    folder = tmp_path_factory.mktemp("demo-run") / "demo"
    out, err = io.StringIO(), io.StringIO()
    code = main(["demo", "-o", str(folder), "--json"], stdout=out, stderr=err)
    return SimpleNamespace(code=code, out=out.getvalue(), err=err.getvalue(), folder=folder)
