"""``dampctl plant fit FRF -o plant.toml``: modes fitted to measured FRFs, written as a plant."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any, TextIO

import numpy as np

from dampctl.commands._common import add_figure_format, add_force_option, print_json, table
from dampctl.errors import UsageError
from dampctl.fileio import check_output, check_output_folder, write_files, write_text
from dampctl.model.measured import MEASURED_KINDS, load_frf
from dampctl.model.modalfit import ModalFit, fit_modes
from dampctl.model.plantfile import dump_plant, parse_plant

NAME = "fit"
HELP = "fit modes to measured FRFs (.npz or .csv) and write them as a plant file"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl plant fit``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("frf", metavar="FRF",
                        help="measured FRFs: .npz (freq_hz, frf, inputs, outputs, output_kind, "
                             "optional coherence) or .csv (freq_hz,<out>/<in> re,<out>/<in> "
                             "im,...); inputs are forces (N)")
    parser.add_argument("-o", "--output", required=True, metavar="FILE",
                        help="plant file to write (TOML)")
    parser.add_argument("--band", metavar="LO-HI",
                        help="frequency band to fit, Hz (default: every measured frequency "
                             "above 0)")
    parser.add_argument("--order", default="auto", metavar="auto|N",
                        help="highest model order of the stability chart, in complex pole "
                             "pairs (default auto: from the number of resonance peaks, stopping "
                             "when no new stable pole appears)")
    parser.add_argument("--modes-hz", metavar="F1,F2,...",
                        help="keep the stable poles nearest these frequencies (Hz) instead of "
                             "choosing automatically")
    parser.add_argument("--driving-point", action="append", default=[], metavar="OUT/IN",
                        help="a channel whose output is at the input's point and direction; "
                             "scales the shapes to modal mass 1 (repeatable; without one the "
                             "shapes are unscaled)")
    parser.add_argument("--actuator", action="append", default=[], metavar="NAME=INPUT",
                        help="a force actuator NAME at the site of measured INPUT (repeatable; "
                             "default one per input, named as the input)")
    parser.add_argument("--sensor", action="append", default=[], metavar="NAME=OUTPUT",
                        help="a sensor NAME of OUTPUT's kind at its site (repeatable; default "
                             "one per motion output, named as the output)")
    parser.add_argument("--output-kind", action="append", default=[], metavar="[OUT=]KIND",
                        help="for a CSV file: what an output measures, "
                             f"{'|'.join(MEASURED_KINDS)} (repeatable; a bare KIND applies to "
                             "every output)")
    parser.add_argument("--title", default="", help="plant title (default: names the FRF file)")
    parser.add_argument("--plots", metavar="DIR",
                        help="write the stability chart and measured-vs-fitted FRFs (PNG) "
                             "into DIR (default: none)")
    add_figure_format(parser)
    add_force_option(parser, "the plant file and figures of the same names in DIR")
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def parse_band(text: str | None, option: str = "--band") -> tuple[float, float] | None:
    """Parse ``LO-HI`` (Hz) into a pair of floats; None gives None.

    Parameters
    ----------
    text : str or None
        The option's value, e.g. ``50-800``.
    option : str, optional
        Option name for messages.

    Returns
    -------
    tuple of float or None
    """
    if text is None:
        return None
    for k, char in enumerate(text):
        if char != "-" or k == 0:
            continue
        try:
            low, high = float(text[:k]), float(text[k + 1 :])
        except ValueError:
            continue
        if np.isfinite(low) and np.isfinite(high) and 0 <= low < high:
            return low, high
        break
    raise UsageError(f"{option}: expected LO-HI in Hz with 0 <= LO < HI (e.g. 50-800), "
                     f"got {text!r}")


def output_kinds(items: list[str]) -> str | dict[str, str] | None:
    """Parse ``--output-kind`` values: one bare kind, or ``OUT=KIND`` items.

    Parameters
    ----------
    items : list of str
        The option's values.

    Returns
    -------
    str, dict or None
        One kind for every output, a mapping output to kind, or None when not given.
    """
    if not items:
        return None
    bare = [i for i in items if "=" not in i]
    for item in items:
        kind = item.partition("=")[2] if "=" in item else item
        if kind not in MEASURED_KINDS:
            raise UsageError(f"--output-kind: kind must be one of {', '.join(MEASURED_KINDS)}, "
                             f"got {item!r}")
    if bare:
        if len(items) > 1:
            raise UsageError("--output-kind: give one bare KIND for every output, or OUT=KIND "
                             "items, not both")
        return bare[0]
    return _assignments(items, "--output-kind")


def _assignments(items: list[str], option: str) -> dict[str, str]:
    found: dict[str, str] = {}
    for item in items:
        name, eq, value = item.partition("=")
        if not eq or not name.strip() or not value.strip():
            raise UsageError(f"{option}: expected NAME=VALUE, got {item!r}")
        if name.strip() in found:
            raise UsageError(f"{option}: {name.strip()!r} is given twice")
        found[name.strip()] = value.strip()
    return found


def fit_payload(fit: ModalFit, plant_path: str | None) -> dict[str, Any]:
    """The JSON form of a modal fit (``dampctl plant fit --json``).

    Parameters
    ----------
    fit : ModalFit
        The fit.
    plant_path : str or None
        The plant file written.

    Returns
    -------
    dict
        ``modes`` (``mode``, ``freq_hz``, ``damping``, ``modal_mass_kg``: the modal mass with
        the shape 1 at the driving point, null when unscaled), ``fit_error`` (channel to
        normalized RMS error), ``orders`` (the stability chart: per order its poles with
        ``freq_hz``, ``damping``, ``freq_stable``, ``damping_stable``, ``shape_stable``),
        ``plant``, and ``plant_error``, ``residuals`` (channel to ``lower_per_kg``,
        ``upper_m_per_n``), ``band_hz``, ``order``, ``tolerances``, ``driving_points``,
        ``warnings``.
    """
    m = fit.measured
    tol = fit.chart.tolerances
    return {
        "modes": [{"mode": k + 1, "freq_hz": float(fit.freqs_hz[k]),
                   "damping": float(fit.dampings[k]),
                   "modal_mass_kg": float(fit.modal_masses[k]) if fit.shapes.scaled[k] else None}
                  for k in range(fit.n_modes)],
        "fit_error": dict(fit.fit_error),
        "orders": [{"order": e.order,
                    "poles": [{"freq_hz": float(e.freq_hz[i]), "damping": float(e.damping[i]),
                               "freq_stable": bool(e.freq_stable[i]),
                               "damping_stable": bool(e.damping_stable[i]),
                               "shape_stable": bool(e.shape_stable[i])}
                              for i in range(e.poles.size)]}
                   for e in fit.chart.orders],
        "plant": plant_path,
        "plant_error": dict(fit.plant_error),
        "residuals": {f"{o}/{i}": {"lower_per_kg": float(fit.lower_residual[a, b]),
                                   "upper_m_per_n": float(fit.upper_residual[a, b])}
                      for a, o in enumerate(m.outputs) for b, i in enumerate(m.inputs)},
        "band_hz": list(fit.band_hz),
        "order": fit.order,
        "named_modes": fit.named,
        "tolerances": {"freq": tol.freq, "damping": tol.damping, "mac": tol.mac,
                       "run": tol.run},
        "driving_points": [f"{o}/{i}" for o, i in fit.driving_points],
        "warnings": list(fit.warnings),
    }


def plant_text(fit: ModalFit, plant, source: str) -> str:
    """The plant file text: a comment saying how the modes were found, then the plant.

    Parameters
    ----------
    fit : ModalFit
        The fit.
    plant : ModalPlant
        The plant built from it.
    source : str
        The FRF file.

    Returns
    -------
    str
    """
    lo, hi = fit.band_hz
    worst = max(fit.plant_error.values(), default=float("nan"))
    lines = [
        f"# Modes fitted to {Path(source).name} by dampctl plant fit: vector fitting (Gustavsen",
        f"# & Semlyen, IEEE Trans. Power Delivery 14(3), 1999), band {lo:g}-{hi:g} Hz, poles",
        f"# read at model order {fit.order}. Largest channel error of this plant against the",
        f"# measurement (normalized RMS over the band): {worst:.2%}.",
    ]
    if fit.driving_points and np.all(fit.shapes.scaled):
        points = ", ".join(f"{o}/{i}" for o, i in fit.driving_points)
        lines.append(f"# Shapes mass-normalized (modal mass 1 kg) at the driving point {points}.")
    else:
        unscaled = [str(k + 1) for k in range(fit.n_modes) if not fit.shapes.scaled[k]]
        lines += [f"# UNSCALED shapes (modes {', '.join(unscaled)}): no driving point scaled "
                  "them, so their modal",
                  "# masses are unknown and collocated responses are not those of the "
                  "structure."]
    lines.append("# Sites are the measured points, named after the outputs (and inputs).")
    return "\n".join(lines) + "\n\n" + dump_plant(plant)


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl plant fit``.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options.
    out, err : file-like
        Streams for results and for messages.

    Returns
    -------
    int
        Exit code 0 (bad input raises a DampctlError, turned into exit 2 by the CLI).
    """
    band = parse_band(args.band)
    order: Any = args.order
    if order != "auto":
        try:
            order = int(order)
        except ValueError:
            raise UsageError(f"--order: expected auto or an integer >= 1, got {order!r}") from None
    modes_hz = None
    if args.modes_hz is not None:
        try:
            modes_hz = [float(x) for x in args.modes_hz.split(",") if x.strip()]
        except ValueError:
            raise UsageError(f"--modes-hz: expected frequencies like 150,160,900, got "
                             f"{args.modes_hz!r}") from None
        if not modes_hz or any(not np.isfinite(f) or f <= 0 for f in modes_hz):
            raise UsageError(f"--modes-hz: expected positive frequencies, got {args.modes_hz!r}")
    actuators = _assignments(args.actuator, "--actuator") or None
    sensors = _assignments(args.sensor, "--sensor") or None
    _check_targets(args)
    measured = load_frf(args.frf, output_kinds=output_kinds(args.output_kind))
    fit = fit_modes(measured.freq_hz, measured.frf, output_kinds=measured.output_kinds,
                    outputs=measured.outputs, inputs=measured.inputs,
                    coherence=measured.coherence, band_hz=band, order=order,
                    driving_points=args.driving_point, modes_hz=modes_hz, source=args.frf)
    plant = fit.to_plant(actuators=actuators, sensors=sensors, title=args.title)
    text = plant_text(fit, plant, args.frf)
    parse_plant(text, source=args.output)  # what is written reads back
    figures = None
    if args.plots:
        from dampctl.report.figures_measured import fit_pngs

        figures = fit_pngs(fit, figure_format=args.figure_format)
    if figures is not None:
        check_output_folder(args.plots, figures, inputs=[args.frf, args.output],
                            replace=args.force)
    path = write_text(args.output, text, inputs=[args.frf], replace=args.force)
    written = []
    if figures is not None:
        written = write_files(args.plots, figures, inputs=[args.frf, args.output],
                              replace=args.force)
    if args.json:
        payload = fit_payload(fit, str(path))
        if args.plots:
            payload["plots"] = [str(p) for p in written]
        print_json(payload, out, "plant-fit")
        return 0
    _print(fit, path, written, out)
    return 0


