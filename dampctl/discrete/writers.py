"""Text of the export files: JSON (everything, full precision), CSV of sections, C header.

File names: ``controller.json``, ``sections.csv``, ``controller.h``. Floats are written with
``repr`` (shortest text that reads back to the same double), so nothing is lost.

The C header holds the coefficients and a small reference routine, ``static inline`` so it can
be included in one translation unit without a library:

* floating point (always): sections in **direct form II transposed** (two states per section),
  ``y = b0 x + w1; w1 = b1 x − a1 y + w2; w2 = b2 x − a2 y``; the arithmetic type is
  ``dampctl_real`` (``double`` unless ``DAMPCTL_REAL`` is defined, e.g. ``-DDAMPCTL_REAL=float``;
  every constant goes through ``DAMPCTL_K`` so single precision stays single precision).
  ``dampctl_<name>_command(state, y)`` returns the actuator command **u = −K(z) y** for one
  sample (the sign of negative feedback is included); a loop or branch whose gain is zero is
  not emitted;
* fixed point (with ``--fixed``): the sections scaled for the signal range
  (:mod:`dampctl.discrete.scaling`) as integer sections in **direct form I** with an ``int64_t``
  accumulator (four states per section), each coefficient with its own fractional bits, a
  rounding shift and saturation to the word (see :mod:`dampctl.discrete.fixedpoint`).
  ``dampctl_<name>_q_branch<j>`` runs one branch on an input word (the sensor value divided by
  ``DAMPCTL_<NAME>_INPUT_FULL_SCALE``, as a fraction of full scale) and returns its output word;
  the caller multiplies it by ``dampctl_<name>_output_scale<j>`` / 2^(W−1) (actuator units),
  adds the feedthrough and the branches, and negates.
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
    "c_identifiers",
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
        "frequency_tolerance": result.frequency_tolerance,
        "scaling": result.scaling,
        "convention": "input word = sensor value / input_full_scale (a fraction of full scale); "
        "coefficients stored as round(c * 2**F) with their own fractional bits (numerator "
        "num_frac_bits, a1 a1_frac_bits, a2 a2_frac_bits); direct form I, int64 accumulator, "
        "F = max of the three, acc = 2**(F-num_frac_bits)*(b0 x0 + b1 x1 + b2 x2) "
        "- 2**(F-a1_frac_bits)*a1 y1 - 2**(F-a2_frac_bits)*a2 y2, "
        "y = saturate((acc + 2**(F-1)) >> F); branch command = output_scale * y / 2**(W-1); "
        "u = -(feedthrough * sensor value + sum of branch commands)",
        "loops": [_fixed_loop(r) for r in result.fixed_realisations],
        "refused": list(result.refused),
    }


def _fixed_loop(r: Realisation) -> dict:
    s = r.scaling
    return {
        "name": r.name,
        "feedthrough": r.form.feedthrough,
        "input_full_scale": s.input_full_scale,
        "input_range_any_signal": s.input_range_any_signal,
        "output_limit": s.output_limit,
        "peak_command": s.peak_command,
        "noise_rms": r.noise_rms,
        "coefficient_error_rms": r.coefficient_error_rms,
        "branches": [
            {
                "label": scaled.label,
                "output_scale": scaled.output_scale,
                "sections": [
                    {
                        "integers": list(q.integers),
                        "word_bits": q.word_bits,
                        "num_frac_bits": q.num_frac_bits,
                        "a1_frac_bits": q.a1_frac_bits,
                        "a2_frac_bits": q.a2_frac_bits,
                        "sos": np.asarray(q.sos).tolist(),
                        "pole_before": _poles(q.before),
                        "pole_after": _poles(q.after),
                        "damping_change": _num(q.damping_change),
                        "frequency_change": _num(q.frequency_change),
                        "accepted": q.accepted,
                        "peak_gain": _num(peak),
                    }
                    for q, peak in zip(secs, peaks, strict=True)
                ],
            }
            for scaled, secs, peaks in zip(s.branches, r.sections, r.peak_gains, strict=True)
        ],
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
        **({"plant_summary": dict(result.plant_summary)} if result.plant_summary else {}),
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
        "block_prewarp_hz": list(c.block_prewarp_hz),
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
    (of the loop). With fixed point the rows are the scaled sections in the order they run,
    their floats the values the integers stand for, and the columns go on with the stored
    integers, num_frac_bits, a1_frac_bits, a2_frac_bits, the branch's output_scale (actuator
    units per full-scale output word) and the loop's input_full_scale (sensor units per
    full-scale input word); cascade_gain is then output_scale / input_full_scale.

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
        header += ["b0_int", "b1_int", "b2_int", "a1_int", "a2_int"]
        header += ["num_frac_bits", "a1_frac_bits", "a2_frac_bits"]
        header += ["output_scale", "input_full_scale"]
    out.write(",".join(header) + "\n")
    reals = result.fixed_realisations if fixed else result.realisations
    for real in reals:
        for b, branch in enumerate(real.form.branches):
            for k, row in enumerate(branch.sos):
                cells = [real.name, str(b + 1), str(k + 1)]
                cells += [repr(float(v)) for v in (row[0], row[1], row[2], row[4], row[5])]
                cells += [repr(branch.gain), repr(real.form.feedthrough)]
                if fixed:
                    sec = real.sections[b][k]
                    cells += [str(v) for v in sec.integers]
                    cells += [str(sec.num_frac_bits), str(sec.a1_frac_bits)]
                    cells += [str(sec.a2_frac_bits)]
                    cells += [repr(real.scaling.branches[b].output_scale)]
                    cells += [repr(real.scaling.input_full_scale)]
                out.write(",".join(_csv_cell(c) for c in cells) + "\n")
    return out.getvalue()


def _csv_cell(text: str) -> str:
    return f'"{text}"' if any(ch in text for ch in ',"<') else text


def c_identifiers(names: list[str]) -> dict[str, str]:
    """A distinct C identifier for each name (``coil-1`` and ``coil_1`` both map to ``coil_1``;
    the second becomes ``coil_1_2``). Case counts too: the header also derives upper-case macro
    names, so two identifiers equal up to case are made distinct as well.

    Parameters
    ----------
    names : list of str
        Realisation names, distinct strings.

    Returns
    -------
    dict of str to str
    """
    out: dict[str, str] = {}
    taken: set[str] = set()
    for name in names:
        base = _ident(name)
        ident, k = base, 1
        while ident.upper() in taken:
            k += 1
            ident = f"{base}_{k}"
        taken.add(ident.upper())
        out[name] = ident
    return out


def _ident(name: str) -> str:
    ident = re.sub(r"[^0-9A-Za-z_]", "_", name)
    return ident if ident and not ident[0].isdigit() else f"_{ident}"


_C_FLOAT = """
#ifndef DAMPCTL_REAL
#define DAMPCTL_REAL double
#endif
typedef DAMPCTL_REAL dampctl_real;
/* every constant is written through DAMPCTL_K, so that with -DDAMPCTL_REAL=float the
   arithmetic stays in single precision (no double promotion) */
