"""``dampctl export PLANT DESIGN --rate HZ -o DIR``: coefficients for the real-time target."""

from __future__ import annotations

import argparse
import math
from typing import TextIO

from dampctl.commands._common import (
    OPTION_RANGES,
    SAFETY_LINES,
    add_force_option,
    number_option,
    print_json,
    table,
)
from dampctl.design import load_design
from dampctl.discrete.export import export_design, modes_above_nyquist
from dampctl.discrete.writers import (
    FILE_NAMES,
    FORMATS,
    export_files,
    payload,
    verification_dict,
)
from dampctl.errors import UsageError
from dampctl.fileio import check_output_folder, write_files
from dampctl.model.plantfile import load_plant

NAME = "export"
HELP = "discretize a design into second-order sections, verify the sampled loop, write files"
#: a sampled-loop shortfall below this fraction of the required damping gets a re-tuning hint
NEAR_MISS = 0.01


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl export``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("plant", help="plant file (TOML); - reads it from standard input")
    parser.add_argument("design", help="design file (JSON, from tuning)")
    parser.add_argument(
        "--rate",
        type=number_option(OPTION_RANGES["rate"]),
        metavar="HZ",
        help="sample rate of the target (Hz); default the plant file's requirements.sample_rate_hz",
    )
    parser.add_argument(
        "--method",
        choices=("tustin", "zoh"),
        default="tustin",
        help="discretization: Tustin (bilinear) or zero-order hold (default tustin)",
    )
    parser.add_argument(
        "--prewarp",
        default="auto",
        metavar="auto|none|HZ",
        help="Tustin prewarping: auto = each section at its own centre frequency, none, or "
        "one frequency in Hz for all (default auto; ignored for zoh)",
    )
    parser.add_argument(
        "--fixed",
        choices=("none", "q15", "q31"),
        default="none",
        help="also round the coefficients to Q15 (16-bit) or Q31 (32-bit) words with a "
        "per-section shift (default none)",
    )
    parser.add_argument(
        "--tolerance",
        type=number_option(OPTION_RANGES["tolerance"]),
        default=0.05,
        metavar="FRACTION",
        help="largest relative change of a section's pole damping that rounding may cause "
        "(default 0.05)",
    )
    parser.add_argument(
        "--frequency-tolerance",
        type=number_option(OPTION_RANGES["tolerance"]),
        default=0.002,
        metavar="FRACTION",
        help="largest relative change of a section's pole frequency that rounding may cause "
        "(default 0.002)",
    )
    parser.add_argument(
        "--input-range",
        default=None,
        metavar="VALUE|PAIR=VALUE,...",
        help="fixed point: the sensor signal at full scale of the input word, in sensor units "
        "(m, m/s, m/s^2, N), for every loop or per loop; default: the input that asks the "
        "actuator for its max_force_n (strut: max_stroke_m) at the frequency of largest "
        "controller gain",
    )
    parser.add_argument(
        "--scaling",
        choices=("linf", "l2"),
        default="linf",
        help="fixed point: scale each section so the peak gain (linf: no overflow for any "
        "sinusoid within the input range) or the 2-norm (l2: for white input) from the input "
        "to its output is 1 (Jackson 1970; default linf)",
    )
    parser.add_argument(
        "--format",
        default=",".join(FORMATS),
        metavar="LIST",
        help="files to write, comma-separated from json, csv, c (default json,csv,c)",
    )
    parser.add_argument(
        "--allow-aliasing",
        action="store_true",
        help="export even when the sample rate is below twice a controlled mode (by default "
        "that is refused: the loop cannot act on a mode above the Nyquist frequency)",
    )
    parser.add_argument("-o", "--output", required=True, metavar="DIR", help="output folder")
    add_force_option(
        parser, "the export files in DIR (other formats of an earlier export there are removed)"
    )
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def _prewarp(text: str):
    if text in ("auto", "none"):
        return text
    try:
        value = float(text)
    except ValueError:
        raise UsageError(
            f"--prewarp: expected auto, none or a frequency in Hz, got {text!r}"
        ) from None
    if not math.isfinite(value) or value <= 0:
        raise UsageError(f"--prewarp: frequency must be positive, got {text!r}") from None
    return value


