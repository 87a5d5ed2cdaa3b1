"""Set-up pieces of a time simulation: channels, modal rows, planned inputs, static targets.

Private to :mod:`dampctl.discrete.simulate` (its functions are that module's helpers).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from dampctl.design import Design
from dampctl.discrete.equivalents import discretize
from dampctl.discrete.modalzoh import sample_modes
from dampctl.discrete.simresult import ActuatorResult, OutputResult
from dampctl.discrete.timeloop import run_loop
from dampctl.errors import PlantError, UsageError
from dampctl.model.plant import ModalPlant

#: largest number of samples a simulation may take (memory guard)
MAX_SAMPLES = 20_000_000
#: open-loop rate when the plant states none: this many samples per period of the top mode
SAMPLES_PER_PERIOD = 20


@dataclass(frozen=True)
class Channels:
    """Inputs and outputs of the sampled structure for one simulation."""

    inputs: tuple[str, ...]  # actuators, then a disturbance
    actuators: tuple[str, ...]
    outputs: tuple[str, ...]  # reported outputs, then design sensors, then strokes
    reported: tuple[str, ...]
    sensors: tuple[str, ...]


def sample_rate(plant: ModalPlant, design: Design | None, rate_hz: float | None) -> float:
    if rate_hz is not None:
        if not (math.isfinite(rate_hz) and rate_hz > 0):
            raise UsageError(f"sample rate must be > 0 Hz, got {rate_hz!r}")
        return float(rate_hz)
    if plant.requirements.sample_rate_hz:
        return float(plant.requirements.sample_rate_hz)
    if design is not None:
        raise UsageError(
            "the closed loop runs at a sample rate: state sample_rate_hz in the plant's "
            "[requirements] or give one"
        )
    return SAMPLES_PER_PERIOD * float(np.max(plant.freqs_hz))


def check_rigid(plant: ModalPlant) -> None:
    """Refuse a move of a plant with rigid-body modes (a free body has no static compliance)."""
    rigid = [k + 1 for k, w in enumerate(plant.omegas) if w == 0.0]
    if rigid:
        raise PlantError(
            f"modes {', '.join(map(str, rigid))} are rigid-body modes (0 Hz): a free body "
            "moved by a force has no static compliance, so a move cannot be scaled to a "
            "distance; simulate the suspended structure (its flexible modes with the "
            "suspension), or a disturbance"
        )


def static_gain(plant: ModalPlant, inputs, outputs) -> np.ndarray:
    """Static response (output unit per input unit) from the modal sum at 0 Hz."""
    return plant.frf(np.array([0.0]), list(inputs), list(outputs))[:, :, 0].real


def _influence(plant: ModalPlant, channels: Channels, input_name: str) -> np.ndarray | None:
    """Motion per metre of base motion of every absolute output, for a base acceleration
    input (None for any other input)."""
    item = next((d for d in plant.disturbances if d.name == input_name), None)
    if item is None or getattr(item, "kind", "force") != "base_acceleration":
        return None
    influence = getattr(item, "influence", None) or {}
    column = np.zeros(len(channels.outputs))
    for o, name in enumerate(channels.outputs):
        reading = next((x for x in (*plant.outputs, *plant.sensors) if x.name == name), None)
        if reading is not None and reading.kind.startswith("absolute_"):
            column[o] = float(influence.get(reading.site, 0.0))
    return column


def base_modes(plant: ModalPlant, channels: Channels) -> tuple[np.ndarray, np.ndarray]:
    """The base's own motion at absolute outputs, as one more rigid-body 'mode' per base
    acceleration: a double integrator of a_g (input row 1 on it), read with the sites'
    influence (absolute = relative + r × base motion; for an acceleration, + r a_g)."""
    rows, columns = [], []
    for j, name in enumerate(channels.inputs):
        column = _influence(plant, channels, name)
        if column is not None and np.any(column):
            row = np.zeros(len(channels.inputs))
            row[j] = 1.0
            rows.append(row)
            columns.append(column)
    n_in, n_out = len(channels.inputs), len(channels.outputs)
    B = np.array(rows).reshape(len(rows), n_in)
    C = np.array(columns).T.reshape(n_out, len(columns))
    return B, C


def modal_rows(plant: ModalPlant, channels: Channels):
    """B, C, orders, D of the sampled structure, strokes included."""
    b = np.column_stack([plant.input_row(name) for name in channels.inputs])
    named = [o for o in channels.outputs if not o.startswith("stroke:")]
    rows, orders = [], []
    for name in channels.outputs:
        if name.startswith("stroke:"):
            act = plant.actuator(name[len("stroke:"):])
            if act.kind == "strut":
                a, c = act.between
                rows.append(np.asarray(plant.sites[c]) - np.asarray(plant.sites[a]))
            else:
                rows.append(np.asarray(plant.sites[act.site]))
            orders.append(0)
        else:
            row, order = plant.output_row(name)
            rows.append(row)
            orders.append(order)
    C = np.array(rows).reshape(len(rows), plant.n_modes)
    D = np.zeros((len(rows), len(channels.inputs)))
    if named:
        # feedthrough (strut force sensors, residual flexibility) of displacement-like outputs
        # (velocity and acceleration have none): the response far above every mode minus its
        # modal part, which is small there (a rigid-body mode's 1/ω² included)
        w0 = 2.0 * np.pi * 1e3 * max(float(np.max(plant.freqs_hz)), 1.0)
        far = plant.frf(np.array([w0 / (2.0 * np.pi)]), list(channels.inputs), named)[:, :, 0]
        basis = 1.0 / (plant.omegas**2 - w0**2 + 2j * plant.dampings * plant.omegas * w0)
        _extra_b, base = base_modes(plant, channels)  # the base's motion r a_g/(jω)² is no D
        base_far = -(base @ _extra_b) / w0**2 if base.size else np.zeros_like(D)
        k = 0
        for o, name in enumerate(channels.outputs):
            if name.startswith("stroke:"):
                continue
            if orders[o] == 0:
                D[o] = (far[k] - (C[o] * basis) @ b).real - base_far[o]
            k += 1
    return b, C, np.array(orders), D


def lag_corners(plant: ModalPlant, channels: Channels, loop: bool):
    ins = []
    for name in channels.inputs:
        act = next((a for a in plant.actuators if a.name == name), None)
        ins.append(None if act is None or act.bandwidth_hz is None else
                   2 * math.pi * act.bandwidth_hz)
    outs = []
    for name in channels.outputs:
        sensor = next((s for s in plant.sensors if s.name == name), None)
        lagged = loop and name in channels.sensors and sensor is not None
        outs.append(2 * math.pi * sensor.bandwidth_hz if lagged and sensor.bandwidth_hz else None)
    return ins, outs


def split_times(times_s: np.ndarray, T: float) -> tuple[np.ndarray, np.ndarray]:
    """Whole samples and fraction (s) of each time; fractions within 1e-9 T snap."""
    ratio = np.asarray(times_s, dtype=float) / T
    whole = np.floor(ratio + 1e-9)
    frac = (ratio - whole) * T
    frac[frac < 1e-9 * T] = 0.0
    return whole.astype(int), frac


def input_limits(plant: ModalPlant, channels: Channels) -> np.ndarray:
    out = np.full(len(channels.inputs), np.inf)
    for j, name in enumerate(channels.inputs):
        act = next((a for a in plant.actuators if a.name == name), None)
        if act is None:
            continue
        limit = act.max_stroke_m if act.kind == "strut" else act.max_force_n
        if limit is not None:
            out[j] = limit
    return out


@dataclass(frozen=True)
class Command:
    """A planned input: base samples on one input, copied at shaper times with amplitudes."""

    input_index: int
    samples: np.ndarray  # base command at t = jT, j = 0 .. steps − 1
    times_s: np.ndarray
    amplitudes: np.ndarray


def piece_starts(commands, T: float, delay_frac: float) -> np.ndarray:
    fracs = [0.0, delay_frac]
    for command in commands:
        fracs.extend(split_times(command.times_s, T)[1])
    return np.unique(np.array(fracs))


def planned_inputs(commands, disturbance, theta: np.ndarray, T: float, steps: int, n_in: int):
    planned = np.zeros((steps, theta.size, n_in))
    for command in commands:
        whole, frac = split_times(command.times_s, T)
        for m, tau, amp in zip(whole, frac, command.amplitudes, strict=True):
            for r, start in enumerate(theta):
                shift = int(m) + (1 if start < tau else 0)
                if shift < steps:
                    planned[shift:, r, command.input_index] += amp * command.samples[
                        : steps - shift
                    ]
    if disturbance is not None:
        index, values = disturbance
        planned[:, :, index] += values[:, None]
    return planned


def controller_dc(controller) -> np.ndarray | None:
    Ac, Bc, Cc, Dc = controller
    if Ac.shape[0] == 0:
        return np.array(Dc)
    A = np.eye(Ac.shape[0]) - Ac
    if np.linalg.cond(A) > 1e12:
        return None
    return Dc + Cc @ np.linalg.solve(A, Bc)


def static_targets(plant, design, controller, channels, final_inputs) -> tuple[np.ndarray, bool]:
    """Static value of every reported output for the final planned inputs, and whether the
    loop's static gain could be used."""
    outs = list(channels.reported)
    G = static_gain(plant, channels.inputs, outs)
    if design is None:
        return G @ final_inputs, True
    dc = controller_dc(controller)
    if dc is None:
        return G @ final_inputs, False
    index = [channels.inputs.index(a) for a in design.actuators]
    Gy = static_gain(plant, channels.inputs, design.sensors)  # sensors per input
    Gya = Gy[:, index]
    lhs = np.eye(len(index)) + dc @ Gya
    u_fb = np.linalg.solve(lhs, -dc @ (Gy @ final_inputs))
    total = np.array(final_inputs, dtype=float)
    total[index] += u_fb
    return G @ total, True


