"""Designs built directly for the export tests (no tuning law involved)."""

from __future__ import annotations

import numpy as np

from dampctl.design import Branch, Design, Loop, Section


def resonance_design(freq_hz: float = 1000.0, damping: float = 0.01) -> Design:
    """One loop K(s) = ω₀² / (s² + 2ζω₀ s + ω₀²) (unit DC gain)."""
    w = 2 * np.pi * freq_hz
    branch = Branch(gain=w**2, sections=(Section((1.0,), (1.0, 2 * damping * w, w**2)),))
    return Design(
        law="ppf",
        plant_fingerprint="none",
        actuators=("f",),
        sensors=("x",),
        target_modes=(1,),
        loops=(Loop("fx", "f", "x", 1.0, branches=(branch,)),),
    )


def ppf_bank(freqs_hz, *, fingerprint="none", gain=0.5, damping=0.1, act="f", sen="x", pair="fx"):
    """A PPF bank: one negative-gain second-order branch per frequency (u = −K y)."""
    branches = []
    for f in freqs_hz:
        w = 2 * np.pi * f
        branches.append(
            Branch(
                gain=-gain * w**2,
                sections=(Section((1.0,), (1.0, 2 * damping * w, w**2)),),
                label=f"filter {f:g} Hz",
            )
        )
    return Design(
        law="ppf",
        plant_fingerprint=fingerprint,
        actuators=(act,),
        sensors=(sen,),
        target_modes=(1,),
        loops=(Loop(pair, act, sen, gain, branches=tuple(branches)),),
    )


def dvf_design(plant, gain: float, *, rolloff_hz: float = 2000.0, pair="p3") -> Design:
    """Velocity feedback with a first-order roll-off on a chain plant's collocated pair."""
    p = plant.pair(pair)
    branch = Branch(gain=gain, sections=(Section((1.0,), (1 / (2 * np.pi * rolloff_hz), 1.0)),))
    return Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=(p.actuator,),
        sensors=(p.sensor,),
        target_modes=tuple(range(1, plant.n_modes + 1)),
        loops=(Loop(pair, p.actuator, p.sensor, gain, branches=(branch,)),),
    )
