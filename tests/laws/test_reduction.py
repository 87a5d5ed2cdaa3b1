"""Tests of dampctl.laws.reduction: balanced truncation, unstable poles kept, the HSV error
bound."""

import control
import numpy as np
import pytest

from dampctl.errors import UsageError
from dampctl.laws.reduction import reduce_controller


def test_reduction_keeps_unstable_controller_poles():
    A = np.diag([0.5, -1.0, -10.0, -100.0])
    B = np.ones((4, 1))
    C = np.ones((1, 4))
    red = reduce_controller((A, B, C, np.zeros((1, 1))), 2)
    assert red.unstable_states == 1
    assert np.sum(np.linalg.eigvals(red.controller[0]).real > 0) == 1
    stable = control.ss(A[1:, 1:], B[1:], C[:, 1:], 0)
    np.testing.assert_allclose(red.hankel_singular_values, control.hsvd(stable), rtol=1e-9)
    assert red.error_bound == pytest.approx(2 * sum(control.hsvd(stable)[1:]), rel=1e-9)
    with pytest.raises(UsageError, match="unstable poles"):
        reduce_controller((A, B, C, np.zeros((1, 1))), 0)


def test_stable_controller_bound_matches_hsvd_and_covers_the_error():
    # Enns 1984 / Glover 1984: ||G - G_r||_inf <= 2 * sum of discarded HSVs; HSVs from
    # python-control's hsvd, the error peak from the exact frequency response on a dense grid.
    blocks = [(2.0, 0.05), (5.0, 0.02), (11.0, 0.1)]  # (w rad/s, zeta) of three modes
    A = np.zeros((6, 6))
    for k, (w, z) in enumerate(blocks):
        A[2 * k : 2 * k + 2, 2 * k : 2 * k + 2] = [[0.0, w], [-w, -2 * z * w]]
    B = np.array([[0, 0], [1.0, 0.3], [0, 0], [0.5, -1.0], [0, 0], [0.2, 0.8]])
    C = np.array([[1.0, 0.1, 0.4, 0.0, -0.3, 0.2], [0.0, 1.0, 0.2, 0.5, 0.1, -0.6]])
    D = np.zeros((2, 2))
    red = reduce_controller((A, B, C, D), 3)
    hsv = control.hsvd(control.ss(A, B, C, D))
    np.testing.assert_allclose(red.hankel_singular_values, hsv, rtol=1e-8)
    assert red.error_bound == pytest.approx(2 * np.sum(hsv[3:]), rel=1e-9)
    w = np.geomspace(1e-3, 1e3, 20000)
    Ar, Br, Cr, Dr = red.controller
    s = 1j * w[:, None, None]
    full = C @ np.linalg.solve(s * np.eye(6) - A, np.broadcast_to(B, (w.size, 6, 2))) + D
    part = Cr @ np.linalg.solve(s * np.eye(3) - Ar, np.broadcast_to(Br, (w.size, 3, 2))) + Dr
    peak = np.max(np.linalg.norm(full - part, ord=2, axis=(1, 2)))
    assert peak <= red.error_bound * (1 + 1e-9)