def output_result(name, unit, values, target, time, *, move, band, end_s, rms_error=None):
    """Figures of one output (a run that diverged holds NaN at its end: figures that need the
    end of the record are None, the others come from the part before)."""
    done = int(np.argmin(np.isfinite(values))) if not np.all(np.isfinite(values)) else None
    ran = values[:done]
    peak = float(ran[np.argmax(np.abs(ran))]) if ran.size else math.nan
    deviation = ran - target
    overshoot = settling = residual = None
    if move is not None and unit == "m" and ran.size:
        overshoot = 100.0 * max(0.0, float(np.max(np.sign(move) * deviation))) / abs(move)
        outside = np.flatnonzero(np.abs(deviation) > band)
        if outside.size == 0 and done is None:
            settling = 0.0
        elif done is None and outside[-1] < values.size - 1:
            settling = float(time[outside[-1] + 1])
    after = deviation[time[: ran.size] >= end_s - 1e-12]
    if after.size and done is None:
        residual = float(np.sqrt(np.mean(after**2)))
    return OutputResult(
        name=name, unit=unit, values=values, target=float(target), peak=peak,
        final=float(values[-1]), overshoot=overshoot, settling_time_s=settling,
        residual_rms=residual, rms_error=rms_error,
    )


def output_unit(plant: ModalPlant, name: str) -> str:
    item = next((o for o in plant.outputs if o.name == name), None)
    return item.unit if item is not None else plant.sensor(name).unit


