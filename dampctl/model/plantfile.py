"""Plant files: TOML in, :class:`~dampctl.model.plant.ModalPlant` out (and back).

Every problem is reported as a :class:`~dampctl.errors.PlantFileError` (or its parent
:class:`~dampctl.errors.PlantError`) naming the file, the field and what is wrong, e.g.
``stage.toml: modes[3].damping: must be in [0, 1), got 1.2``. Indices in field names count from
1, like mode numbers. The keys are documented in the README ("The plant file").
"""

from __future__ import annotations

import sys
import tomllib
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import numpy as np
import tomli_w

from dampctl.errors import PlantError, PlantFileError
from dampctl.model.plant import (
    Actuator,
    Disturbance,
    ModalPlant,
    Mode,
    Output,
    Pair,
    PartPrice,
    Requirements,
    Sensor,
)
from dampctl.values import describe

__all__ = ["dump_plant", "load_plant", "parse_plant"]

#: the plant-file name that means standard input
STDIN = "-"

_TOP_KEYS = {
    "title",
    "modes",
    "sites",
    "actuators",
    "sensors",
    "pairs",
    "outputs",
    "disturbances",
    "requirements",
    "parts",
}
_KEYS: dict[str, tuple[set[str], set[str]]] = {
    # group: (required, optional)
    "modes": ({"freq_hz", "damping"}, {"label", "modal_mass_kg"}),
    "actuators": (
        {"name", "kind"},
        {
            "site",
            "between",
            "stiffness_n_per_m",
            "max_force_n",
            "max_stroke_m",
            "bandwidth_hz",
            "cost",
            "capacitance_f",
            "coupling_k",
        },
    ),
    "sensors": (
        {"name", "kind"},
        {"site", "between", "actuator", "noise_density", "bandwidth_hz", "cost"},
    ),
    "pairs": ({"name", "actuator", "sensor"}, {"static_gain"}),
    "outputs": ({"name", "kind"}, {"site", "between"}),
    "disturbances": ({"name", "site", "psd"}, {"kind"}),
    "parts": ({"name", "kind"}, {"cost", "cost_per_kg"}),
}
_REQUIREMENT_KEYS = {
    "modes",
    "min_damping",
    "sample_rate_hz",
    "loop_delay_s",
    "min_gain_margin_db",
    "min_phase_margin_deg",
    "min_disk_margin_db",
    "max_rms",
}
_STRING_KEYS = {"name", "kind", "site", "actuator", "sensor", "label"}
_FACTORIES: dict[str, Callable[..., Any]] = {
    "modes": Mode,
    "actuators": Actuator,
    "sensors": Sensor,
    "pairs": Pair,
    "outputs": Output,
    "disturbances": Disturbance,
    "parts": PartPrice,
}


def load_plant(path: str | Path) -> ModalPlant:
    """Read a plant file.

    Parameters
    ----------
    path : str or path-like
        A TOML plant file (SI units; frequencies in Hz). The string ``"-"`` reads the plant
        from standard input, as command-line programs do (``cat plant.toml | dampctl check -``).

    Returns
    -------
    ModalPlant
        The validated plant.

    Raises
    ------
    PlantFileError
        When the file cannot be read, is not TOML, or has a missing or unknown key.
    PlantError
        When a value is invalid; the message names the file and the field.
    """
    if isinstance(path, str) and path == STDIN:
        source = "<stdin>"
        raw = sys.stdin.buffer.read() if hasattr(sys.stdin, "buffer") else sys.stdin.read()
        if isinstance(raw, str):
            return parse_plant(raw, source=source)
    else:
        path = Path(path)
        source = str(path)
        try:
            raw = path.read_bytes()
        except OSError as exc:
            raise PlantFileError(
                f"cannot read the plant file ({exc.strerror or exc})", source=source
            ) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise PlantFileError("not a text (UTF-8) file", source=source) from None
    return parse_plant(text, source=source)