def _input_range(text: str | None):
    """``--input-range``: one value, or ``PAIR=VALUE,...``."""
    if text is None:
        return None

    def number(part: str, what: str) -> float:
        try:
            value = float(part)
        except ValueError:
            raise UsageError(f"--input-range: {what}: expected a number, got {part!r}") from None
        if not (math.isfinite(value) and value > 0):
            raise UsageError(f"--input-range: {what}: expected a positive number, got {part!r}")
        return value

    if "=" not in text:
        return number(text.strip(), "value")
    out = {}
    for item in text.split(","):
        name, sep, value = item.partition("=")
        if not sep or not name.strip():
            raise UsageError(f"--input-range: expected PAIR=VALUE, got {item!r}")
        out[name.strip()] = number(value.strip(), name.strip())
    return out


def _formats(text: str) -> list[str]:
    names = [p.strip() for p in text.split(",") if p.strip()]
    bad = [n for n in names if n not in FORMATS]
    if bad or not names:
        raise UsageError(f"--format: expected some of {', '.join(FORMATS)}, got {text!r}") from None
    return list(dict.fromkeys(names))


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl export``; exit 0 done, 1 refused or unstable or requirement unmet.

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
    formats = _formats(args.format)
    prewarp = _prewarp(args.prewarp)
    if not (math.isfinite(args.tolerance) and args.tolerance > 0):
        raise UsageError(f"--tolerance: expected a fraction > 0, got {args.tolerance}")
    if not (math.isfinite(args.frequency_tolerance) and args.frequency_tolerance > 0):
        raise UsageError(
            f"--frequency-tolerance: expected a fraction > 0, got {args.frequency_tolerance}"
        )
    input_range = _input_range(args.input_range)
    names = [FILE_NAMES[f] for f in formats]
    check_output_folder(args.output, names, inputs=[args.plant, args.design], replace=args.force)
    plant = load_plant(args.plant)
    design = load_design(args.design)
    design.check_plant(plant, source=args.design)
    if design.passive:
        return _parts_list(args, plant, design, formats, out)
    if isinstance(input_range, dict):
        known = [lp.pair for lp in design.loops] or list(design.pairs)
        for name in input_range:
            if name not in known:
                raise UsageError(f"--input-range: {name!r} is not a loop of the design (its "
                                 f"pairs: {', '.join(known) or 'none'})")
    rate = args.rate if args.rate is not None else plant.requirements.sample_rate_hz
    if rate is None:
        raise UsageError("--rate is required (the plant file states no sample_rate_hz)")
    high = modes_above_nyquist(plant, design.target_modes, rate)
    if high and not args.allow_aliasing:
        listing = ", ".join(f"mode {m} ({f:.6g} Hz)" for m, f in high)
        filters = " (a PPF filter tuned above it cannot be realised)" if design.law == "ppf" else ""
        raise UsageError(
            f"--rate: {rate:g} Hz is below twice {listing}: the Nyquist frequency "
            f"{rate / 2:g} Hz is below a controlled mode{filters}; raise the rate or give "
            "--allow-aliasing"
        )
    result = export_design(
        plant,
        design,
        rate,
        method=args.method,
        prewarp=prewarp,
        fixed=args.fixed,
        tolerance=args.tolerance,
        frequency_tolerance=args.frequency_tolerance,
        input_range=input_range,
        scaling=args.scaling,
    )
    failures = list(result.failures)
    unmet = _unmet(plant, result)
    stated = plant.requirements.sample_rate_hz
    extra_notes = []
    if stated is not None and abs(stated - rate) > 1e-9 * stated:
        extra_notes.append(
            f"the plant file states sample_rate_hz = {stated:.6g}; exported at {rate:.6g} Hz"
        )
    written = []
    if not failures:
        files = export_files(result, formats)
        written = write_files(
            args.output,
            files,
            inputs=[args.plant, args.design],
            replace=args.force,
            owned=list(FILE_NAMES.values()),
        )
    code = 1 if failures or unmet else 0
    if args.json:
        data = payload(result)
        brief = {
            "rate_hz": data["rate_hz"],
            "method": data["method"],
            "prewarp": data["prewarp"],
            "fixed": data["fixed"],
            "loops": [
                {
                    "pair": lp["pair"],
                    "form": lp["form"],
                    "cascade_gain": lp["cascade_gain"],
                    "sos": lp["sos"],
                }
                for lp in data["loops"]
            ],
            "paths": data["paths"],
            "fixed_point": data["fixed_point"],
            "verification": verification_dict(result),
            "failures": failures,
            "unmet": unmet,
            "notes": data["notes"] + extra_notes,
            "files": [str(p) for p in written],
        }
        print_json(brief, out, "export")
    else:
        _human(result, failures, unmet, written, extra_notes, out)
    for line in failures:
        err.write(f"dampctl export: {line}\n")
    return code


