"""Measured frequency response functions: the value, and the files it is read from.

A :class:`MeasuredFRF` holds the FRFs of a modal test: ``frf[o, j, k]`` is output ``o`` per
unit force at input ``j`` at ``freq_hz[k]``. Inputs are forces (N); each output is a
``displacement`` (m), ``velocity`` (m/s), ``acceleration`` (m/s²) or ``force`` (N). An
optional ordinary coherence (0 to 1) per channel and frequency says how much to trust each
value. Channels are named ``OUTPUT/INPUT``.

Two file forms are read by :func:`load_frf`:

``.npz`` (numpy archive)
    ``freq_hz`` (n_f), ``frf`` (complex, n_out × n_in × n_f), ``inputs`` and ``outputs``
    (names), ``output_kind`` (one per output) and, optionally, ``coherence`` (real, the shape
    of ``frf``). No other keys.
``.csv``
    a header ``freq_hz,<output>/<input> re,<output>/<input> im,...`` and one row per frequency;
    optional ``<output>/<input> coherence`` columns. Every output/input combination must be
    present. The output kinds are not in the file: they are given by the caller (the command
    line's ``--output-kind``).

Every problem is a :class:`~dampctl.errors.MeasurementError` naming the file and the array or
column, e.g. ``test.csv: column 4 (acc2/hammer im): line 17: not a number ('x')``.
"""

from __future__ import annotations

import csv
import io
import zipfile
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType

import numpy as np

from dampctl.errors import MeasurementError, UsageError

__all__ = ["MEASURED_KINDS", "MeasuredFRF", "load_frf"]

#: kinds of measured output and the power of jω that turns a receptance (m/N) into them
MEASURED_KINDS: Mapping[str, int] = MappingProxyType(
    {"displacement": 0, "velocity": 1, "acceleration": 2, "force": 0}
)
_NPZ_KEYS = ("freq_hz", "frf", "inputs", "outputs", "output_kind")
_NPZ_OPTIONAL = ("coherence",)


