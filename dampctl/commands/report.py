"""``dampctl report PLANT DESIGN... -o report.html``: one self-contained HTML design report.

With one design: the full report (plant, sizing, design, assessment, export, move). With two to
six: one report of them side by side (:mod:`dampctl.report.designs`).
"""

from __future__ import annotations

import argparse
import json
from collections.abc import Mapping
from pathlib import Path
from types import SimpleNamespace
from typing import Any, TextIO

from dampctl.analysis.assessment import assess
from dampctl.commands._common import (
    OPTION_RANGES,
    add_figure_format,
    add_force_option,
    jsonable,
    number_option,
    print_json,
)
from dampctl.commands.check import check_payload
from dampctl.design import Design, load_design
from dampctl.discrete.profiles import PROFILES
from dampctl.errors import UsageError
from dampctl.fileio import check_output, write_text
from dampctl.model.measured import MeasuredFRF, load_frf
from dampctl.model.plant import ModalPlant
from dampctl.model.plantfile import load_plant
from dampctl.model.summary import plant_summary, summary_differences
from dampctl.model.survey import survey_plant
from dampctl.report.html import ReportInputs, render_report
from dampctl.values import Range, describe, read_float, read_int, read_str

NAME = "report"
HELP = "write a self-contained HTML report of a design on its plant"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl report``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("plant", help="plant file (TOML); - reads it from standard input")
    parser.add_argument("design", nargs="+", metavar="DESIGN",
                        help="design file written by dampctl tune (JSON); two to six design "
                             "files give one report of them side by side (FRFs, damping, "
                             "margins overlaid)")
    parser.add_argument("-o", "--output", required=True, metavar="FILE",
                        help="report file to write (HTML)")
    add_force_option(parser, "the report file")
    add_figure_format(parser, embedded=True)
    parser.add_argument("--sizing", metavar="FILE",
                        help="sizing result saved from `dampctl size --json` (optional)")
    parser.add_argument("--export", metavar="FILE",
                        help="export summary: controller.json written by `dampctl export`, "
                             "or its --json output (optional)")
    parser.add_argument("--delay-s", type=number_option(OPTION_RANGES["delay"]), default=None,
                        metavar="T",
                        help="loop delay (s) for the assessment; default the plant's "
                             "loop_delay_s plus a ZOH and one sample at its sample rate")
    parser.add_argument("--measured", metavar="FRF",
                        help="measured FRFs (.npz or .csv) to hold the plant against: a section "
                             "and figures of plant against measurement (optional)")
    parser.add_argument("--output-kind", action="append", default=[], metavar="[OUT=]KIND",
                        help="for a CSV --measured file: what an output measures (repeatable; "
                             "a bare KIND applies to every output)")
    parser.add_argument("--json", action="store_true",
                        help="print a JSON summary of the written report on stdout")
    move = parser.add_argument_group(
        "move and settle", "add one move four ways: open loop, shaped, damped, damped and shaped")
    move.add_argument("--move", type=float, metavar="DIST",
                      help="move size in m (needs --drive and --move-output)")
    move.add_argument("--drive", metavar="ACTUATOR", help="actuator that makes the move")
    move.add_argument("--move-output", metavar="OUT",
                      help="displacement output or sensor (m) that moves by DIST")
    move.add_argument("--profile", default="step", metavar="PROFILE",
                      help="step, trapezoid, scurve, impulse or file:CSV (as dampctl simulate; "
                           "default step)")
    move.add_argument("--max-velocity", type=float, metavar="V",
                      help="velocity limit of a trapezoid or scurve move (m/s)")
    move.add_argument("--max-acceleration", type=float, metavar="A",
                      help="acceleration limit of a trapezoid or scurve move (m/s²)")
    move.add_argument("--shaper", metavar="SHAPER",
                      help="shaper file for both shaped runs (default: a ZVD on the design's "
                           "target modes, open-loop and closed-loop values)")
    move.add_argument("--settle-band", metavar="B",
                      help="settling band ±B in m, or N%% of the move (default 1%%)")