#: columns of the parts list (parts.csv), the keys of each part's entry in parts.json
PART_COLUMNS = (
    "part", "label", "mode", "site", "between", "pair", "actuator", "mass_kg", "freq_hz",
    "damping", "stiffness_n_per_m", "damping_n_s_per_m", "coefficient_n_s_per_m",
    "mounting_stiffness_n_per_m", "network", "resistance_ohm", "inductance_h", "cost",
)


def parts_list(plant, design) -> dict:
    """The parts list of a passive design: what to buy or make, with its values and prices.

    Parameters
    ----------
    plant : ModalPlant
        The plant (its ``[[parts]]`` prices).
    design : Design
        A passive design.

    Returns
    -------
    dict
        ``law``, ``plant_fingerprint``, ``note``, ``parts`` (each with the keys of
        :data:`PART_COLUMNS`, None where they do not apply), ``added_mass_kg``, ``total_cost``
        (None unless every part is priced).
    """
    from dampctl.analysis.passive import part_label
    from dampctl.model.passive import Absorber, Damper

    rows = []
    for k, part in enumerate(design.parts):
        row = dict.fromkeys(PART_COLUMNS)
        row.update(part="absorber" if isinstance(part, Absorber) else
                   "damper" if isinstance(part, Damper) else "shunt",
                   label=part_label(part, k))
        if isinstance(part, Absorber):
            row.update(part.to_dict())
        elif isinstance(part, Damper):
            row.update(between=" - ".join(part.between),
                       coefficient_n_s_per_m=part.coefficient_n_s_per_m,
                       mounting_stiffness_n_per_m=part.stiffness_n_per_m)
        else:
            row.update(mode=part.mode, pair=part.pair, actuator=part.actuator,
                       network=part.kind, resistance_ohm=part.resistance_ohm,
                       inductance_h=part.inductance_h)
        row["cost"] = plant.part_price(part.price_kind, getattr(part, "mass_kg", 0.0))
        rows.append(row)
    costs = [r["cost"] for r in rows]
    return {
        "law": design.law,
        "plant_fingerprint": design.plant_fingerprint,
        "note": "passive: no loop, nothing to export; this is the parts list",
        "parts": rows,
        "added_mass_kg": float(sum(r["mass_kg"] or 0.0 for r in rows)),
        "total_cost": None if any(c is None for c in costs) else float(sum(costs)),
    }


