"""Tables of dampctl's values for notebooks: rows, pandas frames, compact HTML.

``ModalPlant``, ``Design``, ``Assessment`` and ``SizingResult`` show themselves in a notebook
through ``_repr_html_`` (a compact table built here) and give their tabular part as a pandas
``DataFrame`` with ``to_frame()``. pandas is optional: it is imported only when a frame is
asked for, and its absence is a :class:`~dampctl.errors.MissingFeatureError` that says how to
install it. This module reads the values' attributes only (it imports no stage), so any stage
may use it.
"""

from __future__ import annotations

import html
import math
from collections.abc import Mapping, Sequence
from typing import Any

from dampctl.errors import MissingFeatureError

__all__ = [
    "assessment_html",
    "assessment_rows",
    "design_html",
    "design_rows",
    "frame",
    "html_table",
    "plant_html",
    "plant_rows",
    "sizing_html",
    "sizing_rows",
]


def frame(rows: Sequence[Mapping[str, Any]]):
    """Rows as a pandas DataFrame (pandas imported here, only when asked for).

    Parameters
    ----------
    rows : sequence of mapping
        One mapping per row, the same keys in each.

    Returns
    -------
    pandas.DataFrame

    Raises
    ------
    MissingFeatureError
        When pandas is not installed.
    """
    try:
        import pandas
    except ImportError:
        raise MissingFeatureError(
            "to_frame() needs pandas, an optional dependency: pip install pandas "
            "(or use to_dict() / the rows without it)"
        ) from None
    return pandas.DataFrame(list(rows))


def _cell(value: Any) -> str:
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if not math.isfinite(value):
            return "∞" if value > 0 else ("−∞" if value < 0 else "NaN")
        return f"{value:.4g}"
    if isinstance(value, list | tuple):
        return ", ".join(_cell(v) for v in value)
    return str(value)


def html_table(rows: Sequence[Mapping[str, Any]], caption: str = "") -> str:
    """A compact HTML table of rows (numbers to 4 significant digits, never wrapped).

    Parameters
    ----------
    rows : sequence of mapping
        One mapping per row; the first row's keys are the columns.
    caption : str, optional
        Shown above the table.

    Returns
    -------
    str
    """
    if not rows:
        return f"<p>{html.escape(caption)}: none</p>" if caption else ""
    keys = list(rows[0])
    head = "".join(f"<th>{html.escape(k)}</th>" for k in keys)
    body = "".join(
        "<tr>" + "".join(f'<td style="white-space:nowrap">{html.escape(_cell(r.get(k)))}</td>'
                         for k in keys) + "</tr>"
        for r in rows
    )
    cap = f"<caption style='text-align:left'>{html.escape(caption)}</caption>" if caption else ""
    return f"<table>{cap}<thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


# ---------------------------------------------------------------------- plant
def plant_rows(plant) -> list[dict[str, Any]]:
    """One row per mode: ``mode``, ``label``, ``freq_hz``, ``damping``, ``modal_mass_kg``.

    Parameters
    ----------
    plant : ModalPlant
        The plant.

    Returns
    -------
    list of dict
    """
    return [{"mode": k, "label": m.label, "freq_hz": m.freq_hz, "damping": m.damping,
             "modal_mass_kg": m.modal_mass_kg} for k, m in enumerate(plant.modes, start=1)]


def plant_html(plant) -> str:
    """A plant in a notebook: title, fingerprint, hardware counts and its modes.

    Parameters
    ----------
    plant : ModalPlant
        The plant.

    Returns
    -------
    str
    """
    head = (f"<b>ModalPlant</b> {html.escape(plant.title or '')} · {plant.n_modes} modes, "
            f"{len(plant.actuators)} actuators, {len(plant.sensors)} sensors, "
            f"{len(plant.pairs)} pairs · fingerprint <code>{plant.fingerprint}</code>")
    return f"<div>{head}{html_table(plant_rows(plant), 'modes')}</div>"


