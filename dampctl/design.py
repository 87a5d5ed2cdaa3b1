"""The :class:`Design`: what a damping law produces, and its file form (JSON).

Sign convention, for every law: the controller maps sensor signals y to actuator commands u by
**negative feedback**, ``u = −K(s) y``. A decentralized design has one SISO loop per pair,
``u_k = −K_k(s) y_k``; a model-based (LQG) or a user's own (``custom``) design holds one MIMO
state space. Either way
:meth:`Design.statespace` gives the whole K(s) (sensors in, actuators out), which is what
assessment, sizing and export use, so they never depend on the law.

A passive design (``tmd``, ``viscous``, ``shunt``) has no controller at all: it holds passive
parts (:mod:`dampctl.model.passive`: absorbers, dampers, shunts) that act on the structure
through their own physics, with no sensor, no sampling, no delay and nothing to export; the
analysis stage adds their states to the plant's (:mod:`dampctl.analysis.passive`).

A SISO loop controller is a sum of branches, each a gain times a cascade of continuous-time
sections (polynomials in s, highest power first, degree ≤ 2):

    K_k(s) = Σ_b gain_b · Π_s num_s(s) / den_s(s)

which holds a velocity-feedback gain with its roll-off, a leaky integrator, or a bank of
positive-position filters (one branch per targeted mode) in physical units.

A ``custom`` controller may also be discrete, at its own sample rate (``controller_rate_hz``):
its matrices are then x[k+1] = A x[k] + B y[k], u[k] = −(C x[k] + D y[k]). The export uses them
as they are (at that rate only); the continuous analyses use the continuous controller whose
Tustin (bilinear) discretization at that rate is exactly this one (the inverse bilinear map of
G. F. Franklin, J. D. Powell & M. L. Workman, *Digital Control of Dynamic Systems*, 3rd ed.
1998, from memory), with the sampling delay of 1.5 samples that dampctl's analyses add.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

from dampctl.errors import DesignError
from dampctl.model.passive import (
    Absorber,
    Damper,
    PassivePart,
    Shunt,
    part_from_dict,
    part_problem,
    part_to_dict,
)
from dampctl.model.plant import ModalPlant, signal_name
from dampctl.model.ssblocks import block_diagonal, branch_matrices, inverse_bilinear, parallel
from dampctl.model.summary import plant_summary, summary_differences
from dampctl.values import Range, describe, read_float, read_int, read_rows, read_str

__all__ = [
    "Branch",
    "Design",
    "Loop",
    "Section",
    "design_from_dict",
    "load_design",
]

#: laws whose design is a set of passive parts (no loop)
PASSIVE_LAWS: tuple[str, ...] = ("tmd", "viscous", "shunt")
#: laws whose design is one MIMO controller (the others: one loop per pair)
MIMO_LAWS: tuple[str, ...] = ("lqg", "custom")
LAWS: tuple[str, ...] = ("dvf", "iff", "ppf", "lqg", "custom", *PASSIVE_LAWS)
FORMAT = "dampctl-design"
FORMAT_VERSION = 1


def _coefficients(values: Sequence[float], what: str) -> tuple[float, ...]:
    out = tuple(float(v) for v in values)
    if not 1 <= len(out) <= 3:
        raise DesignError(f"{what} must have 1 to 3 coefficients (degree <= 2), got {len(out)}")
    if not all(math.isfinite(v) for v in out):
        raise DesignError(f"{what} coefficients must be finite, got {out}")
    return out


@dataclass(frozen=True)
class Section:
    """A continuous-time section num(s)/den(s) of degree ≤ 2.

    Parameters
    ----------
    num, den : sequence of float
        Polynomial coefficients in s (highest power first), 1 to 3 each; ``den[0] != 0`` and
        deg num ≤ deg den.
    """

    num: tuple[float, ...]
    den: tuple[float, ...]

    def __post_init__(self) -> None:
        num = _coefficients(self.num, "section numerator")
        den = _coefficients(self.den, "section denominator")
        num = tuple(np.trim_zeros(np.array(num), "f")) or (0.0,)
        if den[0] == 0.0:
            raise DesignError("section denominator must have a non-zero leading coefficient")
        if len(num) > len(den):
            raise DesignError("section must be proper (deg num <= deg den)")
        object.__setattr__(self, "num", tuple(float(v) for v in num))
        object.__setattr__(self, "den", den)

    def response(self, s: np.ndarray) -> np.ndarray:
        """Value at complex frequencies.

        Parameters
        ----------
        s : array_like of complex
            Laplace variable values (rad/s), e.g. ``2j·π·f``.

        Returns
        -------
        ndarray of complex
            num(s)/den(s).
        """
        return np.polyval(self.num, s) / np.polyval(self.den, s)


@dataclass(frozen=True)
class Branch:
    """One branch of a loop controller: ``gain · Π sections``.

    Parameters
    ----------
    gain : float
        Gain in physical units (actuator unit per sensor unit, with the sections' units).
    sections : sequence of Section
        Cascade of sections; empty for a pure gain.
    label : str, optional
        What the branch is for ("mode 3 filter", "roll-off").
    """

    gain: float
    sections: tuple[Section, ...] = ()
    label: str = ""

    def __post_init__(self) -> None:
        gain = float(self.gain)
        if not math.isfinite(gain):
            raise DesignError(f"branch gain must be finite, got {gain}")
        object.__setattr__(self, "gain", gain)
        object.__setattr__(self, "sections", tuple(self.sections))

    def response(self, s: np.ndarray) -> np.ndarray:
        """Value at complex frequencies.

        Parameters
        ----------
        s : array_like of complex
            Laplace variable values (rad/s), e.g. ``2j·π·f``.

        Returns
        -------
        ndarray of complex
            gain · Π sections(s).
        """
        out = np.full(np.shape(s), self.gain, dtype=complex)
        for section in self.sections:
            out = out * section.response(s)
        return out


@dataclass(frozen=True)
class Loop:
    """One decentralized loop on a pair: ``u = −K(s) y`` with K the sum of the branches.

    Parameters
    ----------
    pair, actuator, sensor : str
        The pair and its actuator and sensor names.
    gain : float
        The law's tuning gain, in the law's own normalization (documented by each law); the
        controller itself is fully defined by ``branches``.
    branches : sequence of Branch
        The controller K(s) = Σ branches, in physical units.
    """

    pair: str
    actuator: str
    sensor: str
    gain: float
    branches: tuple[Branch, ...]

    def __post_init__(self) -> None:
        object.__setattr__(self, "gain", float(self.gain))
        object.__setattr__(self, "branches", tuple(self.branches))
        if not self.branches:
            raise DesignError(f"loop {self.pair!r} has no controller branches")

    def response(self, freq_hz: np.ndarray) -> np.ndarray:
        """K(j 2π f) of the loop.

        Parameters
        ----------
        freq_hz : array_like
            Frequencies (Hz).

        Returns
        -------
        ndarray of complex
            Sum of the branches at each frequency (actuator unit per sensor unit).
        """
        s = 2j * np.pi * np.asarray(freq_hz, dtype=float)
        return sum(branch.response(s) for branch in self.branches)

    def statespace_matrices(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Minimal-per-section state space (A, B, C, D) of K(s); one input, one output."""
        blocks = [branch_matrices(b) for b in self.branches]
        return parallel(blocks)


@dataclass(frozen=True)
class Design:
    """A damping design for one plant.

    Parameters
    ----------
    law : {"dvf", "iff", "ppf", "lqg", "custom", "tmd", "viscous", "shunt"}
        The damping law (``custom``: a controller given by the user; the last three are
        passive: ``parts``, no loops).
    plant_fingerprint : str
        :attr:`ModalPlant.fingerprint` of the plant it was designed for.
    actuators, sensors : sequence of str
        Controller outputs and inputs, in order.
    target_modes : sequence of int
        Modes (1-based) the design is meant to damp.
    loops : sequence of Loop, optional
        Decentralized loops (dvf, iff, ppf): loop k reads ``sensors[k]`` and drives
        ``actuators[k]``.
    controller : tuple of arrays (A, B, C, D), optional
        MIMO controller state space (lqg, custom): u = −(C x_c + D y), x_c' = A x_c + B y
        (x_c[k+1] = A x_c[k] + B y[k] when ``controller_rate_hz`` is given).
    pairs : sequence of str, optional
        Pair names the loops use (decentralized designs; may be given for lqg).
    plant_title : str, optional
        Title of the plant, for reports.
    info : mapping, optional
        Law-specific facts (target damping, leak frequency, achievable damping, reduction
        error bound ...), JSON-serializable.
    controller_rate_hz : float, optional
        Sample rate (Hz) of a discrete ``controller`` (custom designs only); None for a
        continuous one.
    parts : sequence of Absorber, Damper or Shunt, optional
        The passive parts of a passive design (tmd: absorbers, viscous: dampers, shunt:
        shunts); a passive design has no loops, no controller, no actuators and no sensors.
    plant_summary : mapping, optional
        :func:`~dampctl.model.summary.plant_summary` of the plant it was designed for, so that
        a mismatch can name the fields that changed. Design files written before it existed
        have none: a mismatch then says the fingerprint differs without naming fields.
    """

    law: str
    plant_fingerprint: str
    actuators: tuple[str, ...]
    sensors: tuple[str, ...]
    target_modes: tuple[int, ...]
    loops: tuple[Loop, ...] = ()
    controller: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None = None
    pairs: tuple[str, ...] = ()
    plant_title: str = ""
    info: Mapping[str, Any] = field(default_factory=dict)
    controller_rate_hz: float | None = None
    parts: tuple[PassivePart, ...] = ()
    plant_summary: Mapping[str, Any] | None = None

    def __post_init__(self) -> None:
        if self.law not in LAWS:
            raise DesignError(
                f"law must be one of {', '.join(LAWS)}, got {self.law!r}", field="law"
            )
        for name in ("actuators", "sensors", "target_modes", "loops", "pairs", "parts"):
            object.__setattr__(self, name, tuple(getattr(self, name)))
        object.__setattr__(self, "target_modes", tuple(int(m) for m in self.target_modes))
        object.__setattr__(self, "info", MappingProxyType(dict(self.info)))
        if self.law in PASSIVE_LAWS:
            self._check_passive()
            return
        if self.parts:
            raise DesignError(f"an active design ({self.law}) has no passive parts", field="parts")
        if (self.controller is None) == (not self.loops):
            raise DesignError("a design has either loops (decentralized) or a controller (MIMO)")
        if self.loops:
            if [lp.actuator for lp in self.loops] != list(self.actuators) or [
                lp.sensor for lp in self.loops
            ] != list(self.sensors):
                raise DesignError("loop k must drive actuators[k] from sensors[k]")
        if self.controller is not None:
            A, B, C, D = (np.array(m, dtype=float, copy=True) for m in self.controller)
            n = A.shape[0]
            ok = (
                A.shape == (n, n)
                and B.shape == (n, len(self.sensors))
                and C.shape == (len(self.actuators), n)
                and D.shape == (len(self.actuators), len(self.sensors))
            )
            if not ok:
                raise DesignError("controller matrices do not match the actuator/sensor counts")
            for m in (A, B, C, D):
                if not np.all(np.isfinite(m)):
                    raise DesignError("controller matrices must be finite")
                m.setflags(write=False)
            object.__setattr__(self, "controller", (A, B, C, D))
        if self.controller_rate_hz is not None:
            rate = float(self.controller_rate_hz)
            if self.law != "custom" or self.controller is None:
                raise DesignError(
                    "controller_rate_hz is for a custom design's discrete controller only",
                    field="controller_rate_hz",
                )
            if not (math.isfinite(rate) and rate > 0):
                raise DesignError(
                    f"must be a positive sample rate in Hz, got {self.controller_rate_hz!r}",
                    field="controller_rate_hz",
                )
            object.__setattr__(self, "controller_rate_hz", rate)
            A = self.controller[0]
            if A.shape[0] and np.linalg.cond(A + np.eye(A.shape[0])) > 1e12:
                raise DesignError(
                    "the discrete controller has a pole at z = -1 (the Nyquist frequency): it "
                    "has no continuous equivalent to analyse",
                    field="controller",
                )
        for name in (*self.actuators, *self.sensors):
            if not isinstance(name, str) or not name:
                raise DesignError(f"invalid signal name {name!r}")

    def _check_passive(self) -> None:
        if (
            self.loops
            or self.controller is not None
            or self.actuators
            or self.sensors
            or self.controller_rate_hz is not None
        ):
            raise DesignError(
                f"a passive design ({self.law}) has parts only: no loops, controller, actuators "
                "or sensors"
            )
        if not self.parts:
            raise DesignError(f"a passive design ({self.law}) needs at least one part",
                              field="parts")
        wanted = {"tmd": Absorber, "viscous": Damper, "shunt": Shunt}[self.law]
        for k, part in enumerate(self.parts):
            if not isinstance(part, wanted):
                raise DesignError(
                    f"a {self.law} design holds {wanted.__name__.lower()}s, got "
                    f"{type(part).__name__}",
                    field=f"parts[{k + 1}]",
                )

    @property
    def decentralized(self) -> bool:
        """True for one SISO loop per pair (dvf, iff, ppf)."""
        return bool(self.loops)

    @property
    def discrete(self) -> bool:
        """True for a custom design whose controller is given in discrete time."""
        return self.controller_rate_hz is not None

    @property
    def passive(self) -> bool:
        """True for a passive design (tmd, viscous, shunt): parts, no loop."""
        return self.law in PASSIVE_LAWS

    def _no_loop(self) -> None:
        if self.passive:
            raise DesignError(
                f"passive design ({self.law}): no loop, no controller (its parts act through "
                "their own physics; see dampctl.analysis.passive)"
            )

    def statespace_matrices(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(A, B, C, D) of the whole continuous controller, sensors in, actuators out,
        ``u = −(Cx + Dy)`` (for a discrete controller: its continuous bilinear equivalent).

        A passive design has none: it raises :class:`~dampctl.errors.DesignError`.
        """
        self._no_loop()
        if self.controller is not None:
            if self.controller_rate_hz is not None:
                return inverse_bilinear(self.controller, 1.0 / self.controller_rate_hz)
            return tuple(np.array(m) for m in self.controller)
        return block_diagonal([lp.statespace_matrices() for lp in self.loops])

    def discrete_matrices(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(A, B, C, D) of a discrete controller as given (``controller_rate_hz``).

        Raises
        ------
        DesignError
            The controller is continuous.
        """
        if self.controller_rate_hz is None:
            raise DesignError("the controller is continuous: discretize it (dampctl export)")
        return tuple(np.array(m) for m in self.controller)

    def statespace(self, *, negate: bool = False):
        """The controller as a python-control ``StateSpace``.

        Parameters
        ----------
        negate : bool, optional
            False (default): K itself, to be closed with negative feedback (u = −K y).
            True: −K, the map from sensors to actuator commands, for a positive interconnection
            (``control.interconnect``), with the signal names kept.

        Returns
        -------
        control.StateSpace
            Inputs named after the sensors, outputs after the actuators (identifiers where the
            names are, see :func:`signal_name`); discrete (``dt`` = 1/rate) for a discrete
            custom controller.
        """
        import control

        self._no_loop()
        if self.controller_rate_hz is not None:
            A, B, C, D = self.discrete_matrices()
            dt = 1.0 / self.controller_rate_hz
        else:
            A, B, C, D = self.statespace_matrices()
            dt = 0
        sign = -1.0 if negate else 1.0
        return control.ss(
            A,
            B,
            sign * C,
            sign * D,
            dt,
            inputs=[signal_name(s) for s in self.sensors],
            outputs=[signal_name(a) for a in self.actuators],
            name=signal_name(f"{self.law}_controller"),
        )

    def response(self, freq_hz: np.ndarray) -> np.ndarray:
        """Controller frequency response K(j 2π f).

        Parameters
        ----------
        freq_hz : array_like
            Frequencies (Hz).

        Returns
        -------
        ndarray of complex, shape (n_act, n_sens, n_freq)
            K from each sensor to each actuator (u = −K y).
        """
        self._no_loop()
        freq_hz = np.asarray(freq_hz, dtype=float).ravel()
        if self.loops:
            out = np.zeros((len(self.actuators), len(self.sensors), freq_hz.size), complex)
            for k, loop in enumerate(self.loops):
                out[k, k] = loop.response(freq_hz)
            return out
        A, B, C, D = self.controller
        s = 2j * np.pi * freq_hz
        if A.shape[0] == 0:
            return np.repeat(D[:, :, None].astype(complex), s.size, axis=2)
        # diagonalize once (the controller is small and its poles distinct in practice);
        # fall back to one solve per frequency when the eigenvectors are ill-conditioned
        poles, V = np.linalg.eig(A)
        if np.linalg.cond(V) < 1e8:
            Bm = np.linalg.solve(V, B)
            Cm = C @ V
            resolvent = 1.0 / (s[None, :] - poles[:, None])
            return np.einsum("ai,if,is->asf", Cm, resolvent, Bm, optimize=True) + D[:, :, None]
        eye = np.eye(A.shape[0])
        x = np.linalg.solve(s[:, None, None] * eye - A, np.broadcast_to(B, (s.size, *B.shape)))
        return np.moveaxis(C @ x + D, 0, -1)

    def check_plant(self, plant: ModalPlant, *, source: str | None = None) -> None:
        """Raise :class:`DesignError` unless the design belongs to ``plant``.

        Parameters
        ----------
        plant : ModalPlant
            The plant the design is about to be used with.
        source : str, optional
            Design file name for the message.
        """
        if self.plant_fingerprint not in (plant.fingerprint, plant.legacy_fingerprint):
            if self.plant_summary is None:
                what = ("this design file has no plant summary (written by an older dampctl), "
                        "so the changed fields cannot be named")
            else:
                diffs = summary_differences(self.plant_summary, plant_summary(plant))
                what = "; ".join(diffs[:6]) + (f"; and {len(diffs) - 6} more"
                                               if len(diffs) > 6 else "")
                what = what or "mode shapes or site values changed"
            raise DesignError(
                f"was designed for another plant (fingerprint {self.plant_fingerprint}, this "
                f"plant's is {plant.fingerprint}): {what}; tune it again",
                source=source,
                field="plant_fingerprint",
            )
        for k, mode in enumerate(self.target_modes):
            if not 1 <= mode <= plant.n_modes:
                raise DesignError(f"mode {mode} does not exist (the plant has {plant.n_modes})",
                                  source=source, field=f"target_modes[{k + 1}]")
        known = {"actuators": [a.name for a in plant.actuators],
                 "sensors": [x.name for x in plant.sensors]}
        for key, names in (("actuators", self.actuators), ("sensors", self.sensors)):
            for k, name in enumerate(names):
                if name not in known[key]:
                    raise DesignError(f"the plant has no {key[:-1]} {name!r}", source=source,
                                      field=f"{key}[{k + 1}]")
        for k, loop in enumerate(self.loops):
            if loop.pair not in [p.name for p in plant.pairs]:
                raise DesignError(f"the plant has no pair {loop.pair!r}", source=source,
                                  field=f"loops[{k + 1}].pair")
        for k, part in enumerate(self.parts):
            problem, where = part_problem(plant, part)
            if problem:
                raise DesignError(problem, source=source, field=f"parts[{k + 1}].{where}")

    # ------------------------------------------------------------------ file form
    def to_frame(self):
        """The loops (or parts) as a pandas DataFrame (needs pandas: ``pip install pandas``)."""
        from dampctl.tables import design_rows, frame

        return frame(design_rows(self))

    def _repr_html_(self) -> str:
        from dampctl.tables import design_html

        return design_html(self)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dictionary (full float precision); :func:`design_from_dict` inverts it."""
        out: dict[str, Any] = {
            "format": FORMAT,
            "version": FORMAT_VERSION,
            "law": self.law,
            "plant_fingerprint": self.plant_fingerprint,
            "plant_title": self.plant_title,
            "pairs": list(self.pairs),
            "actuators": list(self.actuators),
            "sensors": list(self.sensors),
            "target_modes": list(self.target_modes),
        }
        if self.passive:
            out["passive"] = True
            out["parts"] = [part_to_dict(p) for p in self.parts]
        else:
            out["sign_convention"] = "u = -K(s) y"
        if self.passive:
            pass  # the parts are the whole design
        elif self.loops:
            out["loops"] = [
                {
                    "pair": lp.pair,
                    "actuator": lp.actuator,
                    "sensor": lp.sensor,
                    "gain": lp.gain,
                    "branches": [
                        {
                            "gain": b.gain,
                            "label": b.label,
                            "sections": [
                                {"num": list(s.num), "den": list(s.den)} for s in b.sections
                            ],
                        }
                        for b in lp.branches
                    ],
                }
                for lp in self.loops
            ]
        else:
            A, B, C, D = self.controller
            out["controller"] = {"A": A.tolist(), "B": B.tolist(), "C": C.tolist(), "D": D.tolist()}
            if self.controller_rate_hz is not None:
                out["controller_rate_hz"] = self.controller_rate_hz
        if self.plant_summary is not None:
            out["plant_summary"] = _jsonable(dict(self.plant_summary))
        out["info"] = _jsonable(dict(self.info))
        return out

    def to_json(self) -> str:
        """The design file text (JSON)."""
        return json.dumps(self.to_dict(), indent=2, allow_nan=False) + "\n"


def design_from_dict(data: Mapping[str, Any], *, source: str | None = None) -> Design:
    """Build a :class:`Design` from its dictionary (the parsed design file).

    Every value is read strictly (:mod:`dampctl.values`): a gain is a finite number, never a
    boolean or a string; names are strings; target modes whole numbers >= 1; a loop is written
    once; the law's fields match its name (dvf, iff and ppf hold ``loops``; lqg and custom a
    ``controller``; tmd, viscous and shunt ``parts``). Errors name the field
    (``loops[1].branches[1].gain``). Whether the design fits a given plant (modes, names,
    fingerprint) is :meth:`Design.check_plant`.

    Parameters
    ----------
    data : mapping
        As produced by :meth:`Design.to_dict`.
    source : str, optional
        File name for error messages.

    Returns
    -------
    Design
    """
    try:
        return _design_from_dict(data)
    except DesignError as exc:
        raise DesignError(exc.message, source=source, field=exc.field) from None


def _design_from_dict(data: Mapping[str, Any]) -> Design:
    if data.get("format") != FORMAT:
        raise DesignError(f"not a dampctl design (format must be {FORMAT!r})", field="format")
    law = read_str(_need(data, "law"), "law", error=DesignError)
    if law not in LAWS:
        raise DesignError(f"law must be one of {', '.join(LAWS)}, got {law!r}", field="law")
    wanted = "parts" if law in PASSIVE_LAWS else "controller" if law in MIMO_LAWS else "loops"
    for key in ("loops", "controller", "parts"):
        if key != wanted and data.get(key) not in (None, [], ()):
            raise DesignError(f"a {law} design holds {wanted}, not {key}", field=key)
    if wanted != "parts" and data.get(wanted) is None:
        raise DesignError(f"missing required key (a {law} design holds {wanted})", field=wanted)
    loops = tuple(_read_loop(lp, f"loops[{k + 1}]")
                  for k, lp in enumerate(_list(data.get("loops", []), "loops")))
    for k, loop in enumerate(loops):
        for j in range(k):
            for what in ("pair", "actuator"):
                if getattr(loops[j], what) == getattr(loop, what):
                    raise DesignError(
                        f"{what} {getattr(loop, what)!r} has a loop already (loops[{j + 1}]): "
                        "a loop is written once",
                        field=f"loops[{k + 1}].{what}",
                    )
    parts = tuple(part_from_dict(p, f"parts[{k + 1}]")
                  for k, p in enumerate(_list(data.get("parts", []), "parts")))
    actuators = _names(data, "actuators")
    sensors = _names(data, "sensors")
    controller = None
    if data.get("controller") is not None:
        controller = _read_controller(data["controller"], len(sensors), len(actuators))
    rate = data.get("controller_rate_hz")
    summary = data.get("plant_summary")
    if summary is not None and not isinstance(summary, Mapping):
        raise DesignError(f"expected a table, got {describe(summary)}", field="plant_summary")
    info = data.get("info", {})
    if not isinstance(info, Mapping):
        raise DesignError(f"expected a table, got {describe(info)}", field="info")
    return Design(
        law=law,
        plant_fingerprint=read_str(_need(data, "plant_fingerprint"), "plant_fingerprint",
                                   error=DesignError, empty=False),
        actuators=actuators,
        sensors=sensors,
        target_modes=tuple(
            read_int(m, f"target_modes[{k + 1}]", bounds=Range(1, None), error=DesignError)
            for k, m in enumerate(_list(data.get("target_modes", []), "target_modes"))
        ),
        loops=loops,
        controller=controller,
        pairs=_names(data, "pairs"),
        plant_title=read_str(data.get("plant_title", ""), "plant_title", error=DesignError),
        info=info,
        controller_rate_hz=None if rate is None else read_float(
            rate, "controller_rate_hz", bounds=Range(0, None, "Hz", low_open=True),
            error=DesignError),
        parts=parts,
        plant_summary=summary,
    )


def _need(data: Mapping[str, Any], key: str) -> Any:
    if key not in data:
        raise DesignError("missing required key", field=key)
    return data[key]


def _list(value: Any, where: str) -> list:
    if not isinstance(value, list | tuple):
        raise DesignError(f"expected a list, got {describe(value)}", field=where)
    return list(value)


def _names(data: Mapping[str, Any], key: str) -> tuple[str, ...]:
    return tuple(read_str(v, f"{key}[{k + 1}]", error=DesignError, empty=False)
                 for k, v in enumerate(_list(data.get(key, []), key)))


def _table(value: Any, where: str) -> Mapping[str, Any]:
    if not isinstance(value, Mapping):
        raise DesignError(f"expected a table, got {describe(value)}", field=where)
    return value


def _read_loop(raw: Any, where: str) -> Loop:
    lp = _table(raw, where)
    names = {k: read_str(_need_at(lp, k, where), f"{where}.{k}", error=DesignError, empty=False)
             for k in ("pair", "actuator", "sensor")}
    branches = []
    for j, rb in enumerate(_list(_need_at(lp, "branches", where), f"{where}.branches")):
        at = f"{where}.branches[{j + 1}]"
        b = _table(rb, at)
        sections = []
        for i, rs in enumerate(_list(b.get("sections", []), f"{at}.sections")):
            sat = f"{at}.sections[{i + 1}]"
            sec = _table(rs, sat)
            coeffs = {}
            for key in ("num", "den"):
                values = _list(_need_at(sec, key, sat), f"{sat}.{key}")
                coeffs[key] = tuple(read_float(v, f"{sat}.{key}[{n + 1}]", error=DesignError)
                                    for n, v in enumerate(values))
            try:
                sections.append(Section(coeffs["num"], coeffs["den"]))
            except DesignError as exc:
                raise DesignError(exc.message, field=sat) from None
        branches.append(Branch(
            gain=read_float(_need_at(b, "gain", at), f"{at}.gain", error=DesignError),
            sections=tuple(sections),
            label=read_str(b.get("label", ""), f"{at}.label", error=DesignError),
        ))
    if not branches:
        raise DesignError("a loop needs at least one controller branch", field=f"{where}.branches")
    return Loop(gain=read_float(_need_at(lp, "gain", where), f"{where}.gain", error=DesignError),
                branches=tuple(branches), **names)


def _need_at(table: Mapping[str, Any], key: str, where: str) -> Any:
    if key not in table:
        raise DesignError("missing required key", field=f"{where}.{key}")
    return table[key]


def _read_controller(raw: Any, n_in: int, n_out: int):
    ctrl = _table(raw, "controller")
    a_rows = _list(_need_at(ctrl, "A", "controller"), "controller.A")
    n = len(a_rows)
    mats = []
    for key, rows, cols in (("A", n, n), ("B", n, n_in), ("C", n_out, n), ("D", n_out, n_in)):
        where = f"controller.{key}"
        value = read_rows(_need_at(ctrl, key, "controller"), where, cols, error=DesignError)
        if len(value) != rows:
            raise DesignError(f"expected {rows} rows of {cols} (states {n}, sensors {n_in}, "
                              f"actuators {n_out}), got {len(value)}", field=where)
        mats.append(np.array(value, dtype=float).reshape(rows, cols))
    return tuple(mats)


def load_design(path: str | Path) -> Design:
    """Read a design file written by ``dampctl tune``.

    Parameters
    ----------
    path : str or path-like
        The design file (JSON).

    Returns
    -------
    Design
    """
    path = Path(path)
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise DesignError(
            f"cannot read the design file ({exc.strerror or exc})", source=str(path)
        ) from None
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise DesignError(f"not a JSON design file ({exc})", source=str(path)) from None
    except RecursionError:
        raise DesignError("not a design file (JSON nested too deep)", source=str(path)) from None
    if not isinstance(data, dict):
        raise DesignError("not a dampctl design (expected a JSON object)", source=str(path))
    return design_from_dict(data, source=str(path))


# ---------------------------------------------------------------------- helpers
def _jsonable(value: Any) -> Any:
    if isinstance(value, Mapping):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return _jsonable(value.tolist())
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