def _parts_list(args, plant, design, formats, out: TextIO) -> int:
    """A passive design has no coefficients: say so, and write its parts list instead."""
    import csv
    import io

    from dampctl.commands._common import json_text

    data = parts_list(plant, design)
    files = {}
    if "json" in formats:
        files["parts.json"] = json_text(data, "parts")
    if "csv" in formats:
        buffer = io.StringIO()
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(PART_COLUMNS)
        for row in data["parts"]:
            writer.writerow(["" if row[k] is None else row[k] for k in PART_COLUMNS])
        files["parts.csv"] = buffer.getvalue()
    written = []
    if files:
        written = write_files(
            args.output, files, inputs=[args.plant, args.design], replace=args.force
        )
    if args.json:
        print_json({**data, "files": [str(p) for p in written]}, out, "parts")
        return 0
    out.write(
        f"{design.law} design: passive, no loop — nothing to export (no sampling, no "
        "coefficients). Parts list:\n\n"
    )
    rows = [(r["label"], _part_values(r), r["cost"]) for r in data["parts"]]
    out.write(table(["part", "values", "cost"], rows) + "\n")
    out.write(f"\nadded mass {data['added_mass_kg']:.4g} kg; total cost "
              f"{'-' if data['total_cost'] is None else format(data['total_cost'], '.6g')}\n")
    if written:
        out.write("\nwritten: " + ", ".join(str(p) for p in written) + "\n")
    return 0


def _part_values(row: dict) -> str:
    if row["part"] == "absorber":
        return (f"{row['mass_kg']:.4g} kg, {row['freq_hz']:.4g} Hz, damping {row['damping']:.3g} "
                f"(k {row['stiffness_n_per_m']:.4g} N/m, c {row['damping_n_s_per_m']:.4g} N·s/m)")
    if row["part"] == "damper":
        mount = row["mounting_stiffness_n_per_m"]
        return (f"c {row['coefficient_n_s_per_m']:.4g} N·s/m"
                + (f" on a {mount:.4g} N/m mounting" if mount else ", rigid mounting"))
    text = f"{row['network']} on {row['actuator']}: R {row['resistance_ohm']:.4g} ohm"
    if row["inductance_h"] is not None:
        text += f", L {row['inductance_h']:.4g} H"
    return text


def _unmet(plant, result) -> list[str]:
    need = plant.requirements.min_damping
    if need is None:
        return []
    v = result.fixed_verification or result.verification
    modes = result.controller.target_modes or plant.requirements.modes
    out = []
    for m in modes:
        if not (1 <= m <= plant.n_modes and v.discrete_damping[m - 1] < need):
            continue
        got = v.discrete_damping[m - 1]
        line = f"mode {m}: sampled-loop damping {got:.4g} < required {need:.4g}"
        if got >= need * (1.0 - NEAR_MISS):
            # the tuning's smallest gains reach the target exactly in continuous time (with
            # the delay as Padé sections); the sampled loop then lands a hair below it
            line += (
                f" ({(1 - got / need) * 100:.2g} % short: tune for a little headroom, e.g. "
                f"--target-damping {need * (1.0 + NEAR_MISS):.4g})"
            )
        out.append(line)
    return out


