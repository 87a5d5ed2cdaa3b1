"""``dampctl shape PLANT [DESIGN] --modes 4,5 -o shaper.json``: an input shaper for modes."""

from __future__ import annotations

import argparse
import math
from typing import TextIO

from dampctl.commands._common import (
    add_figure_format,
    add_force_option,
    mode_list,
    print_json,
    table,
)
from dampctl.design import load_design
from dampctl.errors import UsageError
from dampctl.fileio import check_output, check_output_folder, write_files, write_text
from dampctl.laws.shapers import DEFAULT_TOLERANCE, KINDS
from dampctl.laws.shaping import design_shaper
from dampctl.model.plantfile import load_plant

NAME = "shape"
HELP = "design an input shaper (ZV, ZVD, EI, ZVDD) for modes, open loop or damped by a design"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl shape``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("plant", help="plant file (TOML); - reads it from standard input")
    parser.add_argument("design", nargs="?", default=None,
                        help="design file (JSON): shape for its closed-loop (damped) modes")
    parser.add_argument("--modes", required=True, metavar="LIST",
                        help="modes to cancel, e.g. 4,5 or 4-6 (1-based)")
    parser.add_argument("--kind", choices=KINDS, default=None,
                        help="shaper kind (default: the shortest meeting --insensitivity, else "
                             "zvd)")
    parser.add_argument("--tolerance", type=float, default=DEFAULT_TOLERANCE, metavar="V",
                        help="tolerable residual vibration, fraction of the unshaped "
                             f"(default {DEFAULT_TOLERANCE})")
    parser.add_argument("--insensitivity", default=None, metavar="±X%",
                        help="frequency error over which the residual must stay under the "
                             "tolerance, e.g. ±10%% (default: none asked)")
    parser.add_argument("--drift", type=float, default=0.05, metavar="FRACTION",
                        help="largest frequency shift of the drift cases, as dampctl assess "
                             "(default 0.05 = ±5 %%; 0 skips the check)")
    parser.add_argument("-o", "--output", required=True, metavar="FILE",
                        help="shaper file to write (JSON)")
    parser.add_argument("--plots", metavar="DIR",
                        help="write the figures into DIR (see --figure-format)")
    add_figure_format(parser)
    add_force_option(parser, "the shaper file and figures of the same names in DIR")
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def insensitivity(text: str | None) -> float | None:
    """``--insensitivity``: ``±10%``, ``10%`` or ``0.1`` as a fraction.

    Parameters
    ----------
    text : str or None
        The option's value.

    Returns
    -------
    float or None
    """
    if text is None:
        return None
    raw = text.strip().removeprefix("±").removeprefix("+-").strip()
    try:
        value = float(raw[:-1]) / 100.0 if raw.endswith("%") else float(raw)
    except ValueError:
        raise UsageError(f"--insensitivity: expected ±X% (e.g. ±10%), got {text!r}") from None
    if not (math.isfinite(value) and 0 < value < 1):
        raise UsageError(f"--insensitivity: expected between 0 and 100 %, got {text!r}")
    return value


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl shape``; exit 0, or 1 when the asked insensitivity is not met.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options.
    out, err : file-like
        Streams for results and for messages.

    Returns
    -------
    int
        Exit code (bad input raises a DampctlError, turned into exit 2 by the CLI).
    """
    wanted = insensitivity(args.insensitivity)
    modes = mode_list(args.modes)
    inputs = [p for p in (args.plant, args.design) if p]
    check_output(args.output, inputs=inputs, replace=args.force)
    if args.plots:
        check_output_folder(args.plots, [f"sensitivity.{args.figure_format}",
                                          f"impulses.{args.figure_format}"], inputs=inputs,
                            replace=args.force)
    plant = load_plant(args.plant)
    design = None
    if args.design:
        design = load_design(args.design)
        design.check_plant(plant, source=args.design)
    result = design_shaper(plant, modes, design=design, kind=args.kind,
                           tolerance=args.tolerance, insensitivity=wanted, drift=args.drift)
    written = []
    if args.plots:
        from dampctl.report.figures_time import shaper_pngs

        figures = shaper_pngs(result, figure_format=args.figure_format)
        written = write_files(args.plots, figures, inputs=inputs, replace=args.force)
    path = write_text(args.output, result.shaper.to_json(), inputs=inputs, replace=args.force)
    if args.json:
        payload = result.to_dict()
        payload["file"] = str(path)
        payload["plots"] = [str(p) for p in written]
        print_json(payload, out, "shape")
    else:
        _print_human(result, out, plant.title or args.plant)
        out.write(f"wrote {path}\n")
        for p in written:
            out.write(f"wrote {p}\n")
    if result.insensitivity_met is False:
        err.write(
            f"dampctl shape: the residual does not stay under {100 * result.tolerance:.3g} % "
            f"over ±{100 * result.insensitivity:.3g} % frequency error on every mode\n"
        )
        return 1
    return 0


def _print_human(result, out: TextIO, name: str) -> None:
    shaper = result.shaper
    loop = "closed-loop (damped)" if result.loop == "closed" else "open-loop"
    out.write(
        f"{name}: {shaper.kind.upper()} shaper ({result.kind_reason}) for the {loop} modes "
        f"{', '.join(str(m.mode) for m in result.modes)}; {shaper.times_s.size} impulses over "
        f"{shaper.duration_s * 1e3:.4g} ms (the move takes that much longer)\n\n"
    )
    rows = [(k + 1, t * 1e3, a) for k, (t, a) in enumerate(zip(shaper.times_s,
                                                               shaper.amplitudes, strict=True))]
    out.write(table(["impulse", "time (ms)", "amplitude"], rows) + "\n\n")
    rows = [
        (m.mode, m.freq_hz, m.damping, m.band_hz[0], m.band_hz[1], m.band_percent[0],
         m.band_percent[1], None if m.drift_worst is None else 100 * m.drift_worst)
        for m in result.modes
    ]
    out.write(table(["mode", "freq (Hz)", "damping", "band low (Hz)", "band high (Hz)",
                     "low (%)", "high (%)", "drift worst (%)"], rows) + "\n")
    out.write(f"(band: where the residual vibration stays ≤ {100 * result.tolerance:.3g} % of "
              "the unshaped move's)\n")
    if result.insensitivity is not None:
        state = "met" if result.insensitivity_met else "NOT met"
        out.write(f"insensitivity ±{100 * result.insensitivity:.3g} % on every mode: {state}\n")
    d = result.drift
    if d is not None:
        extra = f"; {d.unstable_cases} unstable loop case(s) left out" if d.unstable_cases else ""
        out.write(
            f"frequency drift ±{100 * d.drift:.3g} % ({d.n_cases} cases, as dampctl assess): "
            f"worst residual {100 * d.worst_residual:.3g} %, {d.cases_over} case(s) above the "
            f"tolerance{extra}\n"
        )