def _move_options(args) -> dict | None:
    """The move of ``--move`` as keyword arguments of move_and_settle (None without one)."""
    given = [o for o, v in (("--drive", args.drive), ("--move-output", args.move_output),
                            ("--shaper", args.shaper), ("--settle-band", args.settle_band),
                            ("--max-velocity", args.max_velocity),
                            ("--max-acceleration", args.max_acceleration)) if v is not None]
    if args.move is None:
        if given or args.profile != "step":
            raise UsageError(f"{(given or ['--profile'])[0]} belongs to a move: give --move DIST")
        return None
    if args.drive is None or args.move_output is None:
        raise UsageError("--move needs --drive ACTUATOR and --move-output OUT")
    from dampctl.commands.simulate import read_record, settle_band
    from dampctl.laws.shapers import load_shaper

    if not args.profile.startswith("file:") and args.profile not in PROFILES:
        raise UsageError(
            f"--profile: expected one of {', '.join(PROFILES)} or file:CSV, got {args.profile!r}"
        )
    record = read_record(args.profile[5:]) if args.profile.startswith("file:") else None
    return {
        "drive": args.drive, "output": args.move_output, "distance_m": args.move,
        "profile": "record" if record is not None else args.profile, "record": record,
        "max_velocity": args.max_velocity, "max_acceleration": args.max_acceleration,
        "shaper": load_shaper(args.shaper) if args.shaper else None,
        "settle_band_m": settle_band(args.settle_band, args.move),
    }


