"""Soil fields by unit: a unit-index raster and a per-unit parameter table.

The scenario's soil properties vary by soil unit, never by cell. A run
therefore builds one :class:`SoilFields` object: the index of each cell's
unit (the smallest integer type that holds it, or no raster at all when the
scenario has one unit and no unit map) and, per unit, the central value of
every property and the encoded distributions for Monte Carlo and FOSM. No
per-cell parameter raster is made: :meth:`SoilFields.by_unit` evaluates a
per-cell function on the cells of each unit with that unit's values as
numbers, so a one-unit scenario calls it once on the whole grid.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from types import MappingProxyType
from typing import Callable

import numpy as np

from .errors import InputError

__all__ = ["SoilFields", "soil_fields", "SOIL_KEYS"]

SOIL_KEYS = ("depth_m", "cohesion_kpa", "root_cohesion_kpa", "lateral_root_cohesion_kpa",
             "friction_deg", "unit_weight_kn_m3", "conductivity_m_per_day", "diffusivity_m2_per_s")
"""Properties with a central value per unit in :attr:`SoilFields.central`."""


@dataclass(frozen=True)
class SoilFields:
    """The soil of a run, by unit.

    Attributes
    ----------
    units : tuple of SoilUnit
        Units in the order of their codes; a unit's position is its index.
    index : numpy.ndarray or None
        Unit index per cell (int8 or int16; -1 = no unit or nodata), or None
        when there is one unit (every cell of :attr:`valid` is unit 0).
    valid : numpy.ndarray of bool
        Cells that have a soil unit (and a DEM value).
    central : mapping of str to numpy.ndarray
        Per :data:`SOIL_KEYS` key, the central (median) value of each unit
        (float32, length ``len(units)``; NaN where the unit leaves it unset):
        the precision of the products.
    table : numpy.ndarray
        The units' distributions encoded for the Monte Carlo and FOSM
        kernels (:func:`slopescreen.probability.encode_table`).
    varies : bool
        True when any property of any unit is a distribution.
    depth_measured : str
        ``"vertical"`` (default) or ``"slope_normal"``: how every unit's
        ``depth_m`` was measured (``[soil] depth_measured``). The kernels turn
        a slope-normal thickness H into z = H / cos(theta) per cell; the
        central values and the table keep the depths as given.
    """

    units: tuple
    index: np.ndarray | None
    valid: np.ndarray
    central: MappingProxyType
    table: np.ndarray
    varies: bool
    depth_measured: str = "vertical"

    def products(self):
        """A run writes no product of the soil fields themselves."""
        return ()

    @property
    def labels(self) -> list[str]:
        """Labels of the units, in index order."""
        return [u.label for u in self.units]

    @cached_property
    def _one_unit_index(self) -> np.ndarray:
        index = np.full(self.valid.shape, -1, dtype=np.int8)
        index[self.valid] = 0
        return index

    def index_array(self) -> np.ndarray:
        """The unit index per cell as a raster (int8 for one unit, made once), for consumers
        that need one (Monte Carlo, FOSM, the cluster probabilities, the report)."""
        if self.index is not None:
            return self.index
        return self._one_unit_index

    def value(self, key: str, unit: int) -> np.float32:
        """Central value of ``key`` in unit ``unit`` (float32, the precision of the products)."""
        return np.float32(self.central[key][unit])

    def cell_map(self, key: str) -> np.ndarray | float:
        """Central value of ``key`` per cell: a number for one unit, else a float32 raster.

        Only the failure-cluster search, which works on windows of the grid,
        asks for a raster, and only when there are several units.
        """
        values = self.central[key]
        if len(self.units) == 1:
            return self.value(key, 0)
        return np.append(values, np.nan)[self.index].astype(np.float32)

    def by_unit(self, fn: Callable, cells: dict, keys, *, fill=np.nan):
        """Evaluate ``fn`` per unit and assemble its per-cell outputs.

        Parameters
        ----------
        fn : callable
            ``fn(**cells, **{key: value}) -> array or tuple of arrays``, a
            per-cell function of arrays of one shape and numbers.
        cells : dict of str to numpy.ndarray
            Per-cell inputs on the grid. The float inputs must be NaN outside
            :attr:`valid` (with one unit ``fn`` sees the whole grid; with
            several, only the cells of each unit).
        keys : dict of str to str
            ``fn``'s keyword -> the :data:`SOIL_KEYS` property it takes.
        fill : float or tuple
            Value of the outputs outside every unit (one per output).

        Returns
        -------
        numpy.ndarray or tuple of numpy.ndarray
            Shaped like the grid.

        Examples
        --------
        >>> import numpy as np
        >>> from slopescreen.scenario.model import SoilUnit
        >>> from slopescreen.parameters import fixed
        >>> u = [SoilUnit(code=c, label=f"u{c}", depth_m=fixed(d), cohesion_kpa=fixed(0.0),
        ...               root_cohesion_kpa=fixed(0.0), lateral_root_cohesion_kpa=fixed(0.0),
        ...               friction_deg=fixed(35.0), unit_weight_kn_m3=fixed(18.0),
        ...               conductivity_m_per_day=fixed(1.0), diffusivity_m2_per_s=None)
        ...      for c, d in ((1, 1.0), (2, 2.0))]
        >>> soil = soil_fields(u, np.array([[1, 2], [2, -1]]), np.ones((2, 2), bool))
        >>> x = np.where(soil.valid, 3.0, np.nan)
        >>> soil.by_unit(lambda x, z: x * z, {"x": x}, {"z": "depth_m"})
        array([[ 3.,  6.],
               [ 6., nan]])
        """
        params = {arg: key for arg, key in keys.items()}
        if self.index is None:
            values = {arg: self.value(key, 0) for arg, key in params.items()}
            return fn(**cells, **values)
        outs = None
        shape = self.valid.shape
        for u in range(len(self.units)):
            sel = self.index == u
            if not sel.any():
                continue
            values = {arg: self.value(key, u) for arg, key in params.items()}
            res = fn(**{k: v[sel] for k, v in cells.items()}, **values)
            parts = res if isinstance(res, tuple) else (res,)
            if outs is None:
                fills = fill if isinstance(fill, tuple) else (fill,) * len(parts)
                outs = [np.full(shape, f, dtype=np.asarray(p).dtype) for p, f in zip(parts, fills)]
            for out, part in zip(outs, parts):
                out[sel] = part
        if outs is None:  # pragma: no cover - soil_fields refuses a map with no unit cell
            raise InputError("soil: no cell holds a soil unit")
        return tuple(outs) if len(outs) > 1 else outs[0]


def soil_fields(units, codes, valid, *, depth_measured="vertical") -> SoilFields:
    """Build the soil fields of a run once.

    Parameters
    ----------
    units : sequence of SoilUnit
        Sorted by code.
    codes : numpy.ndarray of int or None
        Unit code per cell from the soil map, of any sign
        (:data:`slopescreen.grid.NO_CODE` or any code without a unit = none),
        or None without a map (exactly one unit).
    valid : numpy.ndarray of bool
        Valid DEM cells.
    depth_measured : {"vertical", "slope_normal"}, keyword-only
        How the units' ``depth_m`` was measured (``[soil] depth_measured``).

    Returns
    -------
    SoilFields

    Raises
    ------
    InputError
        No map and more than one unit.
    """
    from . import _validate
    from .probability import PARAMETER_ORDER, encode_table

    _validate.depth_measured(depth_measured)

    units = tuple(units)
    central = {}
    for key in SOIL_KEYS:
        central[key] = np.array([np.nan if getattr(u, key) is None else getattr(u, key).central()
                                 for u in units], dtype=np.float32)
    table = encode_table([{k: getattr(u, k) for k in PARAMETER_ORDER if getattr(u, k) is not None}
                          for u in units])
    varies = any(getattr(u, k) is not None and not getattr(u, k).is_fixed
                 for u in units for k in PARAMETER_ORDER)
    if codes is None:
        if len(units) != 1:
            raise InputError("soil: several units need a soil map ([soil] map)")
        return SoilFields(units, None, np.asarray(valid, dtype=bool), MappingProxyType(central),
                          table, varies, depth_measured)
    sorted_codes = np.array([u.code for u in units], dtype=np.int64)
    pos = np.clip(np.searchsorted(sorted_codes, codes), 0, len(units) - 1)
    ok = valid & (sorted_codes[pos] == codes)
    if len(units) == 1:
        return SoilFields(units, None, ok, MappingProxyType(central), table, varies,
                          depth_measured)
    dtype = np.int8 if len(units) < 127 else np.int16
    index = np.where(ok, pos, -1).astype(dtype)
    return SoilFields(units, index, ok, MappingProxyType(central), table, varies, depth_measured)
