"""``dampctl check PLANT``: read a plant file and say what its pairs can do."""

from __future__ import annotations

import argparse
from typing import TextIO

from dampctl.commands._common import (
    OPTION_RANGES,
    add_figure_format,
    add_force_option,
    number_option,
    print_json,
    table,
)
from dampctl.errors import UsageError
from dampctl.model.plantfile import load_plant
from dampctl.model.survey import survey_plant

NAME = "check"
HELP = "read a plant file, list its modes and what each candidate pair can see"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl check``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("plant", help="plant file (TOML); - reads it from standard input")
    parser.add_argument(
        "--cluster-tol",
        type=number_option(OPTION_RANGES["fraction"]),
        default=0.02,
        metavar="FRACTION",
        help="relative frequency spacing (fraction) below which modes count as near-repeated "
        "(default 0.02)",
    )
    parser.add_argument(
        "--measured",
        metavar="FRF",
        help="measured FRFs (.npz or .csv, as for `dampctl plant fit`) to hold the plant "
        "against, on the channels whose output and input names are plant sensors and actuators",
    )
    parser.add_argument(
        "--output-kind",
        action="append",
        default=[],
        metavar="[OUT=]KIND",
        help="for a CSV --measured file: what an output measures (repeatable; a bare KIND "
        "applies to every output)",
    )
    parser.add_argument(
        "--plots",
        metavar="DIR",
        help="with --measured: write the plant-against-measurement FRF figures (PNG) into DIR",
    )
    add_figure_format(parser)
    add_force_option(parser, "figures of the same names in DIR")
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def check_payload(plant, survey) -> dict:
    """The JSON form of a plant check (also used in reports).

    Parameters
    ----------
    plant : ModalPlant
        The plant checked.
    survey : PlantSurvey
        Its survey (:func:`dampctl.model.survey.survey_plant`).

    Returns
    -------
    dict
        JSON-ready mapping with keys ``plant``, ``fingerprint``, ``modes``, ``first_freq_hz``,
        ``pairs``, ``unseen_modes``, ``clusters``, ``dominant_modes`` and ``warnings``.
    """
    return {
        "plant": plant.title,
        "fingerprint": plant.fingerprint,
        "modes": [
            {
                "mode": k + 1,
                "label": m.label,
                "freq_hz": m.freq_hz,
                "damping": m.damping,
                "modal_mass_kg": m.modal_mass_kg,
            }
            for k, m in enumerate(plant.modes)
        ],
        "first_freq_hz": float(min(plant.freqs_hz)),
        "pairs": [
            {
                "pair": p.pair,
                "collocated": p.collocated,
                "kind": p.description,
                "participation": [float(x) for x in p.participation],
                "hsv": [float(x) for x in p.hsv],
            }
            for p in survey.pairs
        ],
        "unseen_modes": list(survey.unseen_modes),
        "clusters": [
            {"modes": list(c.modes), "pairs_needed": c.pairs_needed, "rank": c.rank}
            for c in survey.clusters
        ],
        "dominant_modes": {
            name: [{"mode": m, "share": s} for m, s in items]
            for name, items in survey.dominant_modes.items()
        },
        "warnings": list(survey.warnings),
    }


#: the human modes table lists every mode up to this many, else the lowest ones and a summary
TABLE_MODES = 30
#: participation columns (one per mode) shown before the rest is summed up per pair
TABLE_COLUMNS = 10


