"""The per-mode exact sampled model against dense matrix exponentials of the whole system
(scipy.linalg.expm, scipy.signal.cont2discrete)."""

import numpy as np
import pytest
import scipy.linalg
import scipy.signal

from dampctl.discrete.modalzoh import expm_batch, sample_modes
from dampctl.errors import PlantError, UsageError
from dampctl.testing import chain_plant


def _plant():
    return chain_plant([1.0, 0.5, 0.3], [5e5, 2e5, 1e5], damping=0.02)


def _step(sm, X, e, s, pieces):
    w = sm.w_vector(e, pieces)
    y = sm.Cy @ X.ravel() + sm.Dy @ w + sm.Sy @ s
    n = X.shape[1]
    X_next = sm.Pa * X + sm.Pb * X[::-1] + (sm.Gx @ w).reshape(2, n)
    s_next = sm.Fs * s + sm.Hs @ X.ravel() + sm.Gs @ w
    return y, X_next, sm.Ge @ w, s_next


def test_plain_zoh_equals_cont2discrete():
    # No lags, one piece: the ZOH equivalent of the whole modal state space (scipy).
    plant = _plant()
    ins, outs = ["f1", "f3"], ["x2", "v1", "a3"]
    b, c, orders, D = plant._matrices(ins, outs)
    T = 1 / 3000
    sm = sample_modes(plant.omegas, plant.dampings, b, c, orders, D, T)
    A, B, C, Dss = plant.statespace_matrices(ins, outs)
    Ad, Bd, Cd, Dd, _ = scipy.signal.cont2discrete((A, B, C, Dss), T, method="zoh")
    rng = np.random.default_rng(0)
    u = rng.normal(size=(200, 2))
    _, y_ref, _ = scipy.signal.dlsim((Ad, Bd, Cd, Dd, T), u)
    X, e, s = np.zeros((2, 3)), np.zeros(0), np.zeros(0)
    ys = []
    for k in range(200):
        y, X, e, s = _step(sm, X, e, s, u[k][None, :])
        ys.append(y)
    np.testing.assert_allclose(np.array(ys), y_ref, rtol=1e-10, atol=1e-10 * np.abs(y_ref).max())


def test_lags_and_pieces_equal_the_dense_exponential():
    # Actuator lag on one input, sensor lags on two outputs, inputs switching at 0.3 T and 0.7 T:
    # against the dense continuous system [lag, modes, sensor lags] with the input effect of
    # each piece from the Van Loan exponential, Γ(T − θ_r) − Γ(T − θ_{r+1}).
    plant = _plant()
    ins, outs = ["f1", "f3"], ["x2", "v1", "a3", "x3"]
    b, c, orders, D = plant._matrices(ins, outs)
    T = 1 / 2000
    theta = [0.0, 0.3 * T, 0.7 * T]
    corner_in = [2 * np.pi * 800, None]
    corner_out = [None, 2 * np.pi * 1500, 2 * np.pi * 3000, None]
    sm = sample_modes(plant.omegas, plant.dampings, b, c, orders, D, T, breakpoints_s=theta,
                      input_corners_rad_s=corner_in, output_corners_rad_s=corner_out)
    A, Bm, Cm, Dm = plant.statespace_matrices(ins, outs)
    n = A.shape[0]
    we, ws = corner_in[0], [corner_out[1], corner_out[2]]
    N = 1 + n + 2
    Ac, Bc = np.zeros((N, N)), np.zeros((N, 2))
    Ac[0, 0], Bc[0, 0] = -we, we  # force 1 = lag state; force 2 = input 2
    Ac[1:1 + n, 1:1 + n] = A
    Ac[1:1 + n, 0] = Bm[:, 0]
    Bc[1:1 + n, 1] = Bm[:, 1]
    for m, o in enumerate([1, 2]):
        Ac[1 + n + m, 1 + n + m] = -ws[m]
        Ac[1 + n + m, 1:1 + n] = ws[m] * Cm[o]
        Ac[1 + n + m, 0] += ws[m] * Dm[o, 0]
        Bc[1 + n + m, 1] += ws[m] * Dm[o, 1]

    def gamma(h):
        Z = np.zeros((N + 2, N + 2))
        Z[:N, :N], Z[:N, N:] = Ac, Bc
        return scipy.linalg.expm(Z * h)[:N, N:]

    Phi = scipy.linalg.expm(Ac * T)
    G = [gamma(T - t) for t in theta] + [np.zeros((N, 2))]
    pieces = [G[r] - G[r + 1] for r in range(3)]
    rng = np.random.default_rng(1)
    V = rng.normal(size=(60, 3, 2))
    xd = np.zeros(N)
    X, e, s = np.zeros((2, 3)), np.zeros(1), np.zeros(2)
    worst = 0.0
    for k in range(60):
        f = np.array([xd[0], V[k, 0, 1]])
        y_ref = np.array([Cm[0] @ xd[1:1 + n] + Dm[0] @ f, xd[1 + n], xd[2 + n],
                          Cm[3] @ xd[1:1 + n] + Dm[3] @ f])
        y, X, e, s = _step(sm, X, e, s, V[k])
        worst = max(worst, np.max(np.abs(y - y_ref) / (np.abs(y_ref) + 1e-300)))
        xd = Phi @ xd + sum(pieces[r] @ V[k, r] for r in range(3))
    assert worst < 1e-9


