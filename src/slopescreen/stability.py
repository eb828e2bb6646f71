"""Infinite-slope factor of safety and critical steady recharge.

Conventions (docs/methods.md, "Infinite-slope factor of safety" and "Critical
steady recharge"): the depth z to the slip plane and the water height h_w
above it are **vertical**; seepage is slope-parallel so the pore pressure on
the slip plane is u = gamma_w h_w cos^2(theta); angles are degrees at the
interface and radians inside; gamma_w = 9.81 kN/m^3.

The factor of safety is undefined on flat ground (no driving stress). A GIS
band must not carry infinity, so every FS this package writes is clipped to
``[0, FS_CAP]`` with ``FS_CAP = 100``: a value of 100 reads "at least 100",
and a flat cell (slope 0) carries 100. Nodata (NaN in any input) stays NaN.
"""

import dataclasses
import math

import numpy as np

from . import _validate
from ._kernels.slope_stability import FS_CAP, GAMMA_W, _rad, _steady_fs_point, _vertical_depth
from ._numba import njit, njit_parallel, prange
from .errors import InputError

__all__ = [
    "GAMMA_W",
    "FS_CAP",
    "CLASS_LABELS",
    "SoilStrength",
    "factor_of_safety",
    "critical_recharge",
]

CLASS_LABELS = {
    0: "nodata",
    1: "fails even when dry",
    2: "fails under enough recharge",
    3: "stable even when saturated",
}
"""Labels of the stability classes returned by :func:`critical_recharge`."""


@dataclasses.dataclass(frozen=True, kw_only=True, eq=False)
class SoilStrength:
    """Strength and weight of the soil above a slip plane, validated once.

    Every field is a number or an array (per cell); they broadcast against
    each other and against the other inputs of the function they are given
    to. :func:`factor_of_safety`, :func:`slopescreen.hydrology.storm_factor_of_safety`
    and :func:`slopescreen.hydrology.storm_minimum` take one, and the cluster
    strength :class:`slopescreen.clusters.ClusterStrength` is one with lateral
    roots added.

    Parameters
    ----------
    cohesion_kpa : array_like
        Effective soil cohesion c', kPa (>= 0).
    root_cohesion_kpa : array_like
        Basal root cohesion c_r (roots crossing the slip plane), kPa (>= 0); it adds to c'.
    friction_deg : array_like
        Effective friction angle phi', degrees in [0, 60].
    unit_weight_kn_m3 : array_like
        Moist unit weight gamma_m above the water table, kN/m^3 (0 < gamma_m <= 30);
        the storm model's one depth-averaged unit weight gamma_s.
    saturated_unit_weight_kn_m3 : array_like, optional
        Saturated unit weight gamma_sat below the water table, kN/m^3 in
        [9.81, 30] and >= gamma_m. Default None: gamma_m (one bulk unit
        weight, the Montgomery-Dietrich form; a function that needs gamma_sat
        then checks gamma_m against [9.81, 30]). The storm functions use one
        unit weight and refuse a separate gamma_sat.

    Raises
    ------
    InputError
        A value out of its range (the message names the field), infinite
        values, an all-NaN field, gamma_sat lower than gamma_m in some cells.

    Notes
    -----
    Each field is stored as a read-only numpy array: a float32 input as a
    view of the caller's array (an array changed by its owner afterwards is
    seen changed by the object), anything else as a float64 copy.

    Examples
    --------
    >>> s = SoilStrength(cohesion_kpa=2.0, root_cohesion_kpa=0.0, friction_deg=35.0,
    ...                  unit_weight_kn_m3=18.0)
    >>> float(s.friction_deg), s.saturated_unit_weight_kn_m3 is None
    (35.0, True)
    >>> SoilStrength(cohesion_kpa=2.0, root_cohesion_kpa=0.0, friction_deg=70.0,
    ...              unit_weight_kn_m3=18.0)
    Traceback (most recent call last):
    ...
    slopescreen.errors.InputError: friction_deg: got 70.0; expected values >= 0.0 and <= 60.0
    """

    cohesion_kpa: np.ndarray
    root_cohesion_kpa: np.ndarray
    friction_deg: np.ndarray
    unit_weight_kn_m3: np.ndarray
    saturated_unit_weight_kn_m3: np.ndarray | None = None

    def __post_init__(self):
        for key in ("cohesion_kpa", "root_cohesion_kpa", "friction_deg", "unit_weight_kn_m3"):
            self._store(key, _validate.physical_field(getattr(self, key), key))
        if self.saturated_unit_weight_kn_m3 is None:
            return
        gs = _validate.field(self.saturated_unit_weight_kn_m3, "saturated_unit_weight_kn_m3",
                             GAMMA_W, 30.0)
        gm = self.unit_weight_kn_m3
        try:
            shape = np.broadcast_shapes(gs.shape, gm.shape)
        except ValueError:
            raise InputError(f"saturated_unit_weight_kn_m3: shape {gs.shape} does not broadcast "
                             f"with unit_weight_kn_m3 {gm.shape}") from None
        with np.errstate(invalid="ignore"):
            lighter = np.broadcast_to(gs, shape) < gm
        if lighter.any():
            raise InputError(
                "saturated_unit_weight_kn_m3: lower than unit_weight_kn_m3 in some cells; "
                "the saturated unit weight of a soil is at least its moist unit weight"
            )
        self._store("saturated_unit_weight_kn_m3", gs)

    def _store(self, key, arr):
        object.__setattr__(self, key, _validate.read_only(arr))


