"""Reference plants and assertions for testing code that uses dampctl.

The plants here are textbook lumped models turned into modal plants, so their responses are
known in closed form (see the docstring of each).
"""

from __future__ import annotations

import numpy as np

from dampctl.model.components import Actuator, Pair, Sensor
from dampctl.model.plant import ModalPlant

__all__ = ["assert_plant_allclose", "chain_matrices", "chain_plant", "sdof_plant"]


def sdof_plant(mass_kg: float, stiffness_n_per_m: float, damping_n_s_per_m: float) -> ModalPlant:
    """Single-degree-of-freedom oscillator m x'' + c x' + k x = f as a modal plant.

    Parameters
    ----------
    mass_kg, stiffness_n_per_m, damping_n_s_per_m : float
        m (kg), k (N/m), c (N·s/m).

    Returns
    -------
    ModalPlant
        One mode (ω_n = √(k/m), ζ = c/(2√(km)), modal mass m, shape 1 at site ``x``), a force
        actuator ``f``, sensors ``x`` (displacement), ``v`` (velocity), ``a`` (acceleration)
        and pairs ``fv`` (force/velocity) and ``fx`` (force/displacement).
    """
    omega = np.sqrt(stiffness_n_per_m / mass_kg)
    zeta = damping_n_s_per_m / (2.0 * np.sqrt(stiffness_n_per_m * mass_kg))
    from dampctl.model.components import Mode

    return ModalPlant(
        modes=[Mode(freq_hz=omega / (2 * np.pi), damping=zeta, modal_mass_kg=mass_kg)],
        sites={"x": [1.0]},
        actuators=[Actuator(name="f", kind="force", site="x")],
        sensors=[
            Sensor(name="x", kind="displacement", site="x"),
            Sensor(name="v", kind="velocity", site="x"),
            Sensor(name="a", kind="acceleration", site="x"),
        ],
        pairs=[
            Pair(name="fv", actuator="f", sensor="v"),
            Pair(name="fx", actuator="f", sensor="x"),
        ],
        title="single-degree-of-freedom oscillator",
    )


def chain_matrices(masses_kg, stiffnesses_n_per_m) -> tuple[np.ndarray, np.ndarray]:
    """M and K of a grounded chain ground–k₁–m₁–k₂–m₂–…

    Parameters
    ----------
    masses_kg : sequence of float
        Masses m_1..m_n (kg).
    stiffnesses_n_per_m : sequence of float
        Springs k_1..k_n (N/m); k_1 joins ground and m_1, k_j joins m_{j-1} and m_j.

    Returns
    -------
    M, K : ndarray, shape (n, n)
    """
    m = np.asarray(masses_kg, dtype=float)
    k = np.asarray(stiffnesses_n_per_m, dtype=float)
    n = m.size
    K = np.zeros((n, n))
    for j in range(n):
        K[j, j] += k[j]
        if j > 0:
            K[j - 1, j - 1] += k[j]
            K[j - 1, j] -= k[j]
            K[j, j - 1] -= k[j]
    return np.diag(m), K


def chain_plant(masses_kg, stiffnesses_n_per_m, *, damping: float | np.ndarray = 0.0) -> ModalPlant:
    """A grounded mass-spring chain (see :func:`chain_matrices`) as a modal plant.

    Parameters
    ----------
    masses_kg, stiffnesses_n_per_m : sequence of float
        Masses (kg) and springs (N/m).
    damping : float or ndarray, optional
        Modal damping ratio for all modes, or a proportional damping matrix (N·s/m).

    Returns
    -------
    ModalPlant
        Sites ``m1..mn``; at every mass a force actuator ``f<j>``, displacement ``x<j>``,
        velocity ``v<j>`` and acceleration ``a<j>`` sensors, and collocated pairs
        ``p<j>`` (force/velocity) and ``q<j>`` (force/displacement).
    """
    M, K = chain_matrices(masses_kg, stiffnesses_n_per_m)
    n = M.shape[0]
    dofs = [f"m{j + 1}" for j in range(n)]
    actuators = [Actuator(name=f"f{j + 1}", kind="force", site=d) for j, d in enumerate(dofs)]
    sensors = []
    pairs = []
    for j, d in enumerate(dofs):
        sensors += [
            Sensor(name=f"x{j + 1}", kind="displacement", site=d),
            Sensor(name=f"v{j + 1}", kind="velocity", site=d),
            Sensor(name=f"a{j + 1}", kind="acceleration", site=d),
        ]
        pairs += [
            Pair(name=f"p{j + 1}", actuator=f"f{j + 1}", sensor=f"v{j + 1}"),
            Pair(name=f"q{j + 1}", actuator=f"f{j + 1}", sensor=f"x{j + 1}"),
        ]
    return ModalPlant.from_lumped(
        M,
        K,
        dofs,
        damping=damping,
        actuators=actuators,
        sensors=sensors,
        pairs=pairs,
        title=f"{n}-mass chain",
    )


def assert_plant_allclose(actual: ModalPlant, desired: ModalPlant, *, rtol: float = 1e-9) -> None:
    """Assert two plants have the same modes and the same responses at every sensor/actuator.

    Mode shapes are compared through the frequency response (so a sign flip of a mode shape,
    which changes nothing physical, passes).

    Parameters
    ----------
    actual, desired : ModalPlant
        The plants.
    rtol : float, optional
        Relative tolerance.
    """
    np.testing.assert_allclose(actual.freqs_hz, desired.freqs_hz, rtol=rtol)
    np.testing.assert_allclose(actual.dampings, desired.dampings, rtol=rtol, atol=1e-15)
    ins = [a.name for a in desired.actuators]
    outs = [s.name for s in desired.sensors]
    if not ins or not outs:
        return
    freq = np.concatenate([desired.freqs_hz * (1 + 1e-3), desired.freqs_hz * 0.7])
    a, d = actual.frf(freq, ins, outs), desired.frf(freq, ins, outs)
    np.testing.assert_allclose(a, d, rtol=rtol, atol=rtol * np.max(np.abs(d)))