def run_case(plant, design, channels, rate, steps, commands, disturbance, *, closed, controller,
             saturation, noise, engine="auto"):
    """Sample the structure for this case and run the loop; returns (record, limits)."""
    T = 1.0 / rate
    delay = float(plant.requirements.loop_delay_s or 0.0) if closed else 0.0
    m_delay, frac = split_times(np.array([delay]), T)
    theta = piece_starts(commands, T, float(frac[0]))
    b, C, orders, D = modal_rows(plant, channels)
    extra_b, extra_c = base_modes(plant, channels)
    omegas = np.concatenate([plant.omegas, np.zeros(extra_b.shape[0])])
    dampings = np.concatenate([plant.dampings, np.zeros(extra_b.shape[0])])
    ins, outs = lag_corners(plant, channels, closed)
    model = sample_modes(
        omegas, dampings, np.vstack([b, extra_b]), np.hstack([C, extra_c]), orders, D, T,
        breakpoints_s=theta, input_corners_rad_s=ins, output_corners_rad_s=outs,
    )
    planned = planned_inputs(commands, disturbance, theta, T, steps, len(channels.inputs))
    limits = input_limits(plant, channels) if saturation else None
    kwargs = {}
    if closed:
        kwargs = {
            "controller": controller,
            "sensors": np.array([channels.outputs.index(s) for s in design.sensors]),
            "actuators": np.array([channels.inputs.index(a) for a in design.actuators]),
            "delay_samples": int(m_delay[0]),
            "delay_piece": int(np.searchsorted(theta, frac[0])),
            "noise": noise,
        }
    return run_loop(model, planned, limits=limits, engine=engine, **kwargs), limits