def report_html(
    plant: ModalPlant,
    design: Design,
    *,
    sizing: Mapping[str, Any] | None = None,
    sizing_figures: Mapping[str, bytes] | None = None,
    export: Mapping[str, Any] | None = None,
    delay_s: float | None = None,
    measured: MeasuredFRF | None = None,
    move: Mapping[str, Any] | None = None,
    figure_format: str = "png",
    provenance: Mapping[str, Any] | None = None,
) -> tuple[str, Any]:
    """Assess a design and render the HTML report.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The design (checked against the plant's fingerprint).
    sizing : mapping, optional
        Sizing JSON (``dampctl size --json``).
    sizing_figures : mapping of str to bytes, optional
        Sizing PNGs; drawn from ``sizing`` when not given.
    export : mapping, optional
        Export JSON (``dampctl export --json`` or the written controller.json).
    delay_s : float, optional
        Loop delay (s) for the assessment; default the plant's stated delay.
    measured : MeasuredFRF, optional
        Measured FRFs: the plant is held against them (its section and figures).
    move : mapping, optional
        Keyword arguments of :func:`dampctl.report.movesettle.move_and_settle` (drive, output,
        distance_m, ...): adds the "Move and settle" section.
    figure_format : str, optional
        png (default) or svg: the format of the embedded figures.
    provenance : mapping, optional
        Date, command line and input files shown at the top (:func:`provenance_of`);
        default the date alone.

    Returns
    -------
    html : str
        The report.
    assessment : Assessment
        The assessment shown in it.
    """
    from dampctl.report.figures import assessment_pngs

    if figure_format not in ("png", "svg"):
        raise UsageError(f"figure format for a report: png or svg, got {figure_format!r} "
                         "(pdf only for --plots folders)")
    design.check_plant(plant)
    result = assess(plant, design, delay_s=delay_s)
    figures = {}
    captions = {
        "frf": "Frequency response from a disturbance to an output, open and closed loop",
        "loop_gain": "Loop gain L(jω) with crossovers and margins (Bode)",
        "sensitivity": "Sensitivity |S| and complementary sensitivity |T| of the loop",
        "root_locus": "Closed-loop poles as the controller is scaled 0 to 3 times (imaginary "
        "part in Hz; right: damping against frequency)",
        "damping": "Damping ratio per mode, before and after",
        "nyquist": "Nyquist plot of the loop (broken at the plant input) with the critical point",
        "cumulative_rms": "Cumulative RMS motion against frequency",
        "third_octave": "One-third-octave velocity spectrum with vibration criterion levels",
    }
    for name, png in assessment_pngs(result, figure_format=figure_format).items():
        stem = Path(name).stem
        key = next((k for k in captions if stem.startswith(k)), stem)
        detail = stem[len(key):].strip("_")
        figures[f"{captions.get(key, stem)}{' — ' + detail if detail else ''}"] = png
    if sizing is not None:
        pngs = (sizing_figures if sizing_figures is not None
                else _sizing_pngs(sizing, figure_format))
        sizing_captions = {
            "sizing_damping_cost": "Sizing: smallest damping and cost against the number of pairs",
            "sizing_mode_damping": "Sizing: damping of each target mode for the best set of "
            "each size",
        }
        for name, png in pngs.items():
            stem = Path(name).stem
            figures[sizing_captions.get(stem, f"Sizing: {stem.replace('_', ' ')}")] = png
    moved = None
    if move is not None:
        from dampctl.report.movesettle import move_and_settle

        moved = move_and_settle(plant, design, **move)
    check = check_payload(plant, survey_plant(plant))
    if measured is not None:
        from dampctl.model.comparison import compare_plant
        from dampctl.report.figures_measured import comparison_pngs

        comparison = compare_plant(plant, measured)
        check["measured"] = dict(comparison.to_dict(), file=measured.source)
        pngs = comparison_pngs(comparison, figure_format=figure_format)
        for name, png in zip(comparison.channels, pngs.values(),
                             strict=True):
            figures[f"Plant against measurement — {name}"] = png
    inputs = ReportInputs(
        check=check,
        design=design.to_dict(),
        assessment=jsonable(result.to_dict()),
        sizing=jsonable(dict(sizing)) if sizing is not None else None,
        export=jsonable(dict(export)) if export is not None else None,
        figures=figures,
        move=None if moved is None else jsonable(moved.summary),
        move_figure=None if moved is None else moved.figure,
        provenance=provenance if provenance is not None else provenance_of(),
    )
    return render_report(inputs), result


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl report``; exit 0 when every requirement is met, 1 otherwise.

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
    if len(args.design) > 1:
        return _run_designs(args, out)
    args.design = args.design[0]
    inputs = [p for p in (args.plant, args.design, args.sizing, args.export, args.measured,
                          args.shaper) if p]
    check_output(args.output, inputs=inputs, replace=args.force)
    plant = load_plant(args.plant)
    design = load_design(args.design)
    design.check_plant(plant, source=args.design)
    sizing = _read_json(args.sizing, "--sizing") if args.sizing else None
    export = _read_json(args.export, "--export") if args.export else None
    if sizing is not None:
        _check_sizing(sizing, args.sizing, plant)
    if export is not None:
        _check_export(export, args.export, plant, design)
    measured = None
    if args.measured:
        from dampctl.commands.plant_fit import output_kinds

        measured = load_frf(args.measured, output_kinds=output_kinds(args.output_kind))
    move = _move_options(args)
    roles = (("plant", args.plant), ("design", args.design), ("sizing", args.sizing),
             ("export", args.export), ("measured FRFs", args.measured), ("shaper", args.shaper))
    provenance = provenance_of(getattr(args, "argv", None), [(r, p) for r, p in roles if p])
    html, result = report_html(plant, design, sizing=sizing, export=export, delay_s=args.delay_s,
                               measured=measured, move=move, figure_format=args.figure_format,
                               provenance=provenance)
    path = write_text(args.output, html, inputs=inputs, replace=args.force)
    unmet = [r.name for r in result.unmet]
    if args.json:
        print_json({"report": str(path), "all_met": result.all_met, "unmet": unmet}, out, "report")
    else:
        out.write(f"wrote {path}\n")
        if unmet:
            out.write(f"requirements not met: {', '.join(unmet)}\n")
    return 0 if result.all_met else 1


