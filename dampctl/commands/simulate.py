"""``dampctl simulate PLANT [DESIGN]``: a move or a disturbance in time, open and closed loop."""

from __future__ import annotations

import argparse
import math
from pathlib import Path
from typing import TextIO

import numpy as np

from dampctl.commands._common import (
    OPTION_RANGES,
    add_figure_format,
    add_force_option,
    caution_lines,
    number_option,
    print_json,
    table,
    whole_option,
)
from dampctl.design import load_design
from dampctl.discrete.profiles import PROFILES, Record
from dampctl.discrete.simulate import simulate_disturbance, simulate_move
from dampctl.errors import UsageError
from dampctl.fileio import check_output_folder, write_files
from dampctl.laws.shapers import load_shaper
from dampctl.model.plantfile import load_plant

NAME = "simulate"
HELP = "simulate a move or a disturbance in time, open loop and with a design as it will run"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl simulate``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("plant", help="plant file (TOML); - reads it from standard input")
    parser.add_argument("design", nargs="?", default=None,
                        help="design file (JSON) written by dampctl tune; without it, open loop "
                             "only")
    what = parser.add_mutually_exclusive_group(required=True)
    what.add_argument("--drive", metavar="ACTUATOR",
                      help="make a move with this actuator (needs --move and --output)")
    what.add_argument("--disturbance", metavar="NAME",
                      help="apply this disturbance of the plant file (a seeded random record "
                           "of its PSD, or --profile file:CSV)")
    parser.add_argument("--move", type=float, metavar="DIST",
                        help="move size in m: the drive's input is scaled by the plant's static "
                             "compliance so that OUT moves by DIST")
    parser.add_argument("--output", metavar="OUT",
                        help="displacement output or sensor (m) that moves by DIST")
    parser.add_argument("--profile", default="step", metavar="PROFILE",
                        help="move profile: step, trapezoid, scurve (jerk a²/v), impulse (the "
                             "step's input for one sample) or file:CSV (rows time_s,value: the "
                             "fraction of the move; with --disturbance, the record in its unit); "
                             "default step")
    parser.add_argument("--max-velocity", type=float, metavar="V",
                        help="velocity limit of a trapezoid or scurve move (m/s)")
    parser.add_argument("--max-acceleration", type=float, metavar="A",
                        help="acceleration limit of a trapezoid or scurve move (m/s²)")
    parser.add_argument("--duration", type=float, metavar="T",
                        help="record length in s (default: a move's end plus six slowest "
                             "time constants; a random disturbance 50 of them)")
    parser.add_argument("--settle-band", default=None, metavar="B",
                        help="settling band ±B in m, or N%% of the move (default 1%%)")
    parser.add_argument("--shaper", metavar="SHAPER",
                        help="shaper file (JSON) written by dampctl shape, convolved with the move")
    parser.add_argument("--seed", type=whole_option(OPTION_RANGES["seed"]), default=0,
                        help="seed of the random disturbance and sensor noise (default 0)")
    parser.add_argument("--sample-rate", type=number_option(OPTION_RANGES["rate"]), metavar="HZ",
                        help="sample rate in Hz (default: the plant's sample_rate_hz; open loop "
                             "without one, 20 samples per period of the top mode)")
    parser.add_argument("--no-saturation", action="store_true",
                        help="do not clip actuator inputs at max_force_n (default: clip)")
    parser.add_argument("--plots", metavar="DIR",
                        help="write the figures into DIR (see --figure-format)")
    add_figure_format(parser)
    add_force_option(parser, "figures of the same names in DIR")
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def settle_band(text: str | None, distance: float) -> float | None:
    """``--settle-band``: metres, or ``N%`` of the move; None for the default.

    Parameters
    ----------
    text : str or None
        The option's value.
    distance : float
        The move (m).

    Returns
    -------
    float or None
        The band (m).
    """
    if text is None:
        return None
    raw = text.strip()
    try:
        value = float(raw[:-1]) / 100.0 * abs(distance) if raw.endswith("%") else float(raw)
    except ValueError:
        raise UsageError(f"--settle-band: expected metres or N%, got {text!r}") from None
    if not (math.isfinite(value) and value > 0):
        raise UsageError(f"--settle-band: must be > 0, got {text!r}")
    return value


