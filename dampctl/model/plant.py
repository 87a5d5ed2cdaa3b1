"""Modal plant: modes, sites, actuators, sensors, pairs, outputs, disturbances, requirements.

A :class:`ModalPlant` is the structure described by its modes. Each mode ``i`` obeys

    q_i'' + 2 ζ_i ω_i q_i' + ω_i² q_i = (1/m_i) Σ_j f_ij u_j

where ``f_ij`` is the generalized force of input ``j`` on mode ``i`` (a force actuator at a
site contributes φ_i(site); a strut of stiffness k_s between sites a and b pushing with its free
extension δ contributes k_s (φ_i(b) − φ_i(a))). Physical motion at a site is Σ_i φ_i(site) q_i.

The state-space form keeps each mode as a balanced 2×2 block with states ``[ω_i q_i, q_i']``:

    A_i = [[0, ω_i], [−ω_i, −2 ζ_i ω_i]],   B_i = [0, b_i],

which stays well scaled from 1 Hz to 100 kHz.

Every input (actuator or disturbance) is reduced to a modal input row ``b`` (per unit input)
and every output (sensor or performance output) to a modal output row ``c``, a derivative order
(0 displacement-like, 1 velocity-like, 2 acceleration-like) and a direct feedthrough from named
inputs. Frequency responses are evaluated from the modal sum

    H(jω) = Σ_i c_i (jω)^order b_i / (ω_i² − ω² + 2j ζ_i ω_i ω) + D,

vectorized over frequency; no per-frequency linear solve.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np

from dampctl.errors import PlantError
from dampctl.model.components import (
    KIND_ORDER,
    RANGES,
    Actuator,
    Disturbance,
    Mode,
    Output,
    Pair,
    PartPrice,
    Requirements,
    Sensor,
)
from dampctl.model.modalbasis import BasisFiller, Engine, block_frequencies, resolve_engine
from dampctl.values import describe, read_float

__all__ = [
    "Actuator",
    "Disturbance",
    "ModalPlant",
    "Mode",
    "Output",
    "Pair",
    "PartPrice",
    "Requirements",
    "Sensor",
    "signal_name",
]


@dataclass(frozen=True)
class _Channel:
    """Internal: modal row, derivative order and feedthrough of one output."""

    row: np.ndarray
    order: int
    feed: Mapping[str, float]


def signal_name(name: str) -> str:
    """A name python-control's ``interconnect`` can address: an identifier.

    Names that are identifiers already (the usual ``coil_x1``) are kept; other characters
    become ``_`` (``"probe x"`` → ``probe_x``) and a leading digit gets a ``_`` in front.

    Parameters
    ----------
    name : str
        Actuator, sensor, disturbance or output name.

    Returns
    -------
    str
    """
    out = "".join(ch if ch.isalnum() or ch == "_" else "_" for ch in name)
    return out if out and not out[0].isdigit() else f"_{out}"


@dataclass(frozen=True)
class ModalPlant:
    """A structure described by its modes, with candidate actuators, sensors and pairs.

    Parameters
    ----------
    modes : sequence of Mode
        The modes, in order (mode 1 first). Numbering in files and reports is 1-based.
    sites : mapping of str to array_like
        Mode-shape value of every mode at each named point and direction (one value per mode).
    actuators, sensors, pairs, outputs, disturbances : sequence
        The candidate hardware, pairs, performance outputs and disturbances.
    requirements : Requirements, optional
        What the design must achieve.
    title : str, optional
        A title for reports.
    parts : sequence of PartPrice, optional
        Prices of passive parts (absorbers, dampers, shunts), at most one row per kind; they
        do not enter the fingerprint.

    Raises
    ------
    PlantError
        When a shape row has the wrong length or a non-finite value, a name is duplicated or
        unknown, or a force sensor does not name a strut.
    """

    modes: tuple[Mode, ...]
    sites: Mapping[str, np.ndarray]
    actuators: tuple[Actuator, ...] = ()
    sensors: tuple[Sensor, ...] = ()
    pairs: tuple[Pair, ...] = ()
    outputs: tuple[Output, ...] = ()
    disturbances: tuple[Disturbance, ...] = ()
    requirements: Requirements = field(default_factory=Requirements)
    title: str = ""
    parts: tuple[PartPrice, ...] = ()

    def __post_init__(self) -> None:
        modes = tuple(self.modes)
        if not modes:
            raise PlantError("a plant needs at least one mode", field="modes")
        for k, mode in enumerate(modes):
            if not isinstance(mode, Mode):
                raise PlantError(
                    f"expected a Mode, got {type(mode).__name__}", field=f"modes[{k + 1}]"
                )
        object.__setattr__(self, "modes", modes)
        sites = {}
        for name, row in dict(self.sites).items():
            if not isinstance(name, str) or not name:
                raise PlantError(f"a site name must be a string, got {name!r}", field="sites")
            values = _shape_row(row, f"sites.{name}")
            if values.shape[0] != len(modes):
                raise PlantError(
                    f"has {values.shape[0]} values but the plant has {len(modes)} modes",
                    field=f"sites.{name}",
                )
            sites[name] = _readonly(values)
        object.__setattr__(self, "sites", MappingProxyType(sites))
        for group in ("actuators", "sensors", "pairs", "outputs", "disturbances", "parts"):
            object.__setattr__(self, group, tuple(getattr(self, group)))
        self._check_references()

    @classmethod
    def from_lumped(
        cls,
        mass: np.ndarray,
        stiffness: np.ndarray,
        dofs: Sequence[str],
        *,
        damping: float | np.ndarray = 0.0,
        **parts,
    ) -> ModalPlant:
        """Modal plant of a lumped (or FE) model M x'' + C x' + K x = f.

        Parameters
        ----------
        mass, stiffness : ndarray, shape (n, n)
            Symmetric mass (kg) and stiffness (N/m) matrices; M positive definite.
        dofs : sequence of str
            Site name of each degree of freedom (its mode-shape row in ``sites``).
        damping : float or ndarray, optional
            A damping ratio applied to every mode, or a damping matrix C (N·s/m); C must be
            proportional (diagonal in the modal basis), its modal damping ratios are
            φ_iᵀ C φ_i / (2 ω_i).
        **parts
            ``actuators``, ``sensors``, ``pairs``, ``outputs``, ``disturbances``,
            ``requirements``, ``title``, passed to the constructor.

        Returns
        -------
        ModalPlant
            Mass-normalized modes (modal mass 1 kg), sorted by frequency.
        """
        from scipy.linalg import eigh

        M = np.asarray(mass, dtype=float)
        K = np.asarray(stiffness, dtype=float)
        if M.ndim != 2 or M.shape != K.shape or M.shape[0] != M.shape[1]:
            raise PlantError("mass and stiffness must be square matrices of one size")
        if len(dofs) != M.shape[0]:
            raise PlantError(f"{len(dofs)} dof names for {M.shape[0]} degrees of freedom")
        eigenvalues, shapes = eigh(K, M)
        if np.any(eigenvalues <= 0):
            raise PlantError("the stiffness matrix must be positive definite (no rigid modes)")
        omegas = np.sqrt(eigenvalues)
        if np.ndim(damping) == 0:
            ratios = np.full(omegas.shape, float(damping))
        else:
            modal = shapes.T @ np.asarray(damping, dtype=float) @ shapes
            off = modal - np.diag(np.diag(modal))
            if np.max(np.abs(off)) > 1e-8 * max(np.max(np.abs(np.diag(modal))), 1e-300):
                raise PlantError(
                    "the damping matrix is not proportional (not diagonal in the modal basis)"
                )
            ratios = np.diag(modal) / (2.0 * omegas)
        modes = [
            Mode(freq_hz=w / (2.0 * np.pi), damping=z) for w, z in zip(omegas, ratios, strict=True)
        ]
        sites = {name: shapes[k] for k, name in enumerate(dofs)}
        return cls(modes=modes, sites=sites, **parts)

    # ------------------------------------------------------------------ validation
    def _check_references(self) -> None:
        for group in ("actuators", "sensors", "pairs", "outputs", "disturbances", "parts"):
            seen: set[str] = set()
            for k, item in enumerate(getattr(self, group)):
                if item.name in seen:
                    raise PlantError(
                        f"duplicate name {item.name!r}", field=f"{group}[{k + 1}].name"
                    )
                seen.add(item.name)
        for group in ("actuators", "sensors", "outputs", "disturbances"):
            for k, item in enumerate(getattr(self, group)):
                site = getattr(item, "site", None)
                between = getattr(item, "between", None) or ()
                for j, name in enumerate(([site] if site else []) + list(between)):
                    if name not in self.sites:
                        where = "site" if site else f"between[{j + 1}]"
                        raise PlantError(
                            _unknown("site", name, self.sites), field=f"{group}[{k + 1}].{where}"
                        )
        actuators = {a.name: a for a in self.actuators}
        for k, sensor in enumerate(self.sensors):
            if sensor.kind == "force":
                strut = actuators.get(sensor.actuator)
                if strut is None:
                    raise PlantError(
                        _unknown("actuator", sensor.actuator, actuators),
                        field=f"sensors[{k + 1}].actuator",
                    )
                if strut.kind != "strut":
                    raise PlantError(
                        f"force sensor needs a strut, but {strut.name!r} is a "
                        f"{strut.kind} actuator",
                        field=f"sensors[{k + 1}].actuator",
                    )
        kinds: set[str] = set()
        for k, part in enumerate(self.parts):
            if part.kind in kinds:
                raise PlantError(
                    f"a second row for kind {part.kind!r} (one price per kind of part)",
                    field=f"parts[{k + 1}].kind",
                )
            kinds.add(part.kind)
        sensors = {s.name: s for s in self.sensors}
        for k, pair in enumerate(self.pairs):
            if pair.actuator not in actuators:
                raise PlantError(
                    _unknown("actuator", pair.actuator, actuators), field=f"pairs[{k + 1}].actuator"
                )
            if pair.sensor not in sensors:
                raise PlantError(
                    _unknown("sensor", pair.sensor, sensors), field=f"pairs[{k + 1}].sensor"
                )
            sensor = sensors[pair.sensor]
            if pair.static_gain is not None and KIND_ORDER[sensor.kind] != 0:
                raise PlantError(
                    f"static_gain applies to displacement-like or force sensors, not {sensor.kind}",
                    field=f"pairs[{k + 1}].static_gain",
                )
        for k, number in enumerate(self.requirements.modes):
            if number > len(self.modes):
                raise PlantError(
                    f"mode {number} does not exist (the plant has {len(self.modes)})",
                    field=f"requirements.modes[{k + 1}]",
                )
        outputs = {o.name for o in self.outputs}
        for name in self.requirements.max_rms:
            if name not in outputs:
                raise PlantError(
                    _unknown("output", name, outputs), field=f"requirements.max_rms.{name}"
                )

    # ------------------------------------------------------------------ look-ups
    def to_dict(self) -> dict[str, Any]:
        """The plant file's content as plain Python values (what ``dump_plant`` writes)."""
        from dampctl.model.plantfile import _document

        return _document(self)

    def to_frame(self):
        """The modes as a pandas DataFrame (needs pandas: ``pip install pandas``)."""
        from dampctl.tables import frame, plant_rows

        return frame(plant_rows(self))

    def _repr_html_(self) -> str:
        from dampctl.tables import plant_html

        return plant_html(self)

    @property
    def n_modes(self) -> int:
        """Number of modes."""
        return len(self.modes)

    @property
    def omegas(self) -> np.ndarray:
        """Natural frequencies (rad/s), one per mode."""
        return np.array([m.omega for m in self.modes])

    @property
    def freqs_hz(self) -> np.ndarray:
        """Natural frequencies (Hz), one per mode."""
        return np.array([m.freq_hz for m in self.modes])

    @property
    def dampings(self) -> np.ndarray:
        """Damping ratios, one per mode."""
        return np.array([m.damping for m in self.modes])

    @property
    def modal_masses(self) -> np.ndarray:
        """Modal masses (kg), one per mode."""
        return np.array([m.modal_mass_kg for m in self.modes])

    def actuator(self, name: str) -> Actuator:
        """The actuator called ``name``.

        Parameters
        ----------
        name : str
            Actuator name.

        Returns
        -------
        Actuator
        """
        return _lookup(self.actuators, name, "actuator")

    def sensor(self, name: str) -> Sensor:
        """The sensor called ``name``.

        Parameters
        ----------
        name : str
            Sensor name.

        Returns
        -------
        Sensor
        """
        return _lookup(self.sensors, name, "sensor")

    def pair(self, name: str) -> Pair:
        """The pair called ``name``.

        Parameters
        ----------
        name : str
            Pair name.

        Returns
        -------
        Pair
        """
        return _lookup(self.pairs, name, "pair")

    def output(self, name: str) -> Output:
        """The performance output called ``name``.

        Parameters
        ----------
        name : str
            Output name.

        Returns
        -------
        Output
        """
        return _lookup(self.outputs, name, "output")

    def disturbance(self, name: str) -> Disturbance:
        """The disturbance called ``name``.

        Parameters
        ----------
        name : str
            Disturbance name.

        Returns
        -------
        Disturbance
        """
        return _lookup(self.disturbances, name, "disturbance")

    def part_price(self, kind: str, mass_kg: float = 0.0) -> float | None:
        """Cost of one passive part of a kind, from the ``[[parts]]`` table.

        Parameters
        ----------
        kind : str
            ``absorber``, ``damper``, ``r_shunt`` or ``rl_shunt``.
        mass_kg : float, optional
            Absorber mass (kg), for a price per kg.

        Returns
        -------
        float or None
            The price; None when the table has no row of that kind.
        """
        part = next((p for p in self.parts if p.kind == kind), None)
        return None if part is None else part.price(mass_kg)

    @property
    def fingerprint(self) -> str:
        """Short hash of everything a damping design depends on, and of nothing else.

        In it: the modes (frequency, damping, modal mass), the mode shapes at every site, the
        actuators' and sensors' kinds, sites, strut stiffness, piezo constants and roll-offs
        (``bandwidth_hz``), the pairs, and the loop delay and sample rate of the requirements.
        Left out: costs, sensor noise densities and force or stroke limits (assessment reads
        those from the plant it is given), outputs, disturbances, the other requirements, part
        prices and the title, so editing them does not invalidate a design.
        """
        req = self.requirements
        payload = {
            "modes": [[m.freq_hz, m.damping, m.modal_mass_kg] for m in self.modes],
            "sites": {k: [float(x) for x in v] for k, v in sorted(self.sites.items())},
            "actuators": [_plain(a, _NOT_DESIGN_KEYS) for a in self.actuators],
            "sensors": [_plain(s, _NOT_DESIGN_KEYS) for s in self.sensors],
            "pairs": [_plain(p) for p in self.pairs],
            "loop": [req.loop_delay_s, req.sample_rate_hz],
        }
        return _hash(payload)

    @property
    def legacy_fingerprint(self) -> str:
        """The fingerprint as dampctl 0.x wrote it before the loop delay and sample rate entered
        it and costs, noise and limits left it; design files carrying it are still accepted."""
        payload = {
            "modes": [[m.freq_hz, m.damping, m.modal_mass_kg] for m in self.modes],
            "sites": {k: [float(x) for x in v] for k, v in sorted(self.sites.items())},
            "actuators": [_plain(a) for a in self.actuators],
            "sensors": [_plain(s) for s in self.sensors],
            "pairs": [_plain(p) for p in self.pairs],
        }
        return _hash(payload)

    # ------------------------------------------------------------------ modal rows
    def input_row(self, name: str) -> np.ndarray:
        """Modal input row b (per unit input, already divided by modal mass) of an input.

        Parameters
        ----------
        name : str
            An actuator or a disturbance name.

        Returns
        -------
        ndarray, shape (n_modes,)
            b_i in (1/kg) per N for forces, (N/m)/kg per m of extension for struts.
        """
        masses = self.modal_masses
        for actuator in self.actuators:
            if actuator.name == name:
                if actuator.kind == "force":
                    return self.sites[actuator.site] / masses
                a, b = actuator.between
                return actuator.stiffness_n_per_m * (self.sites[b] - self.sites[a]) / masses
        for disturbance in self.disturbances:
            if disturbance.name == name:
                return self.sites[disturbance.site] / masses
        raise PlantError(
            _unknown(
                "input",
                name,
                [a.name for a in self.actuators] + [d.name for d in self.disturbances],
            )
        )

    def _channel(self, name: str) -> _Channel:
        item = next((s for s in self.sensors if s.name == name), None)
        if item is None:
            item = next((o for o in self.outputs if o.name == name), None)
        if item is None:
            raise PlantError(
                _unknown(
                    "output", name, [s.name for s in self.sensors] + [o.name for o in self.outputs]
                )
            )
        if item.kind == "force":
            strut = self.actuator(item.actuator)
            a, b = strut.between
            k_s = strut.stiffness_n_per_m
            return _Channel(k_s * (self.sites[b] - self.sites[a]), 0, {strut.name: -k_s})
        if item.between is not None:
            a, b = item.between
            row = self.sites[b] - self.sites[a]
        else:
            row = self.sites[item.site]
        return _Channel(np.array(row), KIND_ORDER[item.kind], {})

    def output_row(self, name: str) -> tuple[np.ndarray, int]:
        """Modal output row c and derivative order of a sensor or performance output.

        Parameters
        ----------
        name : str
            A sensor or performance-output name.

        Returns
        -------
        row : ndarray, shape (n_modes,)
            c_i such that the output is Σ c_i d^order q_i/dt^order (+ feedthrough).
        order : int
            0 displacement-like (and force), 1 velocity, 2 acceleration.
        """
        channel = self._channel(name)
        return channel.row.copy(), channel.order

    def _matrices(self, inputs: Sequence[str], outputs: Sequence[str]):
        """Modal rows (B: n_modes×n_in, C: n_out×n_modes), orders and the constant term D.

        D holds the sensors' own feedthrough (strut force) and the residual-flexibility
        correction; the acceleration feedthrough c·b belongs to the state-space form only (the
        modal sum with (jω)² already contains it).
        """
        inputs, outputs = list(inputs), list(outputs)
        B = (
            np.column_stack([self.input_row(n) for n in inputs])
            if inputs
            else np.zeros((self.n_modes, 0))
        )
        channels = [self._channel(n) for n in outputs]
        C = np.array([ch.row for ch in channels]).reshape(len(outputs), self.n_modes)
        orders = np.array([ch.order for ch in channels], dtype=int)
        D = np.zeros((len(outputs), len(inputs)))
        for o, ch in enumerate(channels):
            for j, name in enumerate(inputs):
                D[o, j] += ch.feed.get(name, 0.0)
        D += self._residual(inputs, outputs, B, C, orders)
        return B, C, orders, D

    def _residual(self, inputs, outputs, B, C, orders) -> np.ndarray:
        """Static residual-flexibility correction from pairs with a static_gain."""
        D = np.zeros((len(outputs), len(inputs)))
        w2 = self.omegas**2
        for pair in self.pairs:
            if (
                pair.static_gain is None
                or pair.actuator not in inputs
                or pair.sensor not in outputs
            ):
                continue
            j, o = inputs.index(pair.actuator), outputs.index(pair.sensor)
            modal_dc = float(np.sum(C[o] * B[:, j] / w2)) + self._channel(pair.sensor).feed.get(
                pair.actuator, 0.0
            )
            D[o, j] = pair.static_gain - modal_dc
        return D

    # ------------------------------------------------------------------ models
    def statespace_matrices(
        self, inputs: Sequence[str], outputs: Sequence[str]
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """State-space matrices (A, B, C, D) in the balanced modal form, as plain arrays.

        Parameters
        ----------
        inputs : sequence of str
            Actuator or disturbance names (inputs in that order; units N or m).
        outputs : sequence of str
            Sensor or performance-output names (outputs in that order; SI units).

        Returns
        -------
        A : ndarray, shape (2 n_modes, 2 n_modes)
            Block diagonal, blocks [[0, ω_i], [−ω_i, −2ζ_iω_i]]; states [ω_i q_i, q_i'].
        B, C, D : ndarray
            Input, output and feedthrough matrices.
        """
        b, c, orders, D = self._matrices(inputs, outputs)
        D = D + (orders == 2)[:, None] * (c @ b)  # q'' = b u − ω² q − 2ζω q': direct term c·b
        w, z = self.omegas, self.dampings
        n = self.n_modes
        A = np.zeros((2 * n, 2 * n))
        idx = np.arange(n)
        A[2 * idx, 2 * idx + 1] = w
        A[2 * idx + 1, 2 * idx] = -w
        A[2 * idx + 1, 2 * idx + 1] = -2.0 * z * w
        B = np.zeros((2 * n, b.shape[1]))
        B[2 * idx + 1, :] = b
        C = np.zeros((c.shape[0], 2 * n))
        for o, order in enumerate(orders):
            if order == 0:
                C[o, 2 * idx] = c[o] / w
            elif order == 1:
                C[o, 2 * idx + 1] = c[o]
            else:
                C[o, 2 * idx] = -w * c[o]
                C[o, 2 * idx + 1] = -2.0 * z * w * c[o]
        return A, B, C, D

    def statespace(self, actuators: Sequence[str], sensors: Sequence[str]):
        """The plant as a python-control ``StateSpace`` with named signals.

        Parameters
        ----------
        actuators : sequence of str
            Input names: actuators (or disturbances), in order. Units N (force) or m (strut).
        sensors : sequence of str
            Output names: sensors (or performance outputs), in order, SI units.

        Returns
        -------
        control.StateSpace
            Balanced modal form (states ``wq1, dq1, wq2, dq2, ...``); signal and system names
            are identifiers (:func:`signal_name`) so ``control.interconnect`` can address them.
        """
        import control

        A, B, C, D = self.statespace_matrices(actuators, sensors)
        states = [f"{tag}{i + 1}" for i in range(self.n_modes) for tag in ("wq", "dq")]
        return control.ss(
            A,
            B,
            C,
            D,
            inputs=[signal_name(a) for a in actuators],
            outputs=[signal_name(s) for s in sensors],
            states=states,
            name=signal_name(self.title or "plant"),
        )

    def frf(
        self,
        freq_hz: np.ndarray,
        actuators: Sequence[str],
        sensors: Sequence[str],
        *,
        engine: Engine = "auto",
    ) -> np.ndarray:
        """Frequency response from the modal sum.

        Parameters
        ----------
        freq_hz : array_like
            Frequencies (Hz), any shape flattened to one dimension.
        actuators : sequence of str
            Input names (actuators or disturbances).
        sensors : sequence of str
            Output names (sensors or performance outputs).
        engine : {"auto", "numpy", "compiled"}, optional
            How the modal basis is computed (:mod:`dampctl.model.modalbasis`): ``"compiled"`` needs
            numba (the ``fast`` extra); ``"auto"`` (default) uses it for large problems when
            it is installed. Both give the same response to rounding.

        Returns
        -------
        ndarray of complex, shape (n_out, n_in, n_freq)
            H[o, j, k]: response of output o to a unit harmonic input j at freq_hz[k], in
            output unit per input unit.

        Notes
        -----
        Evaluates H = Σ_i c_i (jω)^order b_i / (ω_i² − ω² + 2jζ_iω_iω) + D as one real matrix
        product of the (real) rank-one residues c_i b_i with the modal basis
        1/(ω_i² − ω² + 2jζ_iω_iω), its complex entries read as pairs of reals, so the cost is
        one (n_out·n_in) × n_modes × (2 n_freq) real product. The frequencies go in blocks:
        each block's basis is written into one scratch array allocated once per call and the
        product goes straight into the result; (jω)^order and D are applied at the end, output
        by output. All in float64; nothing is kept between calls.
        """
        freq = np.asarray(freq_hz, dtype=float).ravel()
        if not np.all(np.isfinite(freq)) or np.any(freq < 0):
            raise PlantError("frequencies must be finite and >= 0", field="freq_hz")
        b, c, orders, D = self._matrices(actuators, sensors)
        n_out, n_in = c.shape[0], b.shape[1]
        w = 2.0 * np.pi * freq
        n_modes, n_f = self.n_modes, w.size
        kind = resolve_engine(engine, n_modes, n_f)
        size = block_frequencies(kind, n_modes, n_f)
        filler = BasisFiller(self.omegas, self.dampings, kind, size)
        residues = (c[:, None, :] * b.T[None, :, :]).reshape(n_out * n_in, n_modes)
        h = np.empty((n_out, n_in, n_f), dtype=complex)
        h_pairs = h.reshape(n_out * n_in, n_f).view(float)  # (re, im) pairs of reals
        scratch = np.empty((n_modes, 2 * size))
        for lo in range(0, n_f, size):
            hi = min(lo + size, n_f)
            basis = scratch[:, : 2 * (hi - lo)]
            filler.fill(w[lo:hi], basis)
            np.matmul(residues, basis, out=h_pairs[:, 2 * lo : 2 * hi])
        # one output row (n_in, n_f) at a time: contiguous, and much faster than a fancy index
        if np.any(orders == 1):
            jw = 1j * w
            for o in np.flatnonzero(orders == 1):
                h[o] *= jw
        if np.any(orders == 2):
            minus_w2 = (-(w * w)).astype(complex)
            for o in np.flatnonzero(orders == 2):
                h[o] *= minus_w2
        if np.any(D != 0.0):
            h.real += D[:, :, None]
        return h


def _readonly(array: np.ndarray) -> np.ndarray:
    array = np.array(array, dtype=float, copy=True)
    array.setflags(write=False)
    return array


def _shape_row(row, field: str) -> np.ndarray:
    """A site's shape values: a flat list of finite numbers inside ``RANGES["shape"]``.

    Booleans, strings, nested lists and integers too large for a float are refused with the
    value's position (counted from 1), never handed to numpy's conversions.
    """
    bounds = RANGES["shape"]
    if isinstance(row, np.ndarray) and row.ndim == 1 and row.dtype.kind in "iuf":
        values = row.astype(float)
    else:
        if not isinstance(row, list | tuple | np.ndarray):
            raise PlantError(
                f"expected a list of numbers, one per mode, got {describe(row)}", field=field
            )
        values = np.array(
            [read_float(v, f"{field}[{k + 1}]", error=PlantError) for k, v in enumerate(row)],
            dtype=float,
        )
    bad = np.flatnonzero(~np.isfinite(values) | (np.abs(values) > bounds.high))
    if bad.size:
        k = int(bad[0])
        read_float(float(values[k]), f"{field}[{k + 1}]", bounds=bounds, error=PlantError)
    return values


#: keys added to the hardware after design files existed: left out of the fingerprint while
#: unset, so a plant that does not use them keeps its fingerprint (and its designs stay valid)
_LATER_KEYS = frozenset({"capacitance_f", "coupling_k"})


#: hardware keys a design does not depend on (assessment reads them from the plant it is given)
_NOT_DESIGN_KEYS = frozenset({"cost", "noise_density", "max_force_n", "max_stroke_m"})


def _hash(payload: dict) -> str:
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), default=repr)
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _plain(item, leave_out: frozenset[str] = frozenset()) -> dict:
    out = {}
    for key, value in item.__dict__.items():
        if key in leave_out or (key in _LATER_KEYS and value is None):
            continue
        out[key] = list(value) if isinstance(value, tuple) else value
    return out


def _unknown(what: str, name, known) -> str:
    known = sorted(known)
    listing = ", ".join(known) if known else "none defined"
    return f"unknown {what} {name!r} (known: {listing})"


def _lookup(items, name: str, what: str):
    for item in items:
        if item.name == name:
            return item
    raise PlantError(_unknown(what, name, [i.name for i in items]))
