"""``dampctl compare PLANT DESIGN...``: passive, shaping or active? Every option side by side."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import TextIO

from dampctl.commands._common import (
    SAFETY_LINES,
    add_figure_format,
    add_force_option,
    name_list,
    print_json,
    table,
)
from dampctl.design import load_design
from dampctl.errors import UsageError
from dampctl.fileio import check_output, check_output_folder, write_files, write_text
from dampctl.model.plantfile import load_plant
from dampctl.progress import Progress

NAME = "compare"
HELP = (
    "compare designs (passive, active), an input shaper and their combinations: damping, "
    "peaks, RMS, settling, effort, added mass, cost"
)

#: figures written with --plots, besides one FRF overlay per output
FIGURES = ("cost_vs_result.png",)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl compare``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("plant", help="plant file (TOML)")
    parser.add_argument("designs", nargs="*", metavar="DESIGN",
                        help="design files (JSON) written by dampctl tune, active or passive")
    parser.add_argument("--names", metavar="N1,N2",
                        help="names of the designs in the table, in order (default the file "
                             "names without .json)")
    parser.add_argument("--shaper", metavar="SHAPER",
                        help="shaper file (JSON) written by dampctl shape: one row alone and "
                             "one per design in front of its move (needs --move)")
    parser.add_argument("--move", type=float, metavar="DIST",
                        help="move size in m whose settling time (into ±1 %% of it) is "
                             "compared; needs --drive and --output")
    parser.add_argument("--drive", metavar="ACT", help="the actuator that makes the move")
    parser.add_argument("--output", metavar="OUT",
                        help="the displacement output (or sensor) that moves")
    parser.add_argument("-o", "--html", metavar="FILE",
                        help="write the comparison as a self-contained HTML page")
    parser.add_argument("--plots", metavar="DIR",
                        help="write PNG figures into DIR: frf_overlay_<output>.png, "
                             "cost_vs_result.png")
    add_figure_format(parser)
    add_force_option(parser, "the HTML file and figures of the same names")
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl compare``; exit 0 (bad input: 2).

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options.
    out, err : file-like
        Streams for results and for messages.

    Returns
    -------
    int
        0 when every option was compared (an unstable design is a row saying so).
    """
    from dampctl.report.compare import MoveSpec, compare_designs

    move = _move(args)
    if args.shaper and move is None:
        raise UsageError("--shaper needs a move: --move DIST --drive ACT --output OUT")
    if not args.designs and not args.shaper:
        raise UsageError("give at least one design file (or a shaper with a move)")
    inputs = [args.plant, *args.designs] + ([args.shaper] if args.shaper else [])
    if args.html:
        check_output(args.html, inputs=inputs, replace=args.force)
    if args.plots:
        check_output_folder(args.plots, inputs=inputs, replace=args.force)
    plant = load_plant(args.plant)
    names = _names(args)
    designs = []
    for name, path in zip(names, args.designs, strict=True):
        design = load_design(path)
        design.check_plant(plant, source=path)
        designs.append((name, design))
    shaper = None
    if args.shaper:
        from dampctl.laws.shapers import load_shaper

        shaper = load_shaper(args.shaper)
    steps = 1 + len(designs) * (2 if shaper is not None else 1) + (shaper is not None)
    with Progress(steps, "comparing", stream=err) as progress:
        result = compare_designs(
            plant, designs, shaper=shaper,
            shaper_name=None if shaper is None else _shaper_name(args.shaper, shaper.kind),
            move=None if move is None else MoveSpec(*move), progress=progress,
        )
    written = []
    figures = {}
    if args.html or args.plots:
        from dampctl.report.figures_compare import comparison_pngs

        figures = comparison_pngs(result, figure_format=args.figure_format)
    if args.plots:
        check_output_folder(args.plots, list(figures), inputs=inputs, replace=args.force)
        written += write_files(args.plots, figures, inputs=inputs, replace=args.force)
    if args.html:
        from dampctl.report.compare import render_comparison

        captions = {_caption(name): png for name, png in figures.items()}
        written.append(write_text(args.html, render_comparison(result, captions),
                                  inputs=inputs, replace=args.force))
    if args.json:
        payload = result.to_dict()
        payload["files"] = [str(p) for p in written]
        payload["safety"] = list(SAFETY_LINES)
        print_json(payload, out, "compare")
    else:
        _print_human(result, out)
        for path in written:
            out.write(f"wrote {path}\n")
    return 0


def _move(args) -> tuple[float, str, str] | None:
    given = [args.move is not None, args.drive is not None, args.output is not None]
    if not any(given):
        return None
    if not all(given):
        raise UsageError("a move needs all of --move DIST (m), --drive ACT and --output OUT")
    return (args.move, args.drive, args.output)


def _names(args) -> list[str]:
    if args.names is None:
        stems = [Path(p).stem for p in args.designs]
        return [s if stems.count(s) == 1 else f"{s} ({k + 1})" for k, s in enumerate(stems)]
    names = name_list(args.names, "--names")
    if len(names) != len(args.designs):
        raise UsageError(f"--names: {len(names)} names for {len(args.designs)} design files")
    return names


def _shaper_name(path: str, kind: str) -> str:
    stem = Path(path).stem
    return f"{kind} shaper" if stem == kind else f"{stem} ({kind} shaper)"


def _caption(file_name: str) -> str:
    stem = Path(file_name).stem
    if stem.startswith("frf_overlay_"):
        return f"Response at {stem[len('frf_overlay_'):]}: as built and every option"
    return "Cost against what each option buys"


def _print_human(c, out: TextIO) -> None:
    out.write(f"{c.plant_title or 'plant'}: passive, shaping or active? "
              f"target modes {', '.join(map(str, c.target_modes))}\n\n")
    headers = ["option", "kind", "min damping"]
    headers += [f"peak red. {o} (dB)" for o in c.outputs]
    headers += [f"RMS {o} ({u})" for o, u in zip(c.outputs, c.output_units, strict=True)]
    if c.move is not None:
        headers.append("settling (s)")
    headers += ["effort (RMS)", "added mass (kg)", "cost"]
    rows = []
    for r in c.rows:
        row = [r.name, r.kind, r.min_damping]
        row += [r.peak_reduction_db.get(o) for o in c.outputs]
        row += [r.rms.get(o) for o in c.outputs]
        if c.move is not None:
            row.append(r.settling_time_s)
        effort = None if r.effort is None else f"{r.effort:.4g} {r.effort_unit}"
        row += [effort, r.added_mass_kg, r.cost]
        rows.append(row)
    out.write(table(headers, rows) + "\n")
    if c.move is not None:
        out.write(f"\nmove: {c.move.distance_m:g} m of {c.move.output} by {c.move.drive}; "
                  f"settling into ±{c.settle_band_m:.3g} m (1 %) — '-': not settled within the "
                  "record\n")
    out.write("min damping: smallest over the target modes; peak red.: largest response peak "
              "as built over the option's; effort: largest RMS actuator input; cost: from the "
              "plant file ('-': a passive part without a price)\n")
    notes = list(c.notes) + [f"{r.name}: {n}" for r in c.rows for n in r.notes]
    if notes:
        out.write("\nnotes:\n" + "".join(f"  - {n}\n" for n in notes))
    out.write("\n" + "\n".join(SAFETY_LINES) + "\n")
