"""Read and validate a scenario file: the core, :func:`load_scenario`.

One scenario file drives one run. The format is a public contract, documented
key by key in ``docs/scenario-format.md``. Paths are relative to the scenario
file; units live in the key names; unknown keys are errors.

The validator is a small core (:func:`load_scenario`, in this module) plus one parser per
section (``sections.py``), registered in :data:`SECTION_PARSERS`; ``model.py``
holds the typed scenario and ``fields.py`` the reading helpers. A later stage adds its
section by registering a parser; the core does not change.

Every error is a :class:`~slopescreen.errors.ScenarioError` whose one-line
message names the file and the key path, what was received and what is
expected, e.g. ``scenario.toml: [soil.units.1].depth_m: must be > 0 m, got -1``.
"""

from __future__ import annotations

import hashlib
import tomllib
from pathlib import Path
from typing import Any

from ..errors import ScenarioError
from .fields import Ctx, check_keys, get_date, get_path, get_string
from .model import VERTICAL_UNITS, Routing, Scenario
from .sections import SECTION_PARSERS

__all__ = ["TOP_LEVEL_KEYS", "load_scenario", "scenario_from_data"]


TOP_LEVEL_KEYS = ("title", "dem", "output", "dem_vertical_unit", "dem_date")


def load_scenario(path) -> Scenario:
    """Read, parse and validate a scenario file.

    Parameters
    ----------
    path : str or os.PathLike
        The scenario TOML file.

    Returns
    -------
    Scenario
        Validated, with absolute paths and SI units.

    Raises
    ------
    ScenarioError
        The file is missing, not TOML, or holds an unknown key, a wrong type,
        an out-of-range value or an inconsistent combination. The message is
        one line naming the file and the key path.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / "dem.tif").write_bytes(b"")
    >>> _ = (folder / "s.toml").write_text('dem = "dem.tif"\\noutput = "out"\\n')
    >>> load_scenario(folder / "s.toml").routing.method
    'dinf'
    """
    path = Path(path)
    if not path.is_file():
        raise ScenarioError(f"{path}: scenario file not found")
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise ScenarioError(f"{path}: cannot read the scenario file ({exc.strerror})") from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise ScenarioError(f"{path.name}: not a text file; a scenario is a TOML text file") from None
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(f"{path.name}: not valid TOML ({exc})") from None
    return scenario_from_data(data, path.resolve(), sha256=hashlib.sha256(raw).hexdigest())


def scenario_from_data(data: dict, path: Path, *, sha256: str) -> Scenario:
    """Validate the parsed TOML ``data`` of the scenario file at ``path``.

    :func:`load_scenario` without the reading: the calibration sweep
    validates each changed copy of a scenario this way (paths stay relative
    to ``path``; nothing is read from ``path`` itself).

    Raises
    ------
    ScenarioError
        As :func:`load_scenario`.
    """
    path = Path(path)
    ctx = Ctx(path)
    check_keys(data, ctx, set(TOP_LEVEL_KEYS) | set(SECTION_PARSERS), required=("dem", "output"))
    title = get_string(data, "title", ctx, default=path.stem)
    dem = get_path(data, "dem", ctx, required=True)
    output = get_path(data, "output", ctx, must_exist=False, required=True)
    vertical = get_string(data, "dem_vertical_unit", ctx, choices=tuple(VERTICAL_UNITS))
    kwargs: dict[str, Any] = {"routing": Routing(), "dem_date": get_date(data, "dem_date", ctx)}
    for key, parser in SECTION_PARSERS.items():
        if key in data:
            kwargs.update(parser(data[key], ctx.child(key), path.parent))
    scenario = Scenario(path=path, sha256=sha256, title=title, dem=dem,
                        output=output, dem_vertical_unit=vertical, **kwargs)
    _check_combination(scenario, ctx)
    return scenario


def _check_combination(s: Scenario, ctx: Ctx) -> None:
    """Checks that involve more than one section."""
    if s.rain and s.soil is None:
        raise ctx.child("soil").fail("rain cases need soil properties: add a [soil] section")
    if s.soil is not None and not s.rain:
        raise ctx.child("rain").fail("a [soil] section needs at least one [[rain]] case")
    if s.uncertainty is not None and s.soil is None:
        raise ctx.child("uncertainty").fail("needs a [soil] section with distributions")
    if s.soil is not None and any(r.is_storm for r in s.rain):
        for unit in s.soil.units.values():
            if unit.diffusivity_m2_per_s is None:
                raise ctx.child("soil").child("units").child(unit.code).child(
                    "diffusivity_m2_per_s").fail("required when a rain case is a storm")
    if s.runout is not None and s.runout.source_failure_probability is not None and (
            s.uncertainty is None):
        raise ctx.child("runout").child("source_failure_probability").fail(
            "needs an [uncertainty] section (the probability of failure it thresholds)")
    if s.runout is not None and s.runout.continue_past_corridor and s.corridor is None:
        raise ctx.child("runout").child("continue_past_corridor").fail(
            "applies only with a [corridor] section")
    unit = None if s.corridor is None else s.corridor.engineered_soil_unit
    if unit is not None and (s.soil is None or unit not in s.soil.units):
        raise ctx.child("corridor").child("engineered_soil_unit").fail(
            f"unit {unit} has no table [soil.units.{unit}]; add one with the fill's properties")
    if s.soil is not None and s.soil.map is None:
        mapped = [c for c in s.soil.units if c != unit]
        if len(mapped) != 1:
            raise ctx.child("soil").child("map").fail(
                f"{len(mapped)} soil units are given but no map says where each lies; "
                "add map = \"soil_units.tif\" or keep exactly one unit"
                + (" besides the engineered_soil_unit" if unit is not None else ""))
    inputs = {p.resolve() for p in s.input_files()}
    if s.output.resolve() in inputs or s.output.is_file():
        raise ctx.child("output").fail("must be a folder, not an input or existing file")