def test_refusals():
    plant = _plant()
    b, c, orders, D = plant._matrices(["f1"], ["x1"])
    with pytest.raises(PlantError, match="rigid-body mode undamped"):
        sample_modes(np.array([0.0, 1.0, 2.0]), plant.dampings, b, c, orders, D, 1e-3)
    with pytest.raises(UsageError, match="breakpoints"):
        sample_modes(plant.omegas, plant.dampings, b, c, orders, D, 1e-3, breakpoints_s=[2e-3])


def test_batched_exponential_equals_scipy():
    # Padé 13 with scaling and squaring after balancing (Higham, SIAM J. Matrix Anal. Appl.
    # 26(4), 2005) against scipy.linalg.expm one matrix at a time: random matrices of several
    # norms, and badly scaled modal blocks [[lag, mode, sensor lag, input]]
    rng = np.random.default_rng(7)
    for scale in (1e-3, 1.0, 8.0):
        A = rng.normal(size=(20, 5, 5)) * scale
        ours = expm_batch(A)
        for a, e in zip(A, ours, strict=True):
            ref = scipy.linalg.expm(a)
            assert np.max(np.abs(e - ref)) < 1e-12 * np.max(np.abs(ref))
    w, z, T = 2 * np.pi * 3000.0, 0.003, 1 / 20000
    Z = np.zeros((4, 4))
    Z[0, 1], Z[1, 0], Z[1, 1] = w, -w, -2 * z * w
    Z[1, 3] = 12.0  # 1/kg
    Z[2, 2], Z[2, 0] = -2 * np.pi * 1e4, 2 * np.pi * 1e4 * (-w * 0.8)  # acceleration, lagged
    ref = scipy.linalg.expm(Z * T)
    got = expm_batch((Z * T)[None])[0]
    np.testing.assert_allclose(got, ref, rtol=1e-11, atol=1e-14 * np.max(np.abs(ref)))


def test_rigid_body_mode_is_a_double_integrator():
    # ω = 0: states [q, q'], a force f moves q by b f T²/2 in one held sample and the
    # acceleration output reads c b f (a free mass under a constant force)
    w = np.array([0.0, 300.0])
    z = np.array([0.0, 0.02])
    B = np.array([[0.5], [2.0]])
    C = np.array([[1.0, 0.3], [1.0, 0.3], [1.0, 0.3]])
    T = 1e-3
    sm = sample_modes(w, z, B, C, [0, 1, 2], np.zeros((3, 1)), T)
    A = np.zeros((4, 4))
    A[0, 1] = 1.0
    A[2, 3], A[3, 2], A[3, 3] = w[1], -w[1], -2 * z[1] * w[1]
    Bd = np.array([[0.0], [0.5], [0.0], [2.0]])
    Cd = np.array([[1.0, 0, 0.3 / w[1], 0], [0, 1.0, 0, 0.3],
                   [0, 0, -w[1] * 0.3, -2 * z[1] * w[1] * 0.3]])
    Dd = np.array([[0.0], [0.0], [0.5 + 0.3 * 2.0]])
    Ad, Bdd, Cdd, Ddd, _ = scipy.signal.cont2discrete((A, Bd, Cd, Dd), T, method="zoh")
    u = np.sin(np.arange(50) * 0.3)[:, None]
    _, y_ref, _ = scipy.signal.dlsim((Ad, Bdd, Cdd, Ddd, T), u)
    X, e, s = np.zeros((2, 2)), np.zeros(0), np.zeros(0)
    ys = []
    for k in range(50):
        y, X, e, s = _step(sm, X, e, s, u[k][None, :])
        ys.append(y)
    np.testing.assert_allclose(np.array(ys), y_ref, rtol=1e-10, atol=1e-12 * np.abs(y_ref).max())
    assert sm.Gx[0, 0] == pytest.approx(0.5 * T**2 / 2, rel=1e-12)  # q after one held sample
