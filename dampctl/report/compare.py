"""One comparison of every option: passive parts, command shaping, active loops, combinations.

:func:`compare_designs` answers the design review's first question — what does each option
buy, and for what — on one plant, with the same numbers every other command gives:

* each design is assessed (:func:`dampctl.analysis.assessment.assess`, passive designs too):
  the smallest closed-loop damping over the target modes (the plant's required modes, or the
  designs' own), the peak reduction at each output (largest |H| from the plant's disturbances,
  or from the designs' inputs, over the whole grid, without over with), the RMS at each output
  under the disturbances and sensor noise, the actuator effort (largest RMS actuator input; a
  passive design has none), the added mass (absorbers) and the cost (actuators and sensors the
  design uses, from the plant file; passive parts from its ``[[parts]]`` prices);
* with a move (``drive``, ``output``, ``distance_m``), its settling time into ±1 % of the move:
  the structure as built, each active design's loop as it will run
  (:func:`dampctl.discrete.simulate.simulate_move`), each passive design with its parts
  (:func:`dampctl.discrete.passive_move.simulate_passive_move`), all over one record length;
* with an input shaper, one more row for the shaper alone (shaping: no damping, no RMS change,
  no hardware) and one per design with the shaper in front of its move (combinations).

The first row is always the structure as built (kind ``none``). :meth:`Comparison.to_dict` is
the ``dampctl compare --json`` document; the figures are in :mod:`dampctl.report.figures_compare`
and the HTML page in :func:`render_comparison`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from dampctl.analysis.assessment import assess
from dampctl.errors import UsageError

__all__ = ["CompareRow", "Comparison", "MoveSpec", "compare_designs", "render_comparison"]

#: kinds of row, in the order a reader meets them
KINDS = ("none", "passive", "shaping", "active", "passive+shaping", "active+shaping")


@dataclass(frozen=True)
class MoveSpec:
    """A move to settle: one actuator moves a displacement output by a distance.

    Parameters
    ----------
    distance_m : float
        Move size (m), non-zero.
    drive : str
        The actuator that makes the move.
    output : str
        The displacement output (or sensor) that moves.
    """

    distance_m: float
    drive: str
    output: str

    def __post_init__(self) -> None:
        if not (math.isfinite(self.distance_m) and self.distance_m != 0):
            raise UsageError(f"--move: expected a non-zero distance in m, got {self.distance_m}")


@dataclass(frozen=True)
class CompareRow:
    """One option in the comparison.

    Attributes
    ----------
    name : str
        The option (design name, ``as built``, the shaper, or ``design + shaper``).
    kind : str
        ``none``, ``passive``, ``shaping``, ``active``, ``passive+shaping``, ``active+shaping``.
    law : str or None
        The design's law.
    stable : bool
        Every pole in the left half plane.
    min_damping : float
        Smallest damping ratio over the target modes.
    peak_reduction_db : dict of str to float
        Largest response peak without over with, per output (dB; 0 for as built).
    rms : dict of str to float
        RMS per output under the disturbances (and sensor noise), in its SI unit.
    settling_time_s : float or None
        Settling time of the move (None without a move, or when it does not settle).
    effort : float or None
        Largest RMS actuator input (N for forces, m for strut extensions); None without an
        actuator loop.
    effort_unit : str
        Unit of ``effort``.
    added_mass_kg : float
        Mass added to the structure (absorbers).
    cost : float or None
        Cost from the plant file; None when a passive part has no price.
    frf : ndarray
        |H| per output on :attr:`Comparison.freq_hz` (largest over the inputs).
    notes : tuple of str
        What the reader should know about the row.
    """

    name: str
    kind: str
    law: str | None
    stable: bool
    min_damping: float
    peak_reduction_db: dict
    rms: dict
    settling_time_s: float | None
    effort: float | None
    effort_unit: str
    added_mass_kg: float
    cost: float | None
    frf: np.ndarray
    notes: tuple[str, ...] = ()

    def to_dict(self, with_move: bool) -> dict[str, Any]:
        """JSON form: ``name``, ``kind``, ``min_damping``, ``rms``, ``settling_time_s`` (with a
        move), ``cost``, and ``law``, ``stable``, ``peak_reduction_db``, ``effort``,
        ``effort_unit``, ``added_mass_kg``, ``notes``.

        Parameters
        ----------
        with_move : bool
            Whether a move was simulated (``settling_time_s`` is then present).

        Returns
        -------
        dict
        """
        out: dict[str, Any] = {
            "name": self.name,
            "kind": self.kind,
            "law": self.law,
            "stable": self.stable,
            "min_damping": self.min_damping,
            "peak_reduction_db": dict(self.peak_reduction_db),
            "rms": dict(self.rms),
        }
        if with_move:
            out["settling_time_s"] = self.settling_time_s
        out.update(
            {
                "effort": self.effort,
                "effort_unit": self.effort_unit,
                "added_mass_kg": self.added_mass_kg,
                "cost": self.cost,
                "notes": list(self.notes),
            }
        )
        return out


@dataclass(frozen=True)
class Comparison:
    """Every option side by side, and the curves behind the figures.

    Attributes
    ----------
    plant_title : str
        The plant.
    target_modes : tuple of int
        Modes whose smallest damping is compared.
    inputs, outputs : tuple of str
        What the FRFs and RMS run from and to.
    output_units : tuple of str
        SI unit of each output.
    freq_hz : ndarray
        Frequency grid (Hz) of the FRFs.
    open_frf : ndarray, shape (n_out, n_freq)
        |H| of the structure as built.
    rows : tuple of CompareRow
        The options, as built first.
    move : MoveSpec or None
        The move whose settling time is compared.
    shaper : str or None
        The shaper's name (kind and modes).
    settle_band_m : float or None
        The settling band ± (m).
    notes : tuple of str
        General notes.
    """

    plant_title: str
    target_modes: tuple[int, ...]
    inputs: tuple[str, ...]
    outputs: tuple[str, ...]
    output_units: tuple[str, ...]
    freq_hz: np.ndarray
    open_frf: np.ndarray
    rows: tuple[CompareRow, ...]
    move: MoveSpec | None = None
    shaper: str | None = None
    settle_band_m: float | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict[str, Any]:
        """The ``dampctl compare --json`` document (without ``format``/``version``)."""
        with_move = self.move is not None
        return {
            "plant": self.plant_title,
            "target_modes": list(self.target_modes),
            "inputs": list(self.inputs),
            "outputs": list(self.outputs),
            "output_units": list(self.output_units),
            "move": None
            if self.move is None
            else {
                "distance_m": self.move.distance_m,
                "drive": self.move.drive,
                "output": self.move.output,
                "settle_band_m": self.settle_band_m,
            },
            "shaper": self.shaper,
            "rows": [r.to_dict(with_move) for r in self.rows],
            "notes": list(self.notes),
        }


def compare_designs(
    plant,
    designs: Sequence[tuple[str, Any]],
    *,
    shaper=None,
    shaper_name: str | None = None,
    move: MoveSpec | None = None,
    progress=None,
    assessments: Sequence | None = None,
) -> Comparison:
    """Compare designs (active and passive), a shaper, and their combinations on one plant.

    Parameters
    ----------
    plant : ModalPlant
        The plant (its disturbances, outputs, requirements, costs and part prices are used).
    designs : sequence of (str, Design)
        Named designs; each must belong to the plant.
    shaper : Shaper, optional
        An input shaper (:func:`dampctl.laws.shapers.load_shaper`): one row alone, one per
        design in front of its move. Needs ``move``.
    shaper_name : str, optional
        Its name in the table (default from its kind).
    move : MoveSpec, optional
        The move whose settling time is compared.
    progress : Progress, optional
        Advanced by one step per design, and per simulated move.
    assessments : sequence of Assessment, optional
        The designs' assessments, when the caller has them already (same order).

    Returns
    -------
    Comparison
    """
    step = progress.advance if progress is not None else (lambda n=1: None)
    if shaper is not None and move is None:
        raise UsageError("--shaper needs a move to shape (--move DIST --drive ACT --output OUT)")
    if not designs and shaper is None:
        raise UsageError("give at least one design file, or a shaper with a move")
    names = [n for n, _ in designs]
    if len(set(names)) != len(names):
        raise UsageError(f"two designs have the same name: {', '.join(names)}")
    for name, design in designs:
        design.check_plant(plant, source=name)
    targets = tuple(plant.requirements.modes) or tuple(
        sorted({m for _, d in designs for m in d.target_modes})
    ) or tuple(range(1, plant.n_modes + 1))
    if assessments is not None and len(assessments) != len(designs):
        raise UsageError("give one assessment per design")
    if assessments is None:
        assessments = []
        for _, design in designs:
            assessments.append(assess(plant, design, samples=0))
            step()
    inputs = tuple(d.name for d in plant.disturbances)
    outputs = tuple(o.name for o in plant.outputs)
    if not outputs:
        raise UsageError("the plant states no performance outputs ([[outputs]]): nothing to "
                         "compare the options on")
    freq = _common_grid(plant, assessments)
    open_frf = _open_frf(plant, freq, inputs, outputs, designs)
    sim = _Moves(plant, move) if move is not None else None
    rows = [_as_built(plant, targets, freq, open_frf, outputs, sim)]
    step()
    shaped_name = shaper_name or (f"{shaper.kind} shaper" if shaper is not None else None)
    if shaper is not None:
        rows.append(_shaping_row(rows[0], shaped_name, sim.settle(None, shaper)))
        step()
    for (name, design), a in zip(designs, assessments, strict=True):
        row = _design_row(plant, name, design, a, targets, freq, open_frf, outputs)
        if sim is not None:
            row = _with_settling(row, sim.settle(design, None))
        rows.append(row)
        step()
        if shaper is not None:
            rows.append(_combined(row, shaped_name, sim.settle(design, shaper)))
            step()
    rows.sort(key=lambda r: KINDS.index(r.kind))
    notes = []
    if not inputs:
        notes.append("the plant states no disturbances: FRFs run from each design's own inputs "
                     "and the RMS figures are zero")
    if shaper is not None:
        notes.append("a shaper leaves the damping and the disturbance response unchanged: it "
                     "only removes what the move itself excites")
    return Comparison(
        plant_title=plant.title,
        target_modes=targets,
        inputs=inputs,
        outputs=outputs,
        output_units=tuple(o.unit for o in plant.outputs),
        freq_hz=freq,
        open_frf=open_frf,
        rows=tuple(rows),
        move=move,
        shaper=shaped_name,
        settle_band_m=None if move is None else abs(move.distance_m) * 0.01,
        notes=tuple(notes),
    )


# ---------------------------------------------------------------------- rows
def _common_grid(plant, assessments) -> np.ndarray:
    """The assessments' grids and the plant's, over the band the figures show (a decade and
    a half around the modes, as the assessment's FRF figure)."""
    from dampctl.analysis.response import integration_grid

    grids = [integration_grid(plant, None)] + [a.curves.freq_hz for a in assessments]
    grid = np.unique(np.concatenate(grids))
    lo, hi = float(np.min(plant.freqs_hz)) / 30.0, float(np.max(plant.freqs_hz)) * 30.0
    return grid[(grid >= lo) & (grid <= hi)]


def _open_frf(plant, freq, inputs, outputs, designs) -> np.ndarray:
    ins = list(inputs) or sorted({a for _, d in designs for a in d.actuators})
    if not ins:
        return np.zeros((len(outputs), freq.size))
    return np.max(np.abs(plant.frf(freq, ins, list(outputs))), axis=1)


def _peaks(open_frf, frf, outputs) -> dict:
    out = {}
    for k, name in enumerate(outputs):
        closed = float(np.max(frf[k]))
        opened = float(np.max(open_frf[k]))
        out[name] = 20 * math.log10(opened / closed) if closed > 0 and opened > 0 else None
    return out


def _as_built(plant, targets, freq, open_frf, outputs, sim) -> CompareRow:
    from dampctl.analysis.response import h2_variances

    flat = np.array([0.0 if np.ndim(d.psd) else float(d.psd) for d in plant.disturbances])
    rms = {}
    if plant.disturbances:
        dist = [d.name for d in plant.disturbances]
        variance = h2_variances(plant.statespace_matrices(dist, list(outputs)), flat)
        tables = [d for d in plant.disturbances if np.ndim(d.psd)]
        if tables:
            H = np.abs(plant.frf(freq, dist, list(outputs))) ** 2
            psd = np.array([d.psd_at(freq) if np.ndim(d.psd) else 0 * freq
                            for d in plant.disturbances])
            variance = variance + np.trapezoid(np.einsum("odf,df->of", H, psd), freq, axis=1)
        rms = {name: float(np.sqrt(v)) for name, v in zip(outputs, variance, strict=True)}
    else:
        rms = dict.fromkeys(outputs, 0.0)
    return CompareRow(
        name="as built",
        kind="none",
        law=None,
        stable=True,
        min_damping=float(min(plant.dampings[m - 1] for m in targets)),
        peak_reduction_db=dict.fromkeys(outputs, 0.0),
        rms=rms,
        settling_time_s=None if sim is None else sim.settle(None, None),
        effort=None,
        effort_unit="",
        added_mass_kg=0.0,
        cost=0.0,
        frf=open_frf,
    )


def _design_row(plant, name, design, a, targets, freq, open_frf, outputs) -> CompareRow:
    by_mode = {m.mode: m.closed_damping for m in a.modes}
    frf = np.array([np.interp(freq, a.curves.freq_hz, a.curves.frf_closed[k])
                    for k in range(len(outputs))])
    notes = []
    rms = {o.output: o.closed_rms for o in a.response.outputs}
    effort, unit = None, ""
    if not design.passive and a.response.effort:
        largest = max(a.response.effort, key=lambda e: e.rms)
        effort = largest.rms
        unit = "m" if largest.quantity == "extension" else "N"
    cost, mass = _cost(plant, design, notes)
    if not a.stable:
        notes.append("UNSTABLE: do not build it")
    return CompareRow(
        name=name,
        kind="passive" if design.passive else "active",
        law=design.law,
        stable=bool(a.stable),
        min_damping=float(min(by_mode[m] for m in targets)),
        peak_reduction_db=_peaks(open_frf, frf, outputs),
        rms=rms,
        settling_time_s=None,
        effort=effort,
        effort_unit=unit,
        added_mass_kg=mass,
        cost=cost,
        frf=frf,
        notes=tuple(notes),
    )


def _cost(plant, design, notes) -> tuple[float | None, float]:
    if design.passive:
        mass = float(sum(getattr(p, "mass_kg", 0.0) for p in design.parts))
        prices = [plant.part_price(p.price_kind, getattr(p, "mass_kg", 0.0)) for p in design.parts]
        missing = sorted({p.price_kind for p, c in zip(design.parts, prices, strict=True)
                          if c is None})
        if missing:
            notes.append(f"no price for {', '.join(missing)} in the plant's [[parts]] table")
            return None, mass
        return float(sum(prices)), mass
    total = sum(plant.actuator(n).cost for n in set(design.actuators))
    total += sum(plant.sensor(n).cost for n in set(design.sensors))
    return float(total), 0.0


def _with_settling(row: CompareRow, settling) -> CompareRow:
    from dataclasses import replace

    return replace(row, settling_time_s=settling)


def _shaping_row(built: CompareRow, name: str, settling) -> CompareRow:
    from dataclasses import replace

    return replace(built, name=name, kind="shaping", settling_time_s=settling,
                   notes=("feedforward only: the disturbance response is the structure's",))


def _combined(row: CompareRow, shaper: str, settling) -> CompareRow:
    from dataclasses import replace

    kind = "passive+shaping" if row.kind == "passive" else "active+shaping"
    return replace(row, name=f"{row.name} + {shaper}", kind=kind, settling_time_s=settling)


class _Moves:
    """Settling times of one move for the structure as built, a design, with or without a
    shaper — over one record length, so they compare."""

    def __init__(self, plant, move: MoveSpec) -> None:
        self.plant, self.move = plant, move

    def settle(self, design, shaper) -> float | None:
        from dampctl.discrete.passive_move import simulate_passive_move
        from dampctl.discrete.simulate import simulate_move

        m = self.move
        duration = self._duration(shaper)
        if design is not None and design.passive:
            sim = simulate_passive_move(self.plant, design, drive=m.drive, output=m.output,
                                        distance_m=m.distance_m, shaper=shaper,
                                        duration_s=duration)
        else:
            sim = simulate_move(self.plant, design, drive=m.drive, output=m.output,
                                distance_m=m.distance_m, shaper=shaper, duration_s=duration)
        return sim.result.output(m.output).settling_time_s

    def _duration(self, shaper) -> float:
        """Six slowest time constants 1/(ζω) of the structure as built, plus the shaper."""
        rates = self.plant.dampings * self.plant.omegas
        rates = rates[rates > 0]
        slowest = float(np.min(rates)) if rates.size else float(np.min(self.plant.omegas)) / 60
        extra = 0.0 if shaper is None else float(np.max(shaper.times_s))
        return 6.0 / slowest + extra


# ---------------------------------------------------------------------- HTML
def render_comparison(comparison: Comparison, figures: Mapping[str, bytes] | None = None) -> str:
    """The comparison as one self-contained HTML page (table, figures, cautions).

    Parameters
    ----------
    comparison : Comparison
        The comparison.
    figures : mapping of str to bytes, optional
        Caption to PNG bytes, embedded in order.

    Returns
    -------
    str
    """
    import base64

    from dampctl import __version__
    from dampctl.report.html import _STYLE, SAFETY_TEXT, _e, _table

    c = comparison
    title = f"Passive, shaping or active? {c.plant_title or 'plant'}"
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{_e(title)}</title><style>{_STYLE}</style></head><body>",
        f"<h1>{_e(title)}</h1>",
        f'<p class="note">dampctl {__version__} · target modes '
        f"{_e(', '.join(map(str, c.target_modes)))} · outputs {_e(', '.join(c.outputs))}</p>",
        f'<div class="caution"><b>Safety.</b> {_e(SAFETY_TEXT)}</div>',
        "<h2>Every option side by side</h2>",
        _table([_flat(r, c) for r in c.rows], _columns(c)),
        "<p class='note'>Smallest damping: over the target modes (a mode split by a tuned part "
        "counts with the less damped of its two poles). Peak reduction: largest response peak "
        "as built over the option's. RMS: under the plant's disturbances (and sensor noise). "
        "Effort: largest RMS actuator input. Cost: actuators and sensors from the plant file, "
        "passive parts from its [[parts]] prices; a shaper costs nothing.</p>",
    ]
    if c.notes:
        parts.append("<ul>" + "".join(f"<li>{_e(n)}</li>" for n in c.notes) + "</ul>")
    notes = [f"{r.name}: {n}" for r in c.rows for n in r.notes]
    if notes:
        parts.append("<h3>Notes</h3><ul>" + "".join(f"<li>{_e(n)}</li>" for n in notes)
                     + "</ul>")
    if figures:
        parts.append("<h2>Figures</h2>")
        for caption, png in figures.items():
            data = base64.b64encode(png).decode("ascii")
            parts.append(f'<figure><img alt="{_e(caption)}" src="data:image/png;base64,{data}">'
                         f"<figcaption>{_e(caption)}</figcaption></figure>")
    parts.append("</body></html>")
    return "\n".join(parts) + "\n"


def _columns(c: Comparison) -> list[tuple]:
    cols = [("name", "Option", "text"), ("kind", "Kind", "text"),
            ("min_damping", "Smallest damping (–)")]
    cols += [(f"peak:{o}", f"Peak reduction {o} (dB)") for o in c.outputs]
    cols += [(f"rms:{o}", f"RMS {o} ({u})") for o, u in zip(c.outputs, c.output_units,
                                                           strict=True)]
    if c.move is not None:
        cols.append(("settling_time_s", "Settling time (s)"))
    cols += [("effort", "Effort (RMS, actuator unit)"), ("added_mass_kg", "Added mass (kg)"),
             ("cost", "Cost (price units of the plant file)")]
    return cols


def _flat(row: CompareRow, c: Comparison) -> dict:
    out = {"name": row.name, "kind": row.kind, "min_damping": row.min_damping,
           "settling_time_s": row.settling_time_s, "added_mass_kg": row.added_mass_kg,
           "cost": row.cost,
           "effort": None if row.effort is None else f"{row.effort:.4g} {row.effort_unit}"}
    for o in c.outputs:
        out[f"peak:{o}"] = row.peak_reduction_db.get(o)
        out[f"rms:{o}"] = row.rms.get(o)
    return out
