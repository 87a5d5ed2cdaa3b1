"""``dampctl demo [-o DIR]``: the whole job on the bundled scanning-stage plant.

check → size (each collocated law the pairs allow) → tune the law the sizing recommends →
assess → export at the plant's sample rate → report. Everything is written inside DIR, which
must not exist yet unless ``--force`` is given.
"""

from __future__ import annotations

import argparse
import importlib
import importlib.resources
import time
from pathlib import Path
from typing import TextIO

from dampctl.commands._common import (
    SAFETY_LINES,
    add_figure_format,
    add_force_option,
    json_text,
    print_json,
)
from dampctl.commands.check import check_payload
from dampctl.commands.report import provenance_of, report_html
from dampctl.errors import DampctlError, OutputError
from dampctl.fileio import write_files
from dampctl.model.plantfile import parse_plant
from dampctl.model.survey import survey_plant

NAME = "demo"
HELP = "run the whole job (check, size, tune, assess, export, report) on the bundled stage"

PLANT_FILE = "scanning_stage.toml"
#: laws tried by the sizing step, in order of preference on a tie
LAWS = ("dvf", "iff", "ppf")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl demo``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("-o", "--output", default="dampctl-demo", metavar="DIR",
                        help="folder to create for every file (default ./dampctl-demo)")
    add_figure_format(parser)
    add_force_option(parser, "the demo's files in DIR (DIR is otherwise refused when it exists)")
    parser.add_argument("--json", action="store_true", help="print a JSON summary on stdout")


def _say(err: TextIO, quiet: bool, text: str) -> None:
    if not quiet:
        err.write(text + "\n")
        err.flush()


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl demo``; exit 0 when the design meets every requirement, 1 otherwise.

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
    from dampctl.discrete.export import export_design
    from dampctl.discrete.writers import export_files, payload
    from dampctl.report.figures import assessment_pngs
    from dampctl.report.figures_sizing import sizing_pngs
    from dampctl.sizing.size import size_pairs

    folder = Path(args.output)
    if folder.exists() and not folder.is_dir():
        raise OutputError("exists and is not a folder (choose another -o DIR)", source=str(folder))
    if folder.exists() and not args.force:
        raise OutputError("already exists (choose another -o DIR, or --force to write into it)",
                          source=str(folder))
    start = time.monotonic()
    text = importlib.resources.files("dampctl").joinpath("data", PLANT_FILE).read_text("utf-8")
    plant = parse_plant(text, source=PLANT_FILE)
    quiet = args.json or getattr(args, "quiet", False)

    _say(err, quiet, f"[1/6] check: {plant.title}, {plant.n_modes} modes, "
                     f"{len(plant.pairs)} candidate pairs")
    check = check_payload(plant, survey_plant(plant))

    _say(err, quiet, "[2/6] size: how many pairs, for each collocated law the pairs allow")
    sizing_by_law = {}
    for law in LAWS:
        try:
            sizing_by_law[law] = size_pairs(plant, law=law, progress=err if not quiet else None)
        except DampctlError as exc:
            reason = exc.message.split(";")[0]
            _say(err, quiet, f"      {law.upper()}: not applicable ({reason})")
    if not sizing_by_law:
        raise DampctlError("no collocated law applies to the bundled plant's pairs")
    law, sizing = _pick(sizing_by_law)
    pairs = list(sizing.recommended_row.chosen if sizing.recommended_row is not None
                 else sizing.rows[-1].chosen)
    _say(err, quiet, f"      recommended: {law.upper()} on {len(pairs)} pair(s) "
                     f"{', '.join(pairs)}")

    _say(err, quiet, f"[3/6] tune: {law.upper()} on {', '.join(pairs)}")
    module = importlib.import_module(f"dampctl.laws.{law}")
    design = module.design(plant, pairs)

    _say(err, quiet, "[4/6] assess: modes, margins, robustness, RMS, effort")
    rate = plant.requirements.sample_rate_hz or 20.0 * max(plant.freqs_hz) * 2
    _say(err, quiet, f"[5/6] export: second-order sections at {rate:g} Hz, Q15 check")
    exported = export_design(plant, design, rate, fixed="q15")
    export_summary = payload(exported)

    _say(err, quiet, "[6/6] report")
    sizing_dict = sizing.to_dict()
    fmt = args.figure_format
    embedded = "svg" if fmt == "svg" else "png"  # a browser shows no embedded pdf
    html, assessment = report_html(plant, design, sizing=sizing_dict,
                                   export=export_summary, figure_format=embedded,
                                   provenance=provenance_of(
                                       getattr(args, "argv", None),
                                       texts={"plant (bundled)": (PLANT_FILE, text)}))

    files = {
        PLANT_FILE: text,
        "check.json": json_text(check, "check"),
        "sizing.json": json_text(sizing_dict, "sizing"),
        "design.json": design.to_json(),
        "assessment.json": json_text(assessment.to_dict(), "assessment"),
        "report.html": html,
    }
    figures = {**assessment_pngs(assessment, figure_format=fmt),
               **sizing_pngs(sizing, figure_format=fmt)}
    for name, image in figures.items():
        files[f"plots/{name}"] = image
    if not exported.refused:
        for name, content in export_files(exported).items():
            files[f"export/{name}"] = content
    # one set: a failure or an interrupt leaves the folder's old demo files or the new ones
    owned = ("plots/*.png", "plots/*.svg", "plots/*.pdf", "export/*")
    written = write_files(folder, files, replace=args.force, owned=owned)
    seconds = time.monotonic() - start

    damping = assessment.to_dict()
    targets = set(design.target_modes)
    rows = [m for m in damping["modes"] if m["mode"] in targets]
    worst_gm = min((lp["gain_margin_db"] for lp in damping["loops"]
                    if lp.get("gain_margin_db") is not None), default=None)
    worst_pm = min((lp["phase_margin_deg"] for lp in damping["loops"]
                    if lp.get("phase_margin_deg") is not None), default=None)
    summary = {
        "plant": plant.title,
        "law": law,
        "pairs": pairs,
        "modes": [{"mode": m["mode"], "open_damping": m["open_damping"],
                   "closed_damping": m["closed_damping"]} for m in rows],
        "worst_gain_margin_db": worst_gm,
        "worst_phase_margin_deg": worst_pm,
        "all_met": assessment.all_met,
        "unmet": [r.name for r in assessment.unmet],
        "export_files": [str(p) for p in written if p.parent.name == "export"],
        "report": str(folder / "report.html"),
        "folder": str(folder),
        "seconds": seconds,
    }
    if args.json:
        print_json(summary, out, "demo")
    else:
        _print_summary(summary, out)
    return 0 if assessment.all_met else 1


