"""One report for several designs on one plant (``dampctl report PLANT D1 D2 ...``).

Up to :data:`MAX_DESIGNS` designs are assessed on the same plant and shown side by side: the
verdict of each, the comparison table of :mod:`dampctl.report.compare` (smallest damping, peak
reduction, RMS, effort, cost), the damping of every mode, the margins of every loop, and the
figures overlaid — FRFs at each output and damping bars, one colour per design in every figure
(:data:`dampctl.report.style.SERIES`).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from dampctl.analysis.assessment import assess
from dampctl.errors import UsageError
from dampctl.report.compare import _columns, _flat, compare_designs
from dampctl.report.figures_compare import plot_damping_overlay, plot_frf_overlay
from dampctl.report.html import (
    _PRINT_SCRIPT,
    _STYLE,
    SAFETY_TEXT,
    _e,
    _guard_numbers,
    _img,
    _table,
    provenance_html,
)
from dampctl.report.style import render

__all__ = ["MAX_DESIGNS", "designs_report"]

#: designs one report overlays (six series colours, six line styles)
MAX_DESIGNS = 6


def designs_report(
    plant,
    designs: Sequence[tuple[str, Any]],
    *,
    delay_s: float | None = None,
    figure_format: str = "png",
    provenance: Mapping[str, Any] | None = None,
) -> tuple[str, list]:
    """Assess several designs on one plant and render one HTML report of them side by side.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    designs : sequence of (str, Design)
        Named designs (2 to 6), each belonging to the plant.
    delay_s : float, optional
        Loop delay (s) for the assessments; default the plant's stated delay.
    figure_format : str, optional
        png (default) or svg, embedded.
    provenance : mapping, optional
        Date, command line and input files shown at the top.

    Returns
    -------
    html : str
        The report.
    assessments : list of Assessment
        One per design, in order.
    """
    if not 2 <= len(designs) <= MAX_DESIGNS:
        raise UsageError(f"a report compares 2 to {MAX_DESIGNS} designs, got {len(designs)}")
    if figure_format not in ("png", "svg"):
        raise UsageError(f"figure format for a report: png or svg, got {figure_format!r}")
    names = [n for n, _ in designs]
    if len(set(names)) != len(names):
        raise UsageError(f"two designs have the same name: {', '.join(names)}")
    for name, design in designs:
        design.check_plant(plant, source=name)
    assessments = [assess(plant, d, delay_s=delay_s) for _, d in designs]
    comparison = compare_designs(plant, designs, assessments=assessments)
    figures = _figures(plant, designs, assessments, comparison, figure_format)
    law = ", ".join(sorted({d.law.upper() for _, d in designs}))
    title = f"Damping designs compared: {plant.title or 'plant'}"
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(title)}</title><style>{_STYLE}</style>{_PRINT_SCRIPT}</head><body>",
        f"<h1>{_e(title)}</h1>",
        provenance_html(provenance, plant.fingerprint, law),
        f'<div class="caution"><b>Safety.</b> {_e(SAFETY_TEXT)}</div>',
        _verdicts(names, assessments),
        "<h2>Every design side by side</h2>",
        _table([_flat(r, comparison) for r in comparison.rows], _columns(comparison)),
        "<p class='note'>Smallest damping over the target modes "
        f"{_e(', '.join(map(str, comparison.target_modes)))}; peak reduction: largest response "
        "peak as built over the design's (dB); RMS under the plant's disturbances; effort: "
        "largest RMS actuator input; cost from the plant file's prices.</p>",
        _modes(names, assessments),
        _margins(names, assessments),
        "<h2>Figures</h2>",
    ]
    for caption, image in figures.items():
        parts.append(f"<figure>{_img(image, caption)}<figcaption>{_e(caption)}</figcaption>"
                     "</figure>")
    parts.append("</body></html>")
    return _guard_numbers("\n".join(parts)) + "\n", assessments


def _verdicts(names, assessments) -> str:
    rows = []
    for name, a in zip(names, assessments, strict=True):
        unmet = ", ".join(r.name for r in a.unmet)
        rows.append({"design": name, "law": a.law.upper(), "stable": a.stable,
                     "status": "every requirement met" if a.all_met else f"NOT MET: {unmet}",
                     "met": a.all_met})
    return "<h2>Verdict per design</h2>" + _table(rows, [
        ("design", "Design", "text"), ("law", "Law", "text"), ("stable", "Stable", "text"),
        ("status", "Requirements", "status")])


def _modes(names, assessments) -> str:
    first = assessments[0]
    rows = []
    for k, m in enumerate(first.modes):
        row = {"mode": m.mode, "freq": m.open_freq_hz, "open": m.open_damping}
        for j, a in enumerate(assessments):
            row[f"d{j}"] = a.modes[k].closed_damping
        rows.append(row)
    columns = [("mode", "Mode (#)"), ("freq", "Frequency (Hz)"), ("open", "As built (–)")]
    columns += [(f"d{j}", f"{name} (–)") for j, name in enumerate(names)]
    return "<h2>Damping ratio of every mode</h2>" + _table(rows, columns)


def _margins(names, assessments) -> str:
    rows = []
    for name, a in zip(names, assessments, strict=True):
        for pair, lp in zip(a.pairs, a.loops, strict=False):
            rows.append({"design": name, "loop": pair, "gm": lp.gain_margin_db,
                         "pm": lp.phase_margin_deg, "dm": lp.delay_margin_s,
                         "fc": lp.crossover_hz})
    if not rows:
        return "<h2>Stability margins</h2><p>None: every design is passive (no loop).</p>"
    return ("<h2>Stability margins</h2><p class='note'>Each loop broken at the plant input "
            "with the others closed; delays exact.</p>" + _table(rows, [
                ("design", "Design", "text"), ("loop", "Loop", "text"),
                ("gm", "Gain margin (dB)"), ("pm", "Phase margin (deg)"),
                ("dm", "Delay margin (s)"), ("fc", "Crossover (Hz)")]))


def _figures(plant, designs, assessments, comparison, fmt) -> dict[str, bytes]:
    """FRF overlay per output and the damping bars, one colour per design throughout."""
    order = [r.name for r in comparison.rows if r.kind not in ("none", "shaping")
             and "+" not in r.kind]
    kinds = {r.name: r.kind for r in comparison.rows}
    files = {}
    for k, output in enumerate(comparison.outputs):
        curves = {r.name: r.frf[k] for r in comparison.rows if r.name in order}
        drawn = plot_frf_overlay(comparison.freq_hz, curves, open_curve=comparison.open_frf[k],
                                 kinds=kinds, output=output, unit=comparison.output_units[k])
        files[f"FRF at {output}: as built and with each design"] = render(drawn.figure, fmt)
    by_name = dict(zip([n for n, _ in designs], assessments, strict=True))
    closed = {n: np.array([m.closed_damping for m in by_name[n].modes]) for n in order}
    first = assessments[0]
    drawn = plot_damping_overlay([m.mode for m in first.modes],
                                 [m.open_freq_hz for m in first.modes],
                                 [m.open_damping for m in first.modes], closed)
    files["Damping ratio per mode, as built and with each design"] = render(drawn.figure, fmt)
    return files
