"""Passive parts added to a structure: tuned-mass absorbers, viscous dampers, piezo shunts.

Each part is a value object holding what a buyer or a workshop needs (mass, spring and dashpot
of an absorber; coefficient of a damper; resistance and inductance of a shunt) and is validated
in ``__post_init__`` (a bad value raises :class:`~dampctl.errors.DesignError` naming the field).
How a part acts on the structure — its port and its own states — is the analysis stage's
business (:mod:`dampctl.analysis.passive`); a passive :class:`~dampctl.design.Design` carries a
tuple of them instead of loops.

``GROUND`` in a damper's ``between`` stands for the fixed ground (no site; a plant site of that
name is used as the plant gives it).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import Any

from dampctl.errors import DesignError

__all__ = [
    "GROUND",
    "PART_TYPES",
    "SHUNT_KINDS",
    "Absorber",
    "Damper",
    "PassivePart",
    "Shunt",
    "part_from_dict",
    "part_problem",
    "part_to_dict",
]

#: the name standing for the fixed ground in a damper's ``between``
GROUND = "ground"


def _number(value: Any, name: str, *, positive: bool = True, below: float | None = None) -> float:
    if isinstance(value, bool):
        raise DesignError(f"expected a number, got {value!r}", field=name)
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise DesignError(f"expected a number, got {value!r}", field=name) from None
    if not math.isfinite(number):
        raise DesignError(f"must be finite, got {number!r}", field=name)
    if positive and number <= 0.0:
        raise DesignError(f"must be > 0, got {number!r}", field=name)
    if not positive and number < 0.0:
        raise DesignError(f"must be >= 0, got {number!r}", field=name)
    if below is not None and number >= below:
        raise DesignError(f"must be < {below:g}, got {number!r}", field=name)
    return number


def _name(value: Any, name: str) -> str:
    if not isinstance(value, str) or not value:
        raise DesignError(f"expected a name, got {value!r}", field=name)
    return value


def _mode(value: Any) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise DesignError(f"expected a mode number >= 1, got {value!r}", field="mode")
    return int(value)


@dataclass(frozen=True)
class Absorber:
    """A tuned-mass absorber: a mass on a spring and a dashpot, attached at one site.

    Parameters
    ----------
    mode : int
        The mode (1-based) it is tuned to.
    site : str
        Where it is attached; it moves along the site's direction.
    mass_kg : float
        Absorber mass m_a (kg).
    freq_hz : float
        Its own natural frequency √(k/m_a)/2π on a fixed base (Hz).
    damping : float
        Its own damping ratio c / (2 √(k m_a)), >= 0.
    """

    mode: int
    site: str
    mass_kg: float
    freq_hz: float
    damping: float

    #: what the part is, in the design file
    part = "absorber"

    def __post_init__(self) -> None:
        object.__setattr__(self, "mode", _mode(self.mode))
        object.__setattr__(self, "site", _name(self.site, "site"))
        object.__setattr__(self, "mass_kg", _number(self.mass_kg, "mass_kg"))
        object.__setattr__(self, "freq_hz", _number(self.freq_hz, "freq_hz"))
        object.__setattr__(self, "damping", _number(self.damping, "damping", positive=False))

    @property
    def omega(self) -> float:
        """Natural frequency on a fixed base (rad/s)."""
        return 2.0 * math.pi * self.freq_hz

    @property
    def stiffness_n_per_m(self) -> float:
        """Spring stiffness k = m_a ω_a² (N/m)."""
        return self.mass_kg * self.omega**2

    @property
    def damping_n_s_per_m(self) -> float:
        """Dashpot coefficient c = 2 ζ_a m_a ω_a (N·s/m)."""
        return 2.0 * self.damping * self.mass_kg * self.omega

    @property
    def price_kind(self) -> str:
        """Kind of the part in the plant file's ``[[parts]]`` table."""
        return "absorber"

    def scaled(self, factor: float) -> Absorber:
        """The same absorber with its dashpot scaled (root locus in the dissipation).

        Parameters
        ----------
        factor : float
            Factor on the damping ratio (>= 0).

        Returns
        -------
        Absorber
        """
        return replace(self, damping=self.damping * float(factor))

    def to_dict(self) -> dict[str, Any]:
        """The ``info.absorbers`` entry: ``mode``, ``site``, ``mass_kg``, ``freq_hz``,
        ``damping``, ``stiffness_n_per_m``, ``damping_n_s_per_m``."""
        return {
            "mode": self.mode,
            "site": self.site,
            "mass_kg": self.mass_kg,
            "freq_hz": self.freq_hz,
            "damping": self.damping,
            "stiffness_n_per_m": self.stiffness_n_per_m,
            "damping_n_s_per_m": self.damping_n_s_per_m,
        }


