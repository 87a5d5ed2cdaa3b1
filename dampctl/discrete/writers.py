"""Text of the export files: JSON (everything, full precision), CSV of sections, C header.

File names: ``controller.json``, ``sections.csv``, ``controller.h``. Floats are written with
``repr`` (shortest text that reads back to the same double), so nothing is lost.

The C header holds the coefficients and a small reference routine, ``static inline`` so it can
be included in one translation unit without a library:

* floating point (always): sections in **direct form II transposed** (two states per section),
  ``y = b0 x + w1; w1 = b1 x − a1 y + w2; w2 = b2 x − a2 y``; the arithmetic type is
  ``dampctl_real`` (``double`` unless ``DAMPCTL_REAL`` is defined, e.g. ``-DDAMPCTL_REAL=float``).
  ``dampctl_<name>_command(state, y)`` returns the actuator command **u = −K(z) y** for one
  sample (the sign of negative feedback is included);
* fixed point (with ``--fixed``): integer sections in **direct form I** with an ``int64_t``
  accumulator (four states per section), rounding shift by the section's fractional bits and
  saturation to the word (see :mod:`dampctl.discrete.fixedpoint`). ``dampctl_<name>_q_branch<j>``
  runs one branch's cascade on integer samples and returns its integer output; the caller multiplies
  by the branch's cascade gain (``dampctl_<name>_cascade_gain<j>``, a float in controller units),
  adds the feedthrough and the branches, and negates, in its own signal scaling.
"""

from __future__ import annotations

import io
import json
import re
from collections.abc import Sequence

import numpy as np

from dampctl.discrete.export import ExportResult, Realisation

__all__ = [
    "FILE_NAMES",
    "FORMATS",
    "c_header",
    "export_files",
    "json_text",
    "payload",
    "sections_csv",
    "verification_dict",
]

FORMATS = ("json", "csv", "c")
FILE_NAMES = {"json": "controller.json", "csv": "sections.csv", "c": "controller.h"}
FORMAT_NAME = "dampctl-discrete"


def _num(value) -> float | None:
    value = float(value)
    return value if np.isfinite(value) else None


def _matrices(mats) -> dict:
    return {k: np.asarray(m, dtype=float).tolist() for k, m in zip("ABCD", mats, strict=True)}


def _form(form) -> dict:
    return {
        "feedthrough": form.feedthrough,
        "branches": [
            {"label": b.label, "cascade_gain": b.gain, "sos": np.asarray(b.sos).tolist()}
            for b in form.branches
        ],
    }


def _poles(p) -> dict:
    return {"radius": p.radius, "freq_hz": _num(p.freq_hz), "damping": p.damping}


def verification_dict(result: ExportResult) -> dict:
    """The verification part of the JSON (also printed by ``--json``).

    Parameters
    ----------
    result : ExportResult
        The export (from :func:`dampctl.discrete.export.export_design`).
    """
    v, fv = result.verification, result.fixed_verification
    modes = []
    for k, mode in enumerate(v.modes):
        row = {
            "mode": mode,
            "target": mode in result.controller.target_modes,
            "continuous_freq_hz": float(v.continuous_freq_hz[k]),
            "continuous_damping": float(v.continuous_damping[k]),
            "discrete_freq_hz": float(v.discrete_freq_hz[k]),
            "discrete_damping": float(v.discrete_damping[k]),
        }
        if fv is not None:
            row["fixed_damping"] = float(fv.discrete_damping[k])
        modes.append(row)
    return {
        "loop": "ZOH plant (all modes, roll-offs, loop_delay_s) + one sample of computation "
        "delay + exported controller; continuous: same loop without sampling",
        "modes": modes,
        "stable": v.stable,
        "max_pole_radius": v.max_pole_radius,
        "max_pole_freq_hz": v.max_pole_freq_hz,
        "continuous_stable": v.continuous_stable,
        "fixed_stable": None if fv is None else fv.stable,
        "fixed_max_pole_radius": None if fv is None else fv.max_pole_radius,
        "highest_mode_hz": v.highest_mode_hz,
        "rate_ratio": v.rate_ratio,
        "crossover_hz": v.crossover_hz,
        "phase_lost_deg": v.phase_lost_deg,
        "warnings": list(v.warnings),
    }


