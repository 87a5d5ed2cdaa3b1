"""A known modal plant and its measured FRFs with noise, for the modal-fit and comparison tests.

Four modes, two of them 2 % apart (250 and 255 Hz); accelerometers at five sites p0..p4 and a
force ("hammer") at p0, the driving point. Invented numbers (a test scenario of our own).
"""

import numpy as np

from dampctl.model.components import Actuator, Mode, Sensor
from dampctl.model.plant import ModalPlant

FREQS = np.array([120.0, 250.0, 255.0, 610.0])
ZETAS = np.array([0.01, 0.008, 0.012, 0.015])
SHAPES = np.array([[1.0, 0.8, 0.6, 0.4, 0.2], [0.7, -0.5, 0.9, 0.3, -0.6],
                   [0.5, 0.9, -0.4, -0.8, 0.6], [0.9, -0.7, 0.2, 0.8, -1.0]])  # mode × site
MASSES = np.array([1.3, 0.8, 2.0, 0.5])  # modal masses (kg) of these shapes
SITES = [f"p{k}" for k in range(5)]


def four_mode_plant():
    """Accelerometers at five sites, a force at p0 (the driving point)."""
    modes = [Mode(f, z, modal_mass_kg=m) for f, z, m in zip(FREQS, ZETAS, MASSES, strict=True)]
    return ModalPlant(modes=modes, sites={s: SHAPES[:, k] for k, s in enumerate(SITES)},
                      actuators=[Actuator("hammer", "force", site="p0")],
                      sensors=[Sensor(s, "acceleration", site=s) for s in SITES])


def noisy_four_mode_frf(seed, freq=None):
    """FRFs of :func:`four_mode_plant` with 1 % complex noise: each value times
    1 + 0.01 (n₁ + j n₂)/√2, n normal (so 1 % RMS relative)."""
    freq = np.linspace(60.0, 800.0, 1481) if freq is None else freq
    h = four_mode_plant().frf(freq, ["hammer"], SITES)
    rng = np.random.default_rng(seed)
    noise = (rng.normal(size=h.shape) + 1j * rng.normal(size=h.shape)) / np.sqrt(2)
    return freq, h * (1 + 0.01 * noise)