@dataclass(frozen=True)
class MeasuredFRF:
    """FRFs of a modal test: outputs per unit input force, at increasing frequencies.

    Parameters
    ----------
    freq_hz : array_like, shape (n_f,)
        Frequencies (Hz), finite, >= 0, strictly increasing, at least 4.
    frf : array_like of complex, shape (n_out, n_in, n_f)
        ``frf[o, j, k]``: output ``o`` (its SI unit) per newton at input ``j``.
    outputs, inputs : sequence of str
        Unique names (no ``/``); a channel is named ``OUTPUT/INPUT``.
    output_kinds : sequence of str
        Per output: ``displacement``, ``velocity``, ``acceleration`` or ``force``.
    coherence : array_like, shape (n_out, n_in, n_f), optional
        Ordinary coherence of each value, in [0, 1].
    source : str, optional
        Where the data came from (a file name), used in messages.

    Raises
    ------
    MeasurementError
        When a shape, a value or a name is invalid; the message names the source and the field.
    """

    freq_hz: np.ndarray
    frf: np.ndarray
    outputs: tuple[str, ...]
    inputs: tuple[str, ...]
    output_kinds: tuple[str, ...]
    coherence: np.ndarray | None = None
    source: str = ""

    def __post_init__(self) -> None:
        src = self.source or None
        freq = _array(self.freq_hz, float, "freq_hz", src)
        if freq.ndim != 1 or freq.size < 4:
            raise MeasurementError(f"expected at least 4 frequencies in one row, got shape "
                                   f"{freq.shape}", source=src, field="freq_hz")
        if not np.all(np.isfinite(freq)) or np.any(freq < 0) or np.any(np.diff(freq) <= 0):
            raise MeasurementError("frequencies must be finite, >= 0 and strictly increasing",
                                   source=src, field="freq_hz")
        outputs = _names(self.outputs, "outputs", src)
        inputs = _names(self.inputs, "inputs", src)
        frf = _array(self.frf, complex, "frf", src)
        expected = (len(outputs), len(inputs), freq.size)
        if frf.shape != expected:
            raise MeasurementError(
                f"expected shape {expected} (outputs × inputs × frequencies), got {frf.shape}",
                source=src, field="frf")
        bad = np.argwhere(~np.isfinite(frf))
        if bad.size:
            o, j, k = bad[0]
            raise MeasurementError(f"{outputs[o]}/{inputs[j]} at {freq[k]:g} Hz is not finite",
                                   source=src, field="frf")
        kinds = tuple(str(k) for k in self.output_kinds)
        if len(kinds) != len(outputs):
            raise MeasurementError(f"expected {len(outputs)} kinds (one per output), got "
                                   f"{len(kinds)}", source=src, field="output_kind")
        for name, kind in zip(outputs, kinds, strict=True):
            if kind not in MEASURED_KINDS:
                raise MeasurementError(
                    f"output {name!r}: kind must be one of {', '.join(MEASURED_KINDS)}, got "
                    f"{kind!r}", source=src, field="output_kind")
        coherence = None
        if self.coherence is not None:
            coherence = _array(self.coherence, float, "coherence", src)
            if coherence.shape != expected:
                raise MeasurementError(f"expected the shape of frf {expected}, got "
                                       f"{coherence.shape}", source=src, field="coherence")
            if not np.all(np.isfinite(coherence)) or np.any((coherence < 0) | (coherence > 1)):
                raise MeasurementError("values must be in [0, 1]", source=src, field="coherence")
            coherence.setflags(write=False)
        freq.setflags(write=False)
        frf.setflags(write=False)
        object.__setattr__(self, "freq_hz", freq)
        object.__setattr__(self, "frf", frf)
        object.__setattr__(self, "outputs", outputs)
        object.__setattr__(self, "inputs", inputs)
        object.__setattr__(self, "output_kinds", kinds)
        object.__setattr__(self, "coherence", coherence)

    @property
    def channels(self) -> tuple[str, ...]:
        """Channel names ``OUTPUT/INPUT``, output by output (the order of ``frf`` flattened)."""
        return tuple(f"{o}/{j}" for o in self.outputs for j in self.inputs)

    @property
    def kind_orders(self) -> np.ndarray:
        """Per output, the power of jω between a receptance and the measured kind (0, 1, 2)."""
        return np.array([MEASURED_KINDS[k] for k in self.output_kinds], dtype=int)

    def channel(self, name: str) -> tuple[int, int]:
        """Indices (output, input) of a channel ``OUTPUT/INPUT``.

        Parameters
        ----------
        name : str
            The channel name.

        Returns
        -------
        tuple of int
        """
        out, _, inp = str(name).partition("/")
        if out not in self.outputs or inp not in self.inputs:
            raise UsageError(f"unknown channel {name!r} (outputs: {', '.join(self.outputs)}; "
                             f"inputs: {', '.join(self.inputs)}; write OUTPUT/INPUT)")
        return self.outputs.index(out), self.inputs.index(inp)

    def band(self, low_hz: float, high_hz: float) -> MeasuredFRF:
        """The same measurement restricted to ``low_hz <= f <= high_hz``.

        Parameters
        ----------
        low_hz, high_hz : float
            Band edges (Hz).

        Returns
        -------
        MeasuredFRF
        """
        keep = (self.freq_hz >= low_hz) & (self.freq_hz <= high_hz)
        if np.count_nonzero(keep) < 4:
            raise UsageError(f"the band {low_hz:g}-{high_hz:g} Hz holds {np.count_nonzero(keep)} "
                             f"measured frequencies (the data run {self.freq_hz[0]:g}-"
                             f"{self.freq_hz[-1]:g} Hz); at least 4 are needed")
        coherence = None if self.coherence is None else self.coherence[:, :, keep]
        return MeasuredFRF(self.freq_hz[keep], self.frf[:, :, keep], self.outputs, self.inputs,
                           self.output_kinds, coherence, self.source)


def _array(value, dtype, name: str, source: str | None) -> np.ndarray:
    try:
        array = np.array(value, dtype=dtype, copy=True)
    except (TypeError, ValueError):
        kind = "complex numbers" if dtype is complex else "numbers"
        raise MeasurementError(f"expected an array of {kind}", source=source,
                               field=name) from None
    return array


