"""Write a large demo plant: a double-layer space grid from a lumped truss model, N modes kept.

An invented scenario with plausible numbers, for the scaling benchmark
(``scripts/bench_scale.py``) and for trying dampctl on plants the size of an FE model: the
double-layer grid that carries a large optical bench (about 6.0 m × 4.4 m, 0.5 m deep,
aluminium tubes), pinned at the four bottom corners. The top layer is a rectangular grid of
nodes 0.4 m apart, the bottom layer the grid of bay centres; every bar (top and bottom chords,
and the four diagonals from each bottom node up to the corners of its bay) is an axial spring
EA/L between two nodes with lumped masses (joints, and the deck on the top nodes). Each free
node has x, y and z motion; the modes are those of K φ = ω² M φ
(``ModalPlant.from_lumped``) and the lowest N are kept, as a modal model exported from an FE
solver keeps the modes below a cut-off. The grid grows (more bays along x) only when N asks for
more degrees of freedom than the 16 × 12 grid has (1071), so the plants of 100, 300 and 1000
modes are cut from one structure.

Hardware: 64 candidate pairs for velocity feedback and 8 for integral force feedback.

* 56 collocated vertical force actuators with velocity sensors (``dvf_<node>``) at top nodes
  spread over the deck;
* 8 vertical force actuators with displacement sensors (``ppf_<node>``) at eight more top
  nodes, for positive position feedback (velocity feedback takes them too, through its
  band-limited differentiator);
* 8 active struts in place of diagonals next to the supports, each with a force sensor in
  series (``iff_<k>``); their stiffness is the bar's, so the modes are those of the grid with
  the passive struts, as the plant file requires.

A shaker at a deck corner disturbs the grid; the vertical displacement of two deck points is
the performance output. The requirements ask 2 % damping on the first eight modes with 6 dB /
30 deg margins, sampled at 5 kHz with 50 us of computation delay.

Run: ``python scripts/make_grid_plant.py --modes 1000 -o grid_1000.toml``.
"""

from __future__ import annotations

import argparse
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
    Requirements,
    Sensor,
)
from dampctl.model.plant import ModalPlant  # noqa: E402
from dampctl.model.plantfile import dump_plant  # noqa: E402

PITCH_M = 0.4  # top-grid spacing
DEPTH_M = 0.5
TUBE_EA_N = 7.0e10 * 3.0e-4  # aluminium tube: E = 70 GPa, A = 3 cm²
JOINT_MASS_KG = 0.4  # joint and half of the tubes meeting there
DECK_MASS_KG = 1.6  # deck and payload carried by each top node
DAMPING = 0.004
NY = 12  # top nodes across
MIN_NX = 16  # top nodes along: 16 × 12 top + 15 × 11 bottom nodes, 1071 DOFs


def grid_size(n_modes: int) -> int:
    """Top nodes along x: at least ``MIN_NX``, and enough degrees of freedom for the modes."""
    nx = MIN_NX
    while 3 * (nx * NY + (nx - 1) * (NY - 1)) - 12 < n_modes:
        nx += 1
    return nx


def geometry(nx: int):
    """Nodes {name: (x, y, z)}, bars [(a, b)], and the pinned nodes."""
    nodes = {}
    for i in range(nx):
        for j in range(NY):
            nodes[f"t{i:02d}{j:02d}"] = (i * PITCH_M, j * PITCH_M, DEPTH_M)
    for i in range(nx - 1):
        for j in range(NY - 1):
            nodes[f"b{i:02d}{j:02d}"] = ((i + 0.5) * PITCH_M, (j + 0.5) * PITCH_M, 0.0)
    bars = []
    for i in range(nx):
        for j in range(NY):
            if i + 1 < nx:
                bars.append((f"t{i:02d}{j:02d}", f"t{i + 1:02d}{j:02d}"))
            if j + 1 < NY:
                bars.append((f"t{i:02d}{j:02d}", f"t{i:02d}{j + 1:02d}"))
    for i in range(nx - 1):
        for j in range(NY - 1):
            here = f"b{i:02d}{j:02d}"
            if i + 1 < nx - 1:
                bars.append((here, f"b{i + 1:02d}{j:02d}"))
            if j + 1 < NY - 1:
                bars.append((here, f"b{i:02d}{j + 1:02d}"))
            for di, dj in ((0, 0), (1, 0), (0, 1), (1, 1)):
                bars.append((here, f"t{i + di:02d}{j + dj:02d}"))
    corners = [f"b{0:02d}{0:02d}", f"b{nx - 2:02d}{0:02d}", f"b{0:02d}{NY - 2:02d}"]
    corners.append(f"b{nx - 2:02d}{NY - 2:02d}")
    return nodes, bars, corners