@dataclass(frozen=True)
class Damper:
    """A viscous damper between two sites (or a site and the ground).

    Parameters
    ----------
    between : tuple of str
        The two sites it joins (``GROUND`` for the fixed ground); it resists the motion of
        the second relative to the first.
    coefficient_n_s_per_m : float
        Viscous coefficient c (N·s/m).
    stiffness_n_per_m : float, optional
        Stiffness k_s (N/m) of the mounting in series with the dashpot (a Maxwell element);
        None for a rigid mounting.
    """

    between: tuple[str, str]
    coefficient_n_s_per_m: float
    stiffness_n_per_m: float | None = None

    #: what the part is, in the design file
    part = "damper"

    def __post_init__(self) -> None:
        between = tuple(self.between) if isinstance(self.between, list | tuple) else None
        if between is None or len(between) != 2:
            raise DesignError("expected two site names [a, b]", field="between")
        for k, name in enumerate(between):
            _name(name, f"between[{k + 1}]")
        if between[0] == between[1] or set(between) == {GROUND}:
            raise DesignError(
                f"a damper joins two different points, got {list(between)}", field="between"
            )
        object.__setattr__(self, "between", between)
        object.__setattr__(
            self,
            "coefficient_n_s_per_m",
            _number(self.coefficient_n_s_per_m, "coefficient_n_s_per_m"),
        )
        if self.stiffness_n_per_m is not None:
            object.__setattr__(
                self, "stiffness_n_per_m", _number(self.stiffness_n_per_m, "stiffness_n_per_m")
            )

    @property
    def price_kind(self) -> str:
        """Kind of the part in the plant file's ``[[parts]]`` table."""
        return "damper"

    def scaled(self, factor: float) -> Damper:
        """The same damper with its coefficient scaled.

        Parameters
        ----------
        factor : float
            Factor on the coefficient (> 0).

        Returns
        -------
        Damper
        """
        return replace(self, coefficient_n_s_per_m=self.coefficient_n_s_per_m * float(factor))

    def to_dict(self) -> dict[str, Any]:
        """The ``info.dampers`` entry: ``between``, ``coefficient_n_s_per_m``."""
        return {"between": list(self.between), "coefficient_n_s_per_m": self.coefficient_n_s_per_m}


#: shunt networks
SHUNT_KINDS = ("R", "RL")


@dataclass(frozen=True)
class Shunt:
    """A passive electrical network across the electrodes of a piezoelectric strut.

    Parameters
    ----------
    pair : str
        The plant's pair whose actuator is the strut (a strut with ``capacitance_f`` and
        ``coupling_k``).
    actuator : str
        The strut's actuator name.
    kind : {"R", "RL"}
        A resistor, or a resistor in series with an inductor.
    resistance_ohm : float
        Resistance R (Ω).
    inductance_h : float, optional
        Inductance L (H); required for ``RL``, absent for ``R``.
    mode : int
        The mode (1-based) it is tuned to.
    """

    pair: str
    actuator: str
    kind: str
    resistance_ohm: float
    inductance_h: float | None = None
    mode: int = 1

    #: what the part is, in the design file
    part = "shunt"

    def __post_init__(self) -> None:
        object.__setattr__(self, "pair", _name(self.pair, "pair"))
        object.__setattr__(self, "actuator", _name(self.actuator, "actuator"))
        if self.kind not in SHUNT_KINDS:
            raise DesignError(f"kind must be R or RL, got {self.kind!r}", field="kind")
        object.__setattr__(self, "resistance_ohm", _number(self.resistance_ohm, "resistance_ohm"))
        if self.kind == "RL":
            if self.inductance_h is None:
                raise DesignError("an RL shunt needs inductance_h", field="inductance_h")
            object.__setattr__(self, "inductance_h", _number(self.inductance_h, "inductance_h"))
        elif self.inductance_h is not None:
            raise DesignError("an R shunt has no inductance", field="inductance_h")
        object.__setattr__(self, "mode", _mode(self.mode))

    @property
    def price_kind(self) -> str:
        """Kind of the part in the plant file's ``[[parts]]`` table."""
        return "rl_shunt" if self.kind == "RL" else "r_shunt"

    def scaled(self, factor: float) -> Shunt:
        """The same shunt with its resistance scaled.

        Parameters
        ----------
        factor : float
            Factor on the resistance (> 0).

        Returns
        -------
        Shunt
        """
        return replace(self, resistance_ohm=self.resistance_ohm * float(factor))

    def to_dict(self) -> dict[str, Any]:
        """The ``info.shunts`` entry: ``pair``, ``kind``, ``resistance_ohm``, ``inductance_h``
        (RL only), ``mode``."""
        out: dict[str, Any] = {
            "pair": self.pair,
            "kind": self.kind,
            "resistance_ohm": self.resistance_ohm,
        }
        if self.inductance_h is not None:
            out["inductance_h"] = self.inductance_h
        out["mode"] = self.mode
        return out


