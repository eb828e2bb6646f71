"""Checks and conversions of inputs, shared by every public function of the package.

A public function validates and converts its inputs with these helpers before
a kernel runs, so kernels can assume clean input: :func:`surface` and
:func:`cell_size` for grids, :func:`field` and :func:`physical_field` for
numbers or arrays of a physical quantity (:data:`PHYSICAL_RANGE` bounds the
soil parameters), :func:`physical_parameter` for a distribution of one,
:func:`broadcast_flat` to hand broadcast inputs to a kernel, and
:func:`nonnegative`, :func:`positive_int` and :func:`samples_and_seed` for
scalar options; :func:`read_only` and :func:`parameter_objects` for the
parameter objects (frozen dataclasses of validated inputs) of the public
functions. Every failure is an :class:`~slopescreen.errors.InputError` whose
message names the input.
"""

import dataclasses
import math

import numpy as np

from ._kernels.slope_stability import GAMMA_W
from ._numba import njit
from .errors import InputError


PHYSICAL_RANGE = {
    "depth_m": (0.0, math.inf),
    "cohesion_kpa": (0.0, math.inf),
    "root_cohesion_kpa": (0.0, math.inf),
    "friction_deg": (0.0, 60.0),
    "unit_weight_kn_m3": (0.0, 30.0),
    "conductivity_m_per_day": (0.0, math.inf),
    "diffusivity_m2_per_s": (0.0, math.inf),
}
"""Physical range [low, high] of each soil parameter, in its own unit.

Depth, conductivity, diffusivity and unit weight must be > 0 (the lower bound
is open); cohesions may be 0. Distributions are truncated to these ranges.
"""

_OPEN_LOW = {"depth_m", "unit_weight_kn_m3", "conductivity_m_per_day", "diffusivity_m2_per_s"}


# ---------------------------------------------------------------------------
# grids
# ---------------------------------------------------------------------------


def surface(z, valid=None, *, name="z", min_size=3):
    """Validate a 2-D surface and return it as float with NaN as nodata.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations or another surface; NaN marks nodata.
    valid : array_like of bool, optional
        Cells to use; cells where it is False are treated as nodata.
    name : str
        Name used in error messages.
    min_size : int
        Smallest accepted number of rows and of columns.

    Returns
    -------
    z : numpy.ndarray
        float32 if the input was float32, else float64. A new array only when
        a conversion or masking was needed; the input is never modified.
    valid : numpy.ndarray of bool
        ``isfinite(z) & valid``.

    Raises
    ------
    InputError
        Not 2-D, smaller than ``min_size`` in either axis, holding +-inf, or
        with no valid cell; ``valid`` of another shape.

    Examples
    --------
    >>> import numpy as np
    >>> z, ok = surface(np.array([[1, 2, np.nan]] * 3))
    >>> z.dtype, int(ok.sum())
    (dtype('float64'), 6)
    """
    arr = np.asarray(z)
    if arr.ndim != 2:
        raise InputError(f"{name}: expected a 2-D array (rows, cols), got {arr.ndim}-D")
    if arr.shape[0] < min_size or arr.shape[1] < min_size:
        raise InputError(
            f"{name}: grid is {arr.shape[0]}x{arr.shape[1]} cells; at least "
            f"{min_size}x{min_size} is needed"
        )
    if arr.dtype != np.float32:
        arr = arr.astype(np.float64)
    if np.isinf(arr).any():
        raise InputError(f"{name}: holds infinite values; use NaN for nodata")
    finite = np.isfinite(arr)
    if valid is not None:
        mask = np.asarray(valid, dtype=bool)
        if mask.shape != arr.shape:
            raise InputError(
                f"valid: shape {mask.shape} does not match {name} shape {arr.shape}"
            )
        finite &= mask
        if not mask.all():
            arr = np.where(mask, arr, np.nan).astype(arr.dtype, copy=False)
    if not finite.any():
        raise InputError(f"{name}: every cell is nodata; nothing to compute")
    return arr, finite