def read_record(path: str) -> Record:
    """A CSV record ``time_s,value`` (a header line and ``#`` comments allowed).

    Parameters
    ----------
    path : str
        The file.

    Returns
    -------
    Record
    """
    try:
        text = Path(path).read_text(encoding="utf-8")
    except OSError as exc:
        raise UsageError(f"{path}: cannot read the record ({exc.strerror or exc})") from None
    except UnicodeDecodeError:
        raise UsageError(f"{path}: not a text (CSV) file") from None
    rows = []
    for number, line in enumerate(text.splitlines(), start=1):
        line = line.split("#", 1)[0].strip()
        if not line:
            continue
        cells = [c.strip() for c in line.split(",")]
        if len(cells) != 2:
            raise UsageError(f"{path}: row {number}: expected two columns time_s,value")
        try:
            rows.append((float(cells[0]), float(cells[1])))
        except ValueError:
            if rows or cells != ["time_s", "value"]:
                raise UsageError(
                    f"{path}: row {number}: expected numbers (time_s,value), got {line!r}"
                ) from None
    if len(rows) < 2:
        raise UsageError(f"{path}: needs at least two rows time_s,value")
    data = np.array(rows)
    return Record(data[:, 0], data[:, 1], source=path)


def _passive(plant, design, args, record):
    """A passive design runs continuously with its parts: a step move (shaped or not)."""
    from dampctl.discrete.passive_move import simulate_passive_move

    if args.drive is None:
        raise UsageError(f"a {design.law} design (passive): simulate a move (--drive); a "
                         "disturbance is assessed in the frequency domain by dampctl assess")
    if record is not None or args.profile != "step":
        raise UsageError(f"a {design.law} design (passive): only a step move, shaped with "
                         "--shaper if wanted")
    shaper = load_shaper(args.shaper) if args.shaper else None
    return simulate_passive_move(
        plant, design, drive=args.drive, output=args.output, distance_m=args.move,
        shaper=shaper, duration_s=args.duration, rate_hz=args.sample_rate,
        settle_band_m=settle_band(args.settle_band, args.move),
    )


def _check_options(args) -> None:
    if args.drive is not None:
        if args.move is None or args.output is None:
            raise UsageError("a move needs --move DIST (m) and --output OUT")
    else:
        for option, value in (("--move", args.move), ("--output", args.output),
                              ("--shaper", args.shaper), ("--max-velocity", args.max_velocity),
                              ("--max-acceleration", args.max_acceleration),
                              ("--settle-band", args.settle_band)):
            if value is not None:
                raise UsageError(f"{option} belongs to a move (--drive), not to --disturbance")
        if args.profile != "step" and not args.profile.startswith("file:"):
            raise UsageError("a disturbance takes its PSD or --profile file:CSV, not a profile")
    if not args.profile.startswith("file:") and args.profile not in PROFILES:
        raise UsageError(
            f"--profile: expected one of {', '.join(PROFILES)} or file:CSV, got {args.profile!r}"
        )
    if args.profile == "file:":
        raise UsageError("--profile file: needs a CSV file name (file:record.csv)")


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl simulate``; exit 0, or 1 when a loop as it runs is unstable.

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
    _check_options(args)
    inputs = [p for p in (args.plant, args.design, args.shaper) if p]
    record = None
    if args.profile.startswith("file:"):
        inputs.append(args.profile[5:])
        record = read_record(args.profile[5:])
    if args.plots:
        check_output_folder(args.plots, inputs=inputs, replace=args.force)
    plant = load_plant(args.plant)
    design = None
    if args.design:
        design = load_design(args.design)
        design.check_plant(plant, source=args.design)
    common = {"duration_s": args.duration, "rate_hz": args.sample_rate,
              "saturation": not args.no_saturation}
    if design is not None and design.passive:
        result = _passive(plant, design, args, record)
    elif args.drive is not None:
        shaper = load_shaper(args.shaper) if args.shaper else None
        profile = "record" if record is not None else args.profile
        result = simulate_move(
            plant, design, drive=args.drive, output=args.output, distance_m=args.move,
            profile=profile, max_velocity=args.max_velocity,
            max_acceleration=args.max_acceleration, record=record, shaper=shaper,
            settle_band_m=settle_band(args.settle_band, args.move), **common,
        )
    else:
        result = simulate_disturbance(plant, design, disturbance=args.disturbance,
                                      record=record, seed=args.seed, **common)
    written = []
    if args.plots:
        from dampctl.report.figures_time import simulation_names, simulation_pngs

        fmt = args.figure_format
        check_output_folder(args.plots, simulation_names(result, figure_format=fmt), inputs=inputs,
                            replace=args.force)
        written = write_files(args.plots, simulation_pngs(result, figure_format=fmt), inputs=inputs,
                              replace=args.force)
    unstable = [r.loop for r in (result.open_loop, result.result) if r.diverged_s is not None]
    if args.json:
        payload = result.to_dict()
        payload["plots"] = [str(p) for p in written]
        if design is not None:
            payload["safety"] = list(caution_lines(design.law))
        print_json(payload, out, "simulation")
    else:
        _print_human(result, out, plant.title or args.plant, design is not None)
        if design is not None:
            out.write("\n" + "\n".join(caution_lines(design.law)) + "\n")
        for path in written:
            out.write(f"wrote {path}\n")
    if unstable:
        err.write(f"dampctl simulate: the {' and '.join(dict.fromkeys(unstable))} loop is "
                  "unstable as it runs\n")
        return 1
    return 0