def actuator_results(plant, channels, record, limits, keep) -> tuple[ActuatorResult, ...]:
    out = []
    for name in channels.actuators:
        j = channels.inputs.index(name)
        act = plant.actuator(name)
        stroke = record.outputs[keep, channels.outputs.index(f"stroke:{name}")]
        u = record.forces[keep, j]
        if act.kind == "strut":
            force = act.stiffness_n_per_m * (stroke - u)
            travel = float(np.nanmax(np.abs(u)))
        else:
            force = u
            travel = float(np.nanmax(np.abs(stroke)))
        limit = None if limits is None or not np.isfinite(limits[j]) else float(limits[j])
        out.append(ActuatorResult(
            name=name, force=force, peak_force_n=float(np.nanmax(np.abs(force))),
            rms_force_n=float(np.sqrt(np.nanmean(force**2))),
            saturated_s=float(record.saturated_s[j]), stroke_m=travel, limit=limit,
        ))
    return tuple(out)


def sample_count(duration_s: float, rate: float) -> int:
    if not (math.isfinite(duration_s) and duration_s > 0):
        raise UsageError(f"--duration: must be > 0 s, got {duration_s!r}")
    steps = math.floor(duration_s * rate + 1e-9) + 1
    if steps > MAX_SAMPLES:
        raise UsageError(
            f"{duration_s:g} s at {rate:g} Hz is {steps} samples, more than {MAX_SAMPLES}; "
            "shorten the duration"
        )
    return steps


def slowest_decay(plant: ModalPlant) -> float:
    """Smallest ζω (1/s) over the modes (undamped modes ignored)."""
    rates = plant.dampings * plant.omegas
    rates = rates[rates > 0]
    return float(np.min(rates)) if rates.size else 1.0 / (10.0 / float(np.min(plant.freqs_hz)))


def check_design(plant: ModalPlant, design: Design | None) -> None:
    if design is not None:
        design.check_plant(plant)


def make_channels(plant, design, *, drive=None, extra_outputs=(), disturbance=None) -> Channels:
    actuators = list(design.actuators) if design is not None else []
    if drive is not None and drive not in actuators:
        actuators.append(drive)
    reported = [o.name for o in plant.outputs]
    reported += [o for o in extra_outputs if o not in reported]
    sensors = list(design.sensors) if design is not None else []
    outputs = reported + [s for s in sensors if s not in reported]
    outputs += [f"stroke:{a}" for a in actuators]
    inputs = actuators + ([disturbance] if disturbance is not None else [])
    return Channels(tuple(inputs), tuple(actuators), tuple(outputs), tuple(reported),
                     tuple(sensors))


