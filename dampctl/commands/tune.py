"""``dampctl tune PLANT --law dvf|iff|ppf|lqg|custom ...``: design damping loops, write the design
file (``custom``: the user's own controller from a file, assessed like any design)."""

from __future__ import annotations

import argparse
import math
from dataclasses import replace
from typing import TextIO

from dampctl.analysis.modetable import TABLE_HEADERS, closed_loop_table
from dampctl.commands._common import (
    OPTION_RANGES,
    add_force_option,
    caution_lines,
    mode_list,
    name_list,
    number_option,
    print_json,
    table,
    whole_option,
)
from dampctl.errors import MissingFeatureError, UsageError
from dampctl.fileio import check_output, write_text
from dampctl.model.plantfile import load_plant
from dampctl.values import Range

NAME = "tune"
HELP = (
    "tune damping loops (dvf, iff, ppf on collocated pairs, or lqg) or passive parts (tmd, "
    "viscous, shunt) and write a design file"
)

LAWS = ("dvf", "iff", "ppf", "lqg", "custom", "tmd", "viscous", "shunt")
#: the passive laws: parts, no loop
PASSIVE = ("tmd", "viscous", "shunt")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl tune``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("plant", help="plant file (TOML); - reads it from standard input")
    parser.add_argument(
        "--law",
        required=True,
        choices=LAWS,
        help="damping law: dvf (velocity feedback), iff (integral force feedback), ppf "
        "(positive position feedback), lqg (model-based) or custom (your own controller from "
        "--controller); passive: tmd (tuned-mass dampers), viscous (dampers between sites), "
        "shunt (piezo strut on an R or RL network); required",
    )
    parser.add_argument(
        "--pairs",
        metavar="P1,P2",
        help="pairs to close loops on, one loop each (required for dvf/iff/ppf; for lqg they "
        "give the actuators and sensors)",
    )
    parser.add_argument(
        "--actuators",
        metavar="A1,A2",
        help="lqg and custom: actuators to use, in the controller's output order (default from "
        "--pairs)",
    )
    parser.add_argument(
        "--sensors",
        metavar="S1,S2",
        help="lqg and custom: sensors to use, in the controller's input order (default from "
        "--pairs)",
    )
    parser.add_argument(
        "--controller",
        metavar="FILE",
        help="custom only: the controller, u = -K y, as .npz with arrays A, B, C, D (and "
        "optional dt, the sample time in s, for a discrete controller) or JSON "
        '{"A": [[...]], "B": ..., "C": ..., "D": ..., "dt": ...}',
    )
    parser.add_argument(
        "--modes",
        metavar="1,2",
        help="target modes, 1-based (e.g. 1,2 or 1-4; default the plant's required modes, or all)",
    )
    parser.add_argument(
        "--target-damping",
        type=_target,
        metavar="Z",
        help="damping ratio to reach on the target modes with the smallest gains (default the "
        "plant's min_damping; 'none': dvf/iff/ppf maximize the smallest damping instead)",
    )
    parser.add_argument(
        "--gain",
        metavar="G[,G2]",
        help="fix the loop gain(s) instead of tuning: dvf N·s/m (force) or s (strut), iff rad/s "
        "(Preumont's g), ppf the rule's normalized g; one value or one per pair (default: tune)",
    )
    parser.add_argument(
        "--leak-hz",
        type=number_option(OPTION_RANGES["frequency"]),
        metavar="F",
        help="iff only: integrator leak corner in Hz (default 0.1 x lowest target mode; 0 = pure "
        "integrator)",
    )
    parser.add_argument(
        "--order",
        type=whole_option(Range(1, 1000)),
        metavar="N",
        help="lqg only: controller model order (default the law's choice)",
    )
    parser.add_argument(
        "--delay-s",
        type=number_option(OPTION_RANGES["delay"]),
        metavar="T",
        help="loop delay in s to tune and check against (default the plant's loop_delay_s plus "
        "1.5 samples at its sample_rate_hz)",
    )
    passive = parser.add_argument_group("passive laws (tmd, viscous, shunt)")
    passive.add_argument(
        "--mass-ratio",
        metavar="MU[,MU2]",
        help="tmd: absorber mass over the mode's effective mass at its site, one value for all "
        "or one per target mode (default 0.02, common practice 0.01-0.05)",
    )
    passive.add_argument(
        "--mass-split",
        choices=("each", "total"),
        default="each",
        help="tmd: a single --mass-ratio is each absorber's (each) or the sum over the "
        "absorbers, shared equally (total); default each",
    )
    passive.add_argument(
        "--site",
        metavar="S[,S2]",
        help="tmd: site of each absorber, one for all or one per target mode (default where "
        "the mode's shape is largest; it must be a point that can carry a mass)",
    )
    passive.add_argument(
        "--between",
        action="append",
        metavar="A,B",
        help="viscous: the two sites a damper joins (B may be 'ground'); repeat for more "
        "dampers; required for viscous",
    )
    passive.add_argument(
        "--mount-stiffness",
        metavar="K[,K2]",
        help="viscous: stiffness (N/m) of each damper's mounting, in series with it (default "
        "rigid)",
    )
    passive.add_argument(
        "--coefficient",
        metavar="C[,C2]",
        help="viscous: fix the damper coefficient(s) in N·s/m instead of tuning",
    )
    passive.add_argument(
        "--shunt",
        choices=("RL", "R"),
        default="RL",
        help="shunt: network across each strut, resistor and inductor in series (RL) or a "
        "resistor (R); default RL",
    )
    passive.add_argument(
        "--refine",
        action=argparse.BooleanOptionalAction,
        default=True,
        help="tmd, shunt: refine the tuning rule on the full plant for the smallest output "
        "peak (default; --no-refine keeps the rule)",
    )
    parser.add_argument(
        "-o",
        "--output",
        required=True,
        metavar="DESIGN",
        help="design file to write (JSON); - writes the design on standard output and the "
        "summary on standard error",
    )
    add_force_option(parser, "the design file")
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl tune``.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options.
    out, err : file-like
        Output and error streams.

    Returns
    -------
    int
        0 done, 1 the loop is unstable or the target damping is not met.
    """
    to_stdout = args.output == "-"
    if to_stdout and args.json:
        raise UsageError("-o - writes the design on standard output; --json would print there too "
                         "(give a design file with --json, or drop --json)")
    plant = load_plant(args.plant)
    if not to_stdout:
        check_output(args.output, inputs=[args.plant], replace=args.force)
    design = make_design(plant, args)
    modes = closed_loop_table(plant, design, delay_s=args.delay_s)
    if to_stdout:
        out.write(design.to_json())
        payload = tune_payload(plant, design, modes, design_file="<stdout>")
        if not getattr(args, "quiet", False):
            _print_human(payload, modes, err)  # the summary goes beside the design, not into it
    else:
        path = write_text(args.output, design.to_json(), inputs=[args.plant], replace=args.force)
        payload = tune_payload(plant, design, modes, design_file=str(path))
        if args.json:
            print_json(payload, out, "tune")
        else:
            _print_human(payload, modes, out)
    return 0 if payload["stable"] and payload["target_met"] is not False else 1


def make_design(plant, args: argparse.Namespace):
    """Call the chosen law with the parsed options (the Python API does the work).

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    args : argparse.Namespace
        Parsed ``dampctl tune`` options.

    Returns
    -------
    Design
    """
    law = args.law
    pairs = name_list(args.pairs, "--pairs")
    modes = mode_list(args.modes) or None
    _check_passive_options(args)
    if law in PASSIVE:
        return _passive_design(plant, args, pairs, modes)
    modes = mode_list(args.modes, n_modes=plant.n_modes) or None
    if args.target_damping == NO_TARGET:
        # no target even where the plant file states one: the laws then maximize
        plant = replace(plant, requirements=replace(plant.requirements, min_damping=None))
        args = argparse.Namespace(**{**vars(args), "target_damping": None})
    if args.target_damping is not None and not 0.0 < args.target_damping < 1.0:
        raise UsageError(f"--target-damping must be in (0, 1), got {args.target_damping}")
    gain = _gains(args.gain)
    if args.leak_hz is not None and law != "iff":
        raise UsageError("--leak-hz applies to --law iff only")
    if args.order is not None and law != "lqg":
        raise UsageError("--order applies to --law lqg only")
    if law != "custom" and getattr(args, "controller", None):
        raise UsageError("--controller applies to --law custom only")
    if law == "custom":
        return _custom_design(plant, args, pairs, gain)
    if law != "lqg" and (args.actuators or args.sensors):
        raise UsageError(f"--actuators/--sensors apply to --law lqg; {law} uses --pairs")
    common = {"modes": modes, "target_damping": args.target_damping}
    if law == "lqg":
        if gain is not None:
            raise UsageError("--gain does not apply to --law lqg")
        actuators = name_list(args.actuators, "--actuators")
        sensors = name_list(args.sensors, "--sensors")
        if pairs:
            found = [plant.pair(name) for name in pairs]
            actuators = actuators or [p.actuator for p in found]
            sensors = sensors or [p.sensor for p in found]
        if not actuators or not sensors:
            raise UsageError("--law lqg needs --pairs, or --actuators and --sensors")
        return _lqg().design(plant, actuators, sensors, order=args.order, **common)
    if not pairs:
        raise UsageError(f"--law {law} needs --pairs P1[,P2...]")
    common.update(gain=gain, delay_s=args.delay_s)
    if law == "dvf":
        from dampctl.laws import dvf

        return dvf.design(plant, pairs, **common)
    if law == "iff":
        from dampctl.laws import iff

        return iff.design(plant, pairs, leak_hz=args.leak_hz, **common)
    from dampctl.laws import ppf

    return ppf.design(plant, pairs, **common)


def _custom_design(plant, args: argparse.Namespace, pairs, gain):
    """``--law custom``: the controller file read and checked against the plant."""
    from dampctl.laws.custom import controller_from_file, design_from_statespace

    if not args.controller:
        raise UsageError("--law custom needs --controller FILE (.npz or .json with A, B, C, D)")
    if gain is not None or args.target_damping is not None or args.modes:
        raise UsageError(
            "--gain, --target-damping and --modes do not apply to --law custom: the controller "
            "is used as given"
        )
    actuators = name_list(args.actuators, "--actuators")
    sensors = name_list(args.sensors, "--sensors")
    if pairs:
        found = [plant.pair(name) for name in pairs]
        actuators = actuators or [p.actuator for p in found]
        sensors = sensors or [p.sensor for p in found]
    if not actuators or not sensors:
        raise UsageError("--law custom needs --actuators and --sensors (or --pairs)")
    K = controller_from_file(args.controller)
    try:
        return design_from_statespace(
            plant, K, actuators, sensors, name=f"controller from {args.controller}"
        )
    except UsageError as exc:
        raise UsageError(exc.message, source=args.controller) from None


def _check_passive_options(args: argparse.Namespace) -> None:
    """Options of one family may not be given to a law of the other."""
    law = args.law
    given = {
        "--mass-ratio": args.mass_ratio is not None,
        "--mass-split": args.mass_split != "each",
        "--site": args.site is not None,
        "--between": bool(args.between),
        "--mount-stiffness": args.mount_stiffness is not None,
        "--coefficient": args.coefficient is not None,
        "--shunt": args.shunt != "RL",
        "--no-refine": not args.refine,
    }
    owners = {
        "--mass-ratio": ("tmd",),
        "--mass-split": ("tmd",),
        "--site": ("tmd",),
        "--between": ("viscous",),
        "--mount-stiffness": ("viscous",),
        "--coefficient": ("viscous",),
        "--shunt": ("shunt",),
        "--no-refine": ("tmd", "shunt"),
    }
    for option, on in given.items():
        if on and law not in owners[option]:
            raise UsageError(f"{option} applies to --law {' / '.join(owners[option])} only")
    if law in PASSIVE:
        loop_only = {
            "--gain": args.gain is not None,
            "--target-damping": args.target_damping is not None,
            "--delay-s": args.delay_s is not None,
            "--leak-hz": args.leak_hz is not None,
            "--order": args.order is not None,
            "--actuators/--sensors": bool(args.actuators or args.sensors),
            "--controller": bool(getattr(args, "controller", None)),
        }
        for option, on in loop_only.items():
            if on:
                raise UsageError(f"{option} does not apply to --law {law} (passive: no loop)")
        if args.pairs and law != "shunt":
            raise UsageError(f"--pairs does not apply to --law {law} (passive parts need no pair)")


def _numbers(text: str | None, option: str) -> list[float] | None:
    if text is None:
        return None
    try:
        values = [float(part) for part in text.split(",") if part.strip()]
    except ValueError:
        raise UsageError(
            f"{option}: expected numbers like 0.02 or 0.02,0.03, got {text!r}"
        ) from None
    if not values or not all(math.isfinite(v) and v > 0 for v in values):
        raise UsageError(f"{option}: expected numbers > 0, got {text!r}")
    return values


def _passive_design(plant, args: argparse.Namespace, pairs, modes):
    """Call the passive law with its options."""
    if args.law == "tmd":
        from dampctl.laws import tmd

        ratios = _numbers(args.mass_ratio, "--mass-ratio") or [tmd.DEFAULT_MASS_RATIO]
        sites = name_list(args.site, "--site") if args.site else None
        if sites is not None and len(set(sites)) != len(sites):
            raise UsageError("--site: a site is repeated")
        return tmd.design(
            plant, modes=modes, mass_ratio=ratios, split=args.mass_split, sites=sites,
            refine=args.refine,
        )
    if args.law == "viscous":
        from dampctl.laws import viscous

        if not args.between:
            raise UsageError("--law viscous needs --between A,B (B may be 'ground')")
        links = []
        for text in args.between:
            names = [part.strip() for part in text.split(",") if part.strip()]
            if len(names) != 2:
                raise UsageError(f"--between: expected two site names A,B, got {text!r}")
            links.append(tuple(names))
        stiffness = _numbers(args.mount_stiffness, "--mount-stiffness")
        coefficient = _numbers(args.coefficient, "--coefficient")
        return viscous.design(
            plant, links, modes=modes, stiffness_n_per_m=stiffness, coefficient=coefficient
        )
    from dampctl.laws import shunt

    if not pairs:
        raise UsageError("--law shunt needs --pairs P1[,P2...] on piezoelectric struts")
    return shunt.design(plant, pairs, modes=modes, kind=args.shunt, refine=args.refine)


def tune_payload(plant, design, modes, *, design_file: str | None = None) -> dict:
    """The JSON form of a tuned design with its closed-loop modes (also used in reports).

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The design.
    modes : ClosedLoopTable
        Its closed-loop modes (:func:`dampctl.analysis.modetable.closed_loop_table`).
    design_file : str, optional
        Where the design was written.

    Returns
    -------
    dict
        Keys ``law``, ``plant``, ``plant_fingerprint``, ``pairs``, ``actuators``, ``sensors``,
        ``loops``, ``stable``, ``max_real_part``, ``delay_s``, ``note``, ``target_modes``,
        ``target_damping``, ``target_met``, ``min_damping``, ``modes``, ``controller_poles``,
        ``controller_poles_note``, ``overdamped_modes``, ``info``, ``design_file``,
        ``warnings``; for a passive design also ``passive`` (true) and ``parts`` (each with
        ``label``, ``part`` and its fields).
    """
    info = dict(design.info)
    units = list(info.get("gain_units", []))
    loops = []
    for k, lp in enumerate(design.loops):
        loops.append(
            {
                "pair": lp.pair,
                "actuator": lp.actuator,
                "sensor": lp.sensor,
                "gain": lp.gain,
                "gain_unit": units[k] if k < len(units) else "",
                "branches": [
                    {
                        "gain": b.gain,
                        "label": b.label,
                        "sections": [{"num": list(s.num), "den": list(s.den)} for s in b.sections],
                    }
                    for b in lp.branches
                ],
            }
        )
    target = info.get("target_damping")
    smallest = modes.target_min_damping()
    met = None if target is None or smallest is None else bool(smallest >= target * (1 - 1e-6))
    table_dict = modes.to_dict()
    warnings = list(info.get("warnings", []))
    rate = plant.requirements.sample_rate_hz
    if rate is not None and not design.passive:
        from dampctl.discrete.export import modes_above_nyquist

        high = modes_above_nyquist(plant, design.target_modes, rate)
        if high:
            listing = ", ".join(f"mode {m} ({f:.6g} Hz)" for m, f in high)
            warnings.append(
                f"the plant's sample_rate_hz {rate:g} Hz is below twice {listing}: a sampled "
                "loop cannot act on it (dampctl export refuses it unless --allow-aliasing)"
            )
    if not modes.stable and not any("UNSTABLE" in w for w in warnings):
        warnings.append(
            "the closed loop is UNSTABLE (largest pole real part "
            f"{modes.max_real_part:.4g} 1/s): do "
            "not run it"
        )
    extra = {}
    if design.passive:
        from dampctl.analysis.passive import part_label
        from dampctl.model.passive import part_to_dict

        extra = {
            "passive": True,
            "parts": [
                {"label": part_label(p, k), **part_to_dict(p)} for k, p in enumerate(design.parts)
            ],
        }
    return {
        "law": design.law,
        "plant": plant.title,
        "plant_fingerprint": design.plant_fingerprint,
        "pairs": list(design.pairs),
        "actuators": list(design.actuators),
        "sensors": list(design.sensors),
        "loops": loops,
        "stable": table_dict["stable"],
        "max_real_part": table_dict["max_real_part"],
        "delay_s": table_dict["delay_s"],
        "note": table_dict["note"],
        "target_modes": list(design.target_modes),
        "target_damping": target,
        "target_met": met,
        "min_damping": smallest,
        "modes": table_dict["modes"],
        "controller_poles": table_dict["controller_poles"],
        "controller_poles_note": table_dict["controller_poles_note"],
        "overdamped_modes": table_dict["overdamped_modes"],
        "info": info,
        "design_file": design_file,
        "warnings": warnings,
        **extra,
    }


def _print_human(payload: dict, modes, out: TextIO) -> None:
    title = payload["plant"] or "plant"
    if payload.get("passive"):
        what = f"{len(payload['parts'])} passive part(s), no loop"
    elif payload["pairs"]:
        what = f"{len(payload['pairs'])} loop(s) ({', '.join(payload['pairs'])})"
    else:  # a model-based controller: actuators and sensors, no pairs
        what = (
            f"actuator(s) {', '.join(payload['actuators'])} from sensor(s) "
            f"{', '.join(payload['sensors'])}"
        )
    out.write(f"{title}: {payload['law']} on {what}; design written to {payload['design_file']}\n")
    info = payload["info"]
    if payload.get("passive"):
        out.write(f"\ntuning: {info.get('tuning', '-')}\n")
        out.write(_parts_table(payload["law"], payload["parts"]) + "\n")
    if payload["loops"]:
        out.write(f"\ntuning: {info.get('tuning', '-')}\n")
        rows = [
            [
                lp["pair"],
                lp["actuator"],
                lp["sensor"],
                lp["gain"],
                lp["gain_unit"],
                "; ".join(b["label"] for b in lp["branches"]),
            ]
            for lp in payload["loops"]
        ]
        out.write(table(["pair", "actuator", "sensor", "gain", "unit", "controller"], rows) + "\n")
    out.write(f"\n{payload['note']}:\n")
    out.write(table(list(TABLE_HEADERS), modes.table_rows()) + "\n")
    poles = payload["controller_poles"]
    if poles:
        out.write(f"\n{payload['controller_poles_note']}:\n")
        out.write(table(["freq (Hz)", "damping"], [(p["freq_hz"], p["damping"]) for p in poles]))
        out.write("\n")
    out.write(f"stable: {'yes' if payload['stable'] else 'NO'}\n")
    _print_law_facts(info, out)
    target = payload["target_damping"]
    if target is not None:
        status = "met" if payload["target_met"] else "NOT met"
        out.write(
            f"\ntarget: damping >= {target:g} on mode(s) "
            f"{', '.join(str(m) for m in payload['target_modes'])}: {status} "
            f"(smallest {_num(payload['min_damping'])})\n"
        )
    else:
        out.write(
            f"\nsmallest damping on the target modes: {_num(payload['min_damping'])} "
            "(no target stated)\n"
        )
    if payload["warnings"]:
        out.write("\nwarnings:\n" + "".join(f"  - {w}\n" for w in payload["warnings"]))
    lines = caution_lines(payload["law"])
    out.write("\n" + "\n".join(lines) + "\n")


def _parts_table(law: str, parts: list[dict]) -> str:
    """The parts as a table, with the columns of their kind."""
    if law == "tmd":
        headers = ["absorber", "mode", "site", "mass (kg)", "freq (Hz)", "damping",
                   "stiffness (N/m)", "dashpot (N·s/m)"]
        rows = [
            [k + 1, p["mode"], p["site"], p["mass_kg"], p["freq_hz"], p["damping"],
             p["mass_kg"] * (2 * math.pi * p["freq_hz"]) ** 2,
             2 * p["damping"] * p["mass_kg"] * 2 * math.pi * p["freq_hz"]]
            for k, p in enumerate(parts)
        ]
    elif law == "viscous":
        headers = ["damper", "between", "coefficient (N·s/m)", "mounting (N/m)"]
        rows = [
            [k + 1, " - ".join(p["between"]), p["coefficient_n_s_per_m"],
             p["stiffness_n_per_m"] if p["stiffness_n_per_m"] is not None else "rigid"]
            for k, p in enumerate(parts)
        ]
    else:
        headers = ["shunt", "pair", "strut", "network", "mode", "R (ohm)", "L (H)"]
        rows = [
            [k + 1, p["pair"], p["actuator"], p["kind"], p["mode"], p["resistance_ohm"],
             p.get("inductance_h")]
            for k, p in enumerate(parts)
        ]
    return table(headers, rows)


def _print_law_facts(info: dict, out: TextIO) -> None:
    model = info.get("design_model")
    if isinstance(model, dict) and "modes" in model:
        listed = ", ".join(str(m) for m in model["modes"])
        order = info.get("controller_order")
        full = info.get("full_order")
        reduced = f" (reduced from {full})" if full and order and full != order else ""
        added = model.get("added_for_spillover") or []
        neighbours = [m for m in model.get("neighbours", []) if m not in added]
        spill = f"; added for spillover {', '.join(str(m) for m in added)}" if added else ""
        out.write(
            f"\nLQG design model: modes {listed} (targets "
            f"{', '.join(str(m) for m in model.get('targets', [])) or '-'}; neighbours "
            f"{', '.join(str(m) for m in neighbours) or '-'}{spill}); "
            f"controller order {order}{reduced}\n"
        )
        correction = info.get("full_plant_correction") or {}
        if correction.get("attempt_used"):
            out.write(
                f"LQG attempt used: {correction['attempt_used']} of {correction['attempts']} "
                f"({correction['attempt_reason']})\n"
            )
        estimator = info.get("estimator") or {}
        if estimator.get("estimator_damping"):
            regulator = (info.get("regulator") or {}).get("regulator_damping")
            regulator = regulator or [None] * len(model["modes"])
            rows = [
                [m, r, e]
                for m, r, e in zip(
                    model["modes"], regulator, estimator["estimator_damping"], strict=False
                )
            ]
            out.write(table(["mode", "regulator damping", "estimator damping"], rows) + "\n")
            out.write(
                "(on the design model the closed-loop poles are the regulator's and the "
                "estimator's (separation principle): each mode keeps the less damped of the two)\n"
            )
    if "achievable" in info:
        out.write(
            f"\nIFF leak {info['leak_hz']:.4g} Hz; achievable damping per target mode "
            "(Preumont, equal gains):\n"
        )
        rows = [
            [a["mode"], a["zero_hz"], a["max_damping"], a["optimal_gain"], a["design_damping"]]
            for a in info["achievable"]
        ]
        out.write(
            table(["mode", "zero (Hz)", "max damping", "at gain (rad/s)", "design"], rows) + "\n"
        )
    if "filters" in info:
        out.write(
            f"\nPPF rule: {info['ppf_rule']}; rule damping {info['rule_damping']:.4g}; DC loop "
            f"gain {info['dc_loop_gain']:.4g} (must be < 1)\n"
        )
        rows = [
            [f["pair"], f["mode"], f["freq_hz"], f["damping"], f["gain"], f.get("gain_unit", "")]
            for f in info["filters"]
        ]
        headers = ["pair", "mode", "filter (Hz)", "filter damping", "gain k", "unit"]
        out.write(table(headers, rows) + "\n")
    if info.get("roll_off_hz"):
        out.write(f"\nroll-off corner {info['roll_off_hz']:.4g} Hz ({info['roll_off_rule']})\n")
    _print_margins(info, out)


def _print_margins(info: dict, out: TextIO) -> None:
    """Per-loop margins, the all-loop disk margin, and what limits the gains."""
    margins = info.get("margins")
    if isinstance(margins, list) and margins and "pair" in margins[0]:
        out.write(
            "\nmargins (each loop broken at the plant input, the others closed; exact delay):\n"
        )
        rows = [
            [
                m["pair"],
                _num(m["gain_margin_db"]) if m["gain_margin_db"] is not None else "inf",
                _num(m["phase_margin_deg"]) if m["phase_margin_deg"] is not None else "inf",
                _num(m["delay_margin_s"]) if m["delay_margin_s"] is not None else "inf",
                _num(m["crossover_hz"]),
            ]
            for m in margins
        ]
        headers = ["loop", "gain margin (dB)", "phase margin (deg)", "delay margin (s)",
                   "crossover (Hz)"]
        out.write(table(headers, rows) + "\n")
        disk = info.get("disk_margin") or {}
        if disk.get("gain_margin_db") is not None:
            out.write(
                f"all-loop disk margin: ±{disk['gain_margin_db']:.3g} dB, "
                f"±{disk['phase_margin_deg']:.3g}° on every loop at once "
                f"(at {disk['frequency_hz']:.4g} Hz)\n"
            )
        need = info.get("margin_requirements") or {}
        stated = [
            f"{label} {need[key]:g}{unit}"
            for key, label, unit in (
                ("min_gain_margin_db", "gain margin", " dB"),
                ("min_phase_margin_deg", "phase margin", "°"),
                ("min_disk_margin_db", "disk margin", " dB"),
            )
            if need.get(key) is not None
        ]
        out.write(f"required: {', '.join(stated) if stated else 'none stated'}\n")
    if info.get("limited_by"):
        out.write(f"gains limited by: {'; '.join(info['limited_by'])}\n")
    for c in info.get("capped_modes") or []:
        best = c["max_damping"]
        out.write(
            f"capped: mode {c['mode']} ({c['reason']}): the loops cannot raise its damping "
            f"{c['open_loop_damping']:.3g} by 10 %"
            + (f" (at most {best:.3g})" if best is not None else "")
            + "; left out of the max-min, kept above half its open-loop damping\n"
        )


#: ``--target-damping none``: tune without a target (maximize the smallest damping)
NO_TARGET = "none"


def _target(text: str):
    """``--target-damping`` value: a number, or ``none``."""
    if text.strip().lower() == NO_TARGET:
        return NO_TARGET
    try:
        float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"expected a damping ratio or 'none', got {text!r}"
        ) from None
    return number_option(OPTION_RANGES["fraction"])(text)


def _gains(text: str | None):
    if text is None:
        return None
    try:
        values = [float(part) for part in text.split(",") if part.strip()]
    except ValueError:
        raise UsageError(f"--gain: expected numbers like 50 or 50,80, got {text!r}") from None
    if not values or not all(math.isfinite(v) for v in values):
        raise UsageError(f"--gain: expected finite numbers, got {text!r}")
    return values[0] if len(values) == 1 else values


def _lqg():
    import importlib
    import importlib.util

    if importlib.util.find_spec("dampctl.laws.lqg") is None:
        raise MissingFeatureError(
            "--law lqg needs dampctl.laws.lqg, which is not part of this installation"
        )
    return importlib.import_module("dampctl.laws.lqg")


def _num(value) -> str:
    return "-" if value is None else f"{value:.4g}"