#define DAMPCTL_K(x) ((dampctl_real)(x))

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

/* one integer section: b stored with frac_bits - shift_b fractional bits, a1 with
   frac_bits - shift_a1, a2 with frac_bits - shift_a2; each product is brought to frac_bits
   fractional bits by the left shift before the sum */
typedef struct {{ {word} b0, b1, b2, a1, a2; int shift_b, shift_a1, shift_a2, frac_bits; }}
    dampctl_biquad_q;

/* Cascade in direct form I with an int64_t accumulator; st holds 4 states per section
   (x[n-1], x[n-2], y[n-1], y[n-2]; zero them first). The sections are scaled (L. B. Jackson,
   Bell Syst. Tech. J. 49(2), 1970) so that no section output overflows for inputs within the
   loop's input full scale; the saturation below only acts beyond it. Right shifts of negative
   values are arithmetic on every compiler this is meant for (gcc, clang, armcc). */
static inline dampctl_q dampctl_cascade_q(const dampctl_biquad_q *s, int n_sections,
                                          dampctl_q *st, dampctl_q x)
{{
    for (int i = 0; i < n_sections; ++i, st += 4) {{
        int64_t acc = ((int64_t)s[i].b0 * x + (int64_t)s[i].b1 * st[0]
                       + (int64_t)s[i].b2 * st[1]) * ((int64_t)1 << s[i].shift_b)
                    - (int64_t)s[i].a1 * st[2] * ((int64_t)1 << s[i].shift_a1)
                    - (int64_t)s[i].a2 * st[3] * ((int64_t)1 << s[i].shift_a2);
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
        " * Safety: an active loop can break the structure and piezo amplifiers run at",
        " * hazardous voltage. Verify on hardware with limited gain first, ramp the gain up,",
        " * keep hardware limits and an emergency stop, and follow the local electrical-safety",
        " * codes and the lab's procedures. */",
        "#ifndef DAMPCTL_CONTROLLER_H",
        "#define DAMPCTL_CONTROLLER_H",
        "#include <stdint.h>",
        f"#define DAMPCTL_RATE_HZ {c.rate_hz!r}",
        _C_FLOAT,
    ]
    if not result.realisations:
        lines.append("/* MIMO controller without a modal realisation: see controller.json. */")
    idents = c_identifiers([real.name for real in result.realisations])
    for real in result.realisations:
        lines += _c_float_realisation(real, idents[real.name])
    if result.fixed != "none":
        word = "int16_t" if result.fixed == "q15" else "int32_t"
        top = "32767" if result.fixed == "q15" else "2147483647"
        lines.append(_C_FIXED.format(word=word, top=top))
        for real in result.fixed_realisations:
            lines += _c_fixed_realisation(real, idents.get(real.name) or _ident(real.name))
    lines.append("#endif /* DAMPCTL_CONTROLLER_H */")
    return "\n".join(lines) + "\n"


def _k(value: float) -> str:
    return f"DAMPCTL_K({float(value)!r})"


def _live(branch) -> bool:
    """A branch that contributes: non-zero gain and a numerator somewhere."""
    return branch.gain != 0.0 and bool(np.any(np.asarray(branch.sos)[:, :3] != 0.0))


def _c_float_realisation(real: Realisation, name: str) -> list[str]:
    out = [f"/* {real.name}: {real.actuator} from {real.sensor} */"]
    live = [(j, b) for j, b in enumerate(real.form.branches) if _live(b)]
    if not live and real.form.feedthrough == 0.0:
        out.append(f"/* {real.name} is zero (gain 0): no routine is emitted for it */")
        out.append("")
        return out
    states = sum(2 * len(b.sos) for _, b in live)
    out.append(f"#define DAMPCTL_{name.upper()}_STATES {max(states, 1)}")
    for j, branch in live:
        out.append(f"static const dampctl_biquad dampctl_{name}_sos{j}[{len(branch.sos)}] = {{")
        out += [_c_row(row) for row in branch.sos]
        out.append("};")
    out.append(
        f"static inline dampctl_real dampctl_{name}_command(dampctl_real *state, dampctl_real y)"
    )
    out.append("{")
    if not live:
        out.append("    (void)state;")
    out.append(f"    dampctl_real k = {_k(real.form.feedthrough)} * y;")
    offset = 0
    for j, branch in live:
        n = len(branch.sos)
        out.append(
            f"    k += {_k(branch.gain)} * dampctl_cascade(dampctl_{name}_sos{j}, {n}, "
            f"state + {offset}, y);"
        )
        offset += 2 * n
    out += ["    return -k;", "}", ""]
    return out


def _c_fixed_realisation(real: Realisation, name: str) -> list[str]:
    scaling = real.scaling
    out = [
        f"/* {real.name}, fixed point: branch cascades on integer samples. Input word = "
        f"sensor value / DAMPCTL_{name.upper()}_INPUT_FULL_SCALE (full scale = 2^(W-1)); "
        f"branch j's command = dampctl_{name}_output_scale<j> * word / 2^(W-1) (actuator "
        f"units); u = -(feedthrough * sensor value + sum of the branch commands). */",
        f"#define DAMPCTL_{name.upper()}_INPUT_FULL_SCALE {_k(scaling.input_full_scale)}",
    ]
    for j, (branch, secs) in enumerate(zip(real.form.branches, real.sections, strict=True)):
        if not _live(branch):
            out.append(f"/* branch {j} is zero: not emitted */")
            continue
        out.append(f"#define DAMPCTL_{name.upper()}_Q{j}_STATES {4 * len(secs)}")
        out.append(
            f"static const dampctl_real dampctl_{name}_output_scale{j} = "
            f"{_k(scaling.branches[j].output_scale)};"
        )
        out.append(f"static const dampctl_biquad_q dampctl_{name}_q{j}[{len(secs)}] = {{")
        for s in secs:
            vals = ", ".join(str(v) for v in s.integers)
            f = s.frac_bits
            shifts = f"{f - s.num_frac_bits}, {f - s.a1_frac_bits}, {f - s.a2_frac_bits}, {f}"
            out.append(f"    {{{vals}, {shifts}}},")
        out.append("};")
        out.append(
            f"static inline dampctl_q dampctl_{name}_q_branch{j}(dampctl_q *state, dampctl_q x)"
        )
        out.append(f"{{ return dampctl_cascade_q(dampctl_{name}_q{j}, {len(secs)}, state, x); }}")
    out.append(
        f"static const dampctl_real dampctl_{name}_feedthrough = {_k(real.form.feedthrough)};"
    )
    out.append("")
    return out


def _c_row(row) -> str:
    b0, b1, b2, _a0, a1, a2 = (float(v) for v in row)
    return f"    {{{_k(b0)}, {_k(b1)}, {_k(b2)}, {_k(a1)}, {_k(a2)}}},"


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