@njit_parallel
def _factor_of_safety_kernel(slope, depth, wet, coh, root, phi, gm, gs, st, slope_normal, out):
    n = out.size
    tan_phi0 = math.tan(_rad(phi[0]))  # one friction angle for every cell: tan once
    for i in prange(n):
        th = _rad(slope[i * st[0]])
        cos_t = math.cos(th)
        fs = _steady_fs_point(
            coh[i * st[3]] + root[i * st[4]],
            math.tan(_rad(phi[i])) if st[5] else tan_phi0,
            math.sin(th),
            cos_t,
            _vertical_depth(depth[i * st[1]], cos_t, slope_normal),
            wet[i * st[2]],
            gm[i * st[6]],
            gs[i * st[7]],
        )
        out[i] = fs


def factor_of_safety(slope_deg, depth_m, wetness, *, strength=None, depth_measured="vertical",
                     **strength_fields):
    """Infinite-slope factor of safety with a slope-parallel water table.

    Parameters
    ----------
    slope_deg : array_like
        Slope angle theta of ground and slip plane, degrees in [0, 90). NaN is nodata.
    depth_m : array_like
        Vertical depth z to the slip plane, m (> 0).
    wetness : array_like
        Saturated fraction W = h_w / z of the column, in [0, 1] (h_w vertical).
    strength : SoilStrength
        c', c_r, phi', gamma_m and the optional gamma_sat (default gamma_m).
    depth_measured : {"vertical", "slope_normal"}, keyword-only
        How ``depth_m`` was measured. ``"slope_normal"``: it is the thickness
        H normal to the slope, and the kernel uses z = H / cos(theta) per
        cell (docs/methods.md, "Slope-normal soil thickness").
    **strength_fields
        Instead of ``strength``: its fields as loose keywords
        (``cohesion_kpa=..., root_cohesion_kpa=..., friction_deg=...,
        unit_weight_kn_m3=...`` and optionally ``saturated_unit_weight_kn_m3``),
        from which a :class:`SoilStrength` is built.

    All inputs broadcast against each other.

    Returns
    -------
    numpy.ndarray of float32
        FS in [0, FS_CAP]; FS_CAP (100) where FS >= 100 or the slope is 0; NaN
        where any input is NaN.

    Raises
    ------
    InputError
        A value out of its range (message names the input), infinite values,
        or an all-NaN input.

    Notes
    -----
    With h_w = W z (docs/methods.md, "Infinite-slope factor of safety")::

        W_col = gamma_m (z - h_w) + gamma_sat h_w          (kPa)
        sigma = W_col cos^2(theta),  tau = W_col sin(theta) cos(theta)
        u     = gamma_w h_w cos^2(theta)
        FS    = [c' + c_r + (sigma - u) tan(phi')] / tau

    With gamma_sat = gamma_m = gamma this is
    FS = C / (gamma z sin cos) + (1 - W gamma_w / gamma) tan(phi') / tan(theta).
    Dry and cohesionless, FS = tan(phi') / tan(theta) for any z and gamma.
    The slope must come from the original (not depression-filled) DEM.

    References
    ----------
    Skempton, A.W., DeLory, F.A. (1957). Stability of natural slopes in London
    Clay. Proc. 4th ICSMFE, London, 2, 378-381.
    Montgomery, D.R., Dietrich, W.E. (1994). A physically based model for the
    topographic control on shallow landsliding. Water Resources Research
    30(4), 1153-1171. doi 10.1029/93WR02979 (DOI from memory)
    Duncan, J.M., Wright, S.G., Brandon, T.L. (2014). Soil Strength and Slope
    Stability, 2nd ed. Wiley.

    Examples
    --------
    >>> soil = SoilStrength(cohesion_kpa=0.0, root_cohesion_kpa=0.0, friction_deg=35.0,
    ...                     unit_weight_kn_m3=18.0)
    >>> fs = factor_of_safety(30.0, 1.0, 0.0, strength=soil)
    >>> round(float(fs), 5)  # tan 35 / tan 30
    1.2128

    The same call with the strength as loose keywords:

    >>> fs = factor_of_safety(30.0, 1.0, 0.0, cohesion_kpa=0.0, root_cohesion_kpa=0.0,
    ...                       friction_deg=35.0, unit_weight_kn_m3=18.0)
    >>> round(float(fs), 5)
    1.2128

    A thickness H = 1 m measured normal to a 35 degree slope is the vertical
    depth z = H / cos 35 = 1.22 m:

    >>> clay = SoilStrength(cohesion_kpa=5.0, root_cohesion_kpa=0.0, friction_deg=0.0,
    ...                     unit_weight_kn_m3=18.0)
    >>> h = factor_of_safety(35.0, 1.0, 0.0, strength=clay, depth_measured="slope_normal")
    >>> z = factor_of_safety(35.0, 1.0 / np.cos(np.radians(35.0)), 0.0, strength=clay)
    >>> bool(np.isclose(h, z, rtol=1e-6))
    True
    """
    slope = _validate.slope_field(slope_deg)
    depth = _validate.physical_field(depth_m, "depth_m")
    wet = _validate.field(wetness, "wetness", 0.0, 1.0)
    (s,) = _validate.parameter_objects("factor_of_safety", strength_fields,
                                       ("strength", SoilStrength, strength))
    gs = _validate.saturated_unit_weight(s)
    shape, arrs, st = _validate.broadcast_flat(
        [slope, depth, wet, s.cohesion_kpa, s.root_cohesion_kpa, s.friction_deg,
         s.unit_weight_kn_m3, gs])
    out = np.empty(int(np.prod(shape)), dtype=np.float32)
    _factor_of_safety_kernel(*arrs, st, _validate.depth_measured(depth_measured), out)
    return out.reshape(shape)


