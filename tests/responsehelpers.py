"""Shared by the response tests: test points, a dense reference and a design of each law."""

import numpy as np

from dampctl.laws import dvf, iff, lqg, ppf

#: complex frequencies (rad/s) on, left of and right of the imaginary axis
POINTS = np.array([300j, 50.0 + 2000j, -20.0 + 10j, -3000.0 + 15000j, 1e5j])


def dense_response(matrices, s):
    """C (sI − A)⁻¹ B + D point by point, its derivative −C (sI − A)⁻² B, and tr((sI − A)⁻¹)."""
    A, B, C, D = matrices
    eye = np.eye(A.shape[0])
    K, dK, trace = [], [], []
    for point in s:
        X = np.linalg.solve(point * eye - A, B)
        K.append(C @ X + D)
        dK.append(-C @ np.linalg.solve(point * eye - A, X))
        trace.append(np.trace(np.linalg.inv(point * eye - A)))
    return np.array(K), np.array(dK), np.array(trace)


def close(a, b, tol=1e-10):
    scale = np.maximum(np.abs(b).max(axis=tuple(range(1, np.ndim(b)))), 1e-300)
    return np.all(np.abs(a - b).max(axis=tuple(range(1, np.ndim(b)))) <= tol * scale)


def law_design(stage, truss, law):
    """A design of each law on the example plants."""
    if law == "dvf":
        return stage, dvf.design(stage, ["vx1", "vy2"], gain=50.0)
    if law == "iff":
        return truss, iff.design(truss, ["iff_1", "iff_2"], gain=300.0)
    if law == "ppf":
        return stage, ppf.design(stage, ["dx1"], gain=0.2)
    return stage, lqg.design(stage, ["coil_x1", "coil_y1"], ["vel_x1", "vel_y1"])
