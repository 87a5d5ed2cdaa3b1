"""``dampctl plant fe --mass M --stiffness K --site NAME=DOF ... -o plant.toml``: a plant from
the mass and stiffness matrices of an FE model (only the modes asked for, only the named
DOFs' shape values)."""

from __future__ import annotations

import argparse
import time
from pathlib import Path
from typing import Any, TextIO

import numpy as np

from dampctl.commands._common import add_force_option, number_option, print_json, table
from dampctl.errors import UsageError
from dampctl.fileio import check_output, write_text
from dampctl.model.components import RANGES
from dampctl.model.csvtables import read_csv_table
from dampctl.model.fe_matrices import load_fe_model, read_sites, site_dofs
from dampctl.model.fe_modes import (
    DENSE_LIMIT,
    RIGID_TOL,
    FEModes,
    modal_dampings,
    plant_of_modes,
    solve_modes,
)
from dampctl.model.plantfile import dump_plant, parse_plant

NAME = "fe"
HELP = "modes of FE mass and stiffness matrices (.mtx or .npz) at named DOFs, as a plant file"

#: damping ratio of every flexible mode when no damping option is given
DEFAULT_DAMPING = 0.01


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl plant fe``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument("--mass", required=True, metavar="M",
                        help="mass matrix (kg; kg·m² for rotations): Matrix Market .mtx or "
                             "scipy sparse .npz, one row per DOF")
    parser.add_argument("--stiffness", required=True, metavar="K",
                        help="stiffness matrix (N/m; N·m/rad for rotations), same format and "
                             "size as M")
    parser.add_argument("--site", action="append", default=[], metavar="NAME=DOF",
                        help="a site: the named DOF (a row number, from 1) whose shape values "
                             "the plant keeps (repeatable)")
    parser.add_argument("--sites", metavar="CSV",
                        help="sites from a CSV file with header name,dof (DOFs from 1)")
    count = parser.add_mutually_exclusive_group(required=True)
    count.add_argument("--modes", type=int, metavar="N",
                       help="keep the N lowest modes (rigid-body modes count)")
    count.add_argument("--max-freq-hz", type=number_option(RANGES["freq_hz"]), metavar="F",
                       help="keep every mode up to F (Hz)")
    damping = parser.add_mutually_exclusive_group()
    damping.add_argument("--damping", type=number_option(RANGES["damping"]), metavar="Z",
                         help=f"damping ratio of every mode (default {DEFAULT_DAMPING})")
    damping.add_argument("--damping-file", metavar="CSV",
                         help="damping ratio per mode from a CSV file with header mode,damping "
                              "(modes from 1; a row for every flexible mode kept)")
    damping.add_argument("--rayleigh", metavar="A,B",
                         help="Rayleigh damping C = A M + B K: ratio A/(2ω) + Bω/2 per mode "
                              "(A in 1/s, B in s)")
    parser.add_argument("--title", default="", help="plant title (default: names the matrices)")
    parser.add_argument("-o", "--output", required=True, metavar="PLANT",
                        help="plant file to write (TOML)")
    add_force_option(parser, "the plant file")
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def rayleigh_option(text: str) -> tuple[float, float]:
    """Parse ``A,B`` (Rayleigh coefficients, both >= 0, not both 0).

    Parameters
    ----------
    text : str
        The option's value.

    Returns
    -------
    tuple of float
    """
    parts = text.split(",")
    try:
        alpha, beta = (float(p) for p in parts)
    except ValueError:
        raise UsageError(f"--rayleigh: expected A,B (two numbers, e.g. 0.5,1e-5), got "
                         f"{text!r}") from None
    if not (np.isfinite(alpha) and np.isfinite(beta)) or alpha < 0 or beta < 0 or \
            alpha == beta == 0:
        raise UsageError(f"--rayleigh: A and B must be finite, >= 0 and not both 0, got {text!r}")
    return alpha, beta