def _names(value, field: str, source: str | None) -> tuple[str, ...]:
    names = tuple(str(v) for v in np.asarray(value, dtype=object).ravel())
    if not names:
        raise MeasurementError("expected at least one name", source=source, field=field)
    for name in names:
        if not name.strip() or "/" in name or name != name.strip():
            raise MeasurementError(f"invalid name {name!r} (not empty, no '/', no leading or "
                                   "trailing spaces)", source=source, field=field)
    if len(set(names)) != len(names):
        repeated = next(n for n in names if names.count(n) > 1)
        raise MeasurementError(f"name {repeated!r} is repeated", source=source, field=field)
    return names


def load_frf(
    path: str | Path, *, output_kinds: str | Mapping[str, str] | None = None
) -> MeasuredFRF:
    """Read measured FRFs from a ``.npz`` or ``.csv`` file.

    Parameters
    ----------
    path : str or path-like
        The file (see the module documentation for both forms).
    output_kinds : str or mapping of str to str, optional
        Kinds of the outputs of a CSV file: one kind for every output, or output name to kind.
        Not allowed for ``.npz`` files, which state their own.

    Returns
    -------
    MeasuredFRF

    Raises
    ------
    MeasurementError
        When the file cannot be read or a key, column or value is wrong (naming file and
        array or column).
    UsageError
        When output kinds are missing for a CSV file or given for an ``.npz`` file.
    """
    path = Path(path)
    source = str(path)
    suffix = path.suffix.lower()
    if suffix not in (".npz", ".csv"):
        raise MeasurementError("expected a .npz or .csv file of measured FRFs", source=source)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise MeasurementError(f"cannot read the file ({exc.strerror or exc})",
                               source=source) from None
    if suffix == ".npz":
        if output_kinds is not None:
            raise UsageError(f"{source}: a .npz file states its output kinds (output_kind); "
                             "give output kinds only for CSV files")
        return _read_npz(raw, source)
    return _read_csv(raw, source, output_kinds)


def _read_npz(raw: bytes, source: str) -> MeasuredFRF:
    try:
        archive = np.load(io.BytesIO(raw), allow_pickle=False)
    except (ValueError, OSError, zipfile.BadZipFile) as exc:
        raise MeasurementError(f"not a numpy .npz archive ({exc})", source=source) from None
    if not isinstance(archive, np.lib.npyio.NpzFile):
        raise MeasurementError("not a numpy .npz archive (a single array)", source=source)
    with archive:
        keys = set(archive.files)
        for key in sorted(keys - set(_NPZ_KEYS) - set(_NPZ_OPTIONAL)):
            raise MeasurementError(
                f"unknown array (allowed: {', '.join(_NPZ_KEYS + _NPZ_OPTIONAL)})",
                source=source, field=key)
        for key in _NPZ_KEYS:
            if key not in keys:
                raise MeasurementError("missing array", source=source, field=key)
        values = {}
        for key in sorted(keys):
            try:
                values[key] = archive[key]
            except ValueError as exc:  # object arrays need pickle, which is refused
                raise MeasurementError(f"cannot be read without pickle ({exc}); store names "
                                       "as a string array", source=source, field=key) from None
    for key in ("inputs", "outputs", "output_kind"):
        if values[key].dtype.kind not in "U":
            raise MeasurementError(f"expected an array of strings, got dtype "
                                   f"{values[key].dtype}", source=source, field=key)
    for key in ("freq_hz", "frf", "coherence"):
        if key in values and values[key].dtype.kind not in "iufc":
            raise MeasurementError(f"expected numbers, got dtype {values[key].dtype}",
                                   source=source, field=key)
    if "coherence" in values and values["coherence"].dtype.kind == "c":
        raise MeasurementError("expected real values", source=source, field="coherence")
    if values["freq_hz"].dtype.kind == "c":
        raise MeasurementError("expected real values", source=source, field="freq_hz")
    return MeasuredFRF(values["freq_hz"], values["frf"], tuple(values["outputs"].ravel()),
                       tuple(values["inputs"].ravel()), tuple(values["output_kind"].ravel()),
                       values.get("coherence"), source)