def _human(result, failures, unmet, written, extra_notes, out: TextIO) -> None:
    c = result.controller
    out.write(
        f"{c.law} controller at {c.rate_hz:.6g} Hz, {c.method}"
        + (f", prewarp {c.prewarp}" if c.method == "tustin" else "")
        + (f", fixed point {result.fixed}" if result.fixed != "none" else "")
        + "\n\n"
    )
    if c.loops:
        rows = [
            (
                lp.pair,
                lp.form,
                len(lp.sos),
                lp.cascade_gain,
                f"{lp.cascade_error:.1e}",
                f"{lp.parallel_error:.1e}",
            )
            for lp in c.loops
        ]
        headers = ["loop", "form", "sections", "cascade gain", "cascade err", "parallel err"]
        out.write(table(headers, rows) + "\n")
    elif c.paths:
        out.write(f"MIMO controller: {len(c.paths)} paths of parallel modal biquads\n")
    else:
        out.write("MIMO controller: discrete state space only (no modal realisation)\n")
    if result.fixed != "none":
        _human_fixed(result, out)
    v, fv = result.verification, result.fixed_verification
    out.write(
        "\nsampled closed loop (ZOH plant, one sample of computation delay) beside the "
        "continuous design with the plant's loop_delay_s only (no sampling delay; tune and "
        "assess add 1.5 samples to it)\n"
    )
    headers = [
        "mode", "target", "sampled f (Hz)", "continuous damping (no sampling)", "sampled damping"
    ]  # fmt: skip
    if fv is not None:
        headers.append(f"sampled, {result.fixed} coefficients")
    rows = []
    for k, mode in enumerate(v.modes):
        row = [
            mode,
            mode in c.target_modes,
            v.discrete_freq_hz[k],
            v.continuous_damping[k],
            v.discrete_damping[k],
        ]
        if fv is not None:
            row.append(fv.discrete_damping[k])
        rows.append(row)
    out.write(table(headers, rows) + "\n")
    out.write(
        f"\nstable: {'yes' if result.stable else 'NO'} (largest |z| {v.max_pole_radius:.6f})\n"
    )
    cross = f"{v.crossover_hz:.4g} Hz" if v.crossover_hz else "none"
    out.write(
        f"sample rate {v.rate_ratio:.3g}x the highest controlled mode; crossover {cross}; "
        f"phase lost to hold and computation delay {v.phase_lost_deg:.3g} deg\n"
    )
    for note in (*c.notes, *extra_notes, *v.warnings):
        out.write(f"note: {note}\n")
    for line in (*failures, *unmet):
        out.write(f"NOT MET: {line}\n")
    if written:
        out.write("\nwritten: " + ", ".join(str(p) for p in written) + "\n")
    elif failures:
        out.write("\nno files written\n")
    out.write("\n" + "\n".join(SAFETY_LINES) + "\n")


def _human_fixed(result, out: TextIO) -> None:
    rows = []
    for real in result.fixed_realisations:
        s = real.scaling
        rows.append(
            (
                real.name,
                s.input_full_scale,
                s.input_range_any_signal,
                s.peak_command,
                s.output_limit if s.output_limit is not None else "-",
                real.noise_rms,
                real.coefficient_error_rms,
            )
        )
    out.write(
        f"\nfixed point {result.fixed}: sections scaled ({result.scaling} norm, Jackson 1970) so "
        "that no word overflows for inputs within the input range\n"
    )
    headers = [
        "loop",
        "input range",
        "any signal",
        "peak command",
        "actuator limit",
        "rounding noise RMS",
        "coefficient error RMS",
    ]
    out.write(table(headers, rows) + "\n")
    out.write(
        "input range: sensor units at full scale (no overflow for a sinusoid of any "
        "frequency within it; 'any signal': for every input); peak command, noise and error "
        "in actuator units (noise: rounding every section output; error: rounded "
        "coefficients, white input over the full range)\n"
    )
    rows = []
    for real in result.fixed_realisations:
        for secs, peaks in zip(real.sections, real.peak_gains, strict=True):
            for s, peak in zip(secs, peaks, strict=True):
                rows.append(
                    (
                        s.label,
                        f"{s.num_frac_bits}/{s.a1_frac_bits}/{s.a2_frac_bits}",
                        s.after.radius,
                        s.before.freq_hz,
                        f"{100 * s.frequency_change:+.3f} %",
                        s.before.damping,
                        f"{100 * s.damping_change:+.2f} %",
                        peak,
                        s.accepted,
                    )
                )
    out.write("\nfixed-point sections (fraction bits of b / a1 / a2; pole shift on rounding)\n")
    headers = [
        "section",
        "bits",
        "|z|",
        "f (Hz)",
        "f change",
        "damping",
        "damping change",
        "node gain",
        "ok",
    ]
    out.write(table(headers, rows) + "\n")
    out.write(
        f"ok: pole frequency within {100 * result.frequency_tolerance:.3g} % and damping within "
        f"{100 * result.tolerance:.3g} % after rounding; node gain: peak gain from the input "
        "word to the section's output word (1 after scaling)\n"
    )