def cell_size(dx, dy):
    """Validate cell sizes in metres and return them as floats.

    Raises
    ------
    InputError
        If either size is not a finite number > 0.

    Examples
    --------
    >>> cell_size(5, 2.5)
    (5.0, 2.5)
    """
    out = []
    for label, value in (("dx", dx), ("dy", dy)):
        try:
            v = float(value)
        except (TypeError, ValueError):
            raise InputError(f"{label}: expected a cell size in metres, got {value!r}") from None
        if not np.isfinite(v) or v <= 0:
            raise InputError(f"{label}: cell size must be > 0 m, got {value!r}")
        out.append(v)
    return out[0], out[1]


# ---------------------------------------------------------------------------
# numbers or arrays of a physical quantity
# ---------------------------------------------------------------------------


@njit
def _scan_kernel(values):
    """One pass over the values: (min, max) of the finite ones, NaN count, infinity count."""
    vmin = math.inf
    vmax = -math.inf
    n_nan = 0
    n_inf = 0
    for i in range(values.size):
        v = values[i]
        if math.isnan(v):
            n_nan += 1
        elif math.isinf(v):
            n_inf += 1
        else:
            vmin = min(vmin, v)
            vmax = max(vmax, v)
    return float(vmin), float(vmax), n_nan, n_inf


def field(value, name, low, high, *, open_low=False, open_high=False, allow_nan=True):
    """Validate a number or array of a physical quantity; return an ndarray.

    float32 input stays float32; anything else becomes float64. NaN marks
    nodata (when ``allow_nan``); infinities, values outside the range and
    all-NaN input raise :class:`InputError` naming ``name``.

    Examples
    --------
    >>> field([0.5, float("nan")], "wetness", 0.0, 1.0)
    array([0.5, nan])
    """
    try:
        arr = np.asarray(value)
        if arr.dtype != np.float32:
            arr = arr.astype(np.float64)
    except (TypeError, ValueError):
        raise InputError(
            f"{name}: expected a number or an array of numbers, got {value!r}"
        ) from None
    if arr.size == 0:
        raise InputError(f"{name}: empty array")
    vmin, vmax, n_nan, n_inf = _scan_kernel(arr.reshape(-1))
    if n_inf:
        raise InputError(f"{name}: holds infinite values; use NaN for nodata")
    if n_nan == arr.size:
        raise InputError(f"{name}: every value is NaN (nodata); nothing to compute")
    if n_nan and not allow_nan:
        raise InputError(f"{name}: NaN is not accepted here")
    bad_low = vmin <= low if open_low else vmin < low
    bad_high = vmax >= high if open_high else vmax > high
    if bad_low or bad_high:
        lo_txt = f"> {low}" if open_low else f">= {low}"
        hi_txt = f"< {high}" if open_high else f"<= {high}"
        got = vmin if bad_low else vmax
        raise InputError(f"{name}: got {got}; expected values {lo_txt} and {hi_txt}")
    return arr


def physical_field(value, key, *, name=None):
    """:func:`field` with the range of :data:`PHYSICAL_RANGE` ``[key]``.

    Examples
    --------
    >>> physical_field(1.2, "depth_m")
    array(1.2)
    """
    lo, hi = PHYSICAL_RANGE[key]
    return field(value, name or key, lo, hi, open_low=key in _OPEN_LOW)


def depth_measured(value):
    """True when soil depths were measured normal to the slope (``"slope_normal"``).

    ``"vertical"`` (the default everywhere) gives False; anything else is an
    :class:`InputError` naming ``depth_measured``.
    """
    if value == "vertical":
        return False
    if value == "slope_normal":
        return True
    raise InputError(f"depth_measured: expected \"vertical\" or \"slope_normal\", got {value!r}")


def slope_field(slope_deg):
    """:func:`field` for a slope angle, degrees in [0, 90), named ``slope_deg``."""
    return field(slope_deg, "slope_deg", 0.0, 90.0, open_high=True)


def grid_field(value, shape, key, low, high, *, open_low=False):
    """:func:`field` broadcast to a grid of ``shape``, as a C-contiguous float64 array.

    Raises
    ------
    InputError
        Also when the value does not broadcast to ``shape``.
    """
    return on_grid(field(value, key, low, high, open_low=open_low), shape, key)


