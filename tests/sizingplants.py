"""Small plants for the sizing tests, built in code (invented numbers)."""

from __future__ import annotations

import numpy as np

from dampctl.model.components import Actuator, Disturbance, Mode, Pair, Requirements, Sensor
from dampctl.model.plant import ModalPlant


def shape_plant(
    freqs_hz,
    shapes: dict,
    *,
    damping=0.005,
    costs=None,
    requirements=None,
    disturbances=(),
    title="test plant",
) -> ModalPlant:
    """Modal plant with a force/velocity pair ``p<site>`` at each named site (mass-normalized)."""
    modes = [Mode(float(f), damping) for f in freqs_hz]
    costs = costs or {}
    actuators = [Actuator(f"f{s}", "force", site=s, cost=costs.get(s, 100.0)) for s in shapes]
    sensors = [Sensor(f"v{s}", "velocity", site=s, cost=50.0) for s in shapes]
    pairs = [Pair(f"p{s}", f"f{s}", f"v{s}") for s in shapes]
    return ModalPlant(
        modes=modes,
        sites={**{s: list(v) for s, v in shapes.items()}, **{"d": [1.0] * len(modes)}},
        actuators=actuators,
        sensors=sensors,
        pairs=pairs,
        disturbances=list(disturbances),
        requirements=requirements or Requirements(),
        title=title,
    )


def random_plant(seed: int, n_modes: int = 5, n_sites: int = 6) -> ModalPlant:
    """Seeded random modal plant (well-separated modes) with force/velocity pairs."""
    rng = np.random.default_rng(seed)
    freqs = np.cumsum(rng.uniform(8.0, 20.0, n_modes)) + 10.0
    shapes = {f"s{j}": rng.normal(size=n_modes) for j in range(n_sites)}
    return shape_plant(freqs, shapes, damping=0.004)


def stage_plant(*, requirements=None) -> ModalPlant:
    """A symmetric stage: x and y translations at one frequency, rotation above.

    Sites on the stage edge see x, y and the rotation with the geometry of a square stage;
    a pair at a corner direction sees x and y only through one combination per pair.
    """
    freqs = [40.0, 40.0, 95.0]
    shapes = {
        "ax": [1.0, 0.0, 0.5],  # x direction at one edge
        "by": [0.0, 1.0, 0.5],  # y direction at another edge
        "cd": [0.7071, 0.7071, -0.4],  # diagonal direction at a corner
    }
    return shape_plant(
        freqs, shapes, damping=0.01, requirements=requirements, title="symmetric stage"
    )


def white_force(name: str = "w", site: str = "d", psd: float = 1e-2) -> Disturbance:
    """A white force disturbance (one-sided PSD in N²/Hz)."""
    return Disturbance(name=name, site=site, psd=psd)
