"""Actuator effort under random disturbances against closed forms and scipy's Lyapunov solver."""

import numpy as np
import pytest
from scipy.linalg import solve_continuous_lyapunov
from sizingplants import white_force

from dampctl.analysis.effort import actuator_effort
from dampctl.laws import dvf
from dampctl.testing import sdof_plant


def test_effort_matches_closed_form_and_lyapunov_for_white_force():
    # SDOF under a one-sided white force PSD S: σ_v² = S/(4 m c_total) (Crandall & Mark,
    # Random Vibration in Mechanical Systems, 1963; from memory, σ_x² = S/(4kc) times ω²),
    # so DVF u = −g v has σ_u = g √(S/(4 m (c + g))); scipy's Lyapunov solver agrees.
    m, k, c, g, S = 2.0, 8e4, 8.0, 72.0, 1e-2
    base = sdof_plant(m, k, c)
    plant = type(base)(
        modes=base.modes, sites=base.sites, actuators=base.actuators, sensors=base.sensors,
        pairs=base.pairs, disturbances=[white_force(site="x", psd=S)],
    )  # fmt: skip
    design = dvf.design(plant, ["fv"], gain=g)
    (_name, rms, _limit), = actuator_effort(plant, design)
    assert rms == pytest.approx(g * np.sqrt(S / (4 * m * (c + g))), rel=5e-3)
    A, B, C, _D = plant.statespace_matrices(["f"], ["v"])
    A_cl = A - g * B @ C
    P = solve_continuous_lyapunov(A_cl, -B @ B.T * (S / 2.0))
    assert rms == pytest.approx(g * np.sqrt((C @ P @ C.T)[0, 0]), rel=5e-3)