def discrete_controller(design: Design, rate: float, method: str):
    controller = discretize(design, rate, method=method)
    return tuple(np.asarray(m, dtype=float) for m in controller.realisation_matrices())


def statistical_errors(plant, design, name, outputs, rate, length_s):
    """Relative 1σ error of an RMS over ``length_s`` for each output (model PSD); NaN with a
    rigid-body mode (a free body's drift is not stationary)."""
    from dampctl.analysis.response import closed_loop_frf, integration_grid

    if np.any(plant.omegas == 0.0):
        return np.full(len(outputs), np.nan)
    disturbance = plant.disturbance(name)
    if design is None:
        grid = open_grid(plant)
        H = plant.frf(grid, [name], list(outputs))[:, 0, :]
    else:
        grid = integration_grid(plant, design)
        frf = closed_loop_frf(plant, design, grid, [name], list(outputs),
                              delay_s=float(plant.requirements.loop_delay_s or 0.0)
                              + 1.5 / rate)
        H = frf.closed[:, 0, :]
    grid_ok = grid <= rate / 2
    G = np.abs(H[:, grid_ok]) ** 2 * disturbance.psd_at(grid[grid_ok])[None, :]
    f = grid[grid_ok]
    first = np.trapezoid(G, f, axis=1)
    second = np.trapezoid(G**2, f, axis=1)
    bandwidth = np.where(second > 0, first**2 / np.where(second > 0, second, 1.0), np.nan)
    return 1.0 / (2.0 * np.sqrt(bandwidth * length_s))  # NaN where the output does not move


def open_grid(plant: ModalPlant) -> np.ndarray:
    """Frequencies resolving every open-loop resonance: a log grid and 81 points over ±8 ζ
    about each mode (as :func:`dampctl.analysis.response.integration_grid`)."""
    lo = float(np.min(plant.freqs_hz)) / 100.0
    hi = float(np.max(plant.freqs_hz)) * 20.0
    parts = [np.geomspace(lo, hi, 2000)]
    offsets = np.linspace(-8.0, 8.0, 81)
    for f, z in zip(plant.freqs_hz, plant.dampings, strict=True):
        parts.append(f * np.exp(max(z, 1e-4) * offsets))
    return np.unique(np.concatenate(parts))


def move_gain(plant: ModalPlant, drive: str, output: str, distance_m: float) -> float:
    """Static compliance from ``drive`` to ``output`` (m per unit input), checked."""
    if drive not in [a.name for a in plant.actuators]:
        known = ", ".join(a.name for a in plant.actuators) or "none"
        raise UsageError(f"unknown drive actuator {drive!r} (known: {known})")
    names = [o.name for o in plant.outputs] + [s.name for s in plant.sensors]
    if output not in names:
        raise UsageError(f"unknown output {output!r} (known: {', '.join(names) or 'none'})")
    if output_unit(plant, output) != "m" or plant.output_row(output)[1] != 0:
        raise UsageError(f"output {output!r} is not a displacement: a move is given in metres")
    if not (math.isfinite(distance_m) and distance_m != 0):
        raise UsageError(
            f"the move distance must be a non-zero number of metres, got {distance_m!r}"
        )
    gain = float(static_gain(plant, [drive], [output])[0, 0])
    row = plant.output_row(output)[0] * plant.input_row(drive)
    scale = float(np.sum(np.abs(row) / plant.omegas**2))
    if gain == 0.0 or abs(gain) <= 1e-9 * scale:
        raise UsageError(
            f"actuator {drive!r} does not move output {output!r} statically (static "
            f"compliance {gain:.3g}); choose an actuator that pushes along it"
        )
    return gain