def _fixed_dict(result: ExportResult) -> dict | None:
    if result.fixed == "none":
        return None
    return {
        "number_format": result.fixed,
        "damping_tolerance": result.tolerance,
        "convention": "coefficient c stored as round(c * 2**frac_bits) in a word of word_bits; "
        "frac_bits = word_bits - 1 - shift; direct form I, int64 accumulator, "
        "y = saturate((acc + 2**(frac_bits-1)) >> frac_bits)",
        "loops": [
            {
                "name": r.name,
                "feedthrough": r.form.feedthrough,
                "branches": [
                    {
                        "label": branch.label,
                        "cascade_gain": branch.gain,
                        "sections": [
                            {
                                "integers": list(s.integers),
                                "word_bits": s.word_bits,
                                "frac_bits": s.frac_bits,
                                "shift": s.shift,
                                "sos": np.asarray(s.sos).tolist(),
                                "pole_before": _poles(s.before),
                                "pole_after": _poles(s.after),
                                "damping_change": _num(s.damping_change),
                                "accepted": s.accepted,
                                "peak_gain": _num(peak),
                            }
                            for s, peak in zip(secs, peaks, strict=True)
                        ],
                    }
                    for branch, secs, peaks in zip(
                        r.form.branches, r.sections, r.peak_gains, strict=True
                    )
                ],
            }
            for r in result.fixed_realisations
        ],
        "refused": list(result.refused),
    }


def payload(result: ExportResult) -> dict:
    """Everything about the export as a JSON-ready dictionary (the ``controller.json``).

    Parameters
    ----------
    result : ExportResult
        The export (from :func:`dampctl.discrete.export.export_design`).
    """
    c = result.controller
    return {
        "format": FORMAT_NAME,
        "version": 1,
        "rate_hz": c.rate_hz,
        "sample_time_s": c.sample_time_s,
        "method": c.method,
        "prewarp": c.prewarp if c.prewarp in ("auto", "none") else float(c.prewarp),
        "fixed": result.fixed,
        "law": c.law,
        "plant_fingerprint": c.plant_fingerprint,
        "actuators": list(c.actuators),
        "sensors": list(c.sensors),
        "target_modes": list(c.target_modes),
        "sign_convention": "u[k] = -K(z) y[k]; sections (b0, b1, b2, a0=1, a1, a2) in z^-1",
        "loops": [
            {
                "pair": lp.pair,
                "actuator": lp.actuator,
                "sensor": lp.sensor,
                "form": lp.form,
                "cascade_gain": lp.cascade_gain,
                "sos": np.asarray(lp.sos).tolist(),
                "parallel": _form(lp.parallel),
                "prewarp_hz": list(lp.prewarp_hz),
                "cascade_error": lp.cascade_error,
                "parallel_error": lp.parallel_error,
                "state_space": _matrices(lp.state_space),
            }
            for lp in c.loops
        ],
        "paths": [
            {"actuator": p.actuator, "sensor": p.sensor, **_form(p.parallel)} for p in c.paths
        ],
        "state_space": _matrices(c.state_space),
        "fixed_point": _fixed_dict(result),
        "verification": verification_dict(result),
        "notes": list(c.notes),
    }


def json_text(result: ExportResult) -> str:
    """Text of ``controller.json``.

    Parameters
    ----------
    result : ExportResult
        The export (from :func:`dampctl.discrete.export.export_design`).
    """
    return json.dumps(payload(result), indent=2, allow_nan=False) + "\n"