# ---------------------------------------------------------------------- design
def design_rows(design) -> list[dict[str, Any]]:
    """One row per loop: ``pair``, ``actuator``, ``sensor``, ``gain``, ``branches``, ``order``.

    A design with a MIMO controller and no loops gives one row with its state count.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    list of dict
    """
    rows = [{"pair": lp.pair, "actuator": lp.actuator, "sensor": lp.sensor, "gain": lp.gain,
             "branches": len(lp.branches),
             "order": sum(len(s.den) - 1 for b in lp.branches for s in b.sections)}
            for lp in design.loops]
    if not rows and not design.passive:
        A = design.statespace_matrices()[0]
        rows = [{"pair": ", ".join(design.pairs), "actuator": ", ".join(design.actuators),
                 "sensor": ", ".join(design.sensors), "gain": None, "branches": 0,
                 "order": int(A.shape[0])}]
    if design.passive:
        rows = [{"part": type(p).__name__.lower(), **{k: v for k, v in vars(p).items()
                                                       if isinstance(v, int | float | str)}}
                for p in design.parts]
    return rows


def design_html(design) -> str:
    """A design in a notebook: law, pairs, target modes and its loops (or parts).

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    str
    """
    head = (f"<b>Design</b> {html.escape(design.law.upper())} on "
            f"{html.escape(', '.join(design.pairs) or '–')} · target modes "
            f"{', '.join(str(m) for m in design.target_modes) or '–'} · "
            "<code>u = −K(s) y</code>")
    what = "parts" if design.passive else "loops"
    return f"<div>{head}{html_table(design_rows(design), what)}</div>"


# ---------------------------------------------------------------------- assessment
def assessment_rows(assessment) -> list[dict[str, Any]]:
    """One row per mode: open and closed frequency (Hz) and damping, peak reduction (dB).

    Parameters
    ----------
    assessment : Assessment
        The assessment.

    Returns
    -------
    list of dict
    """
    return [{"mode": m.mode, "open_freq_hz": m.open_freq_hz, "open_damping": m.open_damping,
             "closed_freq_hz": m.closed_freq_hz, "closed_damping": m.closed_damping,
             "peak_reduction_db": m.peak_reduction_db} for m in assessment.modes]


def assessment_html(assessment) -> str:
    """An assessment in a notebook: stability, margins, modes and requirements.

    Parameters
    ----------
    assessment : Assessment
        The assessment.

    Returns
    -------
    str
    """
    state = "stable" if assessment.stable else "UNSTABLE"
    met = "every requirement met" if assessment.all_met else (
        "not met: " + ", ".join(r.name for r in assessment.unmet))
    head = (f"<b>Assessment</b> {html.escape(assessment.law.upper())} · closed loop {state} · "
            f"{html.escape(met)}")
    margins = [{"loop": name, "gain_margin_db": lp.gain_margin_db,
                "phase_margin_deg": lp.phase_margin_deg, "delay_margin_s": lp.delay_margin_s,
                "crossover_hz": lp.crossover_hz}
               for name, lp in zip(assessment.pairs, assessment.loops, strict=False)]
    reqs = [{"requirement": r.name, "required": r.required, "achieved": r.achieved,
             "met": r.met} for r in assessment.requirements]
    return (f"<div>{head}{html_table(margins, 'margins (loop broken at the plant input)')}"
            f"{html_table(assessment_rows(assessment), 'modes')}"
            f"{html_table(reqs, 'requirements')}</div>")


# ---------------------------------------------------------------------- sizing
def sizing_rows(result) -> list[dict[str, Any]]:
    """One row per pair count: chosen pairs, smallest damping, cost, search method.

    Parameters
    ----------
    result : SizingResult
        The sizing result.

    Returns
    -------
    list of dict
    """
    return [{"pairs_used": r.pairs_used, "chosen": ", ".join(r.chosen),
             "min_damping": r.min_damping, "achievable_min_damping": r.achievable_min_damping,
             "cost": r.cost, "method": r.method} for r in result.rows]


def sizing_html(result) -> str:
    """A sizing result in a notebook: law, target, recommendation and the rows.

    Parameters
    ----------
    result : SizingResult
        The sizing result.

    Returns
    -------
    str
    """
    head = (f"<b>SizingResult</b> {html.escape(result.law.upper())} · target damping "
            f"{_cell(result.target_damping)} on modes "
            f"{', '.join(str(m) for m in result.modes)} · recommended "
            f"{_cell(result.recommended)} pair(s)")
    return f"<div>{head}{html_table(sizing_rows(result), 'best set per pair count')}</div>"
