"""The keys a calibration sweep varies, and the scenario text it suggests.

A key is a dotted path to a number in the scenario file. Rain cases are
named by their ``name`` (or by their position, from 1):
``soil.units.1.friction_deg``, ``soil.units.2.root_cohesion_kpa``,
``rain.wet season.steady_mm_per_day``, ``rain.1.steady_mm_per_day``. A parameter given as a
distribution is swept through one of its numbers, named as in docs/scenario-format.md:
``soil.units.1.friction_deg.mean`` (``normal``: ``mean``, ``sd``; ``uniform``: ``low``,
``high``; ``lognormal``: ``median``, ``sd_of_log``). The sweep reruns the per-cell stages
only, so it varies ``[soil]`` and ``[[rain]]`` values.
"""

from __future__ import annotations

import copy
import datetime as _dt
import math
import tomllib
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

__all__ = ["Vary", "parse_vary", "set_value", "toml_text", "MAX_POINTS"]

MAX_POINTS = 400
"""Most parameter points one sweep may compute."""

SECTIONS = ("soil", "rain")
"""Top-level sections a sweep may vary (the per-cell stages read only these)."""


@dataclass(frozen=True)
class Vary:
    """One swept key: ``n`` values evenly spaced from ``low`` to ``high``."""

    key: str
    low: float
    high: float
    n: int

    @property
    def values(self) -> np.ndarray:
        return np.linspace(self.low, self.high, self.n)


def parse_vary(text: str) -> Vary:
    """Read ``KEY=LOW:HIGH:N``.

    Examples
    --------
    >>> parse_vary("soil.units.1.friction_deg=30:38:5").values.tolist()
    [30.0, 32.0, 34.0, 36.0, 38.0]
    """
    where = f"--vary {text}"
    key, sep, spec = text.partition("=")
    parts = spec.split(":")
    if not sep or not key.strip() or len(parts) != 3:
        raise InputError(f"{where}: expected KEY=LOW:HIGH:N, e.g. "
                         "soil.units.1.friction_deg=30:38:5")
    try:
        low, high = float(parts[0]), float(parts[1])
        n = int(parts[2])
    except ValueError:
        raise InputError(f"{where}: LOW and HIGH must be numbers and N a whole number") from None
    if not (math.isfinite(low) and math.isfinite(high)) or low >= high:
        raise InputError(f"{where}: LOW must be below HIGH (got {parts[0]} and {parts[1]})")
    if not 2 <= n <= 100:
        raise InputError(f"{where}: N must be 2 to 100, got {n}")
    return Vary(key.strip(), low, high, n)


def _locate(data: dict, key: str, scenario_name: str):
    """(table, name) of the number ``key`` names in the parsed scenario ``data``."""
    where = f"{scenario_name}: {key}"
    parts = key.split(".")
    if parts[0] not in SECTIONS or len(parts) < 2:
        raise InputError(f"{where}: a sweep varies [soil] and [[rain]] values only (the "
                         "per-cell stages), e.g. soil.units.1.friction_deg")
    node = data.get(parts[0])
    if node is None:
        raise InputError(f"{where}: the scenario has no [{parts[0]}] section")
    rest = parts[1:]
    if parts[0] == "rain":
        cases = node if isinstance(node, list) else []
        name = rest[0]
        match = [c for c in cases if isinstance(c, dict) and c.get("name") == name]
        if not match and name.isdigit() and 1 <= int(name) <= len(cases):
            match = [cases[int(name) - 1]]
        if not match:
            names = ", ".join(repr(c.get("name")) for c in cases if isinstance(c, dict))
            raise InputError(f"{where}: no rain case named {name!r} (the cases: {names})")
        node, rest = match[0], rest[1:]
    if len(rest) >= 2 and rest[-1] in _PARAMETER_SLOTS:      # a distribution's parameter
        table, value = _walk(node, rest[:-1], where)
        dist = value
        if isinstance(dist, dict) and len(dist) == 1:
            (family, params), = dist.items()
            slots = _DISTRIBUTIONS.get(family, ())
            if rest[-1] in slots and isinstance(params, list) and len(params) == len(slots):
                return params, slots.index(rest[-1])
        raise InputError(f"{where}: {'.'.join(parts[:-1])} is not a distribution with a "
                         f"parameter {rest[-1]!r}")
    table, value = _walk(node, rest, where)
    if isinstance(value, dict):
        (family, _), = value.items() if len(value) == 1 else ((None, None),)
        names = " or ".join(f"{key}.{n}" for n in _DISTRIBUTIONS.get(family, ()))
        raise InputError(f"{where}: is a distribution ({', '.join(value)}), not a number; "
                         + (f"sweep one of its parameters: {names}" if names else
                            "fix it to a number in a copy of the scenario to sweep it"))
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"{where}: is {value!r}, not a number")
    return table, rest[-1]


_DISTRIBUTIONS = {"uniform": ("low", "high"), "normal": ("mean", "sd"),
                  "lognormal": ("median", "sd_of_log")}