def _run_designs(args: argparse.Namespace, out: TextIO) -> int:
    """``dampctl report PLANT D1 D2 ...``: several designs in one report."""
    from dampctl.report.designs import MAX_DESIGNS, designs_report

    paths = list(args.design)
    if len(paths) > MAX_DESIGNS:
        raise UsageError(f"a report compares at most {MAX_DESIGNS} designs, got {len(paths)}")
    single = [o for o, v in (("--sizing", args.sizing), ("--export", args.export),
                             ("--measured", args.measured), ("--move", args.move)) if v]
    if single:
        raise UsageError(f"{single[0]} belongs to a report of one design; give one DESIGN")
    inputs = [args.plant, *paths]
    check_output(args.output, inputs=inputs, replace=args.force)
    plant = load_plant(args.plant)
    stems = [Path(p).stem for p in paths]
    names = stems if len(set(stems)) == len(stems) else paths
    designs = []
    for name, path in zip(names, paths, strict=True):
        design = load_design(path)
        design.check_plant(plant, source=path)
        designs.append((name, design))
    roles = [("plant", args.plant)] + [(f"design {n}", p) for n, p in zip(names, paths,
                                                                          strict=True)]
    html, results = designs_report(
        plant, designs, delay_s=args.delay_s, figure_format=args.figure_format,
        provenance=provenance_of(getattr(args, "argv", None), roles),
    )
    path = write_text(args.output, html, inputs=inputs, replace=args.force)
    unmet = [f"{n}: {r.name}" for n, a in zip(names, results, strict=True) for r in a.unmet]
    all_met = all(a.all_met for a in results)
    if args.json:
        print_json({"report": str(path), "all_met": all_met, "unmet": unmet}, out, "report")
    else:
        out.write(f"wrote {path}\n")
        if unmet:
            out.write(f"requirements not met: {', '.join(unmet)}\n")
    return 0 if all_met else 1


def provenance_of(argv=None, files=(), *, texts=None) -> dict[str, Any]:
    """What a report records about how it was made: date, command line, input files.

    Parameters
    ----------
    argv : sequence of str, optional
        The arguments after ``dampctl`` (None: no command line recorded).
    files : sequence of (str, str)
        (role, path) of each input file; ``-`` is standard input (no digest: the plant
        fingerprint identifies it).
    texts : mapping of str to (str, str), optional
        Role to (name, content) for inputs that are not files (the demo's bundled plant).

    Returns
    -------
    dict
        ``created`` (UTC, to the minute), ``command`` and ``inputs``
        (``{"role", "path", "sha256"}``).
    """
    import datetime
    import hashlib
    import shlex

    inputs = []
    for role, path in files:
        if path == "-":
            inputs.append({"role": role, "path": "standard input", "sha256": None})
            continue
        try:
            digest = hashlib.sha256(Path(path).read_bytes()).hexdigest()
        except OSError:
            digest = None
        inputs.append({"role": role, "path": str(path), "sha256": digest})
    for role, (name, content) in (texts or {}).items():
        digest = hashlib.sha256(content.encode("utf-8")).hexdigest()
        inputs.append({"role": role, "path": name, "sha256": digest})
    now = datetime.datetime.now(datetime.UTC).strftime("%Y-%m-%d %H:%M UTC")
    command = None if argv is None else "dampctl " + shlex.join(str(a) for a in argv)
    return {"created": now, "command": command, "inputs": inputs}


def _check_sizing(sizing: Mapping[str, Any], path: str, plant) -> None:
    """A sizing result of ``dampctl size --json`` for this plant, its fields of the right type."""
    if sizing.get("format") != "dampctl-sizing" or not isinstance(sizing.get("rows"), list):
        raise UsageError(f"--sizing: {path} is not a sizing result (its format is not "
                         "dampctl-sizing with a list of rows: give dampctl size --json output)")
    _check_fingerprint(sizing, path, "--sizing", plant)
    for k, mode in enumerate(_list(sizing.get("modes", []), path, "modes")):
        read_int(mode, f"--sizing: {path}: modes[{k + 1}]", bounds=Range(1, plant.n_modes),
                 error=UsageError)
    for k, row in enumerate(sizing["rows"]):
        where = f"--sizing: {path}: rows[{k + 1}]"
        if not isinstance(row, Mapping):
            raise UsageError(f"{where}: expected a table, got {describe(row)}")
        read_int(row.get("pairs_used"), f"{where}.pairs_used", bounds=Range(0, None),
                 error=UsageError)
        for key in ("min_damping", "achievable_min_damping", "cost"):
            if row.get(key) is not None:
                read_float(row[key], f"{where}.{key}", error=UsageError)
        for j, m in enumerate(_list(row.get("mode_damping", []), path, f"rows[{k + 1}]"
                                    ".mode_damping")):
            at = f"{where}.mode_damping[{j + 1}]"
            if not isinstance(m, Mapping):
                raise UsageError(f"{at}: expected a table, got {describe(m)}")
            read_int(m.get("mode"), f"{at}.mode", bounds=Range(1, plant.n_modes), error=UsageError)
            if m.get("damping") is not None:
                read_float(m["damping"], f"{at}.damping", error=UsageError)


