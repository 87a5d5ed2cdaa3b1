"""Write the demo plant ``plants/scanning_stage.toml`` (and its bundled copy) from a lumped model.

An invented demo scenario with plausible numbers: a planar two-axis flexure scanning stage.

Degrees of freedom (8, so 8 modes):

* the machine frame on its floor mounts: ``frame_x``, ``frame_y`` (m) and ``frame_rz`` (rad);
* the stage on its x/y flexures, inside the frame: ``stage_x``, ``stage_y``, ``stage_rz``;
* the tool (probe) at the end of a short arm on the stage: ``tool_x``, ``tool_y``.

x, y and rotation are uncoupled in the stiffness matrix (the flexure layout is symmetric), so
the modes come as x, y and rotation families. The stage flexures are nearly symmetric (the y
flexures 0.8 % stiffer), which gives a near-repeated x/y stage pair; frame mounts and tool arm
are clearly asymmetric.

Four voice coils push between frame and stage (two along x at y = ±40 mm, two along y at
x = ±40 mm). A coil site is the coil's stroke direction: stage motion minus frame motion at
the coil, so a force actuator there applies the equal and opposite coil forces and a velocity
sensor there (the coil's collocated velocity pick-up) reads the relative velocity. Two
capacitive gauges sit at coils x1 and y1.

Run: ``python scripts/make_stage_plant.py`` (rewrites both files, byte-identical).
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
# Two-axis flexure scanning stage -- an invented demo scenario (plausible, not measured, numbers).
# Written by scripts/make_stage_plant.py from a lumped 8-DOF model (frame on floor mounts,
# stage on nearly symmetric x/y flexures, tool on a short arm); see that script for the model.
# Coil sites (coil_*) are the stroke directions of voice coils that push between frame and
# stage: stage motion minus frame motion at the coil. In the frame rotation mode (mode 1) frame
# and stage turn together, so the coils barely see it: `dampctl check` says so.
# SI units; frequencies in Hz.
"""

DOFS = ("frame_x", "frame_y", "frame_rz", "stage_x", "stage_y", "stage_rz", "tool_x", "tool_y")
COIL_ARM_M = 0.04  # coil offset from the stage centre (m)
RIM_M = {"frame_rz": 0.15, "stage_rz": 0.05}  # radius (m) used to scale rotational shapes


def lumped_model() -> tuple[np.ndarray, np.ndarray]:
    """Mass (kg, kg·m²) and stiffness (N/m, N·m/rad) matrices over :data:`DOFS`."""
    m_frame, j_frame = 14.0, 0.20
    m_stage, j_stage = 1.2, 2.4e-3
    m_tool = 0.06
    M = np.diag([m_frame, m_frame, j_frame, m_stage, m_stage, j_stage, m_tool, m_tool])
    k_mount = (7.5e6, 9.0e6)  # frame to floor, x and y (N/m)
    k_mount_rz = 6.0e4  # N·m/rad
    k_flex = (2.2e6, 2.2e6 * 1.008)  # stage flexures, x and y: 0.8 % asymmetry
    k_flex_rz = 2.0e4  # rotational stiffness of the flexure set (N·m/rad)
    k_arm = (6.0e6, 7.2e6)  # tool arm, x and y
    K = np.zeros((8, 8))

    def spring(i: int, j: int | None, k: float) -> None:
        K[i, i] += k
        if j is not None:
            K[j, j] += k
            K[i, j] -= k
            K[j, i] -= k

    for axis in (0, 1):
        spring(axis, None, k_mount[axis])  # frame to floor
        spring(axis, 3 + axis, k_flex[axis])  # stage to frame
        spring(3 + axis, 6 + axis, k_arm[axis])  # tool to stage
    spring(2, None, k_mount_rz)
    spring(2, 5, k_flex_rz)
    return M, K


def coil_row(shapes: dict[str, np.ndarray], axis: str, offset: float) -> np.ndarray:
    """Stroke of a coil along ``axis`` at ``offset`` (m) from the stage centre, per mode."""
    rel = shapes[f"stage_{axis}"] - shapes[f"frame_{axis}"]
    rz = shapes["stage_rz"] - shapes["frame_rz"]
    # a point at (0, y0) moves in x by -y0·rz; a point at (x0, 0) moves in y by +x0·rz
    return rel - offset * rz if axis == "x" else rel + offset * rz