def _count(n: int, word: str) -> str:
    return f"{n} {word}" if n == 1 else f"{n} {word}s"


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl check``.

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
    if not 0.0 < args.cluster_tol < 1.0:
        raise UsageError(f"--cluster-tol: expected a fraction in (0, 1), got {args.cluster_tol}")
    if args.plots and not args.measured:
        raise UsageError("--plots: the figures compare the plant with measurement; give --measured")
    plant = load_plant(args.plant)
    survey = survey_plant(plant, cluster_tol=args.cluster_tol)
    comparison, written = _measured(args, plant)
    if args.json:
        payload = check_payload(plant, survey)
        if comparison is not None:
            payload["measured"] = dict(comparison.to_dict(), file=args.measured)
            if args.plots:
                payload["measured"]["plots"] = [str(p) for p in written]
        print_json(payload, out, "check")
        return 0
    counts = ", ".join(
        _count(n, word)
        for n, word in (
            (plant.n_modes, "mode"),
            (len(plant.actuators), "actuator"),
            (len(plant.sensors), "sensor"),
            (len(plant.pairs), "candidate pair"),
        )
    )
    out.write(f"{plant.title or args.plant}: {counts}\n\n")
    shown = plant.n_modes if plant.n_modes <= TABLE_MODES else TABLE_MODES - 10
    rows = [
        (k + 1, m.label, m.freq_hz, m.damping, m.modal_mass_kg)
        for k, m in enumerate(plant.modes[:shown])
    ]
    out.write(table(["mode", "label", "freq (Hz)", "damping", "modal mass (kg)"], rows) + "\n")
    if shown < plant.n_modes:
        out.write(_modes_summary(plant, shown))
    out.write(f"\nfirst natural frequency: {min(plant.freqs_hz):.4g} Hz\n")
    if survey.pairs:
        out.write("\nparticipation: share of each mode's Hankel singular value per pair\n")
        out.write(_participation(plant, survey) + "\n")
    for name, items in survey.dominant_modes.items():
        listing = ", ".join(f"mode {m} ({s:.0%})" for m, s in items) or "none"
        out.write(f"\noutput {name}: motion dominated by {listing}\n")
    if survey.warnings:
        out.write("\nwarnings:\n" + "".join(f"  - {w}\n" for w in _warnings(plant, survey)))
    if comparison is not None:
        out.write(f"\nagainst measurement ({args.measured}):\n")
        out.write("\n".join(measured_lines(comparison)) + "\n")
        if written:
            out.write(f"wrote {len(written)} figures into {written[0].parent}\n")
    return 0


def _modes_summary(plant, shown: int) -> str:
    """Lines that sum up the modes past the first ``shown`` (a large plant's table)."""
    rest = plant.n_modes - shown
    freqs = plant.freqs_hz[shown:]
    damp = plant.dampings[shown:]
    return (
        f"... and {rest} more modes, {min(freqs):.4g}-{max(freqs):.4g} Hz, damping "
        f"{min(damp):.3g}-{max(damp):.3g} (every mode: dampctl check --json)\n"
    )


#: warnings listed in the human output, and the longest line one may take there
TABLE_WARNINGS = 12
WARNING_WIDTH = 160


def _warnings(plant, survey) -> list[str]:
    """The warnings as printed: all of them, or on a plant past ``TABLE_MODES`` modes the
    first ``TABLE_WARNINGS`` ones, each cut to about ``WARNING_WIDTH`` characters."""
    if plant.n_modes <= TABLE_MODES:
        return list(survey.warnings)
    return _short(list(survey.warnings))


def _short(warnings) -> list[str]:
    """The first ``TABLE_WARNINGS`` warnings, each cut to about ``WARNING_WIDTH`` characters.

    A 3000-mode plant can warn of hundreds of near-repeated pairs, or list thousands of
    unseen modes in one warning; the human output keeps its lines readable and points at
    ``--json``, which holds every warning whole.
    """
    lines = []
    for text in warnings[:TABLE_WARNINGS]:
        if len(text) > WARNING_WIDTH:
            cut = text.rfind(", ", 0, WARNING_WIDTH)
            cut = cut if cut > 0 else WARNING_WIDTH
            text = text[:cut] + ", ... (whole in --json)"
        lines.append(text)
    if len(warnings) > TABLE_WARNINGS:
        lines.append(f"... and {len(warnings) - TABLE_WARNINGS} more warnings (all in --json)")
    return lines