def sections_csv(result: ExportResult) -> str:
    """Text of ``sections.csv``: one row per section of what runs on the target.

    Columns: loop, branch, section (1-based), b0, b1, b2, a1, a2 (a0 = 1), cascade_gain (of the
    whole branch cascade, repeated on each of its rows, not a per-section gain), feedthrough
    (of the loop); with fixed point also the stored integers, frac_bits and shift.

    Parameters
    ----------
    result : ExportResult
        The export (from :func:`dampctl.discrete.export.export_design`).
    """
    out = io.StringIO()
    header = ["loop", "branch", "section", "b0", "b1", "b2", "a1", "a2", "cascade_gain"]
    header.append("feedthrough")
    fixed = result.fixed != "none"
    if fixed:
        header += ["b0_int", "b1_int", "b2_int", "a1_int", "a2_int", "frac_bits", "shift"]
    out.write(",".join(header) + "\n")
    reals = result.fixed_realisations if fixed else result.realisations
    floats = {r.name: r for r in result.realisations}
    for real in reals:
        base = floats[real.name]
        for b, branch in enumerate(base.form.branches):
            for k, row in enumerate(branch.sos):
                cells = [real.name, str(b + 1), str(k + 1)]
                cells += [repr(float(v)) for v in (row[0], row[1], row[2], row[4], row[5])]
                cells += [repr(branch.gain), repr(base.form.feedthrough)]
                if fixed:
                    sec = real.sections[b][k]
                    cells += [str(v) for v in sec.integers] + [str(sec.frac_bits), str(sec.shift)]
                out.write(",".join(_csv_cell(c) for c in cells) + "\n")
    return out.getvalue()


def _csv_cell(text: str) -> str:
    return f'"{text}"' if any(ch in text for ch in ',"<') else text


def _ident(name: str) -> str:
    ident = re.sub(r"[^0-9A-Za-z_]", "_", name)
    return ident if ident and not ident[0].isdigit() else f"_{ident}"


_C_FLOAT = """
#ifndef DAMPCTL_REAL
#define DAMPCTL_REAL double
#endif
typedef DAMPCTL_REAL dampctl_real;

/* one section (b0 + b1 z^-1 + b2 z^-2) / (1 + a1 z^-1 + a2 z^-2) */
typedef struct { dampctl_real b0, b1, b2, a1, a2; } dampctl_biquad;

/* Cascade in direct form II transposed; w holds 2 states per section (zero them first). */
static inline dampctl_real dampctl_cascade(const dampctl_biquad *s, int n_sections,
                                           dampctl_real *w, dampctl_real x)
{
    for (int i = 0; i < n_sections; ++i, w += 2) {
        const dampctl_real y = s[i].b0 * x + w[0];
        w[0] = s[i].b1 * x - s[i].a1 * y + w[1];
        w[1] = s[i].b2 * x - s[i].a2 * y;
        x = y;
    }
    return x;
}
"""

_C_FIXED = """
typedef {word} dampctl_q;

/* one integer section; values are integer / 2^frac_bits */
typedef struct {{ {word} b0, b1, b2, a1, a2; int frac_bits; }} dampctl_biquad_q;

/* Cascade in direct form I with an int64_t accumulator; st holds 4 states per section
   (x[n-1], x[n-2], y[n-1], y[n-2]; zero them first). Keep signal headroom: the accumulator
   of five products can overflow only with every sample near full scale. Right shifts of
   negative values are arithmetic on every compiler this is meant for (gcc, clang, armcc). */
static inline dampctl_q dampctl_cascade_q(const dampctl_biquad_q *s, int n_sections,
                                          dampctl_q *st, dampctl_q x)
{{
    for (int i = 0; i < n_sections; ++i, st += 4) {{
        int64_t acc = (int64_t)s[i].b0 * x + (int64_t)s[i].b1 * st[0]
                    + (int64_t)s[i].b2 * st[1] - (int64_t)s[i].a1 * st[2]
                    - (int64_t)s[i].a2 * st[3];
        acc = (acc + ((int64_t)1 << (s[i].frac_bits - 1))) >> s[i].frac_bits;
        if (acc > {top}) acc = {top};
        if (acc < -{top} - 1) acc = -{top} - 1;
        st[1] = st[0]; st[0] = x; st[3] = st[2]; st[2] = (dampctl_q)acc;
        x = (dampctl_q)acc;
    }}
    return x;
}}
"""


