"""The modal basis of a frequency response, block by block, in numpy or as a compiled loop.

The modal sum H(jω) = Σ_i c_i (jω)^order b_i z_i(ω) + D needs, at every frequency, the
n_modes values z_i(ω) = 1/(ω_i² − ω² + 2jζ_iω_iω). :meth:`dampctl.model.plant.ModalPlant.frf`
stores them per block of frequencies as (re, im) pairs of reals, so that one real matrix
product with the real residues c_i b_i gives the response; this module fills those blocks.

Two engines compute the same numbers:

- ``"numpy"``: a handful of whole-block array passes in scratch arrays that stay in cache.
  Always available.
- ``"compiled"``: the same arithmetic as one loop compiled by numba (the optional ``fast``
  extra, ``pip install "dampctl[fast]"``), one pass and one division per value. It pays a
  one-off cost per process — importing numba (≈0.1 s) and compiling the loop (≈0.25 s the
  first time on a machine, then ≈0.15 s to load it from numba's on-disk cache) — and then
  fills the basis about four times faster, which makes ``ModalPlant.frf`` about twice as fast
  on large plants (``scripts/bench_frf.py``: 100 modes, 8 × 8, 5000 frequencies, 2.2 ms
  against 4.6 ms, seen here on two cores).

``"auto"`` takes the compiled loop when numba is installed and the basis has at least
:data:`COMPILED_MIN_VALUES` values (there the numpy passes take about 2 ms, so the one-off
cost is repaid within a few hundred calls), otherwise numpy; the small plants of a typical
command-line run never import numba. The two engines agree to a few units in the last place
(the compiled loop multiplies by one reciprocal where numpy divides twice).

Functions
---------
resolve_engine   -- the engine a call will use ("numpy" or "compiled")
block_frequencies -- frequencies per block for an engine
BasisFiller      -- fills blocks of the basis for one call
modal_basis      -- the whole basis as a complex array (for checks and for users)
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from typing import Literal

import numpy as np

from dampctl.errors import MissingFeatureError, UsageError

__all__ = [
    "COMPILED_MIN_VALUES",
    "ENGINES",
    "BasisFiller",
    "Engine",
    "block_frequencies",
    "compiled_available",
    "modal_basis",
    "resolve_engine",
]

Engine = Literal["auto", "numpy", "compiled"]
ENGINES: tuple[str, ...] = ("auto", "numpy", "compiled")
COMPILED_MIN_VALUES = 250_000  # modes × frequencies from which "auto" takes the compiled loop

_NUMPY_BLOCK = 512  # frequencies per numpy block: 6 scratch rows of 4 kB per mode stay in cache
_COMPILED_VALUES = 2_000_000  # basis values per compiled block (32 MB of scratch at most)


def compiled_available() -> bool:
    """Whether the compiled engine can run (numba is installed).

    Returns
    -------
    bool
        True when ``import numba`` succeeds.
    """
    return _compiled_loop() is not None


def resolve_engine(engine: str, n_modes: int, n_freq: int) -> str:
    """The engine a call will use.

    Parameters
    ----------
    engine : {"auto", "numpy", "compiled"}
        What the caller asked for.
    n_modes : int
        Number of modes.
    n_freq : int
        Number of frequencies.

    Returns
    -------
    str
        ``"numpy"`` or ``"compiled"``.

    Raises
    ------
    UsageError
        For an engine name not in :data:`ENGINES`.
    MissingFeatureError
        For ``"compiled"`` when numba is not installed.
    """
    if engine not in ENGINES:
        raise UsageError(
            f"unknown engine {engine!r} (expected one of: {', '.join(ENGINES)})", field="engine"
        )
    if engine == "numpy":
        return "numpy"
    if engine == "compiled":
        if not compiled_available():
            raise MissingFeatureError(
                "the compiled engine needs numba: install it with pip install 'dampctl[fast]' "
                "(or use engine='numpy')",
                field="engine",
            )
        return "compiled"
    big = n_modes * n_freq >= COMPILED_MIN_VALUES
    return "compiled" if big and compiled_available() else "numpy"


def block_frequencies(engine: str, n_modes: int, n_freq: int) -> int:
    """Frequencies per block for an engine.

    Parameters
    ----------
    engine : {"numpy", "compiled"}
        A resolved engine (see :func:`resolve_engine`).
    n_modes : int
        Number of modes.
    n_freq : int
        Number of frequencies.

    Returns
    -------
    int
        At least 1 and at most ``max(n_freq, 1)``. The numpy passes work in blocks small
        enough to stay in cache; the compiled loop makes one pass, so its blocks only bound the
        scratch memory.
    """
    size = _NUMPY_BLOCK if engine == "numpy" else max(_NUMPY_BLOCK, _COMPILED_VALUES // n_modes)
    return max(1, min(size, n_freq))


class BasisFiller:
    """Fills blocks of the modal basis for one call.

    Parameters
    ----------
    omegas : ndarray, shape (n_modes,)
        Natural frequencies ω_i (rad/s).
    dampings : ndarray, shape (n_modes,)
        Damping ratios ζ_i.
    engine : {"numpy", "compiled"}
        A resolved engine (see :func:`resolve_engine`).
    block : int
        Largest number of frequencies :meth:`fill` is given at once.

    Notes
    -----
    A workspace, not a value: it owns scratch arrays reused block after block, so one filler
    serves one call in one thread.
    """

    def __init__(self, omegas: np.ndarray, dampings: np.ndarray, engine: str, block: int):
        omegas = np.asarray(omegas, dtype=float)
        dampings = np.asarray(dampings, dtype=float)
        n = omegas.size
        self._w2 = omegas * omegas
        self._minus_two_zw = -2.0 * dampings * omegas
        self._loop = _compiled_loop() if engine == "compiled" else None
        if engine == "compiled" and self._loop is None:
            raise MissingFeatureError("the compiled engine needs numba", field="engine")
        if self._loop is None:
            # ω_i² − ω² and −2ζ_iω_iω as products with exact factors (±1, 0): a k = 2 matrix
            # product rounds each entry once, as the subtraction and multiplication would, and
            # runs several times faster than numpy's broadcast loops over an (n, m) block
            self._left_re = np.column_stack([self._w2, -np.ones(n)])
            self._left_im = np.column_stack([self._minus_two_zw, np.zeros(n)])
            self._re, self._im, self._mag2, self._square = (np.empty((n, block)) for _ in range(4))

    def fill(self, w: np.ndarray, out: np.ndarray) -> None:
        """Write the basis at the frequencies ``w`` into ``out``.

        Parameters
        ----------
        w : ndarray, shape (m,)
            Frequencies ω (rad/s), m at most the filler's block.
        out : ndarray of float, shape (n_modes, 2 m)
            C-contiguous rows; receives Re z_i(ω_k) at ``out[i, 2k]`` and Im z_i(ω_k) at
            ``out[i, 2k + 1]`` (so ``out.view(complex)`` is the complex basis).
        """
        if self._loop is not None:
            self._loop(self._w2, self._minus_two_zw, w, out)
            return
        m = w.size
        r, i, g, s = self._re[:, :m], self._im[:, :m], self._mag2[:, :m], self._square[:, :m]
        np.matmul(self._left_re, np.stack([np.ones(m), w * w]), out=r)
        np.matmul(self._left_im, np.stack([w, np.zeros(m)]), out=i)
        np.multiply(r, r, out=g)
        g += np.multiply(i, i, out=s)
        z = out.view(complex)
        np.divide(r, g, out=z.real)
        np.divide(i, g, out=z.imag)


def modal_basis(
    omega: np.ndarray, omegas: np.ndarray, dampings: np.ndarray, *, engine: Engine = "auto"
) -> np.ndarray:
    """The modal basis z_i(ω) = 1/(ω_i² − ω² + 2jζ_iω_iω) at every frequency.

    Parameters
    ----------
    omega : array_like, shape (n_freq,)
        Frequencies ω (rad/s).
    omegas : array_like, shape (n_modes,)
        Natural frequencies ω_i (rad/s).
    dampings : array_like, shape (n_modes,)
        Damping ratios ζ_i.
    engine : {"auto", "numpy", "compiled"}, optional
        Which engine computes it (see the module notes).

    Returns
    -------
    ndarray of complex, shape (n_modes, n_freq)
        z_i(ω_k) in s²/rad² (modal displacement per unit modal force per unit modal mass).
    """
    omega = np.asarray(omega, dtype=float).ravel()
    omegas = np.asarray(omegas, dtype=float).ravel()
    kind = resolve_engine(engine, omegas.size, omega.size)
    size = block_frequencies(kind, omegas.size, omega.size)
    filler = BasisFiller(omegas, dampings, kind, size)
    basis = np.empty((omegas.size, omega.size), dtype=complex)
    scratch = np.empty((omegas.size, 2 * size))
    for lo in range(0, omega.size, size):
        hi = min(lo + size, omega.size)
        block = scratch[:, : 2 * (hi - lo)]
        filler.fill(omega[lo:hi], block)
        basis[:, lo:hi] = block.view(complex)
    return basis


def _basis_loop(w2: np.ndarray, minus_two_zw: np.ndarray, w: np.ndarray, out: np.ndarray):
    """The compiled engine's loop (plain Python until numba compiles it)."""
    for i in range(w2.shape[0]):
        a, c = w2[i], minus_two_zw[i]
        for k in range(w.shape[0]):
            re = a - w[k] * w[k]
            im = c * w[k]
            q = 1.0 / (re * re + im * im)
            out[i, 2 * k] = re * q
            out[i, 2 * k + 1] = im * q


@functools.cache
def _compiled_loop() -> Callable | None:
    """The loop compiled by numba (cached on disk by numba), or None without numba."""
    try:
        import numba
    except ImportError:
        return None
    # error_model="numpy": 1/0 gives inf (an undamped mode exactly at a grid frequency), as the
    # numpy engine does, instead of raising ZeroDivisionError
    return numba.njit(cache=True, nogil=True, error_model="numpy")(_basis_loop)