def read_damping_file(path: str) -> dict[int, float]:
    """Damping ratio per mode number from a CSV ``mode,damping``.

    Parameters
    ----------
    path : str
        The CSV file.

    Returns
    -------
    dict of int to float
    """
    found_table = read_csv_table(path, ("mode", "damping"), what="mode")
    found: dict[int, float] = {}
    for k in range(len(found_table.rows)):
        mode = found_table.whole(k, "mode", 1, 10**9)
        if mode in found:
            raise found_table.error(k, "mode", f"mode {mode} is given twice")
        found[mode] = found_table.number(k, "damping", RANGES["damping"])
    return found


def _inputs(args: argparse.Namespace) -> list[str]:
    names = [args.mass, args.stiffness]
    names += [x for x in (args.sites, args.damping_file) if x]
    return names


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl plant fe``.

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
    if not args.site and not args.sites:
        raise UsageError("name at least one site: --site NAME=DOF or --sites CSV")
    if args.modes is not None and args.modes < 1:
        raise UsageError(f"--modes: expected a whole number >= 1, got {args.modes}")
    rayleigh = rayleigh_option(args.rayleigh) if args.rayleigh else None
    inputs = _inputs(args)
    check_output(args.output, inputs=inputs, replace=args.force)
    per_mode = read_damping_file(args.damping_file) if args.damping_file else None
    started = time.perf_counter()
    model = load_fe_model(args.mass, args.stiffness)
    sites = site_dofs(args.site, model.n_dofs)
    if args.sites:
        for name, row in read_sites(args.sites, model.n_dofs).items():
            if name in sites:
                raise UsageError(f"site {name!r} is given by --site and in {args.sites}")
            sites[name] = row
    if args.modes is not None and args.modes > model.n_dofs:
        raise UsageError(f"--modes: the model has {model.n_dofs} DOFs, so at most "
                         f"{model.n_dofs} modes, got {args.modes}")
    modes = solve_modes(model, n_modes=args.modes, max_freq_hz=args.max_freq_hz)
    ratio = args.damping if args.damping is not None else (
        DEFAULT_DAMPING if per_mode is None and rayleigh is None else None)
    dampings = modal_dampings(modes, ratio=ratio, per_mode=per_mode, rayleigh=rayleigh,
                              source=args.damping_file or "damping")
    title = args.title or f"FE model {Path(args.stiffness).name}"
    plant = plant_of_modes(modes, sites, dampings, title=title)
    seconds = time.perf_counter() - started
    text = plant_text(plant, modes, sites, args, model.n_dofs)
    parse_plant(text, source=args.output)  # what is written reads back
    path = write_text(args.output, text, inputs=inputs, replace=args.force)
    if args.json:
        print_json(fe_payload(plant, modes, sites, str(path), model.n_dofs, seconds), out,
                   "plant-fe")
        return 0
    _print(plant, modes, sites, path, model.n_dofs, seconds, out)
    return 0


def fe_payload(plant, modes: FEModes, sites: dict[str, int], path: str, n_dofs: int,
               seconds: float, effective: np.ndarray | None = None) -> dict[str, Any]:
    """The JSON form of ``dampctl plant fe``.

    Parameters
    ----------
    plant : ModalPlant
        The plant written.
    modes : FEModes
        The modes solved.
    sites : dict of str to int
        Site to DOF row (0-based).
    path : str
        The plant file written.
    n_dofs : int
        DOFs of the model.
    seconds : float
        Wall time of reading and solving (s).
    effective : ndarray, optional
        Effective modal mass per mode (kg), with a base direction.

    Returns
    -------
    dict
        ``plant``, ``modes`` (``mode``, ``freq_hz``, ``damping``, ``modal_mass_kg``, and
        ``effective_mass_kg`` with a base direction), ``sites`` (``name``, ``dof`` from 1),
        ``dofs``, ``seconds``, ``solver``, ``rigid_modes``.
    """
    rows = []
    for k, mode in enumerate(plant.modes):
        row = {"mode": k + 1, "freq_hz": mode.freq_hz, "damping": mode.damping,
               "modal_mass_kg": mode.modal_mass_kg}
        if effective is not None:
            row["effective_mass_kg"] = float(effective[k])
        rows.append(row)
    return {
        "plant": path,
        "modes": rows,
        "sites": [{"name": name, "dof": int(row) + 1} for name, row in sites.items()],
        "dofs": int(n_dofs),
        "seconds": float(seconds),
        "solver": modes.solver,
        "rigid_modes": int(np.count_nonzero(modes.rigid)),
    }