@njit
def _critical_point(theta_deg, a, depth, cohesion, tan_p, gamma, k_m_per_day):
    """Critical recharge (mm/day, NaN unless class 2) and class of one cell."""
    if (
        math.isnan(theta_deg) or math.isnan(a) or math.isnan(depth) or math.isnan(cohesion)
        or math.isnan(tan_p) or math.isnan(gamma) or math.isnan(k_m_per_day)
    ):
        return math.nan, 0
    if theta_deg <= 0.0:
        return math.nan, 3
    th = _rad(theta_deg)
    s = math.sin(th)
    c = math.cos(th)
    tan_t = s / c
    if tan_p <= 0.0:
        # no friction: FS = C / (gamma z sin cos) whatever the wetness
        if cohesion <= gamma * depth * s * c:
            return math.nan, 1
        return math.nan, 3
    wc = cohesion / (GAMMA_W * depth * c * c * tan_p) + (gamma / GAMMA_W) * (1.0 - tan_t / tan_p)
    if wc <= 0.0:
        return math.nan, 1
    if wc >= 1.0:
        return math.nan, 3
    # q_cr = W_c T sin(theta) / a with T = K z cos(theta); K in m/day -> mm/day
    return wc * k_m_per_day * depth * c * s / a * 1000.0, 2


@njit_parallel
def _critical_recharge_kernel(slope, sca, depth, coh, root, phi, gam, k, st, slope_normal, q_out,
                              cls_out):
    n = q_out.size
    tan_phi0 = math.tan(_rad(phi[0]))
    for i in prange(n):
        theta = slope[i * st[0]]
        q, cl = _critical_point(
            theta,
            sca[i * st[1]],
            _vertical_depth(depth[i * st[2]], math.cos(_rad(theta)), slope_normal),
            coh[i * st[3]] + root[i * st[4]],
            math.tan(_rad(phi[i])) if st[5] else tan_phi0,
            gam[i * st[6]],
            k[i * st[7]],
        )
        q_out[i] = q
        cls_out[i] = cl


