"""``dampctl assess PLANT DESIGN``: closed-loop damping, margins, robustness, RMS and effort."""

from __future__ import annotations

import argparse
import math
from typing import TextIO

from dampctl.analysis.assess_json import robustness_lines
from dampctl.analysis.assessment import PHASE_MARGIN_CONVENTION, assess
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
from dampctl.errors import UsageError
from dampctl.fileio import check_output_folder
from dampctl.model.plantfile import load_plant
from dampctl.progress import Progress

NAME = "assess"
HELP = "assess a design on its plant: damping, margins, robustness, RMS response and effort"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl assess``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("plant", help="plant file (TOML); - reads it from standard input")
    parser.add_argument("design", help="design file (JSON) written by dampctl tune")
    parser.add_argument(
        "--delay-s",
        type=number_option(OPTION_RANGES["delay"]),
        default=None,
        metavar="T",
        help="loop delay in s (default: the plant's loop_delay_s plus a ZOH and one sample at "
        "its sample_rate_hz)",
    )
    parser.add_argument(
        "--drift",
        type=number_option(OPTION_RANGES["drift"]),
        default=0.05,
        metavar="FRACTION",
        help="largest relative shift of each natural frequency in the drift check "
        "(default 0.05 = ±5 %%)",
    )
    parser.add_argument(
        "--samples",
        type=whole_option(OPTION_RANGES["samples"]),
        default=64,
        metavar="N",
        help="random drift cases besides the corners (count, default 64)",
    )
    parser.add_argument(
        "--seed",
        type=whole_option(OPTION_RANGES["seed"]),
        default=0,
        help="seed of the random drift cases, 0 to 2^32-1 (default 0)",
    )
    parser.add_argument(
        "--ideal-hardware",
        action="store_true",
        help="leave out the actuator and sensor roll-offs of the plant file (default: included)",
    )
    parser.add_argument(
        "--plots", metavar="DIR", default=None, help="write PNG figures into DIR (default: none)"
    )
    add_figure_format(parser)
    add_force_option(parser, "figures of the same names in DIR")
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl assess``; exit 0 all requirements met, 1 one is not.

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
    if not math.isfinite(args.drift) or not 0.0 <= args.drift < 1.0:
        raise UsageError(f"--drift: expected a fraction in [0, 1), got {args.drift}")
    if args.delay_s is not None and (not math.isfinite(args.delay_s) or args.delay_s < 0):
        raise UsageError(f"--delay-s: expected a delay >= 0 s, got {args.delay_s}")
    if args.samples < 0:
        raise UsageError(f"--samples: expected a count >= 0, got {args.samples}")
    if args.plots:
        check_output_folder(args.plots, inputs=(args.plant, args.design), replace=args.force)
    plant = load_plant(args.plant)
    design = load_design(args.design)
    design.check_plant(plant, source=args.design)
    with Progress(8, "assessing", stream=err) as progress:
        result = assess(
            plant,
            design,
            delay_s=args.delay_s,
            drift=args.drift,
            samples=args.samples,
            seed=args.seed,
            roll_off=not args.ideal_hardware,
            figures=bool(args.plots),
            progress=progress,
        )
    written = []
    if args.plots:
        from dampctl.report.figures import write_assessment_pngs

        written = write_assessment_pngs(
            result, args.plots, inputs=(args.plant, args.design), replace=args.force,
            figure_format=args.figure_format
        )
    tuned = design.info.get("delay_s")
    note = None
    if isinstance(tuned, int | float) and not math.isclose(tuned, result.delay_s, rel_tol=1e-6,
                                                           abs_tol=1e-12):
        note = (
            f"the design was tuned for a loop delay of {tuned * 1e6:.4g} µs but is assessed with "
            f"{result.delay_s * 1e6:.4g} µs (give --delay-s {tuned:g} to assess it at its "
            "tuning delay)"
        )
    if args.json:
        payload = result.to_dict()
        payload["tuned_delay_s"] = tuned if isinstance(tuned, int | float) else None
        payload["delay_note"] = note
        payload["plots"] = [str(p) for p in written]
        payload["safety"] = list(caution_lines(result.law))
        print_json(payload, out, "assessment")
    else:
        if note:
            out.write(f"note: {note}\n\n")
        _print_human(result, out, plant_name=plant.title or args.plant)
        for path in written:
            out.write(f"wrote {path}\n")
    if not result.all_met:
        err.write(
            "dampctl assess: requirements not met: "
            + "; ".join(r.text for r in result.unmet)
            + "\n"
        )
        return 1
    return 0


