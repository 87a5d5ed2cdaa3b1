"""``dampctl check PLANT``: read a plant file and say what its pairs can do."""

from __future__ import annotations

import argparse
from typing import TextIO

from dampctl.commands._common import OPTION_RANGES, number_option, print_json, table
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
    plant = load_plant(args.plant)
    survey = survey_plant(plant, cluster_tol=args.cluster_tol)
    if args.json:
        print_json(check_payload(plant, survey), out, "check")
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
    rows = [
        (k + 1, m.label, m.freq_hz, m.damping, m.modal_mass_kg) for k, m in enumerate(plant.modes)
    ]
    out.write(table(["mode", "label", "freq (Hz)", "damping", "modal mass (kg)"], rows) + "\n")
    out.write(f"\nfirst natural frequency: {min(plant.freqs_hz):.4g} Hz\n")
    if survey.pairs:
        out.write("\nparticipation: share of each mode's Hankel singular value per pair\n")
        headers = ["pair", "kind", "collocated"] + [f"m{k + 1}" for k in range(plant.n_modes)]
        unseen = set(survey.unseen_modes)
        rows = [
            [p.pair, p.description, p.collocated]
            + ["-" if k + 1 in unseen else f"{x:.2f}" for k, x in enumerate(p.participation)]
            for p in survey.pairs
        ]
        out.write(table(headers, rows) + "\n")
        if unseen:
            out.write(
                "(-: no pair sees the mode: its response at every pair is below 1e-3 of the "
                "pair's strongest mode, so the shares say nothing)\n"
            )
    for name, items in survey.dominant_modes.items():
        listing = ", ".join(f"mode {m} ({s:.0%})" for m, s in items) or "none"
        out.write(f"\noutput {name}: motion dominated by {listing}\n")
    if survey.warnings:
        out.write("\nwarnings:\n" + "".join(f"  - {w}\n" for w in survey.warnings))
    return 0
