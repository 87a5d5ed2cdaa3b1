"""Bring your own controller: any linear controller as a dampctl design (``law = "custom"``).

A controller from a textbook design, an H∞ synthesis, an earlier machine or a notch added by
hand gets the same evidence as a tuned law (closed-loop modes, margins, drift, RMS, effort, the
sampled loop, fixed point, C) once it is a :class:`~dampctl.design.Design`. The convention is
dampctl's: **u = −K y** (negative feedback), sensors in, actuators out. A continuous controller
(``dt`` 0 or None) is analysed as it is and discretized at export; a discrete one (``dt`` > 0,
the sample time in s) is exported at its own rate only and analysed through its continuous
bilinear equivalent (see :mod:`dampctl.design`).

Nothing is tuned: the design says what it is given. Its target modes are the plant's required
modes (or every mode) and its target damping the plant's ``min_damping``, so ``tune`` and
``assess`` judge it against the plant file like any other design.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from dampctl.design import Design
from dampctl.errors import DesignError, UsageError
from dampctl.model.plant import ModalPlant
from dampctl.model.summary import plant_summary

__all__ = ["controller_from_file", "design_from_statespace"]


def _matrices(K) -> tuple[tuple[np.ndarray, ...], float]:
    """(A, B, C, D) and dt (0 = continuous) of a StateSpace or a 4-tuple (or 5 with dt)."""
    if hasattr(K, "A") and hasattr(K, "B") and hasattr(K, "C") and hasattr(K, "D"):
        dt = getattr(K, "dt", 0)
        mats = (K.A, K.B, K.C, K.D)
    elif isinstance(K, Sequence) and len(K) in (4, 5):
        mats = tuple(K[:4])
        dt = K[4] if len(K) == 5 else 0
    else:
        raise UsageError(
            "the controller must be a python-control StateSpace or a tuple (A, B, C, D[, dt]), "
            f"got {type(K).__name__}"
        )
    if dt is True:
        raise UsageError(
            "the controller is discrete with an unspecified sample time (dt=True): give dt in s"
        )
    try:
        dt = 0.0 if dt is None else float(dt)
    except (TypeError, ValueError):
        raise UsageError(f"dt must be a number of seconds, got {dt!r}") from None
    if not (math.isfinite(dt) and dt >= 0):
        raise UsageError(f"dt must be 0 (continuous) or a positive sample time in s, got {dt!r}")
    out = []
    for name, m in zip("ABCD", mats, strict=True):
        try:
            arr = np.array(m, dtype=float)
        except (TypeError, ValueError):
            raise UsageError(f"{name} is not a matrix of numbers") from None
        if arr.ndim == 0:
            arr = arr.reshape(1, 1)
        if arr.ndim != 2:
            raise UsageError(f"{name} must be a 2-D matrix, got {arr.ndim} dimension(s)")
        if not np.all(np.isfinite(arr)):
            raise UsageError(f"{name} has entries that are not finite")
        out.append(arr)
    return tuple(out), dt


def _check_sizes(mats, n_act: int, n_sens: int) -> tuple[np.ndarray, ...]:
    A, B, C, D = mats
    n = A.shape[0] if A.size else max(B.shape[0] if B.size else 0, C.shape[1] if C.size else 0)
    if A.size == 0:
        A = np.zeros((n, n))
    if B.size == 0:
        B = np.zeros((n, n_sens))
    if C.size == 0:
        C = np.zeros((n_act, n))
    if A.shape != (n, n):
        raise UsageError(f"A must be square, got {A.shape[0]} x {A.shape[1]}")
    checks = (
        (B.shape[0], n, f"B has {B.shape[0]} rows, expected {n} (the states of A)"),
        (B.shape[1], n_sens, f"B has {B.shape[1]} columns, expected {n_sens} sensors"),
        (C.shape[0], n_act, f"C has {C.shape[0]} rows, expected {n_act} actuators"),
        (C.shape[1], n, f"C has {C.shape[1]} columns, expected {n} (the states of A)"),
        (D.shape[0], n_act, f"D has {D.shape[0]} rows, expected {n_act} actuators"),
        (D.shape[1], n_sens, f"D has {D.shape[1]} columns, expected {n_sens} sensors"),
    )
    for got, want, message in checks:
        if got != want:
            raise UsageError(message)
    return A, B, C, D


def design_from_statespace(
    plant: ModalPlant,
    K,
    actuators: Sequence[str],
    sensors: Sequence[str],
    *,
    name: str | None = None,
) -> Design:
    """A design holding the user's controller, in the convention u = −K(s) y.

    Parameters
    ----------
    plant : ModalPlant
        The plant the controller is for (the design carries its fingerprint).
    K : control.StateSpace or tuple
        The controller: a python-control ``StateSpace`` (continuous, or discrete with ``dt``
        the sample time in s), or arrays ``(A, B, C, D)`` / ``(A, B, C, D, dt)``. Inputs are the
        sensors (sensor units), outputs the actuator commands (N, or m for a strut), and the
        loop is closed as u = −K y. A state space is always proper.
    actuators, sensors : sequence of str
        Plant actuators (K's outputs, in order) and sensors (K's inputs, in order).
    name : str, optional
        What the controller is ("H-infinity design of 2026-11", "notch at 310 Hz"), kept in
        ``info.name``.

    Returns
    -------
    Design
        ``law = "custom"``; ``controller_rate_hz`` = 1/dt for a discrete controller.

    Raises
    ------
    UsageError
        Not a state space, wrong sizes (the message names the matrix and what was expected),
        non-finite entries, unknown or repeated actuator or sensor names.
    """
    acts, sens = list(actuators), list(sensors)
    if not acts or not sens:
        raise UsageError("a custom controller needs at least one actuator and one sensor")
    for kind, names, known in (
        ("actuator", acts, [a.name for a in plant.actuators]),
        ("sensor", sens, [s.name for s in plant.sensors]),
    ):
        unknown = [n for n in names if n not in known]
        if unknown:
            raise UsageError(
                f"unknown {kind}(s) {', '.join(map(repr, unknown))}; the plant has "
                f"{', '.join(known)}"
            )
        if len(set(names)) != len(names):
            raise UsageError(f"a {kind} is listed twice: {', '.join(names)}")
    mats, dt = _matrices(K)
    A, B, C, D = _check_sizes(mats, len(acts), len(sens))
    targets = plant.requirements.modes or tuple(range(1, plant.n_modes + 1))
    info: dict[str, Any] = {
        "name": name or "",
        "states": int(A.shape[0]),
        # judged against the plant file's requirement, as every design is
        "target_damping": plant.requirements.min_damping,
    }
    try:
        return Design(
            law="custom",
            plant_fingerprint=plant.fingerprint,
            plant_summary=plant_summary(plant),
            actuators=tuple(acts),
            sensors=tuple(sens),
            target_modes=tuple(targets),
            controller=(A, B, C, D),
            plant_title=plant.title,
            info=info,
            controller_rate_hz=(1.0 / dt) if dt > 0 else None,
        )
    except DesignError as exc:
        raise UsageError(exc.message) from None


def controller_from_file(path: str | Path):
    """Read a controller file: ``.npz`` with arrays A, B, C, D (and optional dt), or JSON.

    Parameters
    ----------
    path : str or path-like
        ``.npz`` (numpy) or ``.json`` (``{"A": [[...]], "B": ..., "C": ..., "D": ...,
        "dt": 0.0001}``; ``dt`` optional, 0 or absent for a continuous controller).

    Returns
    -------
    tuple
        (A, B, C, D, dt) as :func:`design_from_statespace` takes it.

    Raises
    ------
    DesignError
        Unreadable file, missing array, or an array that is not numbers; the message names the
        file and the array.
    """
    path = Path(path)
    source = str(path)
    if path.suffix.lower() == ".npz":
        try:
            with np.load(path, allow_pickle=False) as data:
                arrays = {k: np.array(data[k]) for k in data.files}
        except (OSError, ValueError) as exc:
            raise DesignError(f"cannot read the controller file ({exc})", source=source) from None
    else:
        import json

        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except OSError as exc:
            raise DesignError(
                f"cannot read the controller file ({exc.strerror or exc})", source=source
            ) from None
        except (UnicodeDecodeError, json.JSONDecodeError, RecursionError) as exc:
            raise DesignError(f"not a JSON controller file ({exc})", source=source) from None
        if not isinstance(data, dict):
            raise DesignError("expected a JSON object with A, B, C, D", source=source)
        arrays = data
    from dampctl.values import read_float, read_rows

    out = []
    for key in "ABCD":
        if key not in arrays:
            raise DesignError("missing array", source=source, field=key)
        value = arrays[key]
        try:  # strict: a boolean or a string is not a number, rows are of one length
            if isinstance(value, list) and value and all(isinstance(r, list) for r in value):
                value = read_rows(value, key, len(value[0]), error=DesignError)
            elif isinstance(value, list):
                value = [read_float(v, f"{key}[{k + 1}]", error=DesignError)
                         for k, v in enumerate(value)]
        except DesignError as exc:
            raise DesignError(exc.message, source=source, field=exc.field) from None
        if isinstance(value, np.ndarray) and value.dtype.kind not in "iuf":
            raise DesignError(f"expected numbers, got an array of {value.dtype}", source=source,
                              field=key)
        try:
            arr = np.array(value, dtype=float)
        except (TypeError, ValueError):
            raise DesignError("not a matrix of numbers", source=source, field=key) from None
        if not np.all(np.isfinite(arr)):
            raise DesignError("must be finite", source=source, field=key)
        if arr.ndim == 1 and arr.size == 0:
            arr = arr.reshape(0, 0)
        out.append(arr)
    dt = arrays.get("dt", 0.0)
    try:
        dt = float(np.asarray(dt).item()) if not isinstance(dt, bool) else None
    except (TypeError, ValueError):
        dt = None
    if dt is None or not (math.isfinite(dt) and dt >= 0):
        raise DesignError(
            "must be 0 (continuous) or the sample time in s", source=source, field="dt"
        )
    return (*out, dt)