"""Names of the parameters of each distribution table, in the order of its list."""

_PARAMETER_SLOTS = {n for names in _DISTRIBUTIONS.values() for n in names}


def _walk(node, rest, where):
    """(table holding the last key, its value) along the keys ``rest`` from ``node``."""
    if not rest:
        raise InputError(f"{where}: not a key of the scenario; give the full path of a number "
                         "that the scenario sets")
    for part in rest[:-1]:
        if not isinstance(node, dict) or part not in node:
            raise InputError(f"{where}: not a key of the scenario (no {part!r}); give the full "
                             "path of a number that the scenario sets")
        node = node[part]
    if not isinstance(node, dict) or rest[-1] not in node:
        raise InputError(f"{where}: not a key of the scenario; give the full path of a number "
                         "that the scenario sets")
    return node, node[rest[-1]]


def set_value(data: dict, key: str, value: float, *, scenario_name: str) -> dict:
    """A copy of ``data`` with the number at ``key`` set to ``value`` (``data`` is not changed).

    Raises
    ------
    InputError
        ``key`` does not name a number of the scenario's ``[soil]`` or
        ``[[rain]]`` sections.

    Examples
    --------
    >>> data = {"soil": {"units": {"1": {"friction_deg": 34.0}}}}
    >>> set_value(data, "soil.units.1.friction_deg", 30.0, scenario_name="s.toml")
    {'soil': {'units': {'1': {'friction_deg': 30.0}}}}
    >>> data["soil"]["units"]["1"]["friction_deg"]
    34.0
    >>> d = {"soil": {"units": {"1": {"friction_deg": {"normal": [34.0, 2.0]}}}}}
    >>> set_value(d, "soil.units.1.friction_deg.mean", 31.0, scenario_name="s.toml")["soil"]
    {'units': {'1': {'friction_deg': {'normal': [31.0, 2.0]}}}}
    """
    out = copy.deepcopy(data)
    table, name = _locate(out, key, scenario_name)
    table[name] = float(value)
    return out


# ---------------------------------------------------------------------------------------------
# TOML text of a scenario
# ---------------------------------------------------------------------------------------------

_INLINE = ("uniform", "normal", "lognormal", "map")
"""Keys of the small tables written inline (parameter distributions)."""


def _scalar(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int,)) and not isinstance(v, bool):
        return str(v)
    if isinstance(v, float):
        return repr(v) if math.isfinite(v) else ("inf" if v > 0 else "-inf") if not math.isnan(v) else "nan"
    if isinstance(v, (_dt.date, _dt.datetime)):
        return v.isoformat()
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n") + '"'
    if isinstance(v, list):
        return "[" + ", ".join(_scalar(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_key(k)} = {_scalar(x)}" for k, x in v.items()) + " }"
    raise TypeError(f"cannot write {type(v).__name__} as TOML")


def _key(k: str) -> str:
    return k if k.replace("_", "").replace("-", "").isalnum() and k.isascii() else _scalar(k)


def _is_inline(v) -> bool:
    return isinstance(v, dict) and bool(v) and all(k in _INLINE for k in v)


def _plain(v) -> bool:
    return (not isinstance(v, (dict, list)) or _is_inline(v)
            or (isinstance(v, list) and not any(isinstance(x, dict) for x in v)))


def _has_plain(table: dict) -> bool:
    return any(_plain(v) for v in table.values())


def _table(lines: list, prefix: str, table: dict) -> None:
    plain = {k: v for k, v in table.items() if _plain(v)}
    for k, v in plain.items():
        lines.append(f"{_key(k)} = {_scalar(v)}")
    for k, v in table.items():
        if k in plain:
            continue
        name = f"{prefix}.{_key(k)}" if prefix else _key(k)
        if isinstance(v, dict):
            if _has_plain(v) or not v:     # a table of tables only is implied by its children
                lines.append("")
                lines.append(f"[{name}]")
            _table(lines, name, v)
        else:                                   # an array of tables
            for item in v:
                lines.append("")
                lines.append(f"[[{name}]]")
                _table(lines, name, item)


def toml_text(data: dict, *, header: str = "") -> str:
    """TOML text of a parsed scenario (comments are not kept).

    The text parses back to ``data`` (checked).

    Examples
    --------
    >>> data = {"dem": "d.tif", "soil": {"units": {"1": {"friction_deg": {"normal": [34.0, 2.0]}}}},
    ...         "rain": [{"name": "wet", "steady_mm_per_day": 60}]}
    >>> print(toml_text(data))
    dem = "d.tif"
    <BLANKLINE>
    [soil.units.1]
    friction_deg = { normal = [34.0, 2.0] }
    <BLANKLINE>
    [[rain]]
    name = "wet"
    steady_mm_per_day = 60
    <BLANKLINE>
    """
    lines = [f"# {line}" if line else "#" for line in header.splitlines()] if header else []
    _table(lines, "", data)
    text = "\n".join(lines) + "\n"
    if tomllib.loads(text) != data:
        raise ValueError("the TOML text does not read back to the scenario")
    return text
