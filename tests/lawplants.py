"""Test plants for the damping laws, built in code from lumped models (no plant files)."""

from __future__ import annotations

import numpy as np

from dampctl.model.components import Actuator, Mode, Pair, Requirements, Sensor
from dampctl.model.plant import ModalPlant


def strut_plant(
    m1=1.0, m2=1.0, kp=1.0, ka=0.2, k2=1.0, *, damping=0.0, requirements=None, second=None
) -> ModalPlant:
    """Preumont's 2-DOF IFF set-up: ground–(flexure kp ∥ strut ka)–m1–k2–m2.

    The strut ``s1`` (stiffness ka, ground to m1) has a force sensor ``F1``, a relative
    velocity sensor ``dv1`` and a relative displacement sensor ``dx1``; m2 has a force actuator
    ``f2`` and velocity/displacement sensors ``v2``/``x2``. Pairs: ``iff1`` (s1/F1), ``dvf1``
    (s1/dv1), ``ppf1`` (s1/dx1), ``fv2`` (f2/v2), ``fx2`` (f2/x2), ``cross`` (s1/v2) and
    ``crossx`` (s1/x2), not collocated. With ``second`` = a stiffness, a second strut ``s2``
    (force sensor ``F2``) sits in parallel with k2, with pairs ``iff2`` (s2/F2) and ``mixed``
    (s2/F1).
    """
    M = np.diag([m1, m2])
    k2 = k2 + (second or 0.0)
    K = np.array([[kp + ka + k2, -k2], [-k2, k2]])
    base = ModalPlant.from_lumped(M, K, ["m1", "m2"], damping=damping)
    plant = ModalPlant(
        modes=base.modes,
        sites={**base.sites, "ground": np.zeros(2)},
        actuators=[
            Actuator("s1", "strut", between=("ground", "m1"), stiffness_n_per_m=ka),
            Actuator("f2", "force", site="m2"),
        ],
        sensors=[
            Sensor("F1", "force", actuator="s1"),
            Sensor("dv1", "relative_velocity", between=("ground", "m1")),
            Sensor("dx1", "relative_displacement", between=("ground", "m1")),
            Sensor("v2", "velocity", site="m2"),
            Sensor("x2", "displacement", site="m2"),
        ],
        pairs=[
            Pair("iff1", "s1", "F1"),
            Pair("dvf1", "s1", "dv1"),
            Pair("ppf1", "s1", "dx1"),
            Pair("fv2", "f2", "v2"),
            Pair("fx2", "f2", "x2"),
            Pair("cross", "s1", "v2"),
            Pair("crossx", "s1", "x2"),
        ],
        requirements=requirements or Requirements(),
        title="two-mass strut",
    )
    if second is None:
        return plant
    return ModalPlant(
        modes=plant.modes,
        sites=plant.sites,
        actuators=[
            *plant.actuators,
            Actuator("s2", "strut", between=("m1", "m2"), stiffness_n_per_m=second),
        ],
        sensors=[*plant.sensors, Sensor("F2", "force", actuator="s2")],
        pairs=[*plant.pairs, Pair("iff2", "s2", "F2"), Pair("mixed", "s2", "F1")],
        requirements=plant.requirements,
        title="two-mass, two struts",
    )


def cluster_plant(*, damping=0.005) -> ModalPlant:
    """Three modes, the first two near-repeated (10 and 10.05 Hz), and force/velocity pairs.

    Site ``a`` moves only in mode 1 (and 3), ``b`` only in mode 2 (and 3), ``c`` in all three,
    so pair ``pc`` alone spans one direction of the cluster, ``pa`` + ``pb`` span both.
    """
    modes = [Mode(10.0, damping), Mode(10.05, damping), Mode(31.0, damping)]
    sites = {"a": [1.0, 0.0, 0.6], "b": [0.0, 1.0, -0.5], "c": [0.7, 0.7, 0.4]}
    actuators = [Actuator(f"f{s}", "force", site=s) for s in sites]
    sensors = [Sensor(f"v{s}", "velocity", site=s) for s in sites]
    sensors += [Sensor(f"x{s}", "displacement", site=s) for s in sites]
    pairs = [Pair(f"p{s}", f"f{s}", f"v{s}") for s in sites]
    pairs += [Pair(f"q{s}", f"f{s}", f"x{s}") for s in sites]
    return ModalPlant(
        modes=modes,
        sites=sites,
        actuators=actuators,
        sensors=sensors,
        pairs=pairs,
        title="near-repeated pair of modes",
    )


def strut_chain(masses, springs, strut_k, where, *, damping=0.0) -> ModalPlant:
    """Grounded chain with an active strut ``s`` (force sensor ``F``) across spring ``where``.

    Spring j joins mass j−1 (ground for j = 0) and mass j; the strut sits in parallel with it,
    so the plant's modes include the passive strut stiffness. Pair ``iff`` = s/F.
    """
    n = len(masses)
    sites = ["ground"] + [f"m{j + 1}" for j in range(n)]
    K = np.zeros((n, n))
    for j, k in enumerate(springs):
        k = k + (strut_k if j == where else 0.0)
        lo, hi = j - 1, j
        K[hi, hi] += k
        if lo >= 0:
            K[lo, lo] += k
            K[lo, hi] -= k
            K[hi, lo] -= k
    base = ModalPlant.from_lumped(np.diag(masses), K, sites[1:], damping=damping)
    between = (sites[where], sites[where + 1])
    return ModalPlant(
        modes=base.modes,
        sites={**base.sites, "ground": np.zeros(n)},
        actuators=[Actuator("s", "strut", between=between, stiffness_n_per_m=strut_k)],
        sensors=[Sensor("F", "force", actuator="s")],
        pairs=[Pair("iff", "s", "F")],
        title="chain with a strut",
    )


def xy_stage(*, delay_s=1e-4, sample_rate_hz=10000.0, min_disk_margin_db=None) -> ModalPlant:
    """The 3-mode XY stage of issue 19: x at 150 Hz, y at 160 Hz, a coupled mode at 900 Hz.

    Force actuators ``fx``/``fy`` with collocated velocity sensors ``vx``/``vy`` (pairs
    ``vx1``, ``vy1``); 1.2 % open-loop damping; the loop delay (1e-4 s plus sampling at
    10 kHz) caps what velocity feedback can give the 900 Hz mode. Margin requirements 6 dB,
    35°.
    """
    modes = [
        Mode(150.0, 0.012, modal_mass_kg=2.0),
        Mode(160.0, 0.012, modal_mass_kg=2.0),
        Mode(900.0, 0.012, modal_mass_kg=0.5),
    ]
    sites = {"x": [1.0, 0.1, 0.8], "y": [0.1, 1.0, -0.7]}
    return ModalPlant(
        modes=modes,
        sites=sites,
        actuators=[Actuator("fx", "force", site="x"), Actuator("fy", "force", site="y")],
        sensors=[Sensor("vx", "velocity", site="x"), Sensor("vy", "velocity", site="y")],
        pairs=[Pair("vx1", "fx", "vx"), Pair("vy1", "fy", "vy")],
        requirements=Requirements(
            modes=(1, 2, 3),
            min_damping=0.05,
            sample_rate_hz=sample_rate_hz,
            loop_delay_s=delay_s,
            min_gain_margin_db=6.0,
            min_phase_margin_deg=35.0,
        ),
        title="xy stage",
    )