def lumped_model(nx: int):
    """M, K, the DOF names, the DOF index, the bars' extension rows and the pinned nodes."""
    nodes, bars, pinned = geometry(nx)
    free = [n for n in nodes if n not in pinned]
    dofs = [f"{n}_{axis}" for n in free for axis in "xyz"]
    index = {d: k for k, d in enumerate(dofs)}
    n = len(dofs)
    K = np.zeros((n, n))
    rows = {}
    for a, b in bars:
        pa, pb = np.array(nodes[a]), np.array(nodes[b])
        length = float(np.linalg.norm(pb - pa))
        e = (pb - pa) / length
        t = np.zeros(n)  # extension = e·(u_b − u_a) = t @ x
        for node, sign in ((a, -1.0), (b, 1.0)):
            if node not in pinned:
                for j, axis in enumerate("xyz"):
                    t[index[f"{node}_{axis}"]] += sign * e[j]
        stiffness = TUBE_EA_N / length
        K += stiffness * np.outer(t, t)
        rows[(a, b)] = (t, stiffness)
    masses = [JOINT_MASS_KG + (DECK_MASS_KG if d.startswith("t") else 0.0) for d in dofs]
    return np.diag(masses), K, dofs, index, rows, pinned


def _spread(nx: int, count: int, skip: set[str], seed: int) -> list[str]:
    """``count`` inner top nodes drawn with a fixed seed (the layout is part of the scenario),
    none in ``skip``."""
    out: list[str] = []
    rng = np.random.default_rng(seed)
    while len(out) < count:
        i, j = int(rng.integers(1, nx - 1)), int(rng.integers(1, NY - 1))
        name = f"t{i:02d}{j:02d}"
        if name not in skip and name not in out:
            out.append(name)
    return out