def c_header(result: ExportResult) -> str:
    """Text of ``controller.h``: coefficients and the reference routines (see module doc).

    Parameters
    ----------
    result : ExportResult
        The export (from :func:`dampctl.discrete.export.export_design`).
    """
    c = result.controller
    lines = [
        "/* Discrete controller written by dampctl export.",
        f" * sample rate {c.rate_hz!r} Hz, method {c.method}, prewarp {c.prewarp}, "
        f"fixed point {result.fixed}",
        f" * plant fingerprint {c.plant_fingerprint}",
        " * Sign: every *_command routine returns u = -K(z) y (negative feedback).",
        " * Safety: verify on hardware with limited gain first, ramp the gain up, keep",
        " * hardware limits and an emergency stop. */",
        "#ifndef DAMPCTL_CONTROLLER_H",
        "#define DAMPCTL_CONTROLLER_H",
        "#include <stdint.h>",
        f"#define DAMPCTL_RATE_HZ {c.rate_hz!r}",
        _C_FLOAT,
    ]
    if not result.realisations:
        lines.append("/* MIMO controller without a modal realisation: see controller.json. */")
    for real in result.realisations:
        lines += _c_float_realisation(real)
    if result.fixed != "none":
        word = "int16_t" if result.fixed == "q15" else "int32_t"
        top = "32767" if result.fixed == "q15" else "2147483647"
        lines.append(_C_FIXED.format(word=word, top=top))
        for real in result.fixed_realisations:
            lines += _c_fixed_realisation(real)
    lines.append("#endif /* DAMPCTL_CONTROLLER_H */")
    return "\n".join(lines) + "\n"


def _c_float_realisation(real: Realisation) -> list[str]:
    name = _ident(real.name)
    out = [f"/* {real.name}: {real.actuator} from {real.sensor} */"]
    states = sum(2 * len(b.sos) for b in real.form.branches)
    out.append(f"#define DAMPCTL_{name.upper()}_STATES {states}")
    for j, branch in enumerate(real.form.branches):
        out.append(f"static const dampctl_biquad dampctl_{name}_sos{j}[{len(branch.sos)}] = {{")
        out += [_c_row(row) for row in branch.sos]
        out.append("};")
    out.append(
        f"static inline dampctl_real dampctl_{name}_command(dampctl_real *state, dampctl_real y)"
    )
    out.append("{")
    out.append(f"    dampctl_real k = {real.form.feedthrough!r} * y;")
    offset = 0
    for j, branch in enumerate(real.form.branches):
        n = len(branch.sos)
        out.append(
            f"    k += {branch.gain!r} * dampctl_cascade(dampctl_{name}_sos{j}, {n}, "
            f"state + {offset}, y);"
        )
        offset += 2 * n
    out += ["    return -k;", "}", ""]
    return out


def _c_fixed_realisation(real: Realisation) -> list[str]:
    name = _ident(real.name)
    out = [f"/* {real.name}, fixed point: branch cascades on integer samples */"]
    for j, (branch, secs) in enumerate(zip(real.form.branches, real.sections, strict=True)):
        out.append(f"#define DAMPCTL_{name.upper()}_Q{j}_STATES {4 * len(secs)}")
        out.append(f"static const double dampctl_{name}_cascade_gain{j} = {branch.gain!r};")
        out.append(f"static const dampctl_biquad_q dampctl_{name}_q{j}[{len(secs)}] = {{")
        for s in secs:
            vals = ", ".join(str(v) for v in s.integers)
            out.append(f"    {{{vals}, {s.frac_bits}}}, /* shift {s.shift} */")
        out.append("};")
        out.append(
            f"static inline dampctl_q dampctl_{name}_q_branch{j}(dampctl_q *state, dampctl_q x)"
        )
        out.append(f"{{ return dampctl_cascade_q(dampctl_{name}_q{j}, {len(secs)}, state, x); }}")
    out.append(f"static const double dampctl_{name}_feedthrough = {real.form.feedthrough!r};")
    out.append("")
    return out


def _c_row(row) -> str:
    b0, b1, b2, _a0, a1, a2 = (float(v) for v in row)
    return f"    {{{b0!r}, {b1!r}, {b2!r}, {a1!r}, {a2!r}}},"


def export_files(result: ExportResult, formats: Sequence[str] = FORMATS) -> dict[str, str]:
    """File name → text for the requested formats.

    Parameters
    ----------
    result : ExportResult
        The export.
    formats : sequence of {"json", "csv", "c"}, optional
        Which files (default all three).

    Returns
    -------
    dict of str to str
    """
    makers = {"json": json_text, "csv": sections_csv, "c": c_header}
    return {FILE_NAMES[f]: makers[f](result) for f in formats}
