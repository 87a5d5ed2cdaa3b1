"""The loop's engines: the open loop's whole-record filters (complex modal form, real
fallback) against the step loops, numpy and compiled."""

import numpy as np

from dampctl.discrete.modalzoh import sample_modes
from dampctl.discrete.timeloop import run_loop


def _model():
    # a rigid-body mode (double integrator: real eigenvalues, the real fallback), two flexible
    # modes, an actuator lag, a lagged output and inputs switching inside the sample
    w = np.array([0.0, 2 * np.pi * 40.0, 2 * np.pi * 900.0])
    z = np.array([0.0, 0.01, 0.2])
    B = np.array([[0.5, 0.1], [1.0, -0.4], [0.3, 0.8]])
    C = np.array([[1.0, 0.2, 0.1], [0.3, 1.0, -0.5], [0.0, 0.4, 1.0]])
    T = 1 / 5000
    return sample_modes(w, z, B, C, [0, 1, 2], np.zeros((3, 2)), T,
                        breakpoints_s=[0.0, 0.4 * T], input_corners_rad_s=[2e4, None],
                        output_corners_rad_s=[None, None, 3e4])


def test_open_loop_engines_agree():
    model = _model()
    rng = np.random.default_rng(3)
    planned = rng.normal(size=(3000, 2, 2))
    limits = np.array([1.5, np.inf])
    filt = run_loop(model, planned, limits=limits, engine="numpy")
    steps = run_loop(model, planned, limits=limits, engine="compiled")
    scale = np.max(np.abs(steps.outputs), axis=0)
    np.testing.assert_allclose(filt.outputs, steps.outputs, rtol=0, atol=1e-10 * scale.max())
    np.testing.assert_allclose(filt.forces, steps.forces, rtol=0, atol=1e-12)
    np.testing.assert_allclose(filt.saturated_s, steps.saturated_s, rtol=1e-12)
    assert filt.saturated_s[0] > 0 and filt.saturated_s[1] == 0


def test_closed_loop_engines_agree():
    model = _model()
    rng = np.random.default_rng(4)
    planned = rng.normal(size=(2000, 2, 2)) * 0.1
    controller = (np.array([[0.9]]), np.array([[1.0, 0.0, 0.0]]), np.array([[0.5], [0.0]]),
                  np.array([[2.0, 0.0, 0.0], [0.0, 0.0, 1.0]]))
    kwargs = {"controller": controller, "sensors": np.array([1, 0, 2]),
              "actuators": np.array([0, 1]), "delay_samples": 1, "delay_piece": 1,
              "noise": rng.normal(size=(2000, 3)) * 1e-3, "limits": np.array([2.0, 2.0])}
    a = run_loop(model, planned, engine="numpy", **kwargs)
    b = run_loop(model, planned, engine="compiled", **kwargs)
    np.testing.assert_allclose(a.outputs, b.outputs, rtol=0,
                               atol=1e-12 * np.max(np.abs(a.outputs)))
    np.testing.assert_allclose(a.saturated_s, b.saturated_s, rtol=1e-12)
