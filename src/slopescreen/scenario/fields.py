"""Reading helpers of the validator: each knows the file and the key path for its messages."""

from __future__ import annotations

import datetime as _dt
import math
import warnings
from pathlib import Path

import numpy as np

from ..errors import InputWarning, ScenarioError


class Ctx:
    """Where a value sits: the scenario file and a key path, for error messages."""

    def __init__(self, file: Path, path: str = ""):
        self.file = file
        self.path = path

    def child(self, key) -> "Ctx":
        """Context of a key inside this table."""
        if isinstance(key, int):
            return Ctx(self.file, f"{self.path}[{key}]")
        if not self.path:
            return Ctx(self.file, str(key))
        return Ctx(self.file, f"{self.path}.{key}")

    def where(self) -> str:
        """``file: key.path`` as used at the start of every message."""
        return f"{self.file.name}: {self.path}" if self.path else self.file.name

    def fail(self, message: str) -> ScenarioError:
        """Build the error for this place (the caller raises it)."""
        return ScenarioError(f"{self.where()}: {message}")


def _describe(value) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def check_keys(table: dict, ctx: Ctx, allowed, required=()) -> None:
    """Refuse unknown keys and report missing required ones."""
    if not isinstance(table, dict):
        raise ctx.fail(f"expected a table, got {_describe(table)}")
    for key in table:
        if key not in allowed:
            choices = ", ".join(sorted(allowed))
            raise ctx.child(key).fail(f"unknown key; accepted keys here are: {choices}")
    for key in required:
        if key not in table:
            raise ctx.child(key).fail("required key is missing")


_ABSENT = object()


def _entry(table, key, ctx: Ctx, required):
    """(context of the key, its value or ``_ABSENT``); a missing required key is an error."""
    c = ctx.child(key)
    if key not in table:
        if required:
            raise c.fail("required key is missing")
        return c, _ABSENT
    return c, table[key]


def get_number(table, key, ctx: Ctx, *, default=None, low=None, high=None,
               low_open=False, required=False) -> float | None:
    """Read a finite number in [low, high] (``low_open`` makes it > low)."""
    c, value = _entry(table, key, ctx, required)
    if value is _ABSENT:
        return default
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise c.fail(f"expected a number, got {_describe(value)}")
    value = float(value)
    if not math.isfinite(value):
        raise c.fail(f"expected a finite number, got {value}")
    _check_range(c, value, low, high, low_open, "g")
    return value


def _check_range(c: Ctx, value, low, high, low_open=False, fmt=""):
    """Raise when ``value`` lies outside [low, high] (``(low, high]`` with ``low_open``)."""
    if low is not None and (value < low or (low_open and value == low)):
        op = ">" if low_open else ">="
        raise c.fail(f"must be {op} {low:{fmt}}, got {value:{fmt}}")
    if high is not None and value > high:
        raise c.fail(f"must be <= {high:{fmt}}, got {value:{fmt}}")


def get_int(table, key, ctx: Ctx, *, default=None, low=None, high=None) -> int | None:
    """Read an integer in [low, high]."""
    c, value = _entry(table, key, ctx, False)
    if value is _ABSENT:
        return default
    if isinstance(value, bool) or not isinstance(value, int):
        raise c.fail(f"expected a whole number, got {_describe(value)}")
    _check_range(c, value, low, high)
    return value


def get_bool(table, key, ctx: Ctx, *, default=False) -> bool:
    """Read ``true`` or ``false``."""
    c, value = _entry(table, key, ctx, False)
    if value is _ABSENT:
        return default
    if not isinstance(value, bool):
        raise c.fail(f"expected true or false, got {_describe(value)}")
    return value


def get_crs(table, key, ctx: Ctx) -> str | None:
    """Read a CRS text that pyproj understands (``"EPSG:32610"``, WKT, PROJ)."""
    text = get_string(table, key, ctx)
    if text is None:
        return None
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    try:
        CRS.from_user_input(text)
    except CRSError:
        raise ctx.child(key).fail(f"not a CRS pyproj knows: {_describe(text)}; "
                                  "give e.g. \"EPSG:32610\"") from None
    return text


def get_string(table, key, ctx: Ctx, *, default=None, choices=None, required=False) -> str | None:
    """Read a non-empty string, optionally one of ``choices``."""
    c, value = _entry(table, key, ctx, required)
    if value is _ABSENT:
        return default
    if not isinstance(value, str) or not value.strip():
        raise c.fail(f"expected a non-empty text, got {_describe(value)}")
    if choices is not None and value not in choices:
        raise c.fail(f"expected one of {', '.join(choices)}; got {value!r}")
    return value


def get_date(table, key, ctx: Ctx) -> _dt.date | None:
    """Read a calendar date: a TOML date (``2021-01-15``) or a text ``"YYYY-MM-DD"``."""
    c, value = _entry(table, key, ctx, False)
    if value is _ABSENT:
        return None
    if isinstance(value, _dt.datetime):
        return value.date()
    if isinstance(value, _dt.date):
        return value
    if isinstance(value, str):
        try:
            return _dt.date.fromisoformat(value.strip())
        except ValueError:
            pass
    raise c.fail(f"expected a date such as 2021-01-15, got {_describe(value)}")


def get_texts(table, key, ctx: Ctx) -> tuple[str, ...]:
    """Read one text or a list of texts (whole numbers are taken as their digits)."""
    c, value = _entry(table, key, ctx, False)
    if value is _ABSENT:
        return ()
    items = value if isinstance(value, list) else [value]
    out = []
    for i, item in enumerate(items):
        if isinstance(item, bool) or not isinstance(item, (str, int)) or (
                isinstance(item, str) and not item.strip()):
            where = c.child(i) if isinstance(value, list) else c
            raise where.fail(f"expected a non-empty text, got {_describe(item)}")
        out.append(str(item))
    if not out:
        raise c.fail("expected at least one text, got an empty list")
    return tuple(out)


