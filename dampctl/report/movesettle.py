"""The report's "Move and settle" comparison: one move four ways.

Open loop, open loop with an input shaper, damped (the design's closed loop as it runs, or
the structure with a passive design's parts), and damped with a shaper — the shaper designed
on the open-loop modes for the shaped run and on the closed-loop (damped) modes for the damped
and shaped run, unless one shaper is given for both
(:func:`dampctl.laws.shaping.design_shaper`, :func:`dampctl.discrete.simulate.simulate_move`;
a passive design by :func:`dampctl.discrete.passive_move.simulate_passive_move`, a step move
only: its parts are simulated exactly, with no loop to sample).
The result is JSON-ready (what :func:`dampctl.report.html.render_report` shows) plus the
figure of the four time histories.
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from typing import Any

import numpy as np

from dampctl.design import Design
from dampctl.discrete.profiles import Record, move_profile
from dampctl.discrete.simulate import default_move_duration, simulate_move
from dampctl.errors import UsageError
from dampctl.laws.shapers import Shaper
from dampctl.laws.shaping import design_shaper
from dampctl.model.plant import ModalPlant

__all__ = ["MoveComparison", "move_and_settle"]

LABELS = ("open loop", "shaped", "damped", "damped and shaped")


@dataclass(frozen=True)
class MoveComparison:
    """One move four ways.

    Attributes
    ----------
    summary : dict
        JSON-ready: ``setup`` (the move), ``rows`` (one per run: ``label``, ``shaper``,
        ``settling_time_s``, ``overshoot``, ``residual_rms``, ``peak``, ``command_end_s``,
        ``peak_force_n``, ``saturated_s``), ``notes``.
    figure : bytes
        PNG of the four time histories of the moved output.
    """

    summary: dict
    figure: bytes


def _row(label: str, run, sim, output: str, drive: str, shaper) -> dict[str, Any]:
    out = run.output(output)
    act = run.actuator(drive)
    return {
        "label": label,
        "loop": run.loop,
        "shaper": None if shaper is None else {
            "kind": shaper.kind, "duration_s": shaper.duration_s,
            "modes": list(shaper.modes), "modes_hz": list(shaper.modes_hz)},
        "settling_time_s": out.settling_time_s,
        "overshoot": out.overshoot,
        "residual_rms": out.residual_rms,
        "peak": out.peak,
        "command_end_s": sim.setup["command_end_s"],
        "peak_force_n": act.peak_force_n,
        "saturated_s": act.saturated_s,
    }


def move_and_settle(
    plant: ModalPlant,
    design: Design,
    *,
    drive: str,
    output: str,
    distance_m: float,
    profile: str = "step",
    max_velocity: float | None = None,
    max_acceleration: float | None = None,
    record: Record | None = None,
    shaper: Shaper | None = None,
    settle_band_m: float | None = None,
    duration_s: float | None = None,
) -> MoveComparison:
    """Simulate one move open loop, shaped, damped, and damped and shaped.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        An active design (its loop is simulated as it runs) or a passive one (its parts in
        place; a step move only, shaped by the shaper).
    drive, output : str
        Actuator making the move, displacement output that moves.
    distance_m : float
        Size of the move (m).
    profile : str, optional
        Move profile (:func:`dampctl.discrete.profiles.move_profile`). Default ``"step"``.
    max_velocity, max_acceleration : float, optional
        Limits (m/s, m/s²) of a trapezoid or S-curve.
    record : Record, optional
        The fraction of the move against time, for ``profile="record"``.
    shaper : Shaper, optional
        One shaper for both shaped runs; default a ZVD on the design's target modes (their
        open-loop values for "shaped", their closed-loop values for "damped and shaped").
    settle_band_m : float, optional
        Settling band ± (m); default 1 % of the move.
    duration_s : float, optional
        Record length (s); default long enough for the slowest run to settle.

    Returns
    -------
    MoveComparison

    Raises
    ------
    UsageError
        A passive design with a profile other than a step, or a bad move.
    """
    from dampctl.report.figures_time import plot_moves

    passive = bool(getattr(design, "passive", False))
    if passive and profile != "step":
        raise UsageError(f"a {design.law} design (passive) moves by a step only, shaped by "
                         f"the shaper; got profile {profile!r}")
    modes = list(design.target_modes) or [int(np.argmax(plant.freqs_hz)) + 1]
    if shaper is None:
        open_shaper = design_shaper(plant, modes, kind="zvd", drift=0.0).shaper
        closed_shaper = design_shaper(plant, modes, design=design, kind="zvd", drift=0.0).shaper
    else:
        open_shaper = closed_shaper = shaper
    if duration_s is None:  # one record length for the four runs: the longest default
        timing = move_profile(profile, distance_m, max_velocity=max_velocity,
                              max_acceleration=max_acceleration, record=record)
        longest = max(open_shaper.duration_s, closed_shaper.duration_s)
        duration_s = default_move_duration(plant, timing.move_time_s + longest)
    move = {"drive": drive, "output": output, "distance_m": distance_m, "profile": profile,
            "max_velocity": max_velocity, "max_acceleration": max_acceleration,
            "record": record, "settle_band_m": settle_band_m, "duration_s": duration_s}
    if passive:
        from dampctl.discrete.passive_move import simulate_passive_move

        exact = {"drive": drive, "output": output, "distance_m": distance_m,
                 "settle_band_m": settle_band_m, "duration_s": duration_s}
        plain = simulate_passive_move(plant, design, **exact)
        both = simulate_passive_move(plant, design, shaper=closed_shaper, **exact)
    else:
        plain = simulate_move(plant, design, **move)
        both = simulate_move(plant, design, shaper=closed_shaper, **move)
    shaped = simulate_move(plant, None, shaper=open_shaper, **move)
    runs = [(LABELS[0], plain.open_loop, plain, None),
            (LABELS[1], shaped.result, shaped, open_shaper),
            (LABELS[2], plain.result, plain, None),
            (LABELS[3], both.result, both, closed_shaper)]
    rows = [_row(label, run, sim, output, drive, sh) for label, run, sim, sh in runs]
    notes = []
    for sim in (plain, shaped, both):
        notes.extend(n for n in sim.notes if n not in notes)
    from matplotlib.figure import Figure

    target = plain.result.output(output).target
    traces = {label: run.output(output).values for label, run, _, _ in runs}
    figure = Figure(figsize=(11.0, 4.2))
    figure.subplots_adjust(left=0.07, right=0.98, bottom=0.14, top=0.9, wspace=0.22)
    whole, zoom = figure.add_subplot(1, 2, 1), figure.add_subplot(1, 2, 2)
    band = plain.setup["settle_band_m"]
    plot_moves(plain.time_s, traces, output=output, target=target, band=band, ax=whole)
    settled = [r["settling_time_s"] for r in rows if r["settling_time_s"]]
    longest_end = max(r["command_end_s"] for r in rows)
    window = max(5 * min(settled) if settled else plain.duration_s, 1.5 * longest_end)
    plot_moves(plain.time_s, traces, output=output, target=target, band=band,
               until_s=min(window, plain.duration_s), ax=zoom)
    setup = {k: v for k, v in plain.setup.items() if k != "shaper"}
    setup["sample_rate_hz"] = plain.sample_rate_hz
    setup["duration_s"] = plain.duration_s
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=110)
    return MoveComparison({"setup": setup, "rows": rows, "notes": notes}, buffer.getvalue())
