"""Write the demo plant ``plants/light_truss.toml`` from a lumped planar truss model.

An invented demo scenario with plausible numbers: a light three-bay planar truss boom
(1.5 m long, 0.3 m deep, carbon tubes) clamped at its root, with three piezo struts in place of
three of its bars, each with a force sensor in series (the usual set-up for integral force
feedback).

Six free nodes with x and y motion give 12 degrees of freedom, so 12 modes. Bars are axial
springs EA/L along their axis; node masses lump the joints and half of each tube. The struts'
own stiffness is part of K, so the modes written are those of the structure *with* the
passive struts, as the plant file requires. A strut's sites ``<strut>_a`` and ``<strut>_b``
are the motions of its two end nodes along the strut axis (from a to b), so its extension is
b − a.

Run: ``python scripts/make_truss_plant.py``.
"""

from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # run from a checkout

from dampctl.model.components import (  # noqa: E402
    Actuator,
    Disturbance,
    Output,
    Pair,
    PartPrice,
    Requirements,
    Sensor,
)
from dampctl.model.plant import ModalPlant  # noqa: E402
from dampctl.model.plantfile import dump_plant  # noqa: E402

HEADER = """\
# Light three-bay truss boom with piezo struts -- an invented demo scenario (plausible, not
# measured, numbers). Written by scripts/make_truss_plant.py from a lumped planar truss model
# (12 degrees of freedom); the modes are those of the structure WITH the passive struts.
# Sites <strut>_a / <strut>_b are the strut's end-node motions along its axis. SI units;
# frequencies in Hz.
"""

BAY_M, DEPTH_M = 0.5, 0.3
NODE_MASS_KG = 0.25
TUBE_EA_N = 1.6e6  # carbon tube, E·A
STRUT_STIFFNESS = {"strut_1": 2.4e6, "strut_2": 2.4e6, "strut_3": 2.0e6}  # N/m
# piezo stacks: free capacitance (F) and coupling factor k (k² = d² k_s / C: about 0.2 µm per
# volt, so the 30 µm stroke needs about 150 V); invented, plausible for a stack of this size
STRUT_CAPACITANCE_F = 4e-7
STRUT_COUPLING = 0.5


def geometry() -> tuple[dict[str, tuple[float, float]], list[tuple[str, str, str | None]]]:
    """Nodes (name: (x, y), m) and bars (node a, node b, strut name or None)."""
    nodes = {"r0": (0.0, 0.0), "r1": (0.0, DEPTH_M)}  # clamped root
    for bay in range(1, 4):
        nodes[f"b{bay}"] = (bay * BAY_M, 0.0)
        nodes[f"t{bay}"] = (bay * BAY_M, DEPTH_M)
    bars: list[tuple[str, str, str | None]] = []
    below = {0: "r0", 1: "b1", 2: "b2", 3: "b3"}
    above = {0: "r1", 1: "t1", 2: "t2", 3: "t3"}
    for bay in range(1, 4):
        bars.append((below[bay - 1], below[bay], "strut_1" if bay == 1 else None))
        bars.append((above[bay - 1], above[bay], "strut_2" if bay == 1 else None))
        bars.append((below[bay], above[bay], None))  # batten
        bars.append((below[bay - 1], above[bay], "strut_3" if bay == 2 else None))  # diagonal
        bars.append((above[bay - 1], below[bay], None))  # cross diagonal (redundant truss)
    return nodes, bars


def lumped_model():
    """M, K (with the struts), the DOF names, and each strut's (a, b, axis) data."""
    nodes, bars = geometry()
    free = [n for n in nodes if not n.startswith("r")]
    dofs = [f"{n}_{axis}" for n in free for axis in ("x", "y")]
    index = {d: k for k, d in enumerate(dofs)}
    n = len(dofs)
    M = np.eye(n) * NODE_MASS_KG
    K = np.zeros((n, n))
    struts = {}
    for a, b, strut in bars:
        (xa, ya), (xb, yb) = nodes[a], nodes[b]
        length = np.hypot(xb - xa, yb - ya)
        e = np.array([xb - xa, yb - ya]) / length
        k = STRUT_STIFFNESS[strut] if strut else TUBE_EA_N / length
        # extension = e·(u_b − u_a) = t @ x
        t = np.zeros(n)
        for node, sign in ((a, -1.0), (b, 1.0)):
            if node in free:
                t[index[f"{node}_x"]] += sign * e[0]
                t[index[f"{node}_y"]] += sign * e[1]
        K += k * np.outer(t, t)
        if strut:
            struts[strut] = (a, b, e)
    return M, K, dofs, struts, index