def build() -> ModalPlant:
    """The demo plant."""
    M, K = lumped_model()
    base = ModalPlant.from_lumped(M, K, DOFS, damping=0.0)
    # scale each mass-normalized shape so that its largest translation is 1 (modal mass
    # 1/scale² kg), rotations counted as the motion of a point at RIM_M from the centre: the
    # modal masses printed by `dampctl check` are then physical
    phi = np.array([base.sites[d] for d in DOFS])
    lever = np.array([RIM_M.get(d, 1.0) for d in DOFS])[:, None]
    scale = np.max(np.abs(phi * lever), axis=0)
    phi = phi / scale
    phi[np.abs(phi) < 1e-12 * np.max(np.abs(phi))] = 0.0  # eigensolver round-off: exact zeros
    shapes = {d: phi[j] for j, d in enumerate(DOFS)}
    sites = {
        "frame_x": shapes["frame_x"],
        "frame_y": shapes["frame_y"],
        "stage_x": shapes["stage_x"],
        "stage_y": shapes["stage_y"],
        "tool_x": shapes["tool_x"],
        "tool_y": shapes["tool_y"],
        "coil_x1": coil_row(shapes, "x", COIL_ARM_M),
        "coil_x2": coil_row(shapes, "x", -COIL_ARM_M),
        "coil_y1": coil_row(shapes, "y", COIL_ARM_M),
        "coil_y2": coil_row(shapes, "y", -COIL_ARM_M),
    }
    labels, dampings = [], []
    for k in range(base.n_modes):
        energy = {d: M[j, j] * phi[j, k] ** 2 for j, d in enumerate(DOFS)}
        part = max(energy, key=energy.get)
        body, axis = part.split("_")
        labels.append(f"{body} {axis}")
        # invented but typical damping: mounts 2 %, flexures 0.5 %, tool arm 0.3 %
        dampings.append({"frame": 0.02, "stage": 0.005, "tool": 0.003}[body])
    modes = [
        dataclasses.replace(m, damping=z, label=label, modal_mass_kg=1.0 / s**2)
        for m, z, label, s in zip(base.modes, dampings, labels, scale, strict=True)
    ]
    actuators = [
        Actuator(
            name=f"coil_{s}",
            kind="force",
            site=f"coil_{s}",
            max_force_n=40.0,
            bandwidth_hz=8000.0,
            cost=650.0,
        )
        for s in ("x1", "x2", "y1", "y2")
    ]
    sensors = [
        Sensor(
            name=f"vel_{s}",
            kind="velocity",
            site=f"coil_{s}",
            noise_density=5e-8,
            bandwidth_hz=10000.0,
            cost=300.0,
        )
        for s in ("x1", "x2", "y1", "y2")
    ] + [
        Sensor(
            name=f"gap_{s}",
            kind="displacement",
            site=f"coil_{s}",
            noise_density=2e-11,
            bandwidth_hz=5000.0,
            cost=900.0,
        )
        for s in ("x1", "y1")
    ]
    pairs = [
        Pair(name=f"v{s}", actuator=f"coil_{s}", sensor=f"vel_{s}")
        for s in ("x1", "x2", "y1", "y2")
    ]
    pairs += [Pair(name=f"d{s}", actuator=f"coil_{s}", sensor=f"gap_{s}") for s in ("x1", "y1")]
    outputs = [
        Output(name="probe_x", kind="relative_displacement", between=("frame_x", "tool_x")),
        Output(name="probe_y", kind="relative_displacement", between=("frame_y", "tool_y")),
    ]
    floor_psd = np.array([[5.0, 4e-6], [80.0, 4e-6], [400.0, 4e-7], [3000.0, 1e-9]])
    disturbances = [
        Disturbance(name="floor_x", site="frame_x", psd=floor_psd),
        Disturbance(name="floor_y", site="frame_y", psd=floor_psd),
    ]
    numbers = [k + 1 for k, label in enumerate(labels) if label.startswith("stage")]
    requirements = Requirements(
        modes=tuple(numbers),
        min_damping=0.05,
        sample_rate_hz=20000.0,
        loop_delay_s=2e-5,
        min_gain_margin_db=6.0,
        min_phase_margin_deg=35.0,
        max_rms={"probe_x": 6e-9, "probe_y": 6e-9},
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
        title="two-axis flexure scanning stage (demo)",
        # prices of passive parts (invented): a machined absorber with its flexure and
        # elastomer, priced by its mass, and a small viscous damper with its brackets
        parts=[
            PartPrice(name="tuned absorber", kind="absorber", cost=180.0, cost_per_kg=900.0),
            PartPrice(name="viscous damper", kind="damper", cost=420.0),
        ],
    )


def main() -> None:
    """Write ``plants/scanning_stage.toml`` and ``dampctl/data/scanning_stage.toml``."""
    text = HEADER + "\n" + dump_plant(build())
    for path in (
        ROOT / "plants" / "scanning_stage.toml",
        ROOT / "dampctl" / "data" / "scanning_stage.toml",
    ):
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
        print(f"wrote {path.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