def parse_plant(text: str, *, source: str = "<plant>") -> ModalPlant:
    """Build a plant from the text of a plant file.

    Parameters
    ----------
    text : str
        TOML text.
    source : str, optional
        Name used for the file in error messages.

    Returns
    -------
    ModalPlant
        The validated plant.
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PlantFileError(f"not valid TOML ({exc})", source=source) from None
    except RecursionError:
        raise PlantFileError(
            "arrays or tables are nested too deeply to read (a plant file needs two levels)",
            source=source,
        ) from None
    try:
        return _build(data)
    except RecursionError:
        raise PlantFileError(
            "a value is nested too deeply (a plant file needs two levels)", source=source
        ) from None
    except PlantError as exc:
        cls = type(exc)
        raise cls(exc.message, source=source, field=exc.field) from None


def _build(data: Mapping[str, Any]) -> ModalPlant:
    _check_keys(data, set(), _TOP_KEYS, "")
    if "modes" not in data:
        raise PlantFileError("missing required key (at least one [[modes]] table)", field="modes")
    if "sites" not in data:
        raise PlantFileError(
            "missing required key ([sites] table of mode-shape rows)", field="sites"
        )
    groups = {name: _records(data, name) for name in _KEYS}
    sites = data["sites"]
    if not isinstance(sites, dict):
        raise PlantFileError("expected a table of name = [values]", field="sites")
    for name, row in sites.items():  # each value is read strictly by ModalPlant
        if not isinstance(row, list):
            raise PlantError(
                f"expected a list of numbers, one per mode, got {describe(row)}",
                field=f"sites.{name}",
            )
    requirements = _requirements(data.get("requirements", {}))
    title = data.get("title", "")
    if not isinstance(title, str):
        raise PlantFileError(f"expected a string, got {describe(title)}", field="title")
    return _wrap(
        "",
        lambda: ModalPlant(
            modes=groups["modes"],
            sites=sites,
            actuators=groups["actuators"],
            sensors=groups["sensors"],
            pairs=groups["pairs"],
            outputs=groups["outputs"],
            disturbances=groups["disturbances"],
            requirements=requirements,
            title=title,
            parts=groups["parts"],
        ),
    )


def _records(data: Mapping[str, Any], group: str) -> tuple:
    rows = data.get(group, [])
    if not isinstance(rows, list) or not all(isinstance(r, dict) for r in rows):
        raise PlantFileError(f"expected an array of tables ([[{group}]])", field=group)
    required, optional = _KEYS[group]
    built = []
    for k, row in enumerate(rows):
        where = f"{group}[{k + 1}]"
        _check_keys(row, required, required | optional, where)
        for key, value in row.items():
            if key in _STRING_KEYS and not isinstance(value, str):
                raise PlantFileError(
                    f"expected a string, got {describe(value)}", field=f"{where}.{key}"
                )
            if key == "between" and (
                not isinstance(value, list) or not all(isinstance(v, str) for v in value)
            ):
                raise PlantFileError("expected two site names, [a, b]", field=f"{where}.between")
        kwargs = dict(row)
        if "between" in kwargs:
            kwargs["between"] = tuple(kwargs["between"])
        built.append(_wrap(where, lambda kw=kwargs: _FACTORIES[group](**kw)))
    return tuple(built)


def _requirements(raw: Any) -> Requirements:
    if not isinstance(raw, dict):
        raise PlantFileError("expected a table", field="requirements")
    _check_keys(raw, set(), _REQUIREMENT_KEYS, "requirements")
    kwargs = dict(raw)
    if "modes" in kwargs:
        if not isinstance(kwargs["modes"], list):
            raise PlantFileError("expected a list of mode numbers", field="requirements.modes")
        kwargs["modes"] = tuple(kwargs["modes"])
    if "max_rms" in kwargs and not isinstance(kwargs["max_rms"], dict):
        raise PlantFileError("expected a table of output = limit", field="requirements.max_rms")
    return _wrap("requirements", lambda: Requirements(**kwargs))


def _check_keys(row: Mapping[str, Any], required: set[str], allowed: set[str], where: str) -> None:
    prefix = f"{where}." if where else ""
    for key in row:
        if key not in allowed:
            raise PlantFileError(
                f"unknown key (allowed: {', '.join(sorted(allowed))})", field=f"{prefix}{key}"
            )
    for key in sorted(required):
        if key not in row:
            raise PlantFileError("missing required key", field=f"{prefix}{key}")


def _wrap(where: str, build: Callable[[], Any]) -> Any:
    try:
        return build()
    except PlantError as exc:
        field = ".".join(p for p in (where, exc.field) if p) or None
        raise type(exc)(exc.message, field=field) from None


# ---------------------------------------------------------------------- writing
_OPTIONAL_ZERO = {"cost", "cost_per_kg", "noise_density"}  # written only when not 0 (default)


def dump_plant(plant: ModalPlant) -> str:
    """TOML text of a plant, readable by :func:`load_plant` (round trip).

    Every key and every value is rendered by tomli-w, so any title, label or name (quotes,
    backslashes, newlines, control characters, any Unicode) reads back unchanged. The layout
    is the plant file's usual one: ``[[modes]]`` tables, one line per site in ``[sites]``.

    Parameters
    ----------
    plant : ModalPlant
        The plant to write.

    Returns
    -------
    str
        The plant file text.
    """
    return _render(_document(plant))


def _document(plant: ModalPlant) -> dict[str, Any]:
    """The plant file as plain Python values (str, float, int, list, dict), in file order.

    A key added to the plant file is added here; ``_render`` writes whatever this
    holds.

    Parameters
    ----------
    plant : ModalPlant
        The plant to describe.

    Returns
    -------
    dict
        ``title``, ``modes``, ``sites``, the groups (actuators, sensors, pairs, outputs,
        disturbances) and ``requirements`` when the plant states any.
    """
    doc: dict[str, Any] = {"title": plant.title, "modes": []}
    for mode in plant.modes:
        row: dict[str, Any] = {"label": mode.label} if mode.label else {}
        row |= {
            "freq_hz": mode.freq_hz,
            "damping": mode.damping,
            "modal_mass_kg": mode.modal_mass_kg,
        }
        doc["modes"].append(_plain(row))
    doc["sites"] = {name: _plain(row) for name, row in plant.sites.items()}
    for group in ("actuators", "sensors", "pairs", "outputs", "disturbances", "parts"):
        rows = []
        for item in getattr(plant, group):
            rows.append(
                {
                    key: _plain(value)
                    for key, value in item.__dict__.items()
                    if value is not None and not (key in _OPTIONAL_ZERO and value == 0.0)
                }
            )
        if rows:
            doc[group] = rows
    req = plant.requirements
    stated = {
        key: _plain(getattr(req, key))
        for key in (
            "modes",
            "min_damping",
            "sample_rate_hz",
            "loop_delay_s",
            "min_gain_margin_db",
            "min_phase_margin_deg",
            "min_disk_margin_db",
        )
        if getattr(req, key) not in (None, ())
    }
    if req.max_rms:
        stated["max_rms"] = _plain(dict(req.max_rms))
    if stated:
        doc["requirements"] = stated
    return doc


def _render(document: Mapping[str, Any]) -> str:
    """TOML text of a document of plain values, every key and value rendered by tomli-w.

    Top-level values come first; a table becomes ``[name]``, a list of tables one
    ``[[name]]`` per table. Inside them, lists stay on one line (tomli-w puts one item per
    line, which makes a mode-shape row of a hundred modes a hundred lines) and tables become
    inline tables.

    Parameters
    ----------
    document : mapping of str to value
        Plain Python values: str, bool, int, float, lists and mappings of them.

    Returns
    -------
    str
        TOML text ending with one newline.
    """
    head: list[str] = []
    sections: list[str] = []
    for key, value in document.items():
        if isinstance(value, Mapping):
            sections.append(_section(f"[{_key(key)}]", value))
        elif isinstance(value, list | tuple) and value and all(
            isinstance(v, Mapping) for v in value
        ):
            sections += [_section(f"[[{_key(key)}]]", row) for row in value]
        else:
            head.append(f"{_key(key)} = {_literal(value)}")
    chunks = ["\n".join(head)] if head else []
    return "\n\n".join(chunks + sections).rstrip() + "\n"


def _section(header: str, table: Mapping[str, Any]) -> str:
    return "\n".join([header] + [f"{_key(k)} = {_literal(v)}" for k, v in table.items()])


def _key(name: str) -> str:
    # tomli-w writes a bare key when it can and a quoted, escaped one otherwise
    return tomli_w.dumps({name: 0}).removesuffix(" = 0\n")


def _literal(value: Any) -> str:
    if isinstance(value, Mapping):
        return "{ " + ", ".join(f"{_key(k)} = {_literal(v)}" for k, v in value.items()) + " }"
    if isinstance(value, list | tuple):
        return "[" + ", ".join(_literal(v) for v in value) + "]"
    return tomli_w.dumps({"v": value}).removeprefix("v = ").removesuffix("\n")


def _plain(value: Any) -> Any:
    """numpy arrays and scalars as Python lists and numbers (tomli-w takes only those)."""
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    return value