def build() -> ModalPlant:
    """The demo plant."""
    M, K, dofs, struts, index = lumped_model()
    base = ModalPlant.from_lumped(M, K, dofs, damping=0.0)
    phi = np.array([base.sites[d] for d in dofs])
    # scale each shape so that its largest nodal translation is 1: modal mass 1/scale² (kg)
    scale = np.max(np.abs(phi), axis=0)
    phi = phi / scale
    phi[np.abs(phi) < 1e-12] = 0.0  # eigensolver round-off: exact zeros
    sites = {}
    for name, (a, b, e) in struts.items():
        for end, node in (("a", a), ("b", b)):
            row = np.zeros(base.n_modes)
            if not node.startswith("r"):
                row = e[0] * phi[index[f"{node}_x"]] + e[1] * phi[index[f"{node}_y"]]
            sites[f"{name}_{end}"] = row
    sites["tip_y"] = phi[index["t3_y"]]
    sites["tip_x"] = phi[index["t3_x"]]
    labels = _labels(phi, index)
    modes = [
        dataclasses.replace(
            m, damping=0.004 if k < 6 else 0.006, modal_mass_kg=1.0 / s**2, label=labels[k]
        )
        for k, (m, s) in enumerate(zip(base.modes, scale, strict=True))
    ]
    actuators = [
        Actuator(
            name=name,
            kind="strut",
            between=(f"{name}_a", f"{name}_b"),
            stiffness_n_per_m=STRUT_STIFFNESS[name],
            max_stroke_m=30e-6,
            max_force_n=600.0,
            bandwidth_hz=3000.0,
            cost=1800.0,
            capacitance_f=STRUT_CAPACITANCE_F,
            coupling_k=STRUT_COUPLING,
        )
        for name in struts
    ]
    sensors = [
        Sensor(
            name=f"load_{name[-1]}",
            kind="force",
            actuator=name,
            noise_density=2e-4,
            bandwidth_hz=20000.0,
            cost=450.0,
        )
        for name in struts
    ]
    pairs = [
        Pair(name=f"iff_{name[-1]}", actuator=name, sensor=f"load_{name[-1]}") for name in struts
    ]
    outputs = [
        Output(name="tip_y", kind="displacement", site="tip_y"),
        Output(name="tip_x", kind="displacement", site="tip_x"),
    ]
    disturbances = [Disturbance(name="tip_shaker", site="tip_y", psd=1e-3)]
    requirements = Requirements(
        modes=(1, 2, 3),
        min_damping=0.015,
        sample_rate_hz=20000.0,
        loop_delay_s=2e-5,
        min_gain_margin_db=6.0,
        min_phase_margin_deg=35.0,
    )
    return ModalPlant(
        modes=modes,
        sites=sites,
        actuators=actuators,
        sensors=sensors,
        pairs=pairs,
        outputs=outputs,
        disturbances=disturbances,
        requirements=requirements,
        title="light truss boom with piezo struts (demo)",
        # prices of passive networks (invented): a resistor on a board, or a resistor and a
        # synthetic inductor (op-amp gyrator with its supply)
        parts=[
            PartPrice(name="resistive shunt", kind="r_shunt", cost=60.0),
            PartPrice(name="resistive-inductive shunt", kind="rl_shunt", cost=480.0),
        ],
    )


def _labels(phi: np.ndarray, index: dict[str, int]) -> list[str]:
    """Name modes by the tip motion: bending (tip moves in y), axial (in x), else local."""
    counts = {"bending": 0, "axial": 0, "local": 0}
    labels = []
    for k in range(phi.shape[1]):
        tip_x = phi[index["t3_x"], k] + phi[index["b3_x"], k]
        tip_y = phi[index["t3_y"], k] + phi[index["b3_y"], k]
        if abs(tip_y) > 0.5 * 2 and abs(tip_y) > abs(tip_x):
            kind = "bending"
        elif abs(tip_x) > 0.5 * 2:
            kind = "axial"
        else:
            kind = "local"
        counts[kind] += 1
        labels.append(f"{kind} {counts[kind]}")
    return labels


def main() -> None:
    """Write ``plants/light_truss.toml``."""
    path = ROOT / "plants" / "light_truss.toml"
    path.write_text(HEADER + "\n" + dump_plant(build()), encoding="utf-8")
    print(f"wrote {path.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
