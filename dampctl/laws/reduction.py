"""Controller reduction by balanced truncation, with the Hankel-singular-value error bound.

A controller K(s) is reduced to ``order`` states by balanced truncation (python-control
``balred`` with slycot ``ab09ad``; slycot ``ab09md`` when K has poles with Re ≥ 0, which are kept
whole while the stable part is truncated: C. S. Hsu & D. Hou, "Reducing unstable linear control
systems via real Schur transformation", *Electronics Letters* 27:984–986, 1991). The error
satisfies ‖K − K_r‖∞ ≤ 2 Σ (discarded Hankel singular values of the stable part) (D. F. Enns,
"Model reduction with balanced realizations: an error bound and a frequency weighted
generalization", *Proc. 23rd IEEE CDC*, 1984; K. Glover, "All optimal Hankel-norm
approximations of linear multivariable systems and their L∞-error bounds", *Int. J. Control*
39(6):1115–1193, 1984).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dampctl.errors import MissingFeatureError, UsageError

__all__ = ["Reduction", "reduce_controller"]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


@dataclass(frozen=True)
class Reduction:
    """A controller reduced by balanced truncation.

    Attributes
    ----------
    controller : tuple of ndarray
        Reduced (A, B, C, D), same convention and units as the full controller.
    order, full_order : int
        Reduced and full state counts.
    hankel_singular_values : tuple of float
        Hankel singular values of the stable part of the full controller, decreasing.
    unstable_states : int
        Controller poles with Re ≥ 0, kept unreduced.
    error_bound : float
        2 Σ discarded Hankel singular values, a bound on ‖K − K_r‖∞ (sensor unit → actuator
        unit).
    """

    controller: Matrices
    order: int
    full_order: int
    hankel_singular_values: tuple[float, ...]
    unstable_states: int
    error_bound: float


def reduce_controller(controller: Matrices, order: int) -> Reduction:
    """Reduce a controller by balanced truncation (python-control ``balred`` with slycot).

    Parameters
    ----------
    controller : tuple of ndarray
        (A, B, C, D) of the controller.
    order : int
        States to keep, at least the number of unstable controller poles.

    Returns
    -------
    Reduction

    Raises
    ------
    UsageError
        When ``order`` is below the unstable pole count or not below the full order.
    MissingFeatureError
        When slycot is not installed.
    """
    try:
        from slycot import ab09ad, ab09md
    except ImportError:
        raise MissingFeatureError(
            "controller reduction (--order) needs slycot; install it with pip install slycot"
        ) from None
    import control

    A, B, C, D = (np.array(m, dtype=float) for m in controller)
    n, m, p = A.shape[0], B.shape[1], C.shape[0]
    n_unstable = int(np.sum(np.linalg.eigvals(A).real >= 0.0))
    if not n_unstable <= order < n:
        raise UsageError(
            f"order must be between the controller's {n_unstable} unstable poles and its full "
            f"order {n} (exclusive), got {order}",
            field="order",
        )
    reduced = control.balred(control.ss(A, B, C, D), order, method="truncate")
    if n_unstable:
        *_, n_stable, hsv = ab09md(
            "C", "B", "N", n, m, p, A.copy(), B.copy(), C.copy(), alpha=0.0, nr=order, tol=0.0
        )
    else:
        *_, hsv = ab09ad("C", "B", "N", n, m, p, A.copy(), B.copy(), C.copy(), nr=order, tol=0.0)
        n_stable = n
    hsv = np.asarray(hsv[:n_stable], dtype=float)
    bound = 2.0 * float(np.sum(hsv[order - n_unstable :]))
    mats = tuple(np.asarray(x, dtype=float) for x in (reduced.A, reduced.B, reduced.C, reduced.D))
    return Reduction(
        controller=mats,
        order=int(mats[0].shape[0]),
        full_order=n,
        hankel_singular_values=tuple(float(v) for v in hsv),
        unstable_states=n_unstable,
        error_bound=bound,
    )