def build(n_modes: int) -> ModalPlant:
    """The grid with its lowest ``n_modes`` modes."""
    nx = grid_size(n_modes)
    M, K, dofs, index, bar_rows, pinned = lumped_model(nx)
    base = ModalPlant.from_lumped(M, K, dofs, damping=0.0)
    phi = np.array([base.sites[d] for d in dofs])[:, :n_modes]
    scale = np.max(np.abs(phi), axis=0)  # largest nodal translation 1: modal mass 1/scale² kg
    phi = phi / scale
    phi[np.abs(phi) < 1e-12] = 0.0  # eigensolver round-off: exact zeros

    sites: dict[str, np.ndarray] = {}
    actuators, sensors, pairs = [], [], []

    def vertical(node: str, kind: str, sensor_kind: str, prefix: str) -> None:
        site = f"{node}_z"
        sites[site] = phi[index[site]]
        actuators.append(
            Actuator(
                name=f"f_{node}", kind="force", site=site, max_force_n=20.0,
                bandwidth_hz=4000.0, cost=900.0,
            )
        )  # fmt: skip
        sensors.append(
            Sensor(
                name=f"{prefix}_{node}", kind=sensor_kind, site=site,
                noise_density=1e-7 if sensor_kind == "velocity" else 1e-9,
                bandwidth_hz=8000.0, cost=300.0 if sensor_kind == "velocity" else 400.0,
            )
        )  # fmt: skip
        pairs.append(Pair(name=f"{kind}_{node}", actuator=f"f_{node}", sensor=f"{prefix}_{node}"))

    dvf_nodes = _spread(nx, 56, set(), seed=11)
    for node in dvf_nodes:
        vertical(node, "dvf", "velocity", "v")
    for node in _spread(nx, 8, set(dvf_nodes), seed=12):
        vertical(node, "ppf", "displacement", "d")
    # active struts: the diagonals from the bottom nodes next to each pinned corner
    strut_bars = []
    for corner in pinned:
        i, j = int(corner[1:3]), int(corner[3:5])
        ii = i + (1 if i == 0 else -1)
        for di, dj in ((0, 0), (1, 1)):
            strut_bars.append((f"b{ii:02d}{j:02d}", f"t{ii + di:02d}{j + dj:02d}"))
    for k, (a, b) in enumerate(strut_bars, start=1):
        t, stiffness = bar_rows[(a, b)]
        name = f"strut_{k}"
        # sites: the strut's end motions along its axis, so that its extension is b − a
        rows = {"a": np.zeros(n_modes), "b": t @ phi}
        sites[f"{name}_a"], sites[f"{name}_b"] = rows["a"], rows["b"]
        actuators.append(
            Actuator(
                name=name, kind="strut", between=(f"{name}_a", f"{name}_b"),
                stiffness_n_per_m=float(stiffness), max_stroke_m=50e-6, max_force_n=800.0,
                bandwidth_hz=3000.0, cost=2200.0,
            )
        )  # fmt: skip
        sensors.append(
            Sensor(
                name=f"load_{k}", kind="force", actuator=name, noise_density=2e-4,
                bandwidth_hz=20000.0, cost=450.0,
            )
        )  # fmt: skip
        pairs.append(Pair(name=f"iff_{k}", actuator=name, sensor=f"load_{k}"))
    corner, middle = f"t{nx - 1:02d}{NY - 1:02d}", f"t{nx // 2:02d}{NY // 2:02d}"
    sites["deck_corner"] = phi[index[f"{corner}_z"]]
    sites["deck_middle"] = phi[index[f"{middle}_z"]]
    modes = [
        dataclasses.replace(m, damping=DAMPING, modal_mass_kg=1.0 / s**2)
        for m, s in zip(base.modes[:n_modes], scale, strict=True)
    ]
    return ModalPlant(
        modes=modes,
        sites=sites,
        actuators=actuators,
        sensors=sensors,
        pairs=pairs,
        outputs=[
            Output(name="deck_corner", kind="displacement", site="deck_corner"),
            Output(name="deck_middle", kind="displacement", site="deck_middle"),
        ],
        disturbances=[Disturbance(name="shaker", site="deck_corner", psd=1e-2)],
        requirements=Requirements(
            modes=tuple(range(1, 9)),
            min_damping=0.02,
            sample_rate_hz=5000.0,
            loop_delay_s=5e-5,
            min_gain_margin_db=6.0,
            min_phase_margin_deg=30.0,
        ),
        title=f"double-layer grid {nx} x {NY}, lowest {n_modes} modes (demo)",
    )


def header(n_modes: int) -> str:
    """Comment lines at the top of the written file."""
    return (
        f"# Double-layer space grid, lowest {n_modes} modes -- an invented demo scenario\n"
        "# (plausible, not measured, numbers). Written by scripts/make_grid_plant.py from a\n"
        "# lumped space-truss model; see that script for the model and the hardware. SI units;\n"
        "# frequencies in Hz.\n"
    )


def main(argv: list[str] | None = None) -> None:
    """Write the plant file named on the command line."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--modes", type=int, default=1000, help="modes kept (default 1000)")
    parser.add_argument("-o", "--output", required=True, help="plant file to write (TOML)")
    args = parser.parse_args(argv)
    if args.modes < 16:
        parser.error("--modes must be at least 16")
    path = Path(args.output)
    if path.exists():
        parser.error(f"{path} exists: choose another name")
    path.write_text(header(args.modes) + "\n" + dump_plant(build(args.modes)), encoding="utf-8")
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
