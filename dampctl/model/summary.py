"""A compact summary of what a design depends on, and the differences between two of them.

A design file keeps the plant's fingerprint (:attr:`ModalPlant.fingerprint`, a hash) and, beside
it, this summary: each mode's frequency, damping and modal mass, the actuators' and sensors'
kinds, sites and roll-offs, the pairs, the loop delay and the sample rate. When a plant's
fingerprint no longer matches, the two summaries say *what* changed::

    mode 3 freq_hz 462.3 → 470.0
    actuator coil bandwidth_hz 5000 → 4000

Mode shapes (the site values) are in the fingerprint but not in the summary (they would make it
as large as the plant); a change of shapes alone reads "mode shapes or site values changed".
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

__all__ = ["plant_summary", "summary_differences"]

#: keys of an actuator or a sensor the design depends on (cost, noise and limits are not)
_HARDWARE_KEYS = ("kind", "site", "between", "actuator", "stiffness_n_per_m", "bandwidth_hz",
                  "capacitance_f", "coupling_k")


def plant_summary(plant) -> dict[str, Any]:
    """The compact, JSON-ready summary of what a design depends on.

    Parameters
    ----------
    plant : ModalPlant

    Returns
    -------
    dict
        Keys ``modes`` (list of ``{freq_hz, damping, modal_mass_kg}``), ``actuators``,
        ``sensors`` (name → the hardware keys that are set), ``pairs`` (name →
        ``{actuator, sensor}``), ``loop_delay_s`` and ``sample_rate_hz`` (None when unset).
    """
    req = plant.requirements
    return {
        "modes": [{"freq_hz": m.freq_hz, "damping": m.damping, "modal_mass_kg": m.modal_mass_kg}
                  for m in plant.modes],
        "actuators": {a.name: _hardware(a) for a in plant.actuators},
        "sensors": {s.name: _hardware(s) for s in plant.sensors},
        "pairs": {p.name: {"actuator": p.actuator, "sensor": p.sensor} for p in plant.pairs},
        "loop_delay_s": req.loop_delay_s,
        "sample_rate_hz": req.sample_rate_hz,
    }


def summary_differences(old: Mapping[str, Any], new: Mapping[str, Any]) -> list[str]:
    """What differs between two summaries, one short phrase each (old → new).

    Parameters
    ----------
    old : mapping
        The summary stored in a design file.
    new : mapping
        :func:`plant_summary` of the plant at hand.

    Returns
    -------
    list of str
        Empty when the summaries agree (then only the mode shapes can differ).
    """
    out = []
    old_modes, new_modes = list(old.get("modes", [])), list(new.get("modes", []))
    if len(old_modes) != len(new_modes):
        out.append(f"mode count {len(old_modes)} → {len(new_modes)}")
    for k, (a, b) in enumerate(zip(old_modes, new_modes, strict=False)):
        for key in ("freq_hz", "damping", "modal_mass_kg"):
            if _get(a, key) != _get(b, key):
                out.append(f"mode {k + 1} {key} {_show(_get(a, key))} → {_show(_get(b, key))}")
    for group, word in (("actuators", "actuator"), ("sensors", "sensor"), ("pairs", "pair")):
        was, now = _table(old.get(group)), _table(new.get(group))
        for name in was.keys() - now.keys():
            out.append(f"{word} {name} removed")
        for name in now.keys() - was.keys():
            out.append(f"{word} {name} added")
        for name in sorted(was.keys() & now.keys()):
            a, b = _table(was[name]), _table(now[name])
            for key in sorted(a.keys() | b.keys()):
                if a.get(key) != b.get(key):
                    out.append(f"{word} {name} {key} {_show(a.get(key))} → {_show(b.get(key))}")
    for key in ("loop_delay_s", "sample_rate_hz"):
        if old.get(key) != new.get(key):
            out.append(f"{key} {_show(old.get(key))} → {_show(new.get(key))}")
    return out


def _hardware(item) -> dict[str, Any]:
    out = {}
    for key in _HARDWARE_KEYS:
        value = getattr(item, key, None)
        if value is not None:
            out[key] = list(value) if isinstance(value, tuple) else value
    return out


def _table(value: Any) -> Mapping[str, Any]:
    return value if isinstance(value, Mapping) else {}


def _get(mode: Any, key: str) -> Any:
    return mode.get(key) if isinstance(mode, Mapping) else None


def _show(value: Any) -> str:
    if value is None:
        return "none"
    if isinstance(value, float):
        return f"{value:.6g}"
    return str(value)
