"""``dampctl plant new -o PLANT``: a commented starter plant file for those who write by hand.

One mode, one actuator/sensor pair and every section of the plant file shown once, each key
with its unit; optional keys that would change the example are left commented out. The file
loads as it is (a 1 kg, 50 Hz oscillator), so ``dampctl check`` works on it straight away.
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import TextIO

from dampctl.commands._common import print_json
from dampctl.fileio import write_files

NAME = "new"
HELP = "write a commented starter plant file (one mode, one pair, every section with units)"

#: the starter file: every section once, units on every key
STARTER = """\
# dampctl plant file: a starter to edit (written by `dampctl plant new`).
#
# SI units throughout (kg, m, s, N); frequencies in Hz. Every key is checked and a key that
# is not known is an error, so a typo never goes unnoticed. Lines starting with '#' are
# comments; the keys commented out below are optional. The README's section "The plant file"
# describes every key. Check the file after each edit with:  dampctl check <this file>
#
# As written, this is a 1 kg mass on a spring at 50 Hz with 1 % damping, a voice coil and a
# velocity sensor on the mass.

title = "starter plant"                   # a name used in reports

# ---------------------------------------------------------------------------------------------
# Modes: one [[modes]] table per mode, in order (the first table is mode 1). Each mode obeys
#   q'' + 2 damping w q' + w^2 q = (generalized force) / modal_mass_kg,  w = 2 pi freq_hz.
[[modes]]
label = "mass on spring"                  # optional: a short description
freq_hz = 50.0                            # natural frequency (Hz), > 0
damping = 0.01                            # damping ratio (fraction of critical), 0 <= damping < 1
modal_mass_kg = 1.0                       # modal mass (kg) for the shape values below;
                                          # 1 for mass-normalized shapes (the default)

# ---------------------------------------------------------------------------------------------
# Sites: the mode-shape value of every mode (one number per mode, in mode order) at a point
# along one direction, in m per unit modal coordinate. Actuators, sensors, outputs and
# disturbances are placed at sites by name.
[sites]
mass = [1.0]
frame = [0.0]                             # a point that does not move in this mode

# ---------------------------------------------------------------------------------------------
# Actuators: kind "force" (a force in N along `site`) or "strut" (an active element of
# stiffness stiffness_n_per_m (N/m) between two sites, `between = ["a", "b"]`, whose input is
# its free extension in m).
[[actuators]]
name = "coil"
kind = "force"
site = "mass"
max_force_n = 10.0                        # optional: force limit (N), checked against 3 x RMS
# bandwidth_hz = 2000.0                   # optional: first-order roll-off of actuator and
                                          # amplifier (Hz)
# cost = 250.0                            # optional: any currency, used when sizing

# ---------------------------------------------------------------------------------------------
# Sensors: kind "displacement" (m), "velocity" (m/s) or "acceleration" (m/s^2) at `site`;
# "relative_displacement" (m) or "relative_velocity" (m/s) of between[2] minus between[1];
# "force" (N) in the strut named by `actuator`.
[[sensors]]
name = "geophone"
kind = "velocity"
site = "mass"
noise_density = 1e-7                      # optional: noise in the sensor's unit per sqrt(Hz),
                                          # here (m/s)/sqrt(Hz)
# bandwidth_hz = 5000.0                   # optional: first-order roll-off of the sensor (Hz)
# cost = 100.0                            # optional: used when sizing

# ---------------------------------------------------------------------------------------------
# Pairs: candidate actuator/sensor pairs, one damping loop each.
[[pairs]]
name = "coil_geophone"
actuator = "coil"
sensor = "geophone"
# A pair with a displacement-like or force sensor may also give `static_gain`: its measured
# DC gain (sensor unit per actuator unit), which accounts for the modes left out.

# ---------------------------------------------------------------------------------------------
# Outputs: the motion the design should reduce. kind "displacement" (m), "velocity" (m/s),
# "acceleration" (m/s^2) at `site`, or "relative_displacement" / "relative_velocity" with
# `between`.
[[outputs]]
name = "mass_motion"
kind = "displacement"
site = "mass"

# ---------------------------------------------------------------------------------------------
# Disturbances: random forces on the structure, independent of each other.
[[disturbances]]
name = "floor_push"
kind = "force"
site = "mass"
psd = 1e-4                                # one-sided force PSD (N^2/Hz): a number (flat), or
                                          # rows [freq_hz, psd] interpolated log-log, e.g.
                                          # [[1.0, 1e-4], [100.0, 1e-6]]

# ---------------------------------------------------------------------------------------------
# Requirements: what the design must achieve; commands exit with code 1 when one is not met.
[requirements]
modes = [1]                               # target modes (1-based numbers)
min_damping = 0.05                        # smallest closed-loop damping ratio on the targets
sample_rate_hz = 10000.0                  # sample rate (Hz) of the real-time controller
loop_delay_s = 5e-5                       # further loop delay (s): converters, computation
min_gain_margin_db = 6.0                  # gain margin (dB) of each loop, one at a time
min_phase_margin_deg = 35.0               # phase margin (degrees) of each loop
min_disk_margin_db = 3.0                  # disk margin (dB): gain change on all loops at once
max_rms = { mass_motion = 1e-6 }          # largest closed-loop RMS per output (its SI unit)
"""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl plant new``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument(
        "-o", "--output", required=True, metavar="PLANT", help="plant file to write (TOML)"
    )
    parser.add_argument(
        "--force", action="store_true", help="replace PLANT if it exists (default: refuse)"
    )
    parser.add_argument("--json", action="store_true", help="print JSON on stdout")


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl plant new``.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options.
    out, err : file-like
        Streams for results and for messages.

    Returns
    -------
    int
        Exit code 0 (a file that cannot be written raises a DampctlError: exit 2).
    """
    target = Path(args.output)
    (path,) = write_files(target.parent, {target.name: STARTER}, replace=args.force)
    if args.json:
        print_json({"plant": str(path)}, out, "plant-new")
    else:
        out.write(f"wrote {path}: edit it, then run `dampctl check {path}`\n")
    return 0
