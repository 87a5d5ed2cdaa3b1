"""The JSON form of an :class:`~dampctl.analysis.assessment.Assessment`, and its plain lines.

Non-finite numbers become None (JSON null): an infinite gain margin means no phase crossover,
an infinite delay margin means |L| never reaches 1.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from dampctl.analysis.modetable import REAL_POLE_DAMPING, other_poles_heading
from dampctl.analysis.vc import third_octave_centres_hz

__all__ = ["assessment_dict", "robustness_lines"]


def _num(value) -> Any:
    if value is None:
        return None
    if isinstance(value, bool | np.bool_):
        return bool(value)
    value = float(value)
    return value if math.isfinite(value) else None


def _poles(poles) -> list[dict]:
    out = []
    for p in np.asarray(poles, dtype=complex):
        w = abs(p)
        out.append(
            {
                "freq_hz": _num(w / (2 * np.pi)),
                "damping": _num(-p.real / w if w > 0 else 1.0),
                "real": _num(p.real),
                "imag": _num(p.imag),
            }
        )
    return out


def _vc(rating) -> dict | None:
    if rating is None:
        return None
    return {
        "curve": rating.curve,
        "level_m_s": _num(rating.level_m_s),
        "worst_band_hz": _num(rating.worst_band_hz),
        "worst_rms_m_s": _num(rating.worst_rms_m_s),
    }


def _cumulative(freq, values) -> dict:
    """Cumulative RMS sampled at the one-third-octave centres inside the grid (compact)."""
    n_lo = math.ceil(10 * math.log10(freq[0]))
    n_hi = math.floor(10 * math.log10(freq[-1]))
    at = 10.0 ** (np.arange(n_lo, n_hi + 1) / 10.0)
    return {
        "freq_hz": [float(f) for f in at],
        "rms": [_num(v) for v in np.interp(at, freq, values)],
    }


def assessment_dict(a) -> dict[str, Any]:
    """JSON-ready dictionary of an assessment (see the README, "Assessing a design").

    Parameters
    ----------
    a : Assessment
        The assessment, as :func:`~dampctl.analysis.assessment.assess` returns it.

    Returns
    -------
    dict
        Plain numbers, lists and strings only; non-finite numbers as None.
    """
    r = a.robustness
    freq = a.response.freq_hz
    centres = third_octave_centres_hz()
    loops = []
    for k, (name, m) in enumerate(zip(a.pairs, a.loops, strict=True)):
        entry = {
            "pair": name,
            "actuator": m.loop,
            "gain_margin_db": _num(m.gain_margin_db),
            "gain_reduction_margin_db": _num(m.gain_reduction_margin_db),
            "phase_margin_deg": _num(m.phase_margin_deg),
            "delay_margin_s": _num(m.delay_margin_s),
            "crossover_hz": _num(m.crossover_hz),
            "crossovers_hz": [_num(f) for f in m.crossovers_hz],
            "phase_crossovers_hz": [_num(f) for f in m.phase_crossovers_hz],
        }
        if a.disk is not None:
            entry["disk_margin"] = _num(a.disk.loop_alpha[k])
            entry["disk_gain_margin_db"] = _num(a.disk.loop_gain_margin_db[k])
            entry["disk_phase_margin_deg"] = _num(a.disk.loop_phase_margin_deg[k])
        loops.append(entry)
    rms = []
    for o in a.response.outputs:
        reduction = (
            20 * math.log10(o.open_rms / o.closed_rms)
            if o.closed_rms > 0 and math.isfinite(o.open_rms) and math.isfinite(o.closed_rms)
            else None
        )
        item = {
            "output": o.output,
            "unit": o.unit,
            "open_rms": _num(o.open_rms),
            "closed_rms": _num(o.closed_rms),
            "noise_rms": _num(o.noise_rms),
            "reduction_db": _num(reduction),
            "open_rms_integral": _num(o.open_rms_integral),
            "closed_rms_integral": _num(o.closed_rms_integral),
            "method": o.method,
            "cumulative_closed": _cumulative(freq, o.cumulative_closed),
            "cumulative_open": _cumulative(freq, o.cumulative_open),
        }
        if o.vc_closed is not None:
            item["vc_open"] = _vc(o.vc_open)
            item["vc_closed"] = _vc(o.vc_closed)
            item["third_octave"] = {
                "centre_hz": [float(c) for c in centres],
                "open_rms_m_s": [_num(v) for v in o.band_rms_open],
                "closed_rms_m_s": [_num(v) for v in o.band_rms_closed],
            }
        rms.append(item)
    effort = [
        {
            "actuator": e.actuator,
            "quantity": e.quantity,
            "unit": _LOAD_UNITS.get(e.quantity, "N"),
            "rms": _num(e.rms),
            "peak_estimate": _num(e.peak_estimate),
            "peak_asd": _num(e.peak_asd),
            "peak_asd_hz": _num(e.peak_asd_hz),
            "limit": _num(e.limit),
            "within_limit": e.within_limit,
            "strut_force_rms_n": _num(e.strut_force_rms_n),
            "force_limit_n": _num(e.force_limit_n),
            "force_within_limit": e.force_within_limit,
        }
        for e in a.response.effort
    ]

    def bandwidth(b):
        if b is None:  # a passive design: no loop
            return None
        return {
            "min_stable_hz": _num(b.min_stable_hz) if b.min_stable_hz is not None else None,
            "unstable_with_ideal_hardware": bool(b.min_stable_hz == np.inf),
            "searched_down_to_hz": _num(b.searched_down_to_hz),
            "stated_hz": [_num(x) for x in b.stated_hz],
        }

    out: dict[str, Any] = {
        "plant": a.plant_title,
        "law": a.law,
        "stable": bool(a.stable),
        "max_real_part": _num(a.max_real_part),
        "delay": {
            "delay_s": a.delay_s,
            "frequency_domain": "exact exp(-j w T)",
            "poles": f"Pade cascade of {a.pade_sections} [2/2] sections",
            "pade_sections": a.pade_sections,
            "roll_off": a.roll_off,
        },
        "target_modes": list(a.target_modes),
        "modes": [
            {
                "mode": m.mode,
                "open_freq_hz": m.open_freq_hz,
                "open_damping": m.open_damping,
                "closed_freq_hz": _num(m.closed_freq_hz),
                "closed_damping": _num(m.closed_damping),
                "peak_reduction_db": _num(m.peak_reduction_db),
                "peak_reduction_by_output_db": {
                    k: _num(v) for k, v in m.peak_reduction_by_output_db.items()
                },
            }
            for m in a.modes
        ],
        "peak_reduction": {
            "inputs": list(a.curves.frf_inputs),
            "outputs": list(a.curves.frf_outputs),
        },
        "controller_poles": _poles(a.controller_poles),
        "controller_poles_note": other_poles_heading(_overdamped(a), passive=a.passive),
        "overdamped_modes": list(_overdamped(a)),
        "loops": loops,
        "phase_margin_convention": (
            "smallest phase lag that brings L(jw) to -180 deg at a gain crossover"
        ),
        "robustness": {
            "drift": {
                "drift": r.drift.drift,
                "cases": r.drift.n_cases,
                "corners": r.drift.n_corners,
                "all_corners": r.drift.all_corners,
                "unstable_cases": r.drift.unstable_cases,
                "max_real_part": _num(r.drift.max_real_part),
                "worst_damping": [
                    {"mode": m, "damping": _num(v)} for m, v in r.drift.worst_damping.items()
                ],
            },
            "extra_delay": None
            if r.delay is None
            else {
                "delay_margin_s": _num(r.delay.delay_margin_s),
                "extra_delay_s": _num(r.delay.extra_delay_s),
                "confirmed_by_poles": r.delay.confirmed,
                "pade_sections": r.delay.pade_sections,
            },
            "actuator_bandwidth": bandwidth(r.actuator_bandwidth),
            "sensor_bandwidth": bandwidth(r.sensor_bandwidth),
            "spillover": [
                {
                    "mode": s.mode,
                    "freq_hz": s.freq_hz,
                    "open_damping": s.open_damping,
                    "closed_damping": _num(s.closed_damping),
                    "lost_damping": s.lost_damping,
                    "unstable": s.unstable,
                }
                for s in r.spillover
            ],
        },
        "rms": rms,
        "effort": effort,
        "requirements": [
            {
                "name": q.name,
                "required": q.required if isinstance(q.required, bool) else _num(q.required),
                "achieved": q.achieved if isinstance(q.achieved, bool) else _num(q.achieved),
                "met": bool(q.met),
            }
            for q in a.requirements
        ],
        "all_met": bool(a.all_met),
    }
    if a.passive:
        from dampctl.model.passive import part_to_dict

        out["passive"] = True
        out["delay"] = {"delay_s": 0.0, "note": "passive: no loop, no delay, no roll-off"}
        out["parts"] = [
            {"label": label, **part_to_dict(p)}
            for label, p in zip(a.part_labels, a.parts, strict=True)
        ]
        out["notes"] = list(a.notes)
    if a.disk is not None:
        out["disk_margin"] = {
            "alpha": _num(a.disk.alpha),
            "gain_margin_db": _num(a.disk.gain_margin_db),
            "phase_margin_deg": _num(a.disk.phase_margin_deg),
            "frequency_hz": _num(a.disk.frequency_hz),
            "bound": a.disk.bound,
            "valid": bool(a.stable),
        }
    return out


#: unit of each effort quantity (actuator inputs; a passive part's load)
_LOAD_UNITS = {"force": "N", "extension": "m", "stroke": "m", "voltage": "V"}


def _overdamped(a) -> tuple[int, ...]:
    return tuple(m.mode for m in a.modes if m.closed_damping >= REAL_POLE_DAMPING)


def robustness_lines(robustness: dict[str, Any]) -> list[str]:
    """One plain line per robustness check, from the JSON form (``dampctl assess``, report).

    Parameters
    ----------
    robustness : dict
        The ``"robustness"`` entry of :func:`assessment_dict`.

    Returns
    -------
    list of str
        Frequency drift, extra delay, actuator and sensor bandwidth, and spillover (when the
        plant has modes above the design band), in that order.
    """
    drift = robustness["drift"]
    worst = ", ".join(f"mode {w['mode']} {_g(w['damping'])}" for w in drift["worst_damping"])
    delay = robustness["extra_delay"]
    lines = [
        f"drift +-{drift['drift']:.3g}: {drift['cases']} cases ({drift['corners']} corners), "
        f"{drift['unstable_cases']} unstable; worst damping {worst}",
    ]
    if delay is None:
        lines.append("extra delay, actuator and sensor roll-off: none apply (passive: no loop)")
    else:
        extra = delay["extra_delay_s"]
        lines.append(
            "extra delay to instability: "
            + ("none found" if extra is None else f"{extra * 1e3:.4g} ms")
            + f" ({'confirmed by the poles' if delay['confirmed_by_poles'] else 'from the poles'})"
        )
    for which in ("actuator", "sensor"):
        band = robustness[f"{which}_bandwidth"]
        if band is None:
            continue
        if band["unstable_with_ideal_hardware"]:
            text = "unstable even with ideal hardware"
        elif band["min_stable_hz"] is None:
            text = f"stable for any corner down to {band['searched_down_to_hz']:.3g} Hz"
        else:
            text = f"stable for corners above {band['min_stable_hz']:.4g} Hz"
        lines.append(f"{which} first-order roll-off: {text}")
    spill = robustness.get("spillover") or []
    if spill:
        bad = [s for s in spill if s["lost_damping"] or s["unstable"]]
        lines.append(
            f"spillover: {len(spill)} mode(s) above the design band, {len(bad)} losing damping"
            + "".join(
                f"; mode {s['mode']} {_g(s['open_damping'])} -> {_g(s['closed_damping'])}"
                for s in bad
            )
        )
    return lines


def _g(value) -> str:
    return "-" if value is None else f"{value:.3g}"