def _participation(plant, survey) -> str:
    """The participation table; past ``TABLE_COLUMNS`` modes each pair's strongest modes.

    A plant of a few modes gets one column per mode. A large one (an FE model of hundreds or
    thousands of modes) gets the first ``TABLE_COLUMNS`` modes and, per pair, the three modes
    it sees best among the rest, so that no line grows with the number of modes.
    """
    unseen = set(survey.unseen_modes)
    n_cols = min(plant.n_modes, TABLE_COLUMNS)
    headers = ["pair", "kind", "collocated"] + [f"m{k + 1}" for k in range(n_cols)]
    more = plant.n_modes > n_cols
    if more:
        headers.append(f"strongest above m{n_cols}")
    rows = []
    for p in survey.pairs:
        share = list(p.participation)
        row = [p.pair, p.description, p.collocated] + [
            "-" if k + 1 in unseen else f"{x:.2f}" for k, x in enumerate(share[:n_cols])
        ]
        if more:
            order = sorted(
                (k for k in range(n_cols, len(share)) if k + 1 not in unseen),
                key=lambda k: -share[k],
            )[:3]
            row.append(", ".join(f"m{k + 1} {share[k]:.2f}" for k in order) or "none")
        rows.append(row)
    text = table(headers, rows)
    if unseen:
        text += (
            "\n(-: no pair sees the mode: at every pair its own response is below 1e-3 of "
            "the other modes' at its frequency, so no loop can move it; the shares say "
            "nothing)"
        )
    if more:
        text += (
            f"\n({plant.n_modes - n_cols} modes above m{n_cols} summed up by their strongest "
            "shares; every share: dampctl check --json)"
        )
    return text


def _measured(args: argparse.Namespace, plant):
    """The comparison with --measured (None without it) and the figures written."""
    if not args.measured:
        return None, []
    from dampctl.commands.plant_fit import output_kinds
    from dampctl.fileio import check_output_folder, write_files
    from dampctl.model.comparison import compare_plant
    from dampctl.model.measured import load_frf

    inputs = [args.plant, args.measured]
    if args.plots:
        check_output_folder(args.plots, inputs=inputs, replace=args.force)
    measured = load_frf(args.measured, output_kinds=output_kinds(args.output_kind))
    comparison = compare_plant(plant, measured)
    written = []
    if args.plots:
        from dampctl.report.figures_measured import comparison_pngs

        figures = comparison_pngs(comparison, figure_format=args.figure_format)
        written = write_files(args.plots, figures, inputs=inputs,
                              replace=args.force)
    return comparison, written


def measured_lines(comparison) -> list[str]:
    """Plain lines of a plant-against-measurement comparison (for check and the report).

    Parameters
    ----------
    comparison : PlantComparison
        The comparison (:func:`dampctl.model.comparison.compare_plant`).

    Returns
    -------
    list of str
        The modes table, the channel errors and the warnings.
    """
    lo, hi = comparison.freq_hz[0], comparison.freq_hz[-1]
    tol = comparison.tolerances
    lines = [f"{len(comparison.channels)} shared channels, {lo:g}-{hi:g} Hz; tolerances: "
             f"frequency {tol.freq:.0%}, damping {tol.damping:.0%}, MAC {tol.mac:g}, FRF error "
             f"{tol.error:.0%}", ""]
    rows = [(m.mode or "-", _hz(m.plant_freq_hz), _hz(m.measured_freq_hz),
             None if m.freq_change is None else f"{m.freq_change:+.2%}", m.plant_damping,
             m.measured_damping, None if m.mac is None else f"{m.mac:.4f}", m.channel)
            for m in comparison.modes]
    lines.append(table(["mode", "plant (Hz)", "measured (Hz)", "change", "plant damping",
                        "measured damping", "MAC", "strongest on"], rows))
    lines.append("")
    rows = [(c, f"{comparison.error[c]:.1%}") for c in comparison.channels]
    lines.append("FRF error per channel (normalized RMS over the band, coherence-weighted)")
    lines.append(table(["channel", "error"], rows))
    if comparison.warnings:
        lines += ["", "measurement warnings:"] + [f"  - {w}" for w in comparison.warnings]
    return lines


def _hz(value: float | None) -> str | None:
    return None if value is None else f"{value:.2f}"