def _pick(sizing_by_law: dict):
    """The law whose recommendation meets the target at the lowest cost (then fewest pairs)."""
    def key(item):
        law, result = item
        row = result.recommended_row
        if row is None:
            return (1, float("inf"), float("inf"), -result.rows[-1].min_damping, LAWS.index(law))
        return (0, row.cost, row.pairs_used, -row.min_damping, LAWS.index(law))

    return min(sizing_by_law.items(), key=key)


def _print_summary(summary: dict, out: TextIO) -> None:
    out.write(f"dampctl demo: {summary['plant']}\n\n")
    out.write(f"pairs chosen: {summary['law'].upper()} on {', '.join(summary['pairs'])}\n")
    out.write("damping of the target modes, before -> after:\n")
    for m in summary["modes"]:
        out.write(f"  mode {m['mode']}: {m['open_damping']:.4g} -> {m['closed_damping']:.4g}\n")
    gm, pm = summary["worst_gain_margin_db"], summary["worst_phase_margin_deg"]
    out.write(f"worst margin: gain {gm:.3g} dB, phase {pm:.3g} deg\n" if gm is not None
              and pm is not None else "worst margin: -\n")
    if summary["unmet"]:
        out.write(f"requirements not met: {', '.join(summary['unmet'])}\n")
    else:
        out.write("every requirement of the plant file is met\n")
    out.write("exported: " + ", ".join(summary["export_files"]) + "\n")
    out.write(f"report: {summary['report']}  (open it in a browser)\n")
    out.write(f"all files in {summary['folder']}/ ({summary['seconds']:.1f} s)\n\n")
    out.write("\n".join(SAFETY_LINES) + "\n")