def get_path(table, key, ctx: Ctx, *, must_exist=True, required=False) -> Path | None:
    """Read a path relative to the scenario file and resolve it."""
    text = get_string(table, key, ctx, required=required)
    if text is None:
        return None
    if "\0" in text:
        raise ctx.child(key).fail(f"a path cannot hold a NUL character, got {_describe(text)}")
    path = (ctx.file.parent / text).resolve()
    try:
        found = path.exists()
    except OSError as exc:  # a name too long for the file system, say
        raise ctx.child(key).fail(f"not a usable path: {_describe(text)} ({exc.strerror})") from None
    if must_exist and not found:
        raise ctx.child(key).fail(f"file not found: {text} (paths are relative to the scenario file)")
    return path


def slugify(name: str) -> str:
    """Turn a rain-case name into a file-name-safe slug."""
    out = []
    for ch in name.lower():
        if ch.isascii() and ch.isalnum():
            out.append(ch)
        elif out and out[-1] != "-":
            out.append("-")
    slug = "".join(out).strip("-")
    return slug or "case"


_TINY32 = float(np.finfo(np.float32).tiny)
"""Smallest normal 32-bit float: an open lower bound of a soil property is exceeded by at least
this much, so the property is not 0 (or a denormal) in the float32 soil table and products."""

SOIL_PROPERTIES = {
    "depth_m": (0.01, 20.0, False, None, 5.0, True, None),
    "cohesion_kpa": (0.0, 500.0, False, None, None, True, None),
    "root_cohesion_kpa": (0.0, 500.0, False, None, None, False, 0.0),
    "lateral_root_cohesion_kpa": (0.0, 500.0, False, None, None, False, 0.0),
    "friction_deg": (0.0, 60.0, True, None, None, True, None),
    "unit_weight_kn_m3": (10.0, 25.0, False, 14.0, 23.0, True, None),
    "conductivity_m_per_day": (0.0, 1.0e4, True, None, None, True, None),
    "diffusivity_m2_per_s": (1.0e-12, 1.0, False, None, None, False, None),
}
"""Accepted range of each soil property: (low, high, low is excluded, warn below,
warn above, required, default). Ranges follow common screening practice; the floors of
``depth_m`` (1 cm) and ``diffusivity_m2_per_s`` (1e-12 m^2/s, a time scale Z^2 / D0 of at most
4e14 s for 20 m of soil) keep every storm time and force within the 32-bit floats of the
products."""


def parse_parameter(value, ctx: Ctx, *, low, high, low_open=False, warn_low=None, warn_high=None):
    """Parse a fixed number or a distribution table into a Parameter.

    ``{ uniform = [low, high] }``, ``{ normal = [mean, sd] }`` (truncated to
    the physical range), ``{ lognormal = [median, sd_of_log] }``.
    """
    from .. import parameters as P

    def in_range(x, what):
        if x < low or (low_open and x == low) or x > high:
            op = ">" if low_open else ">="
            raise ctx.fail(f"{what} must be {op} {low:g} and <= {high:g}, got {x:g}")
        if low_open and x - low < _TINY32:   # the soil table and the products are float32
            raise ctx.fail(f"{what} must be > {low:g}, got {x:g}: below {_TINY32:.3g}, the "
                           "least the computations hold (32-bit floats)")
        if (warn_low is not None and x < warn_low) or (warn_high is not None and x > warn_high):
            warnings.warn(
                f"{ctx.where()}: {what} {x:g} is outside the usual range "
                f"{warn_low if warn_low is not None else low:g}-{warn_high if warn_high is not None else high:g}; check it",
                InputWarning, stacklevel=4)

    if isinstance(value, bool):
        raise ctx.fail(f"expected a number or a distribution table, got {value!r}")
    if isinstance(value, (int, float)):
        x = float(value)
        if not math.isfinite(x):
            raise ctx.fail(f"expected a finite number, got {x}")
        in_range(x, "value")
        return P.fixed(x)
    if not isinstance(value, dict) or len(value) != 1:
        raise ctx.fail("expected a number or a table with exactly one of uniform, normal, "
                       f"lognormal; got {_describe(value)}")
    (kind, args), = value.items()
    c = ctx.child(kind)
    if kind not in ("uniform", "normal", "lognormal"):
        raise c.fail("unknown distribution; accepted: uniform, normal, lognormal")
    if (not isinstance(args, list) or len(args) != 2
            or any(isinstance(a, bool) or not isinstance(a, (int, float)) for a in args)
            or not all(math.isfinite(float(a)) for a in args)):
        raise c.fail(f"expected a list of two numbers, got {_describe(args)}")
    a, b = float(args[0]), float(args[1])
    if kind == "uniform":
        if a > b:
            raise c.fail(f"low {a:g} is greater than high {b:g}")
        in_range(a, "low")
        in_range(b, "high")
        dist = P.uniform(a, b)
    elif kind == "normal":
        if b < 0:
            raise c.fail(f"standard deviation must be >= 0, got {b:g}")
        in_range(a, "mean")
        dist = P.normal(a, b)
    else:
        if a <= 0:
            raise c.fail(f"median must be > 0, got {a:g}")
        if b < 0:
            raise c.fail(f"sd of log must be >= 0, got {b:g}")
        in_range(a, "median")
        dist = P.lognormal(a, b)
    lo = math.nextafter(low, math.inf) if low_open else low
    return dist.truncated(lo, high)