def critical_recharge(
    slope_deg,
    sca_m,
    *,
    depth_m,
    cohesion_kpa,
    root_cohesion_kpa,
    friction_deg,
    unit_weight_kn_m3,
    conductivity_m_per_day,
    depth_measured="vertical",
):
    """Steady recharge that brings a cell to FS = 1, and its stability class.

    Parameters
    ----------
    slope_deg : array_like
        Slope angle theta, degrees in [0, 90). NaN is nodata.
    sca_m : array_like
        Specific catchment area a = A/b, m (> 0). NaN is nodata.
    depth_m : array_like
        Vertical soil depth z, m (> 0).
    cohesion_kpa, root_cohesion_kpa : array_like
        c' and basal c_r, kPa (>= 0).
    friction_deg : array_like
        phi', degrees in [0, 60].
    unit_weight_kn_m3 : array_like
        Bulk wet unit weight gamma_s of the whole column, kN/m^3 (0, 30].
    conductivity_m_per_day : array_like
        Saturated hydraulic conductivity K_s, m/day (> 0).
    depth_measured : {"vertical", "slope_normal"}, keyword-only
        How ``depth_m`` was measured. ``"slope_normal"``: it is the thickness
        H normal to the slope, and the kernel uses z = H / cos(theta) per
        cell (docs/methods.md, "Slope-normal soil thickness").

    Returns
    -------
    q_cr_mm_per_day : numpy.ndarray of float32
        Critical steady recharge, mm/day, in class 2 only; NaN elsewhere
        (classes 0, 1 and 3 have no rate: the class says why).
    stability_class : numpy.ndarray of uint8
        See :data:`CLASS_LABELS`: 1 fails even when dry (W_c <= 0), 2 fails
        under enough recharge (0 < W_c < 1), 3 stable even when saturated
        (W_c >= 1, and every flat cell), 0 nodata.

    Raises
    ------
    InputError
        A value outside its range, infinite values or all-NaN input.

    Notes
    -----
    Setting FS = 1 in the single-unit-weight form and W = q a / (T sin theta)::

        W_c  = C / (gamma_w z cos^2 tan phi') + (gamma_s / gamma_w)(1 - tan theta / tan phi')
        q_cr = W_c T sin(theta) / a,      T = K_s z cos(theta)

    The sin(theta) gradient and T = K_s z cos(theta) follow docs/methods.md,
    "Steady wetness"; the tan(theta) or T = K_s z conventions give q_cr
    larger by 1/cos(theta). q_cr is a relative index of topographic control, not a
    rainfall threshold. With phi' = 0 FS does not depend on wetness, so the
    class is 1 or 3.

    References
    ----------
    Montgomery, D.R., Dietrich, W.E. (1994). Water Resources Research 30(4),
    1153-1171. doi 10.1029/93WR02979 (DOI from memory)
    Montgomery, D.R., Sullivan, K., Greenberg, H.M. (1998). Regional test of a
    model for shallow landsliding. Hydrological Processes 12(6), 943-955
    (cohesive form; bibliographic details from memory).

    Examples
    --------
    >>> q, cls = critical_recharge(30.0, 100.0, depth_m=1.0, cohesion_kpa=2.0,
    ...     root_cohesion_kpa=0.0, friction_deg=35.0, unit_weight_kn_m3=18.0,
    ...     conductivity_m_per_day=2e-5 * 86400)
    >>> round(float(q), 3), int(cls)
    (5.314, 2)
    """
    slope = _validate.slope_field(slope_deg)
    sca = _validate.field(sca_m, "sca_m", 0.0, math.inf, open_low=True)
    depth = _validate.physical_field(depth_m, "depth_m")
    coh = _validate.physical_field(cohesion_kpa, "cohesion_kpa")
    root = _validate.physical_field(root_cohesion_kpa, "root_cohesion_kpa")
    phi = _validate.physical_field(friction_deg, "friction_deg")
    gam = _validate.physical_field(unit_weight_kn_m3, "unit_weight_kn_m3")
    k = _validate.physical_field(conductivity_m_per_day, "conductivity_m_per_day")
    shape, arrs, st = _validate.broadcast_flat([slope, sca, depth, coh, root, phi, gam, k])
    n = int(np.prod(shape))
    q = np.empty(n, dtype=np.float32)
    cls = np.empty(n, dtype=np.uint8)
    _critical_recharge_kernel(*arrs, st, _validate.depth_measured(depth_measured), q, cls)
    return q.reshape(shape), cls.reshape(shape)

