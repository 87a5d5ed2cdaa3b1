"""Assessment of a passive design: the structure with its parts, no loop.

:func:`~dampctl.analysis.assessment.assess` hands a passive design (tmd, viscous, shunt) here.
What an active design's assessment holds is kept where it means something and said plainly
where it does not:

* closed-loop modes: the poles of the structure with its parts (plant states plus the parts'
  own states, :func:`dampctl.analysis.passive.passive_statespace`), matched to the modes; a
  mode split by a tuned part shows the less damped of its two poles;
* peak reductions, FRFs, RMS at the outputs: exact, with the parts (no sensor noise: there is
  no sensor);
* frequency drift of the structure's modes with the parts unchanged (a tuned part's worst
  enemy), and spillover;
* margins, extra delay, roll-off limits: none — *passive: no loop* — and the plant file's
  margin requirements do not apply (listed in ``notes``, never reported as met);
* "effort": each part's load — an absorber's stroke (m), a damper's force (N), a shunt's
  voltage (V) — under the disturbances;
* the root locus: the parts' dissipation (absorber damping, damper coefficient, shunt
  resistance) scaled 0.001 to 3 times.
"""

from __future__ import annotations

import numpy as np

from dampctl.analysis.assessment import (
    Assessment,
    Curves,
    RequirementCheck,
    Robustness,
    _mode_rows,
)
from dampctl.analysis.closedloop import closed_loop_matrix, open_loop_poles
from dampctl.analysis.loopmodel import GainLocus
from dampctl.analysis.passive import (
    PassiveModel,
    PassiveSweep,
    pair_part_poles,
    passive_model,
    passive_statespace,
    with_parts,
)
from dampctl.analysis.response import (
    PEAK_FACTOR,
    LoopEffort,
    ResponseResult,
    h2_variances,
    integration_grid,
    random_response,
)
from dampctl.analysis.robustness import (
    ALL_CORNERS_UP_TO,
    DriftResult,
    drift_cases,
    drifted_plant_matrices,
    spillover,
)

__all__ = ["NO_LOOP", "assess_passive", "passive_drift"]

#: what a passive design answers where an active one has margins, delays and roll-offs
NO_LOOP = "passive: no loop"

#: scale factors of the parts' dissipation in the root locus (1 is the design)
LOCUS_FACTORS = np.concatenate([[1e-3], np.linspace(0.1, 3.0, 30)])


def assess_passive(
    plant, design, *, drift: float = 0.05, samples: int = 64, seed: int = 0, progress=None
) -> Assessment:
    """Assess a passive design on its plant (module docstring).

    Parameters
    ----------
    plant : ModalPlant
        The plant (its disturbances, outputs and requirements are used).
    design : Design
        A passive design (``design.passive``) belonging to the plant.
    drift : float, optional
        Largest relative shift of each natural frequency in the drift check.
    samples : int, optional
        Random drift samples besides the corners.
    seed : int, optional
        Seed of the random drift samples.
    progress : Progress, optional
        Advanced by one step per stage (8 stages, as for active designs).

    Returns
    -------
    Assessment
        With ``passive`` true, no loops, no disk margin, ``robustness.delay`` and the
        bandwidth limits None, the parts' loads as ``response.effort``.
    """
    step = progress.advance if progress is not None else (lambda n=1: None)
    targets = tuple(design.target_modes) or tuple(plant.requirements.modes)
    targets = targets or tuple(range(1, plant.n_modes + 1))
    model = passive_model(plant, design.parts)
    poles = np.linalg.eigvals(passive_statespace(plant, model)[0])
    matched = pair_part_poles(plant, model, poles).matched
    step(2)
    drift_result = passive_drift(plant, model, targets, drift=drift, samples=samples, seed=seed)
    step(3)
    grid = integration_grid(plant, None, poles)
    ports = model.ports
    response = random_response(
        model.plant, ports, ports.statespace_matrices(), delay_s=0.0, roll_off=False,
        freq_hz=grid,
    )
    response = ResponseResult(
        freq_hz=response.freq_hz,
        outputs=response.outputs,
        effort=_loads(plant, model, grid),
        disturbances=response.disturbances,
    )
    step()
    frf_in = tuple(d.name for d in plant.disturbances) or ports.actuators
    frf_out = tuple(o.name for o in plant.outputs) or ports.sensors
    frf = PassiveSweep(plant, model, grid, frf_in, frf_out).frf()
    mag_open = np.max(np.abs(frf.open), axis=1)
    mag_closed = np.max(np.abs(frf.closed), axis=1)
    rows = _mode_rows(plant, matched, grid, frf_out, mag_open, mag_closed)
    step()
    locus = _locus(plant, model)
    step()
    requirements, notes = _requirements(plant, matched, response, targets)
    return Assessment(
        plant_title=plant.title,
        law=design.law,
        stable=matched.stable,
        max_real_part=matched.max_real_part,
        delay_s=0.0,
        pade_sections=0,
        roll_off=False,
        target_modes=targets,
        modes=rows,
        controller_poles=matched.other_poles,
        loops=(),
        pairs=(),
        disk=None,
        robustness=Robustness(
            drift=drift_result,
            delay=None,
            actuator_bandwidth=None,
            sensor_bandwidth=None,
            spillover=spillover(plant, matched, targets),
        ),
        response=response,
        requirements=requirements,
        curves=Curves(
            freq_hz=grid,
            frf_inputs=frf_in,
            frf_outputs=frf_out,
            frf_units=tuple(_unit(model.plant, name) for name in frf_out),
            frf_open=mag_open,
            frf_closed=mag_closed,
            loops=np.zeros((0, grid.size), dtype=complex),
            locus=locus,
            frf_open_h=frf.open,
            frf_closed_h=frf.closed,
        ),
        passive=True,
        parts=tuple(design.parts),
        part_labels=model.labels,
        notes=tuple(notes),
    )


