"""Rain cases: steady recharge (:class:`SteadyRain`) and a storm (:class:`StormRain`).

Two models use them, both with vertical depths, slope-parallel flow and angles
in degrees at the interface: steady recharge (O'Loughlin 1986; Montgomery &
Dietrich 1994), whose wetness W = h_w / z is
:func:`slopescreen.hydrology.steady_wetness`, and a storm on near-saturated
soil (Iverson 2000): :func:`~slopescreen.hydrology.iverson_response`,
:func:`~slopescreen.hydrology.storm_pressure_head`,
:func:`~slopescreen.hydrology.storm_factor_of_safety` and
:func:`~slopescreen.hydrology.storm_minimum` (least FS over depth and time,
per cell). The probability and cluster modules reuse the rain cases.
"""

import dataclasses
import math

from .. import _validate
from ..errors import InputError


_INF = math.inf


@dataclasses.dataclass(frozen=True)
class SteadyRain:
    """A steady recharge case.

    Parameters
    ----------
    recharge_mm_per_day : float
        Steady recharge q per unit horizontal area, mm/day (>= 0).

    Examples
    --------
    >>> SteadyRain(60.0).recharge_mm_per_day
    60.0
    """

    recharge_mm_per_day: float

    def __post_init__(self):
        object.__setattr__(self, "recharge_mm_per_day",
                           _validate.nonnegative(self.recharge_mm_per_day, "recharge_mm_per_day"))


@dataclasses.dataclass(frozen=True)
class StormRain:
    """A storm of constant intensity on near-saturated soil (Iverson 2000).

    Parameters
    ----------
    intensity_mm_per_h : float
        Rain intensity, mm/h (>= 0). Only min(I, K_s) infiltrates.
    duration_h : float
        Storm duration, h (>= 0).
    water_table_depth_m : float or None
        Vertical depth d of the water table before the storm, m (>= 0), the
        same under every cell. Give this or ``antecedent_mm_per_day``.
    steady_ratio : float, keyword-only
        Long-term steady infiltration ratio (I_Z/K_Z)_LT in [0, 1]; beta =
        cos^2(slope) - steady_ratio (clipped at 0). Default 0.
    horizon_h : float or None, keyword-only
        Latest time considered, h from the storm start. None: the whole
        response, up to the post-storm peak of the head at each depth.
    antecedent_mm_per_day : float or None, keyword-only
        Background recharge q0 before the storm, mm/day (>= 0), instead of
        ``water_table_depth_m``: each cell starts from the steady water table
        of that recharge, d = z (1 - W) with W = min(1, q0 a / (K z sin cos))
        (:func:`slopescreen.hydrology.antecedent_table_depth`), so hollows
        start wetter than spurs; the functions that take it need ``sca_m``.

    Raises
    ------
    InputError
        A negative or non-finite value, or not exactly one of
        ``water_table_depth_m`` and ``antecedent_mm_per_day``.

    Examples
    --------
    >>> StormRain(15.0, 8.0, 1.2).duration_s
    28800.0
    >>> StormRain(15.0, 8.0, antecedent_mm_per_day=2.0).water_table_depth_m is None
    True
    """

    intensity_mm_per_h: float
    duration_h: float
    water_table_depth_m: float | None = None
    steady_ratio: float = dataclasses.field(default=0.0, kw_only=True)
    horizon_h: float | None = dataclasses.field(default=None, kw_only=True)
    antecedent_mm_per_day: float | None = dataclasses.field(default=None, kw_only=True)

    def __post_init__(self):
        if (self.water_table_depth_m is None) == (self.antecedent_mm_per_day is None):
            raise InputError("water_table_depth_m, antecedent_mm_per_day: give exactly one (the "
                             "water table before the storm, or the recharge that sets it)")
        for key in ("intensity_mm_per_h", "duration_h", "water_table_depth_m", "steady_ratio",
                    "antecedent_mm_per_day"):
            if getattr(self, key) is not None:
                object.__setattr__(self, key, _validate.nonnegative(getattr(self, key), key))
        if self.steady_ratio > 1.0:
            raise InputError(f"steady_ratio: expected a value in [0, 1], got {self.steady_ratio}")
        if self.horizon_h is not None:
            object.__setattr__(self, "horizon_h",
                               _validate.nonnegative(self.horizon_h, "horizon_h"))

    @property
    def intensity_m_per_s(self):
        """Intensity in m/s."""
        return self.intensity_mm_per_h / 3.6e6

    @property
    def duration_s(self):
        """Duration in s."""
        return self.duration_h * 3600.0

    @property
    def horizon_s(self):
        """Horizon in s, or +inf when none is set."""
        return _INF if self.horizon_h is None else self.horizon_h * 3600.0