def _damping_words(args: argparse.Namespace) -> str:
    if args.damping_file:
        return f"damping ratios from {Path(args.damping_file).name}"
    if args.rayleigh:
        return f"Rayleigh damping C = A M + B K with A,B = {args.rayleigh}"
    ratio = args.damping if args.damping is not None else DEFAULT_DAMPING
    return f"damping ratio {ratio:g} for every flexible mode"


def plant_text(plant, modes: FEModes, sites: dict[str, int], args: argparse.Namespace,
               n_dofs: int) -> str:
    """The plant file: a comment saying where the modes come from, then the plant.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    modes : FEModes
        The modes solved.
    sites : dict of str to int
        Site to DOF row (0-based).
    args : argparse.Namespace
        The command's options.
    n_dofs : int
        DOFs of the model.

    Returns
    -------
    str
    """
    how = ("shift-invert Lanczos (scipy eigsh)" if modes.solver == "lanczos"
           else "the dense solver (scipy eigh)")
    rigid = int(np.count_nonzero(modes.rigid))
    lines = [
        f"# Modes of the FE model {Path(args.mass).name} (M), {Path(args.stiffness).name} (K), "
        f"{n_dofs} DOFs,",
        f"# by dampctl plant fe: the {modes.n_modes} lowest modes, found by {how};",
        "# shapes mass-normalized (modal mass 1 kg, shape values in m per unit modal "
        "coordinate);",
        f"# {_damping_words(args)}.",
    ]
    if rigid:
        lines.append(f"# {rigid} rigid-body modes (|ω²| < {RIGID_TOL:g} x max K_ii/M_ii) have "
                     "freq_hz = 0 and no damping.")
    listing = ", ".join(f"{name} = DOF {row + 1}" for name, row in sites.items())
    lines.append(f"# Sites (DOFs numbered from 1): {listing}.")
    return "\n".join(_wrap_comment(lines)) + "\n\n" + dump_plant(plant)


def _wrap_comment(lines: list[str], width: int = 99) -> list[str]:
    wrapped = []
    for line in lines:
        while len(line) > width:
            cut = line.rfind(" ", 0, width)
            if cut <= 2:
                break
            wrapped.append(line[:cut])
            line = "# " + line[cut + 1:]
        wrapped.append(line)
    return wrapped


def _print(plant, modes: FEModes, sites, path: Path, n_dofs: int, seconds: float,
           out: TextIO, effective: np.ndarray | None = None) -> None:
    how = "shift-invert Lanczos" if modes.solver == "lanczos" else (
        f"dense (at most {DENSE_LIMIT} DOFs, or every mode)")
    rigid = int(np.count_nonzero(modes.rigid))
    out.write(f"{n_dofs} DOFs; {modes.n_modes} modes by {how} in {seconds:.2f} s"
              + (f"; {rigid} rigid-body" if rigid else "") + "\n\n")
    headers = ["mode", "freq (Hz)", "damping", "modal mass (kg)"]
    rows = [[k + 1, m.freq_hz, m.damping, m.modal_mass_kg] for k, m in enumerate(plant.modes)]
    out.write(table(headers, rows) + "\n\n")
    out.write(f"sites: {', '.join(f'{n} (DOF {r + 1})' for n, r in sites.items())}\n")
    out.write(f"wrote {path}\n")