def on_grid(arr, shape, key):
    """An already validated array broadcast to a grid of ``shape``, C-contiguous float64.

    Raises
    ------
    InputError
        When ``arr`` does not broadcast to ``shape`` (the message names ``key``).

    Examples
    --------
    >>> on_grid(np.array(2.0), (2, 2), "cohesion_kpa").tolist()
    [[2.0, 2.0], [2.0, 2.0]]
    """
    try:
        return np.ascontiguousarray(np.broadcast_to(arr, shape), dtype=np.float64)
    except ValueError:
        raise InputError(
            f"{key}: shape {arr.shape} does not broadcast to the grid {shape}"
        ) from None


def physical_parameter(param, key):
    """Intersect a parameter's bounds with :data:`PHYSICAL_RANGE` ``[key]``.

    Parameters
    ----------
    param : slopescreen.parameters.Parameter
        A fixed value or a distribution; its name is used in messages.
    key : str
        A key of :data:`PHYSICAL_RANGE`.

    Returns
    -------
    slopescreen.parameters.Parameter
        ``param`` itself when fixed, else the distribution truncated to the range.

    Raises
    ------
    InputError
        When the (fixed) value or the whole distribution lies outside the range.
    """
    lo, hi = PHYSICAL_RANGE[key]
    name = param.name
    if param.kind == "fixed":
        v = param.a
        if v < lo or v > hi or (key in _OPEN_LOW and v <= lo):
            rel = ">" if key in _OPEN_LOW else ">="
            raise InputError(
                f"{name}: {v} is outside the physical range ({rel} {lo}, <= {hi})"
            )
        return param
    new_lo, new_hi = max(param.low, lo), min(param.high, hi)
    try:
        if new_lo > new_hi:
            raise InputError("empty")
        return param.truncated(new_lo, new_hi)
    except InputError:
        raise InputError(
            f"{name}: the {param.kind} distribution ({param.a}, {param.b}) within bounds "
            f"[{param.low}, {param.high}] lies outside the physical range [{lo}, {hi}]"
        ) from None


def saturated_unit_weight(strength):
    """The saturated unit weight of a :class:`~slopescreen.stability.SoilStrength`.

    Its own ``saturated_unit_weight_kn_m3`` (checked when the object was
    built), or else the moist ``unit_weight_kn_m3`` standing in for it,
    checked here to lie in [GAMMA_W, 30] kN/m^3.

    Raises
    ------
    InputError
        A moist unit weight below 9.81 kN/m^3 where it stands in for the saturated one.
    """
    if strength.saturated_unit_weight_kn_m3 is not None:
        return strength.saturated_unit_weight_kn_m3
    return field(strength.unit_weight_kn_m3,
                 "saturated_unit_weight_kn_m3 (defaults to unit_weight_kn_m3)", GAMMA_W, 30.0)


def broadcast_flat(arrays):
    """Broadcast validated inputs for a kernel; return (shape, 1-D arrays, strides).

    An input of one element is passed as it is with stride 0, any other as a
    contiguous 1-D copy of the broadcast array with stride 1, so a kernel
    reads element i of input j at ``flats[j][i * strides[j]]``.

    Examples
    --------
    >>> import numpy as np
    >>> shape, flats, strides = broadcast_flat([np.array(2.0), np.ones((2, 3))])
    >>> shape, strides.tolist()
    ((2, 3), [0, 1])
    """
    shape = np.broadcast_shapes(*(a.shape for a in arrays))
    flats, strides = [], []
    for a in arrays:
        if a.size == 1:
            flats.append(a.reshape(1))
            strides.append(0)
        else:
            flats.append(np.ascontiguousarray(np.broadcast_to(a, shape)).reshape(-1))
            strides.append(1)
    return shape, flats, np.array(strides, dtype=np.int64)


# ---------------------------------------------------------------------------
# scalar options
# ---------------------------------------------------------------------------


