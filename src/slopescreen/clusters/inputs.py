"""Parameter objects of the cluster functions, each validated once where it is built.

:class:`ClusterStrength` (the soil strength of the force model, a
:class:`~slopescreen.stability.SoilStrength` with lateral roots),
:class:`ClusterOptions` (the options of :func:`~slopescreen.clusters.failure_clusters`:
passive share, area band, tiles, bound windows, size-resolved search) and
:class:`ClusterUncertainty` (the soil distributions, samples and rain case of
:func:`~slopescreen.clusters.cluster_failure_probability`). The cluster
functions take them, or build them from loose keywords of the same names.
"""

import dataclasses
import math
from collections.abc import Mapping

import numpy as np

from .. import _validate
from .._kernels.rain_case import _STORM, _rain_vector
from .._kernels.soil_table import _checked_table
from ..errors import InputError
from ..hydrology import SteadyRain
from ..parameters import Parameter, fixed
from ..stability import SoilStrength

__all__ = ["ClusterStrength", "ClusterOptions", "ClusterUncertainty"]


@dataclasses.dataclass(frozen=True, kw_only=True, eq=False)
class ClusterStrength(SoilStrength):
    """Soil strength of the cluster force model: a SoilStrength plus lateral root cohesion.

    The fields of :class:`~slopescreen.stability.SoilStrength` (``cohesion_kpa``
    c' on the base, the sides and the toe; ``root_cohesion_kpa`` basal roots;
    ``friction_deg``; ``unit_weight_kn_m3``; the optional
    ``saturated_unit_weight_kn_m3``), documented there, and:

    Parameters
    ----------
    lateral_root_cohesion_kpa : array_like
        Root cohesion across the side and head faces, kPa (>= 0), depth-uniform.

    Fields are numbers or per-cell arrays that broadcast to the
    grid of the call.

    Raises
    ------
    InputError
        A value out of its range (the message names the field), infinite
        values, an all-NaN field.

    Examples
    --------
    >>> soil = ClusterStrength(cohesion_kpa=0.5, root_cohesion_kpa=0.5,
    ...     lateral_root_cohesion_kpa=2.0, friction_deg=34.0, unit_weight_kn_m3=18.5)
    >>> float(soil.lateral_root_cohesion_kpa)
    2.0
    """

    lateral_root_cohesion_kpa: np.ndarray

    def __post_init__(self):
        super().__post_init__()
        self._store("lateral_root_cohesion_kpa", _validate.field(
            self.lateral_root_cohesion_kpa, "lateral_root_cohesion_kpa", 0.0, math.inf))


