"""Value objects a modal plant is made of: modes, actuators, sensors, pairs, outputs,
disturbances and requirements.

Each is a frozen dataclass validated in ``__post_init__``: a bad value raises
:class:`~dampctl.errors.PlantError` naming the field. Units are SI; frequencies in Hz.

Numbers are read strictly (:mod:`dampctl.values`): a boolean or a string is never a number,
and every number has a stated range (:data:`RANGES`) outside which it is physically absurd for
a precision structure and refused with the range in the message.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Literal

import numpy as np

from dampctl.errors import PlantError
from dampctl.values import Range, describe, read_float, read_rows

__all__ = [
    "ACTUATOR_KINDS",
    "KIND_ORDER",
    "KIND_UNIT",
    "OUTPUT_KINDS",
    "PART_KINDS",
    "RANGES",
    "SENSOR_KINDS",
    "Actuator",
    "Disturbance",
    "Mode",
    "Output",
    "Pair",
    "PartPrice",
    "Requirements",
    "Sensor",
]

ActuatorKind = Literal["force", "strut"]
SensorKind = Literal[
    "displacement",
    "velocity",
    "acceleration",
    "relative_displacement",
    "relative_velocity",
    "force",
]
OutputKind = Literal[
    "displacement", "velocity", "acceleration", "relative_displacement", "relative_velocity"
]

ACTUATOR_KINDS: tuple[str, ...] = ("force", "strut")
SENSOR_KINDS: tuple[str, ...] = (
    "displacement",
    "velocity",
    "acceleration",
    "relative_displacement",
    "relative_velocity",
    "force",
)
OUTPUT_KINDS: tuple[str, ...] = SENSOR_KINDS[:-1]

#: derivative order of each output kind (0: displacement-like, 1: velocity, 2: acceleration)
KIND_ORDER: Mapping[str, int] = MappingProxyType(
    {
        "displacement": 0,
        "velocity": 1,
        "acceleration": 2,
        "relative_displacement": 0,
        "relative_velocity": 1,
        "force": 0,
    }
)
#: SI unit of each output kind
KIND_UNIT: Mapping[str, str] = MappingProxyType(
    {
        "displacement": "m",
        "velocity": "m/s",
        "acceleration": "m/s^2",
        "relative_displacement": "m",
        "relative_velocity": "m/s",
        "force": "N",
    }
)


#: stated range of every number of a plant, by key; a value outside it is refused. The bounds
#: are far outside anything a precision structure has (a modal mass of a microgram's millionth,
#: a mode at 10 MHz) and keep every product the models form (shapes over masses, ω² ...)
#: well inside double precision.
RANGES: Mapping[str, Range] = MappingProxyType(
    {
        "freq_hz": Range(1e-6, 1e7, "Hz"),
        "damping": Range(0.0, 1.0, high_open=True),
        "modal_mass_kg": Range(1e-12, 1e12, "kg"),
        "shape": Range(-1e12, 1e12),
        "stiffness_n_per_m": Range(0.0, 1e15, "N/m", low_open=True),
        "max_force_n": Range(0.0, 1e9, "N", low_open=True),
        "max_stroke_m": Range(0.0, 100.0, "m", low_open=True),
        "bandwidth_hz": Range(0.0, 1e9, "Hz", low_open=True),
        "cost": Range(0.0, 1e15),
        "cost_per_kg": Range(0.0, 1e15),
        "capacitance_f": Range(0.0, 1.0, "F", low_open=True),
        "coupling_k": Range(0.0, 1.0, low_open=True, high_open=True),
        "noise_density": Range(0.0, 1e9),
        "static_gain": Range(-1e15, 1e15),
        "psd": Range(0.0, 1e15, "N²/Hz"),
        "psd_freq_hz": Range(0.0, 1e7, "Hz", low_open=True),
        "min_damping": Range(0.0, 1.0, low_open=True, high_open=True),
        "sample_rate_hz": Range(0.0, 1e9, "Hz", low_open=True),
        "loop_delay_s": Range(0.0, 1.0, "s"),
        "min_gain_margin_db": Range(0.0, 100.0, "dB"),
        "min_phase_margin_deg": Range(0.0, 180.0, "deg", high_open=True),
        "min_disk_margin_db": Range(0.0, 100.0, "dB", low_open=True),
        "max_rms": Range(0.0, 1e12, low_open=True),
    }
)


def _finite(value: float, field_name: str, key: str | None = None) -> float:
    """A number of the plant, read strictly and checked against ``RANGES[key]``."""
    bounds = RANGES[key or field_name]
    return read_float(value, field_name, bounds=bounds, error=PlantError)


def _optional(value: float | None, field_name: str) -> float | None:
    return None if value is None else _finite(value, field_name)


def _readonly(array: np.ndarray) -> np.ndarray:
    array = np.array(array, dtype=float, copy=True)
    array.setflags(write=False)
    return array


@dataclass(frozen=True)
class Mode:
    """One structural mode.

    Parameters
    ----------
    freq_hz : float
        Natural frequency (Hz), > 0.
    damping : float
        Damping ratio (fraction of critical), 0 <= damping < 1.
    modal_mass_kg : float, optional
        Modal mass (kg) of the mode for the shape values given; 1 for mass-normalized shapes.
    label : str, optional
        A short description ("stage x", "bending 1").
    """

    freq_hz: float
    damping: float
    modal_mass_kg: float = 1.0
    label: str = ""

    def __post_init__(self) -> None:
        object.__setattr__(self, "freq_hz", _finite(self.freq_hz, "freq_hz"))
        object.__setattr__(self, "damping", _finite(self.damping, "damping"))
        object.__setattr__(self, "modal_mass_kg", _finite(self.modal_mass_kg, "modal_mass_kg"))
        _string(self.label, "label")

    @property
    def omega(self) -> float:
        """Natural frequency (rad/s)."""
        return 2.0 * math.pi * self.freq_hz


@dataclass(frozen=True)
class Actuator:
    """An actuator: a point force at a site, or an active strut between two sites.

    Parameters
    ----------
    name : str
        Unique name.
    kind : {"force", "strut"}
        ``force``: input is a force (N) along ``site``. ``strut``: input is the free extension
        δ (m) of an element of stiffness ``stiffness_n_per_m`` between ``between[0]`` and
        ``between[1]``; it pushes the two sites apart with k_s·δ. The modes must be those of the
        structure *with* the passive strut.
    site : str, optional
        Site of a force actuator.
    between : tuple of str, optional
        The two sites a strut joins (its extension is motion of the second minus the first).
    stiffness_n_per_m : float, optional
        Strut stiffness k_s (N/m), > 0; required for a strut.
    max_force_n : float, optional
        Force limit (N) used in effort checks.
    max_stroke_m : float, optional
        Stroke limit (m) of a strut.
    bandwidth_hz : float, optional
        First-order roll-off corner (Hz) of the actuator and its amplifier.
    cost : float, optional
        Cost of the actuator (any currency), for sizing.
    capacitance_f : float, optional
        A piezoelectric strut's free capacitance C (F), measured unloaded as data sheets give
        it; its blocked capacitance is C (1 − k²). Struts only; with ``coupling_k`` it makes
        the strut usable for a passive electrical shunt (``dampctl tune --law shunt``).
    coupling_k : float, optional
        The strut's electromechanical coupling factor k, 0 < k < 1 (k² = d² k_s / C, with d
        its free extension per volt and k_s ``stiffness_n_per_m``, the short-circuit
        stiffness). Struts only.
    """

    name: str
    kind: ActuatorKind
    site: str | None = None
    between: tuple[str, str] | None = None
    stiffness_n_per_m: float | None = None
    max_force_n: float | None = None
    max_stroke_m: float | None = None
    bandwidth_hz: float | None = None
    cost: float = 0.0
    capacitance_f: float | None = None
    coupling_k: float | None = None

    def __post_init__(self) -> None:
        if self.kind not in ACTUATOR_KINDS:
            raise PlantError(
                f"kind must be one of {', '.join(ACTUATOR_KINDS)}, got {self.kind!r}", field="kind"
            )
        _check_location(self.kind == "strut", self.site, self.between, self)
        if self.between is not None:
            object.__setattr__(self, "between", tuple(self.between))
        if self.kind == "strut":
            if self.stiffness_n_per_m is None:
                raise PlantError("a strut needs stiffness_n_per_m", field="stiffness_n_per_m")
            stiffness = _finite(self.stiffness_n_per_m, "stiffness_n_per_m")
            object.__setattr__(self, "stiffness_n_per_m", stiffness)
        elif self.stiffness_n_per_m is not None:
            raise PlantError("only a strut has a stiffness", field="stiffness_n_per_m")
        for name in ("max_force_n", "max_stroke_m", "bandwidth_hz", "capacitance_f",
                     "coupling_k"):
            object.__setattr__(self, name, _optional(getattr(self, name), name))
        object.__setattr__(self, "cost", _finite(self.cost, "cost"))
        for name in ("capacitance_f", "coupling_k"):
            if getattr(self, name) is not None and self.kind != "strut":
                raise PlantError("only a piezoelectric strut has this", field=name)

    @property
    def piezo(self) -> bool:
        """True for a strut with ``capacitance_f`` and ``coupling_k`` (it can carry a shunt)."""
        return self.capacitance_f is not None and self.coupling_k is not None


@dataclass(frozen=True)
class Sensor:
    """A sensor.

    Parameters
    ----------
    name : str
        Unique name.
    kind : str
        ``displacement`` (m), ``velocity`` (m/s), ``acceleration`` (m/s², with its direct
        feedthrough) at ``site``; ``relative_displacement`` / ``relative_velocity`` of
        ``between[1]`` minus ``between[0]``; ``force`` (N): the force in strut ``actuator``,
        F = k_s (bᵀx − δ), positive in tension, with its −k_s feedthrough from δ.
    site : str, optional
        Site of an absolute sensor.
    between : tuple of str, optional
        The two sites of a relative sensor.
    actuator : str, optional
        The strut whose force a ``force`` sensor measures.
    noise_density : float, optional
        Noise amplitude spectral density, in the sensor's unit per √Hz (one-sided).
    bandwidth_hz : float, optional
        First-order roll-off corner (Hz) of the sensor and its conditioning.
    cost : float, optional
        Cost of the sensor, for sizing.
    """

    name: str
    kind: SensorKind
    site: str | None = None
    between: tuple[str, str] | None = None
    actuator: str | None = None
    noise_density: float = 0.0
    bandwidth_hz: float | None = None
    cost: float = 0.0

    def __post_init__(self) -> None:
        if self.kind not in SENSOR_KINDS:
            raise PlantError(
                f"kind must be one of {', '.join(SENSOR_KINDS)}, got {self.kind!r}", field="kind"
            )
        if self.kind == "force":
            if not self.actuator:
                raise PlantError("a force sensor needs actuator = <strut name>", field="actuator")
            if self.site is not None or self.between is not None:
                raise PlantError("a force sensor is placed by its strut, not by site", field="site")
        else:
            if self.actuator is not None:
                raise PlantError("only a force sensor names an actuator", field="actuator")
            _check_location(self.kind.startswith("relative_"), self.site, self.between, self)
        if self.between is not None:
            object.__setattr__(self, "between", tuple(self.between))
        object.__setattr__(self, "noise_density", _finite(self.noise_density, "noise_density"))
        object.__setattr__(self, "bandwidth_hz", _optional(self.bandwidth_hz, "bandwidth_hz"))
        object.__setattr__(self, "cost", _finite(self.cost, "cost"))

    @property
    def unit(self) -> str:
        """SI unit of the measured quantity."""
        return KIND_UNIT[self.kind]


@dataclass(frozen=True)
class Pair:
    """A candidate actuator/sensor pair for one damping loop.

    Parameters
    ----------
    name : str
        Unique name.
    actuator, sensor : str
        Names of the actuator and the sensor.
    static_gain : float, optional
        Measured or FE static (DC) gain of sensor/actuator, in sensor unit per actuator unit.
        Where given (displacement-like and force sensors only), the plant adds a constant
        residual-flexibility term so that its DC gain equals this value, accounting for the
        modes left out of the model.
    """

    name: str
    actuator: str
    sensor: str
    static_gain: float | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "static_gain", _optional(self.static_gain, "static_gain"))


@dataclass(frozen=True)
class Output:
    """A performance output: motion at a site (or between two sites) that the design must reduce.

    Parameters
    ----------
    name : str
        Unique name.
    kind : str
        ``displacement``, ``velocity``, ``acceleration``, ``relative_displacement`` or
        ``relative_velocity`` (SI units).
    site : str, optional
        Site of an absolute output.
    between : tuple of str, optional
        The two sites of a relative output.
    """

    name: str
    kind: OutputKind
    site: str | None = None
    between: tuple[str, str] | None = None

    def __post_init__(self) -> None:
        if self.kind not in OUTPUT_KINDS:
            raise PlantError(
                f"kind must be one of {', '.join(OUTPUT_KINDS)}, got {self.kind!r}", field="kind"
            )
        _check_location(self.kind.startswith("relative_"), self.site, self.between, self)
        if self.between is not None:
            object.__setattr__(self, "between", tuple(self.between))

    @property
    def unit(self) -> str:
        """SI unit of the output."""
        return KIND_UNIT[self.kind]


@dataclass(frozen=True)
class Disturbance:
    """A random force disturbance at a site.

    Parameters
    ----------
    name : str
        Unique name.
    site : str
        Site the force acts at, along the site's direction.
    psd : float or array_like
        One-sided force power spectral density (N²/Hz): a constant, or rows of
        ``[freq_hz, psd]`` with increasing frequency, interpolated log-log and zero outside.
    kind : {"force"}
        Only point forces are supported.
    """

    name: str
    site: str
    psd: float | np.ndarray
    kind: Literal["force"] = "force"

    def __post_init__(self) -> None:
        if self.kind != "force":
            raise PlantError(f"kind must be force, got {self.kind!r}", field="kind")
        psd = self.psd
        if isinstance(psd, np.ndarray):
            psd = psd.tolist()
        if not isinstance(psd, list | tuple):
            object.__setattr__(self, "psd", _finite(psd, "psd"))
            return
        rows = read_rows(
            psd,
            "psd",
            2,
            bounds=(RANGES["psd_freq_hz"], RANGES["psd"]),
            error=PlantError,
        )
        if len(rows) < 2:
            raise PlantError(
                f"expected a number or at least two rows [freq_hz, psd], got {describe(psd)}",
                field="psd",
            )
        table = np.array(rows, dtype=float)
        if np.any(np.diff(table[:, 0]) <= 0):
            raise PlantError("frequencies must be increasing (one row per frequency)", field="psd")
        object.__setattr__(self, "psd", _readonly(table))

    def psd_at(self, freq_hz: np.ndarray) -> np.ndarray:
        """One-sided force PSD (N²/Hz) at the given frequencies.

        Parameters
        ----------
        freq_hz : array_like
            Frequencies (Hz).

        Returns
        -------
        ndarray
            PSD (N²/Hz), same shape as ``freq_hz``; zero outside a table's range.
        """
        freq_hz = np.asarray(freq_hz, dtype=float)
        if np.ndim(self.psd) == 0:
            return np.full(freq_hz.shape, float(self.psd))
        f, s = self.psd[:, 0], self.psd[:, 1]
        with np.errstate(divide="ignore"):
            log_s = np.log(np.where(s > 0, s, 1e-300))
            out = np.exp(np.interp(np.log(np.maximum(freq_hz, 1e-300)), np.log(f), log_s))
        out[(freq_hz < f[0]) | (freq_hz > f[-1])] = 0.0
        return np.where(out < 1e-290, 0.0, out)


#: kinds of passive part the plant file's ``[[parts]]`` table can price
PART_KINDS: tuple[str, ...] = ("absorber", "damper", "r_shunt", "rl_shunt")


@dataclass(frozen=True)
class PartPrice:
    """The price of a kind of passive part (a row of the plant file's ``[[parts]]`` table).

    Parameters
    ----------
    name : str
        Unique name (what the part is, for tables).
    kind : {"absorber", "damper", "r_shunt", "rl_shunt"}
        Tuned-mass absorber, viscous damper, resistive or resistive-inductive piezo shunt.
    cost : float, optional
        Cost of one part (any currency, the same as the actuators' and sensors' costs).
    cost_per_kg : float, optional
        Absorbers only: cost per kg of absorber mass, added to ``cost``.
    """

    name: str
    kind: str
    cost: float = 0.0
    cost_per_kg: float = 0.0

    def __post_init__(self) -> None:
        if self.kind not in PART_KINDS:
            raise PlantError(
                f"kind must be one of {', '.join(PART_KINDS)}, got {self.kind!r}", field="kind"
            )
        object.__setattr__(self, "cost", _finite(self.cost, "cost"))
        per_kg = _finite(self.cost_per_kg, "cost_per_kg")
        if per_kg and self.kind != "absorber":
            raise PlantError("only an absorber is priced per kg", field="cost_per_kg")
        object.__setattr__(self, "cost_per_kg", per_kg)

    def price(self, mass_kg: float = 0.0) -> float:
        """Cost of one part of this kind.

        Parameters
        ----------
        mass_kg : float, optional
            Absorber mass (kg); ignored for other kinds.

        Returns
        -------
        float
            ``cost + cost_per_kg · mass_kg``.
        """
        return self.cost + self.cost_per_kg * float(mass_kg)


@dataclass(frozen=True)
class Requirements:
    """What the damping design must achieve; used by assessment exit codes and sizing.

    Parameters
    ----------
    modes : tuple of int
        Target modes (1-based numbers).
    min_damping : float, optional
        Smallest closed-loop damping ratio required on the target modes.
    sample_rate_hz : float, optional
        Sample rate (Hz) of the real-time target.
    loop_delay_s : float, optional
        Loop delay (s) besides sampling (computation, converters).
    min_gain_margin_db, min_phase_margin_deg : float, optional
        Required loop-at-a-time margins (dB, degrees).
    min_disk_margin_db : float, optional
        Required all-loop symmetric disk margin (dB): every loop's gain may change by this
        much up or down, with the matching phase, on all loops at once (Seiler, Packard &
        Gahinet, IEEE Control Systems Magazine 40(5), 2020).
    max_rms : mapping of str to float, optional
        Largest closed-loop RMS allowed at each named performance output (its SI unit).
    """

    modes: tuple[int, ...] = ()
    min_damping: float | None = None
    sample_rate_hz: float | None = None
    loop_delay_s: float | None = None
    min_gain_margin_db: float | None = None
    min_phase_margin_deg: float | None = None
    min_disk_margin_db: float | None = None
    max_rms: Mapping[str, float] = field(default_factory=dict)

    def __post_init__(self) -> None:
        modes = tuple(self.modes)
        for k, number in enumerate(modes):
            if isinstance(number, bool | np.bool_) or not isinstance(number, int | np.integer):
                raise PlantError(
                    f"expected mode numbers >= 1, got {describe(number)}", field=f"modes[{k + 1}]"
                )
            if number < 1:
                raise PlantError(f"expected mode numbers >= 1, got {number}",
                                 field=f"modes[{k + 1}]")
        if len(set(modes)) != len(modes):
            raise PlantError("a mode number is given twice", field="modes")
        object.__setattr__(self, "modes", tuple(int(m) for m in modes))
        for name in ("min_damping", "sample_rate_hz", "loop_delay_s", "min_gain_margin_db",
                     "min_phase_margin_deg", "min_disk_margin_db"):
            object.__setattr__(self, name, _optional(getattr(self, name), name))
        if not isinstance(self.max_rms, Mapping):
            raise PlantError(f"expected a table of output = limit, got {describe(self.max_rms)}",
                             field="max_rms")
        limits = {}
        for key, value in dict(self.max_rms).items():
            name = _string(key, "max_rms")
            limits[name] = _finite(value, f"max_rms.{name}", "max_rms")
        object.__setattr__(self, "max_rms", MappingProxyType(limits))


def _string(value, field_name: str) -> str:
    if not isinstance(value, str):
        raise PlantError(f"expected a string, got {describe(value)}", field=field_name)
    return value


def _check_location(relative: bool, site, between, owner) -> None:
    if relative:
        if site is not None:
            raise PlantError(
                f"{owner.kind} is placed with between = [a, b], not site", field="site"
            )
        if between is None or len(between) != 2 or between[0] == between[1]:
            raise PlantError(
                f"{owner.kind} needs between = [site_a, site_b] with two different sites",
                field="between",
            )
    else:
        if between is not None:
            raise PlantError(f"{owner.kind} is placed with site, not between", field="between")
        if not site:
            raise PlantError(f"{owner.kind} needs a site", field="site")