def nonnegative(value, name, *, allow_zero=True):
    """Validate a finite number >= 0 (> 0 unless ``allow_zero``); return it as a float.

    Examples
    --------
    >>> nonnegative("2.5", "duration_h")
    2.5
    """
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected a number, got {value!r}") from None
    if not math.isfinite(v) or v < 0.0 or (v == 0.0 and not allow_zero):
        rel = ">= 0" if allow_zero else "> 0"
        raise InputError(f"{name}: expected a finite number {rel}, got {value!r}")
    return v


def positive_int(value, name):
    """Validate an integer >= 1 (an integral float is accepted); return it as an int.

    Examples
    --------
    >>> positive_int(20.0, "n_depths")
    20
    """
    try:
        n = int(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected an integer >= 1, got {value!r}") from None
    if n < 1 or n != value:
        raise InputError(f"{name}: expected an integer >= 1, got {value!r}")
    return n


def samples_and_seed(samples, seed):
    """Validate a Monte Carlo sample count (>= 1) and seed (in [0, 2**64)); return them as ints.

    Raises
    ------
    InputError
        Naming ``samples`` or ``seed``.

    Examples
    --------
    >>> samples_and_seed(400, 7)
    (400, 7)
    """
    n = positive_int(samples, "samples")
    try:
        s = int(seed)
    except (TypeError, ValueError):
        raise InputError(f"seed: expected an integer in [0, 2**64), got {seed!r}") from None
    if s != seed or not 0 <= s < 2**64:
        raise InputError(f"seed: expected an integer in [0, 2**64), got {seed!r}")
    return n, s


# ---------------------------------------------------------------------------
# parameter objects
# ---------------------------------------------------------------------------


def read_only(arr):
    """A read-only view of a validated array (no copy; ``arr`` itself stays writable).

    A parameter object stores its arrays this way, so nothing can be written
    into them through the object.

    Examples
    --------
    >>> a = np.zeros(3)
    >>> v = read_only(a)
    >>> v.flags.writeable, a.flags.writeable
    (False, True)
    """
    view = arr.view()
    view.flags.writeable = False
    return view


def parameter_objects(function, loose, *specs):
    """The parameter objects of a public call, given as objects or as loose keywords.

    Parameters
    ----------
    function : str
        Name of the public function, for messages.
    loose : dict
        The loose keyword arguments of the call (field name -> value).
    *specs : tuple of (str, type, object or None)
        Per parameter object: its keyword, its class (a dataclass) and the
        object the caller gave, or None to build it from the loose keywords
        that name its fields.

    Returns
    -------
    list
        One object per spec, in order.

    Raises
    ------
    TypeError
        A loose keyword that is a field of none of the classes, or a required
        field missing (as Python says of a wrong call).
    InputError
        An object that is not of its class, or an object given together with
        loose keywords of its fields. The constructors raise the input errors
        of the values themselves.

    Examples
    --------
    >>> @dataclasses.dataclass(frozen=True)
    ... class Box:
    ...     side_m: float
    >>> parameter_objects("volume", {"side_m": 2.0}, ("box", Box, None))
    [Box(side_m=2.0)]
    """
    left = dict(loose)
    chosen = []
    for name, cls, given in specs:
        fields = [f for f in dataclasses.fields(cls) if f.init]
        mine = {f.name: left.pop(f.name) for f in fields if f.name in left}
        if given is not None:
            if not isinstance(given, cls):
                raise InputError(f"{name}: expected a {cls.__name__}, got {type(given).__name__}")
            if mine:
                raise InputError(f"{name}: given as a {cls.__name__} and as the loose keywords "
                                 f"{', '.join(mine)}; give one or the other")
        chosen.append((name, cls, given, fields, mine))
    if left:
        raise TypeError(f"{function}() got an unexpected keyword argument {next(iter(left))!r}")
    out = []
    for name, cls, given, fields, mine in chosen:
        if given is None:
            missing = [f.name for f in fields if f.name not in mine
                       and f.default is dataclasses.MISSING
                       and f.default_factory is dataclasses.MISSING]
            if missing:
                raise TypeError(f"{function}() missing required keyword argument(s) "
                                f"{', '.join(map(repr, missing))} (or give {name}="
                                f"{cls.__name__}(...))")
            given = cls(**mine)
        out.append(given)
    return out