def _count(value, name, low):
    """An integer >= low (an integral float is accepted), as an int."""
    try:
        n = int(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected an integer >= {low}, got {value!r}") from None
    if n < low or n != value:
        raise InputError(f"{name}: expected an integer >= {low}, got {value!r}")
    return n


def _area(value, name):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected an area in m^2, got {value!r}") from None
    if math.isnan(v) or v < 0.0 or (name == "min_area_m2" and math.isinf(v)):
        raise InputError(f"{name}: expected a finite area >= 0 m^2 (max_area_m2 may be inf), "
                         f"got {value!r}")
    return v


def _bands(value):
    """An integer >= 1, or a tuple of (min, max) pairs in m^2."""
    if isinstance(value, (int, np.integer)) and not isinstance(value, bool):
        if value < 1:
            raise InputError(f"size_bands: expected an integer >= 1 or (min_area_m2, "
                             f"max_area_m2) pairs, got {value}")
        return int(value)
    try:
        pairs = tuple(tuple(float(v) for v in pair) for pair in value)
    except (TypeError, ValueError):
        raise InputError(f"size_bands: expected an integer >= 1 or (min_area_m2, max_area_m2) "
                         f"pairs, got {value!r}") from None
    if not pairs or any(len(p) != 2 for p in pairs):
        raise InputError(f"size_bands: expected an integer >= 1 or (min_area_m2, max_area_m2) "
                         f"pairs, got {value!r}")
    return pairs


_NODATA_FACES = ("free", "charged")
"""Rules for margin faces towards nodata cells (``nodata_faces``)."""


def _nodata_faces_free(value):
    """True for ``nodata_faces="free"``, False for ``"charged"``; InputError otherwise."""
    if value not in _NODATA_FACES:
        raise InputError(f"nodata_faces: expected one of {', '.join(_NODATA_FACES)}, got {value!r}")
    return value == "free"


@dataclasses.dataclass(frozen=True, kw_only=True)
class ClusterOptions:
    """Options of :func:`~slopescreen.clusters.failure_clusters` (the scenario's ``[clusters]``).

    Parameters
    ----------
    min_area_m2, max_area_m2 : float, optional
        Area band of the scenario, m^2 (0 <= min <= max; max may be inf).
        Sets the ``in_area_band`` column (the failing clusters of the exact
        cut have whatever size the physics gives them) and bounds the
        size-resolved search, which needs both.
    passive_fraction : float
        Share eta in [0, 1] of full Rankine passive resistance counted at the
        toe (scenario ``[clusters] passive_fraction``, default 0.5).
    nodata_faces : {"free", "charged"}
        Margin faces towards nodata cells: free of any force (default) or
        charged with the cell's own values (scenario ``[clusters]
        nodata_faces``; see :func:`~slopescreen.clusters.cluster_forces`).
    tile_cells, halo_cells : int
        Tile core (>= 1) and halo (>= 0) of the tiled cut, cells (see
        :func:`~slopescreen.clusters.failing_set`); default 200 and 24.
    bound : bool
        Compute ``cluster_fs_bound`` (the slower product; default True); a
        NaN raster if False.
    bound_window_cells, bound_stride_cells : int
        Window side W (>= 2) and stride s (1 <= s < W) of ``cluster_fs_bound``,
        default 40 and 20; the bound holds for clusters whose bounding box
        spans at most W - s rows and columns.
    size_resolved : bool
        Also run the size-resolved search (needs ``min_area_m2`` and
        ``max_area_m2``): the least-stable connected cluster of each area
        band in windows around each failing cluster and in the
        ``size_n_least`` least-stable bound-map windows
        (:func:`~slopescreen.clusters.size_resolved_clusters`). Default False.
    size_bands : int or sequence of (float, float)
        Number of geometric area bands (>= 1, default 1), or explicit
        (min, max) pairs in m^2 (:func:`~slopescreen.clusters.area_bands`).
    size_time_limit_s : float
        Time limit of the mixed-integer solves per window and band, s (> 0,
        default 10).
    size_window_cells : int
        Side of the windows centred on failing clusters, cells (>= 1, default 40).
    size_n_least : int
        Least-stable bound-map windows added as candidates (>= 0, default 4;
        needs ``bound``).
    size_max_clusters : int, optional
        Search at most this many windows centred on failing clusters (>= 0),
        the least stable first; a cluster inside a window already chosen
        adds none (default: every cluster not so covered).

    Raises
    ------
    InputError
        A value of the wrong kind or out of its range (the message names the
        field); ``size_resolved`` without both area limits.

    Examples
    --------
    >>> opts = ClusterOptions(min_area_m2=50.0, max_area_m2=500.0, size_resolved=True,
    ...                       size_bands=2)
    >>> opts.size_bands, opts.bound
    (2, True)
    >>> ClusterOptions(size_window_cells=0)
    Traceback (most recent call last):
    ...
    slopescreen.errors.InputError: size_window_cells: expected an integer >= 1, got 0
    """

    min_area_m2: float | None = None
    max_area_m2: float | None = None
    passive_fraction: float = 0.5
    nodata_faces: str = "free"
    tile_cells: int = 200
    halo_cells: int = 24
    bound: bool = True
    bound_window_cells: int = 40
    bound_stride_cells: int = 20
    size_resolved: bool = False
    size_bands: int | tuple = 1
    size_time_limit_s: float = 10.0
    size_window_cells: int = 40
    size_n_least: int = 4
    size_max_clusters: int | None = None

    def __post_init__(self):
        put = self._put
        lo, hi = self.min_area_m2, self.max_area_m2
        lo = None if lo is None else _area(lo, "min_area_m2")
        hi = None if hi is None else _area(hi, "max_area_m2")
        if lo is not None and hi is not None and hi < lo:
            raise InputError(f"min_area_m2, max_area_m2: expected 0 <= min <= max, got {lo}, {hi}")
        put("min_area_m2", lo)
        put("max_area_m2", hi)
        put("passive_fraction", float(_validate.field(
            self.passive_fraction, "passive_fraction", 0.0, 1.0, allow_nan=False)))
        _nodata_faces_free(self.nodata_faces)
        for name in ("tile_cells", "halo_cells"):
            v = getattr(self, name)
            try:
                ok = int(v) == v and v >= (1 if name == "tile_cells" else 0)
            except (TypeError, ValueError):
                ok = False
            if not ok:
                raise InputError(f"{name}: expected a non-negative integer (tile >= 1), got {v!r}")
            put(name, int(v))
        w, s = self.bound_window_cells, self.bound_stride_cells
        try:
            ok = int(w) == w and int(s) == s and int(w) >= 2 and 1 <= int(s) < int(w)
        except (TypeError, ValueError):
            ok = False
        if not ok:
            raise InputError(f"bound_window_cells, bound_stride_cells: expected integers with "
                             f"1 <= stride < window and window >= 2, got {w!r}, {s!r}")
        put("bound_window_cells", int(w))
        put("bound_stride_cells", int(s))
        put("bound", bool(self.bound))
        put("size_resolved", bool(self.size_resolved))
        if self.size_resolved and (lo is None or hi is None):
            raise InputError("min_area_m2, max_area_m2: the size-resolved search needs the "
                             "scenario's area range ([clusters] min_area_m2, max_area_m2)")
        put("size_bands", _bands(self.size_bands))
        t = self.size_time_limit_s
        if isinstance(t, bool) or not (isinstance(t, (int, float)) and math.isfinite(t)
                                       and t > 0):
            raise InputError(f"size_time_limit_s: expected a positive number of seconds, got "
                             f"{t!r}")
        put("size_time_limit_s", float(t))
        put("size_window_cells", _validate.positive_int(self.size_window_cells,
                                                        "size_window_cells"))
        put("size_n_least", _count(self.size_n_least, "size_n_least", 0))
        if self.size_max_clusters is not None:
            put("size_max_clusters", _count(self.size_max_clusters, "size_max_clusters", 0))

    def _put(self, key, value):
        object.__setattr__(self, key, value)


def _encode_lateral(lateral, n_units):
    """Encoded rows (n_units, 1, 5) of the lateral root cohesion, truncated to >= 0."""
    if isinstance(lateral, (Parameter, int, float, np.integer, np.floating)):
        values = [lateral] * n_units
    else:
        try:
            values = list(lateral)
        except TypeError:
            raise InputError("lateral_root_cohesion_kpa: expected a number, a Parameter or one "
                             "per soil unit") from None
        if len(values) != n_units:
            raise InputError(f"lateral_root_cohesion_kpa: {len(values)} values for "
                             f"{n_units} soil units; give one per unit")
    out = np.empty((n_units, 1, 5))
    for u, v in enumerate(values):
        name = f"unit {u} lateral_root_cohesion_kpa"
        if isinstance(v, Parameter):
            par = Parameter(v.kind, v.a, v.b, v.low, v.high, name=name)
        else:
            par = fixed(v, name=name)
        # same physical range as the basal root cohesion: [0, inf)
        out[u, 0] = _validate.physical_parameter(par, "root_cohesion_kpa").encode()
    return out


@dataclasses.dataclass(frozen=True, kw_only=True, eq=False)
class ClusterUncertainty:
    """What the probability that a cluster fails is drawn from: soil distributions, samples, rain.

    Parameters
    ----------
    unit_index : array_like of int, shape (rows, cols)
        Row of ``table`` of each cell's soil unit; -1 is nodata.
    table : numpy.ndarray, shape (n_units, 7, 5)
        Encoded soil parameters of the stability stage
        (:func:`slopescreen.probability.encode_table`); a storm needs the diffusivity.
    lateral_root_cohesion_kpa : float, Parameter or sequence
        Lateral root cohesion, kPa: one value or Parameter for all units, or
        one per unit (scenario key of the same name).
    samples : int
        Number of Monte Carlo samples N (>= 1, default 400).
    seed : int
        Seed in [0, 2**64) (default 0); the same seed gives bit-identical
        results with any number of threads.
    rain : SteadyRain or StormRain, optional
        The rain case: wetness recomputed per sample from the drawn
        parameters (a steady case, and a storm with ``antecedent_mm_per_day``,
        need ``sca_m``). Default None: the
        wetness given to the function is held fixed over the samples.
    sca_m : array_like, optional
        Specific catchment area a, m (>= 0), shape (rows, cols); used by a
        steady rain case and by a storm's antecedent water table only.
    depth_measured : {"vertical", "slope_normal"}
        How the table's ``depth_m`` was measured (default ``"vertical"``).
        ``"slope_normal"``: each sampled thickness H becomes the cell's
        vertical depth z = H / cos(theta) (docs/methods.md, "Slope-normal soil
        thickness").
    n_depths : int
        Storm only: failure depths tried per cell and sample (default 1: the
        soil base only), the depth rule of
        :func:`slopescreen.hydrology.storm_minimum`; a run uses 20.
    min_failure_depth_m : float
        Storm only: minimum credible failure depth z_min, m (default 0); the
        depths tried are z_min + (H - z_min) k / n_depths, k = 1..n_depths, at
        the drawn soil depth H (the base only where H <= z_min); a run uses
        ``[soil] min_failure_depth_m``.

    Raises
    ------
    InputError
        A bad unit index, table, lateral root cohesion, sample count, seed,
        rain case or depth rule (the message names the field); a steady case,
        or a storm with an antecedent recharge, without ``sca_m``.

    Notes
    -----
    The table is stored checked and truncated to the physical ranges, the
    lateral root cohesion as given (a sequence as a tuple), ``unit_index``
    and ``sca_m`` as read-only arrays (``sca_m`` as for the fields of
    :class:`~slopescreen.stability.SoilStrength`).

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.parameters import normal
    >>> from slopescreen.probability import encode_table
    >>> t = encode_table([{"depth_m": 1.0, "cohesion_kpa": 0.0, "root_cohesion_kpa": 0.0,
    ...     "friction_deg": normal(33.0, 3.0), "unit_weight_kn_m3": 18.0,
    ...     "conductivity_m_per_day": 1.0}])
    >>> unc = ClusterUncertainty(unit_index=np.zeros((6, 6), int), table=t,
    ...     lateral_root_cohesion_kpa=1.0, samples=200, seed=3)
    >>> unc.samples, unc.rain is None
    (200, True)
    >>> ClusterUncertainty(unit_index=np.zeros((6, 6), int), table=t,
    ...     lateral_root_cohesion_kpa=1.0, samples=0)
    Traceback (most recent call last):
    ...
    slopescreen.errors.InputError: samples: expected an integer >= 1, got 0
    """

    unit_index: np.ndarray
    table: np.ndarray
    lateral_root_cohesion_kpa: object
    samples: int = 400
    seed: int = 0
    rain: object = None
    sca_m: np.ndarray | None = None
    depth_measured: str = "vertical"
    n_depths: int = 1
    min_failure_depth_m: float = 0.0

    def __post_init__(self):
        put = self._put
        _validate.depth_measured(self.depth_measured)
        put("n_depths", _count(self.n_depths, "n_depths", 1))
        put("min_failure_depth_m",
            _validate.nonnegative(self.min_failure_depth_m, "min_failure_depth_m"))
        unit = np.asarray(self.unit_index)
        if unit.ndim != 2 or not np.issubdtype(unit.dtype, np.integer):
            raise InputError(f"unit_index: expected a 2-D integer array, got {unit.dtype} of "
                             f"shape {unit.shape}")
        storm = self.rain is not None and _rain_vector(self.rain)[0] == _STORM
        encoded, _ = _checked_table(self.table, storm)
        n_units = encoded.shape[0]
        if unit.size and (unit.min() < -1 or unit.max() >= n_units):
            raise InputError(f"unit_index: values must lie in [-1, {n_units - 1}], got "
                             f"[{unit.min()}, {unit.max()}]")
        put("unit_index", _validate.read_only(unit))
        put("table", _validate.read_only(encoded))
        lateral = self.lateral_root_cohesion_kpa
        _encode_lateral(lateral, n_units)
        if not isinstance(lateral, (Parameter, int, float, np.integer, np.floating)):
            put("lateral_root_cohesion_kpa", tuple(lateral))
        n, s = _validate.samples_and_seed(self.samples, self.seed)
        put("samples", n)
        put("seed", s)
        if self.sca_m is not None:
            put("sca_m", _validate.read_only(_validate.field(self.sca_m, "sca_m", 0.0, math.inf)))
        elif isinstance(self.rain, SteadyRain):
            raise InputError("sca_m: a steady rain case needs the specific catchment area")
        elif getattr(self.rain, "antecedent_mm_per_day", None) is not None:
            raise InputError("sca_m: a storm with antecedent_mm_per_day needs the specific "
                             "catchment area")

    def _put(self, key, value):
        object.__setattr__(self, key, value)

    @classmethod
    def from_mapping(cls, mapping):
        """Build one from a mapping of its fields (the ``uncertainty`` dict of earlier releases).

        Raises
        ------
        InputError
            Not a mapping, an unknown key or a missing required key (the
            messages start with ``uncertainty:``), or a bad value.

        Examples
        --------
        >>> import numpy as np
        >>> from slopescreen.probability import encode_table
        >>> t = encode_table([{"depth_m": 1.0, "cohesion_kpa": 0.0, "root_cohesion_kpa": 0.0,
        ...     "friction_deg": 33.0, "unit_weight_kn_m3": 18.0, "conductivity_m_per_day": 1.0}])
        >>> ClusterUncertainty.from_mapping({"unit_index": np.zeros((3, 3), int), "table": t,
        ...     "lateral_root_cohesion_kpa": 1.0, "seed": 5}).seed
        5
        """
        if not isinstance(mapping, Mapping):
            raise InputError("uncertainty: expected a mapping of keyword arguments")
        fields = dataclasses.fields(cls)
        keys = {f.name for f in fields}
        extra = set(mapping) - keys
        if extra:
            raise InputError(f"uncertainty: unknown key(s) {sorted(extra)}; expected "
                             f"{sorted(keys)}")
        for f in fields:
            if f.default is dataclasses.MISSING and f.name not in mapping:
                raise InputError(f"uncertainty: missing {f.name!r}")
        return cls(**mapping)
