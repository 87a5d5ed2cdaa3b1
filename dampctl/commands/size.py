"""``dampctl size PLANT``: how many pairs, which ones, and what each costs and buys."""

from __future__ import annotations

import argparse
from typing import TextIO

from dampctl.commands._common import (
    OPTION_RANGES,
    SAFETY_LINES,
    add_figure_format,
    add_force_option,
    mode_list,
    name_list,
    number_option,
    print_json,
    table,
    whole_option,
)
from dampctl.errors import UsageError
from dampctl.fileio import check_output_folder, write_files
from dampctl.model.plantfile import load_plant
from dampctl.model.summary import plant_summary
from dampctl.sizing.size import LAWS, size_pairs
from dampctl.values import Range

NAME = "size"
HELP = (
    "find how many pairs a structure needs and where, with the cost of each extra pair (or how "
    "much absorber mass, or which piezo struts to shunt)"
)
#: passive laws with a size to choose (dampctl.sizing.passive)
PASSIVE = ("tmd", "shunt")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl size``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("plant", help="plant file (TOML); - reads it from standard input")
    parser.add_argument(
        "--law",
        choices=(*LAWS, *PASSIVE),
        default="dvf",
        help="collocated damping law (default dvf); tmd: absorber mass ratios; shunt: how many "
        "piezo struts to shunt",
    )
    parser.add_argument(
        "--modes",
        metavar="1,2",
        help="target modes, 1-based (e.g. 1,2 or 1-4; default the plant's required modes, or all)",
    )
    parser.add_argument(
        "--target-damping",
        type=number_option(OPTION_RANGES["fraction"]),
        metavar="Z",
        help="damping ratio every target mode must reach (default the plant's min_damping)",
    )
    parser.add_argument(
        "--max-pairs",
        type=whole_option(Range(1, 64)),
        metavar="K",
        help="largest number of pairs to try (default min(usable candidates, 4))",
    )
    parser.add_argument(
        "--exhaustive-limit",
        type=whole_option(Range(1, 10_000_000)),
        default=2000,
        metavar="N",
        help="search every set when there are at most N sets of a size, else greedy selection "
        "with swaps (default 2000)",
    )
    parser.add_argument(
        "--candidates",
        metavar="P1,P2",
        help="candidate pairs to choose from (default every pair of the plant)",
    )
    parser.add_argument(
        "--plots",
        metavar="DIR",
        help="write PNG figures (damping and cost against pair count, damping per mode) to DIR "
        "(default none)",
    )
    add_figure_format(parser)
    add_force_option(parser, "figures of the same names in DIR")
    passive = parser.add_argument_group("passive laws (tmd, shunt)")
    passive.add_argument(
        "--mass-ratios",
        metavar="MU1,MU2",
        help="tmd: mass ratios to try, each for every target mode (default "
        "0.005,0.01,0.02,0.05,0.1)",
    )
    passive.add_argument(
        "--site", metavar="S[,S2]", help="tmd: absorber site(s), as dampctl tune --law tmd"
    )
    passive.add_argument(
        "--shunt", choices=("RL", "R"), default="RL", help="shunt: the network (default RL)"
    )
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl size``.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options.
    out, err : file-like
        Output and progress/error streams.

    Returns
    -------
    int
        0 with a recommendation, 1 when no count up to K meets the requirements.
    """
    if args.law in PASSIVE:
        return _passive(args, out)
    if args.mass_ratios or args.site or args.shunt != "RL":
        raise UsageError("--mass-ratios, --site and --shunt apply to --law tmd / shunt only")
    plant = load_plant(args.plant)
    if args.plots:
        from dampctl.report.figures_sizing import SIZING_FIGURES

        names = [n.replace(".png", "." + args.figure_format) for n in SIZING_FIGURES]
        check_output_folder(args.plots, names, inputs=[args.plant], replace=args.force)
    if args.target_damping is not None and not 0.0 < args.target_damping < 1.0:
        raise UsageError(f"--target-damping must be in (0, 1), got {args.target_damping}")
    if args.max_pairs is not None and args.max_pairs < 1:
        raise UsageError(f"--max-pairs must be >= 1, got {args.max_pairs}")
    if args.exhaustive_limit < 1:
        raise UsageError(f"--exhaustive-limit must be >= 1, got {args.exhaustive_limit}")
    candidates = name_list(args.candidates, "--candidates") or None
    result = size_pairs(
        plant,
        law=args.law,
        modes=mode_list(args.modes, n_modes=plant.n_modes) or None,
        target_damping=args.target_damping,
        max_pairs=args.max_pairs,
        exhaustive_limit=args.exhaustive_limit,
        candidates=candidates,
        progress=err,
    )
    files = []
    if args.plots:
        from dampctl.report.figures_sizing import sizing_pngs

        pngs = sizing_pngs(result, figure_format=args.figure_format)
        files = write_files(args.plots, pngs, inputs=[args.plant], replace=args.force)
    payload = result.to_dict()
    payload["plant_fingerprint"] = plant.fingerprint
    payload["plant_summary"] = plant_summary(plant)
    payload["plots"] = [str(f) for f in files]
    payload["safety"] = list(SAFETY_LINES)
    if args.json:
        print_json(payload, out, "sizing")
    else:
        _print_human(plant, result, files, out)
    return 0 if result.recommended is not None else 1


def _passive(args: argparse.Namespace, out: TextIO) -> int:
    """``--law tmd|shunt``: sizes of passive parts (:mod:`dampctl.sizing.passive`)."""
    from dampctl.sizing.passive import DEFAULT_MASS_RATIOS, size_absorbers, size_shunts

    if args.plots:
        raise UsageError(f"--plots is not available for --law {args.law}")
    plant = load_plant(args.plant)
    modes = mode_list(args.modes, n_modes=plant.n_modes) or None
    if args.law == "tmd":
        if args.candidates or args.max_pairs or args.shunt != "RL":
            raise UsageError("--candidates, --max-pairs and --shunt do not apply to --law tmd")
        ratios = DEFAULT_MASS_RATIOS
        if args.mass_ratios:
            try:
                ratios = [float(v) for v in args.mass_ratios.split(",") if v.strip()]
            except ValueError:
                raise UsageError(f"--mass-ratios: expected numbers, got {args.mass_ratios!r}"
                                 ) from None
        sites = name_list(args.site, "--site") or None
        result = size_absorbers(plant, modes=modes, sites=sites, mass_ratios=ratios,
                                target_damping=args.target_damping)
    else:
        if args.mass_ratios or args.site:
            raise UsageError("--mass-ratios and --site apply to --law tmd")
        result = size_shunts(plant, modes=modes, candidates=name_list(args.candidates,
                                                                     "--candidates") or None,
                             kind=args.shunt, max_pairs=args.max_pairs,
                             target_damping=args.target_damping)
    if args.json:
        print_json({**result.to_dict(), "plant_fingerprint": plant.fingerprint,
                    "plant_summary": plant_summary(plant)}, out, "sizing-passive")
    else:
        size = "mass ratio" if result.size_name == "mass_ratio" else "struts"
        target = "none" if result.target_damping is None else f"{result.target_damping:g}"
        out.write(f"{plant.title or 'plant'}: sizing {result.law} for modes "
                  f"{', '.join(map(str, result.modes))}, target damping {target}\n\n")
        rows = [[r.size, ",".join(r.chosen), r.min_damping, r.limiting_mode, r.peak_ratio,
                 r.added_mass_kg, r.cost, r.target_met] for r in result.rows]
        headers = [size, "parts at", "min damping", "limiting mode", "peak ratio",
                   "added mass (kg)", "cost", "target met"]
        out.write(table(headers, rows) + "\n\n" + result.statement + "\n")
        out.write("peak ratio: largest response peak at the outputs with the parts over "
                  "without; cost: [[parts]] prices (and the struts' own cost)\n")
    return 0 if result.recommended is not None else 1


def _print_human(plant, result, files, out: TextIO) -> None:
    target = "none" if result.target_damping is None else f"{result.target_damping:g}"
    out.write(
        f"{plant.title or 'plant'}: sizing {result.law.upper()} loops for modes "
        f"{', '.join(str(m) for m in result.modes)}, target damping {target}\n\n"
    )
    rows = []
    for r in result.rows:
        effort = "-" if r.effort_rms is None else max(e[1] for e in r.effort_rms)
        gm = min(m["gain_margin_db"] for m in r.margins)
        pm = min(m["phase_margin_deg"] for m in r.margins)
        rows.append(
            [
                r.pairs_used,
                ",".join(r.chosen),
                r.method,
                r.min_damping,
                r.achievable_min_damping,
                r.limiting_mode,
                r.cost,
                r.damping_per_cost,
                effort,
                gm,
                pm,
                "yes" if r.acceptable else "no",
            ]
        )
    kinds = {plant.actuator(a.actuator).kind for a in plant.pairs}
    unit = "N" if kinds <= {"force"} else ("m" if kinds == {"strut"} else "N or m")
    headers = [
        "k", "pairs", "search", "min damping", "maximized", "limiting mode", "cost",
        "Δmaximized/cost", f"max RMS command ({unit})", "GM (dB)", "PM (deg)", "acceptable",
    ]  # fmt: skip
    out.write(table(headers, rows) + "\n\n")
    out.write(f"rank rule: {result.rank_rule}\n")
    for c in result.clusters:
        out.write(
            f"  modes {c['modes']} are near-repeated: need {c['pairs_needed']} pairs spanning "
            f"them (all candidates together span {c['rank_all']})\n"
        )
    for r in result.rows:
        for s in r.shortfall:
            out.write(
                f"  {r.pairs_used} pair(s) {','.join(r.chosen)} fall short on modes {s['modes']} "
                f"(rank {s['rank']} of {s['pairs_needed']})\n"
            )
    for pair, reason in result.excluded:
        out.write(f"  excluded {pair}: {reason}\n")
    out.write(f"\n{result.statement}\n")
    out.write(
        "min damping: the law's design for the set (as dampctl tune gives it), with the stated "
        "delay; maximized: the same law tuned for the largest smallest damping; "
        "Δmaximized/cost: gain in 'maximized' over the row above per unit of extra cost\n"
    )
    for f in files:
        out.write(f"wrote {f}\n")
    out.write("\n" + "\n".join(SAFETY_LINES) + "\n")