def _print_human(a, out: TextIO, *, plant_name: str) -> None:
    d = a.to_dict()
    what = f"{len(a.parts)} passive part(s)" if a.passive else f"{len(a.loops)} loop(s)"
    out.write(
        f"{plant_name}: {a.law} design, {what}; "
        f"{'STABLE' if a.stable else 'UNSTABLE'} (largest real part {a.max_real_part:.4g} 1/s)\n"
    )
    if a.passive:
        out.write(
            "passive: no loop, no delay, no roll-off; the parts' own states are in the model "
            "(a mode split by a tuned part shows the less damped of its two poles)\n"
        )
        out.write("".join(f"  {label}\n" for label in a.part_labels) + "\n")
    else:
        out.write(
            f"loop delay {a.delay_s * 1e6:.4g} µs: exact in frequency responses, "
            f"{a.pade_sections} Padé [2/2] section(s) for poles; roll-offs "
            f"{'included' if a.roll_off else 'left out'}\n\n"
        )
    rows = [
        (
            m.mode,
            m.open_freq_hz,
            m.open_damping,
            m.closed_freq_hz,
            m.closed_damping,
            m.peak_reduction_db,
            "*" if m.mode in a.target_modes else "",
        )
        for m in a.modes
    ]
    headers = [
        "mode",
        "open (Hz)",
        "open damping",
        "closed (Hz)",
        "closed damping",
        "peak reduction (dB)",
        "target",
    ]
    out.write(table(headers, rows) + "\n")
    out.write(
        f"(peak reduction: worst over the outputs {', '.join(a.curves.frf_outputs)} whose "
        "response peaks on the mode; -: on none of them, the mode's peak is not what they show)\n"
    )
    if len(a.controller_poles):
        out.write(f"\n{d['controller_poles_note']}:\n")
        rows = [(p["freq_hz"], p["damping"]) for p in d["controller_poles"]]
        out.write(table(["freq (Hz)", "damping"], rows) + "\n")
    if a.passive:
        out.write("\nmargins: none (passive: no loop to break)\n")
    else:
        _print_margins(a, d, out)
    out.write("\nrobustness:\n")
    out.write("".join(f"  {line}\n" for line in robustness_lines(d["robustness"])))
    _print_response(a, d, out)
    out.write("\nrequirements:\n")
    for q in a.requirements:
        out.write(f"  [{'met' if q.met else 'NOT MET'}] {q.text}\n")
    for note in a.notes:
        out.write(f"  [n/a] {note}\n")
    lines = caution_lines(a.law)
    out.write("\n" + "\n".join(lines) + "\n")


def _print_margins(a, d: dict, out: TextIO) -> None:
    out.write("\nmargins (each loop broken at the plant input, the others closed):\n")
    rows = [
        (
            lp["pair"],
            lp["gain_margin_db"],
            lp["phase_margin_deg"],
            None if lp["delay_margin_s"] is None else lp["delay_margin_s"] * 1e3,
            lp["crossover_hz"],
        )
        for lp in d["loops"]
    ]
    out.write(table(["loop", "GM (dB)", "PM (deg)", "DM (ms)", "crossover (Hz)"], rows) + "\n")
    out.write(f"({PHASE_MARGIN_CONVENTION})\n")
    if a.disk is not None:
        out.write(
            f"disk margin, all loops at once: alpha {a.disk.alpha:.3g} -> "
            f"+-{a.disk.gain_margin_db:.3g} dB, +-{a.disk.phase_margin_deg:.3g} deg "
            f"({a.disk.bound})\n"
        )


def _print_response(a, d: dict, out: TextIO) -> None:
    if d["rms"]:
        noise = "" if a.passive else " and sensor noise"
        out.write(f"\nRMS under the plant's disturbances{noise}:\n")
        rows = [
            (
                o["output"],
                o["unit"],
                o["open_rms"],
                o["closed_rms"],
                o["noise_rms"],
                o["reduction_db"],
                (o.get("vc_closed") or {}).get("curve") or "-",
            )
            for o in d["rms"]
        ]
        headers = [
            "output",
            "unit",
            "open RMS",
            "closed RMS",
            "noise part",
            "reduction (dB)",
            "VC met",
        ]
        out.write(table(headers, rows) + "\n")
    if d["effort"]:
        heading = "part loads" if a.passive else "actuator effort"
        out.write(f"\n{heading}:\n")
        rows = [
            (
                e["actuator"],
                f"{e['quantity']} ({e['unit']})",
                e["rms"],
                e["peak_estimate"],
                e["limit"],
                e["within_limit"],
            )
            for e in d["effort"]
        ]
        first = "part" if a.passive else "actuator"
        out.write(table([first, "quantity", "RMS", "3 x RMS", "limit", "within"], rows) + "\n")
        for e in a.response.effort:
            over = [e.quantity] if e.within_limit is False else []
            over += ["force"] if e.force_within_limit is False else []
            if over:
                out.write(
                    f"  WARNING: {e.actuator}: 3 x RMS exceeds its {' and '.join(over)} limit "
                    "under the stated disturbances\n"
                )


def _vc_text(item: dict) -> str:
    if "vc_closed" not in item:
        return ""
    return item["vc_closed"]["curve"] or "above Workshop"


def _ms(seconds: float) -> str:
    return "none found" if math.isinf(seconds) else f"{seconds * 1e3:.4g} ms"