def passive_drift(
    plant, model: PassiveModel, target_modes, *, drift: float, samples: int = 64, seed: int = 0
) -> DriftResult:
    """Worst damping of the target modes when the structure's frequencies drift, parts fixed.

    The cases are those of :func:`dampctl.analysis.robustness.drift_cases` (step corners up to
    one mode above the highest target); each case's poles are matched as in
    :func:`dampctl.analysis.passive.pair_part_poles` (a mode split by a tuned part counts with
    the less damped of its two poles), all eigenvalue problems in one batched call.

    Parameters
    ----------
    plant : ModalPlant
        The nominal plant.
    model : PassiveModel
        The parts on their ports (:func:`dampctl.analysis.passive.passive_model`).
    target_modes : sequence of int
        Modes (1-based) whose damping is tracked.
    drift : float
        Largest relative shift of each natural frequency.
    samples : int, optional
        Random samples besides the corners.
    seed : int, optional
        Seed of the random samples.

    Returns
    -------
    DriftResult
    """
    cases = drift_cases(
        plant.n_modes, drift, samples=samples, seed=seed, step_modes=max(target_modes) + 1
    )
    n_corners = cases.shape[0] - max(int(samples), 0)
    ports = model.ports
    elements = ports.statespace_matrices()
    mats = [
        closed_loop_matrix(
            drifted_plant_matrices(model.plant, ports.actuators, ports.sensors, f), elements
        )
        for f in cases
    ]
    poles = np.linalg.eigvals(np.stack(mats))
    worst = {m: np.inf for m in target_modes}
    worst_case, worst_value = cases[0], np.inf
    for f, p in zip(cases, poles, strict=True):
        open_poles = open_loop_poles(plant.omegas * f, plant.dampings)
        matched = pair_part_poles(plant, model, p, open_poles).matched
        for m in target_modes:
            value = float(matched.damping[m - 1])
            worst[m] = min(worst[m], value)
            if value < worst_value:
                worst_value, worst_case = value, f
    largest = np.max(poles.real, axis=1)
    return DriftResult(
        drift=float(drift),
        n_cases=int(cases.shape[0]),
        n_corners=int(n_corners),
        all_corners=plant.n_modes <= ALL_CORNERS_UP_TO,
        unstable_cases=int(np.sum(largest >= 0.0)),
        max_real_part=float(np.max(largest)),
        worst_damping=worst,
        worst_case=np.array(worst_case),
    )


def _loads(plant, model: PassiveModel, grid: np.ndarray) -> tuple[LoopEffort, ...]:
    """RMS load of every part under the disturbances: Lyapunov (flat) + integral (tables)."""
    if not plant.disturbances:
        return ()
    dist = [d.name for d in plant.disturbances]
    flat = np.array([0.0 if np.ndim(d.psd) else float(d.psd) for d in plant.disturbances])
    system = passive_statespace(plant, model, dist, (), loads=True)
    variance = h2_variances(system, flat)
    frf = PassiveSweep(plant, model, grid, dist, ()).frf()
    table = np.array(
        [d.psd_at(grid) if np.ndim(d.psd) else 0.0 * grid for d in plant.disturbances]
    )
    every = np.array([d.psd_at(grid) for d in plant.disturbances])
    density = np.einsum("pdf,df->pf", np.abs(frf.effort) ** 2, every)
    variance = variance + np.trapezoid(
        np.einsum("pdf,df->pf", np.abs(frf.effort) ** 2, table), grid, axis=1
    )
    out = []
    for k, (label, element) in enumerate(zip(model.labels, model.ports.elements, strict=True)):
        rms = float(np.sqrt(variance[k]))
        asd = np.sqrt(density[k])
        j = int(np.argmax(asd))
        limit = element.load_limit
        out.append(
            LoopEffort(
                actuator=label,
                quantity=element.load,
                rms=rms,
                peak_asd=float(asd[j]),
                peak_asd_hz=float(grid[j]) if asd[j] > 0 else None,
                peak_estimate=PEAK_FACTOR * rms,
                limit=limit,
                within_limit=None if limit is None else bool(PEAK_FACTOR * rms <= limit),
            )
        )
    return tuple(out)


def _locus(plant, model: PassiveModel) -> GainLocus:
    mats = [
        passive_statespace(plant, with_parts(model, plant, [p.scaled(k) for p in model.parts]))[0]
        for k in LOCUS_FACTORS
    ]
    return GainLocus(gains=LOCUS_FACTORS.copy(), poles=np.linalg.eigvals(np.stack(mats)))


def _requirements(plant, matched, response, targets):
    req = plant.requirements
    out = [RequirementCheck("stability", True, bool(matched.stable), bool(matched.stable))]
    notes = []
    if req.min_damping is not None:
        modes = req.modes or targets
        achieved = float(min(matched.damping[m - 1] for m in modes))
        out.append(
            RequirementCheck("min_damping", req.min_damping, achieved, achieved >= req.min_damping)
        )
    for name in ("min_gain_margin_db", "min_phase_margin_deg"):
        if getattr(req, name) is not None:
            notes.append(f"{name}: does not apply ({NO_LOOP})")
    by_name = {o.output: o for o in response.outputs}
    for name, limit in req.max_rms.items():
        achieved = by_name[name].closed_rms if matched.stable else np.inf
        out.append(RequirementCheck(f"max_rms.{name}", limit, achieved, achieved <= limit))
    return tuple(out), notes


def _unit(plant, name: str) -> str:
    if any(o.name == name for o in plant.outputs):
        return plant.output(name).unit
    return plant.sensor(name).unit