def _ms(value):
    return None if value is None else value * 1e3


def _print_human(result, out: TextIO, name: str, closed: bool) -> None:
    setup = result.setup
    if result.kind == "move":
        shaper = setup["shaper"]
        shaped = (f", {shaper['kind'].upper()} shaper of {shaper['duration_s'] * 1e3:.4g} ms"
                  if shaper else "")
        out.write(
            f"{name}: {setup['profile']} move of {setup['distance_m']:.4g} m at "
            f"{setup['output']} with {setup['drive']} (static input {setup['static_input']:.4g}, "
            f"command ends at {setup['command_end_s'] * 1e3:.4g} ms{shaped})\n"
        )
    else:
        source = ("a given record" if setup["source"] == "record"
                  else f"a random record of its PSD (seed {setup['seed']})")
        out.write(f"{name}: disturbance {setup['disturbance']} as {source}"
                  f"{', sensor noise in the loop' if setup['sensor_noise'] else ''}\n")
    if setup.get("passive"):
        loop = f"with its passive parts ({setup['passive']}): continuous, no loop"
    else:
        loop = (f"closed loop as it runs: exported controller, one sample + "
                f"{setup['loop_delay_s'] * 1e6:.4g} µs loop delay, "
                f"{'saturation at the limits' if setup['saturation'] else 'no saturation'}"
                if closed else "open loop")
    out.write(f"{result.sample_rate_hz:.6g} Hz, {result.time_s.size} samples "
              f"({result.duration_s:.4g} s); {loop}\n\n")
    runs = [result.open_loop, result.result] if closed else [result.result]
    rows = []
    for run in runs:
        for o in run.outputs:
            if result.kind == "move":
                rows.append((o.name, run.loop, o.unit, o.peak, o.final, o.overshoot,
                             _ms(o.settling_time_s), o.residual_rms))
            else:
                error = None if o.rms_error is None else 100 * o.rms_error
                rows.append((o.name, run.loop, o.unit, o.peak, o.residual_rms, error))
    if result.kind == "move":
        headers = ["output", "loop", "unit", "peak", "final", "overshoot (%)", "settling (ms)",
                   "residual RMS"]
    else:
        headers = ["output", "loop", "unit", "peak", "RMS", "RMS error (%, 1σ)"]
    out.write(table(headers, rows) + "\n")
    if result.kind == "move":
        out.write(f"(settling into ±{setup['settle_band_m']:.3g} m of the static value, from "
                  "the start of the command; -: not settled within the record)\n")
    rows = [(a.name, run.loop, a.peak_force_n, a.rms_force_n, a.saturated_s, a.stroke_m, a.limit)
            for run in runs for a in run.actuators]
    out.write("\n" + table(["actuator", "loop", "peak force (N)", "RMS force (N)",
                            "saturated (s)", "stroke (m)", "limit"], rows) + "\n")
    for note in result.notes:
        out.write(f"note: {note}\n")