def _check_targets(args: argparse.Namespace) -> None:
    """Refuse before any work: an existing plant file or figure without --force, or an input."""
    check_output(args.output, inputs=[args.frf], replace=args.force)
    if args.plots:
        check_output_folder(args.plots, inputs=[args.frf, args.output], replace=args.force)


def _print(fit: ModalFit, path: Path, written: list[Path], out: TextIO) -> None:
    lo, hi = fit.band_hz
    m = fit.measured
    chosen = "named with --modes-hz" if fit.named else "stable over orders, chosen automatically"
    tol = fit.chart.tolerances
    out.write(f"{m.source}: {len(m.outputs)} outputs × {len(m.inputs)} inputs, "
              f"{m.freq_hz.size} frequencies in {lo:g}-{hi:g} Hz\n")
    out.write(f"stability chart: orders 1-{fit.chart.orders[-1].order} (pole pairs); stable "
              f"means within {tol.freq:.0%} in frequency, {tol.damping:.0%} in damping and MAC "
              f">= {tol.mac:g} over {tol.run} orders\n")
    out.write(f"{fit.n_modes} modes, {chosen}, read at order {fit.order}\n\n")
    rows = [(k + 1, f"{fit.freqs_hz[k]:.2f}", fit.dampings[k],
             fit.modal_masses[k] if fit.shapes.scaled[k] else "unscaled")
            for k in range(fit.n_modes)]
    out.write(table(["mode", "freq (Hz)", "damping", "modal mass at driving point (kg)"], rows)
              + "\n\n")
    rows = []
    for a, o in enumerate(m.outputs):
        for b, i in enumerate(m.inputs):
            name = f"{o}/{i}"
            rows.append((name, f"{fit.fit_error[name]:.2%}",
                         f"{fit.plant_error[name]:.2%}" if name in fit.plant_error else "-",
                         fit.lower_residual[a, b], fit.upper_residual[a, b]))
    out.write("per channel: normalized RMS error over the band (coherence-weighted where given) "
              "of the fit\n(modes and residuals) and of the plant written; residual terms of "
              "the receptance,\nL/(jw)^2 for modes below the band and U for modes above it\n")
    out.write(table(["channel", "fit error", "plant error", "lower L (1/kg)",
                     "upper U (m/N)"], rows) + "\n")
    if fit.warnings:
        out.write("\nwarnings:\n" + "".join(f"  - {w}\n" for w in fit.warnings))
    out.write(f"\nwrote {path}\n")
    if written:
        out.write(f"wrote {len(written)} figures into {written[0].parent}\n")