def _check_export(export: Mapping[str, Any], path: str, plant, design) -> None:
    """The controller.json of ``dampctl export`` (or its --json) for this plant and design."""
    if export.get("format") not in ("dampctl-discrete", "dampctl-export"):
        raise UsageError(f"--export: {path} is not an export summary (its format is not "
                         "dampctl-discrete: give the controller.json written by dampctl export, "
                         "or its --json output)")
    _check_fingerprint(export, path, "--export", plant)
    read_float(export.get("rate_hz"), f"--export: {path}: rate_hz",
               bounds=Range(0, None, "Hz", low_open=True), error=UsageError)
    read_str(export.get("method"), f"--export: {path}: method", error=UsageError)
    stated = export.get("law")
    if stated is not None and stated != design.law:
        raise UsageError(f"--export: {path}: law: the export is of a {stated!r} design, the "
                         f"design given is {design.law!r}")


def _check_fingerprint(data: Mapping[str, Any], path: str, option: str, plant) -> None:
    stated = data.get("plant_fingerprint")
    if stated is None:
        return  # written before the fingerprint was stored: nothing to check against
    if stated not in (plant.fingerprint, plant.legacy_fingerprint):
        summary = data.get("plant_summary")
        if isinstance(summary, Mapping):
            diffs = summary_differences(summary, plant_summary(plant))
            what = "; ".join(diffs[:6]) or "mode shapes or site values changed"
        else:
            what = "the file has no plant summary, so the changed fields cannot be named"
        raise UsageError(f"{option}: {path}: plant_fingerprint: made for another plant "
                         f"(fingerprint {stated}, this plant's is {plant.fingerprint}): {what}")


def _list(value: Any, path: str, key: str) -> list:
    if not isinstance(value, list):
        raise UsageError(f"{path}: {key}: expected a list, got {describe(value)}")
    return value


def _read_json(path: str, option: str) -> dict:
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
    except OSError as exc:
        raise UsageError(f"{option}: cannot read {path} ({exc.strerror or exc})") from None
    except (UnicodeDecodeError, json.JSONDecodeError, RecursionError) as exc:
        raise UsageError(f"{option}: {path} is not JSON ({exc})") from None
    if not isinstance(data, dict):
        raise UsageError(f"{option}: {path} does not hold a JSON object")
    return data


def _sizing_pngs(sizing: Mapping[str, Any], figure_format: str = "png") -> dict[str, bytes]:
    """Sizing figures drawn from the sizing JSON (the figures take the same fields)."""
    from dampctl.report.figures_sizing import sizing_pngs

    rows = [
        SimpleNamespace(
            pairs_used=r["pairs_used"], chosen=tuple(r.get("chosen", ())),
            min_damping=r.get("min_damping"),
            achievable_min_damping=r.get("achievable_min_damping", r.get("min_damping")),
            cost=r.get("cost"),
            mode_damping=tuple((m["mode"], m["damping"]) for m in r.get("mode_damping", ())),
        )
        for r in sizing.get("rows", ())
    ]
    view = SimpleNamespace(law=str(sizing.get("law", "")), rows=tuple(rows),
                           target_damping=sizing.get("target_damping"),
                           recommended=sizing.get("recommended"),
                           modes=tuple(sizing.get("modes", ())))
    return sizing_pngs(view, figure_format=figure_format)