def _read_csv(raw: bytes, source: str, output_kinds) -> MeasuredFRF:
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise MeasurementError("not a text (UTF-8) file", source=source) from None
    rows = [row for row in csv.reader(io.StringIO(text)) if row and any(c.strip() for c in row)]
    if len(rows) < 2:
        raise MeasurementError("expected a header and rows of values", source=source)
    header = [h.strip() for h in rows[0]]
    if header[0] != "freq_hz":
        raise MeasurementError(f"the first column must be freq_hz, got {header[0]!r}",
                               source=source, field="column 1")
    columns: dict[tuple[str, str, str], int] = {}
    outputs: list[str] = []
    inputs: list[str] = []
    for c, name in enumerate(header[1:], start=2):
        where = f"column {c} ({name})"
        channel, _, part = name.rpartition(" ")
        out, slash, inp = channel.partition("/")
        if part not in ("re", "im", "coherence") or not slash or not out or not inp or "/" in inp:
            raise MeasurementError("expected '<output>/<input> re', '... im' or "
                                   "'... coherence'", source=source, field=where)
        if (out, inp, part) in columns:
            raise MeasurementError("repeated column", source=source, field=where)
        columns[(out, inp, part)] = c - 1
        outputs += [] if out in outputs else [out]
        inputs += [] if inp in inputs else [inp]
    has_coherence = any(part == "coherence" for _, _, part in columns)
    parts = ("re", "im", "coherence") if has_coherence else ("re", "im")
    for out in outputs:
        for inp in inputs:
            for part in parts:
                if (out, inp, part) not in columns:
                    raise MeasurementError(
                        f"missing column '{out}/{inp} {part}' (every output/input combination "
                        f"needs {' and '.join(parts)})", source=source)
    values = np.empty((len(rows) - 1, len(header)))
    for r, row in enumerate(rows[1:], start=2):
        if len(row) != len(header):
            raise MeasurementError(f"line {r}: {len(row)} values for {len(header)} columns",
                                   source=source)
        for c, cell in enumerate(row):
            try:
                values[r - 2, c] = float(cell)
            except ValueError:
                raise MeasurementError(f"line {r}: not a number ({cell.strip()!r})",
                                       source=source,
                                       field=f"column {c + 1} ({header[c]})") from None
            if not np.isfinite(values[r - 2, c]):
                raise MeasurementError(f"line {r}: not finite ({cell.strip()!r})",
                                       source=source, field=f"column {c + 1} ({header[c]})")
    frf = np.empty((len(outputs), len(inputs), values.shape[0]), dtype=complex)
    coherence = np.empty(frf.shape) if has_coherence else None
    for o, out in enumerate(outputs):
        for j, inp in enumerate(inputs):
            frf[o, j] = values[:, columns[(out, inp, "re")]] + 1j * values[
                :, columns[(out, inp, "im")]]
            if coherence is not None:
                coherence[o, j] = values[:, columns[(out, inp, "coherence")]]
    kinds = _csv_kinds(outputs, output_kinds, source)
    return MeasuredFRF(values[:, 0], frf, tuple(outputs), tuple(inputs), kinds, coherence,
                       source)


def _csv_kinds(outputs: Sequence[str], output_kinds, source: str) -> tuple[str, ...]:
    if output_kinds is None:
        raise UsageError(f"{source}: a CSV file does not say what its outputs measure: give "
                         f"their kinds (--output-kind {outputs[0]}=acceleration, or one kind "
                         "for all)")
    if isinstance(output_kinds, str):
        return tuple(output_kinds for _ in outputs)
    unknown = sorted(set(output_kinds) - set(outputs))
    if unknown:
        raise UsageError(f"{source}: output kind given for {unknown[0]!r}, which is not an "
                         f"output of the file (outputs: {', '.join(outputs)})")
    missing = [o for o in outputs if o not in output_kinds]
    if missing:
        raise UsageError(f"{source}: no output kind for {', '.join(missing)} (give "
                         f"--output-kind {missing[0]}=KIND)")
    return tuple(output_kinds[o] for o in outputs)