#: the part types, by the name their design-file form gives (``part``)
PART_TYPES = {"absorber": Absorber, "damper": Damper, "shunt": Shunt}

PassivePart = Absorber | Damper | Shunt


def part_to_dict(part: PassivePart) -> dict[str, Any]:
    """The design-file form of a part: ``part`` (absorber, damper, shunt) and its fields.

    Parameters
    ----------
    part : Absorber, Damper or Shunt
        The part.

    Returns
    -------
    dict
        ``{"part": ..., field: value, ...}``; :func:`part_from_dict` inverts it.
    """
    fields = {k: (list(v) if isinstance(v, tuple) else v) for k, v in part.__dict__.items()}
    return {"part": part.part, **fields}


def part_from_dict(data: Mapping[str, Any], where: str = "parts") -> PassivePart:
    """Build a part from its design-file form (as :func:`part_to_dict` writes it).

    Parameters
    ----------
    data : mapping
        The part's keys.
    where : str, optional
        Field path for error messages (``parts[2]``).

    Returns
    -------
    Absorber, Damper or Shunt
    """
    if not isinstance(data, Mapping):
        raise DesignError("expected an object", field=where)
    values = dict(data)
    kind = values.pop("part", None)
    if kind not in PART_TYPES:
        raise DesignError(
            f"unknown part {kind!r} (absorber, damper or shunt)", field=f"{where}.part"
        )
    try:
        return PART_TYPES[kind](**values)
    except TypeError as exc:
        raise DesignError(f"unexpected or missing key ({exc})", field=where) from None
    except DesignError as exc:
        field = f"{where}.{exc.field}" if exc.field else where
        raise DesignError(exc.message, field=field) from None


def part_problem(plant, part) -> tuple[str, str]:
    """What is wrong with a passive part on this plant ("" when nothing), and the field.

    Parameters
    ----------
    plant : ModalPlant
        The plant the part is to act on.
    part : Absorber, Damper or Shunt
        The part.

    Returns
    -------
    tuple of str
        (problem, field of the part), both "" when the part fits the plant.
    """
    if isinstance(part, Absorber):
        if part.site not in plant.sites:
            return f"unknown site {part.site!r}", "site"
        if part.mode > plant.n_modes:
            return f"mode {part.mode} does not exist (the plant has {plant.n_modes})", "mode"
    elif isinstance(part, Damper):
        for name in part.between:
            if name != GROUND and name not in plant.sites:
                return f"unknown site {name!r}", "between"
    elif isinstance(part, Shunt):
        actuator = next((a for a in plant.actuators if a.name == part.actuator), None)
        if actuator is None or not actuator.piezo:
            return (
                f"{part.actuator!r} is not a piezoelectric strut of the plant (a strut with "
                "capacitance_f and coupling_k)",
                "actuator",
            )
        pair = next((p for p in plant.pairs if p.name == part.pair), None)
        if pair is None or pair.actuator != part.actuator:
            return f"the plant has no pair {part.pair!r} on {part.actuator!r}", "pair"
        if part.mode > plant.n_modes:
            return f"mode {part.mode} does not exist (the plant has {plant.n_modes})", "mode"
    return "", ""
