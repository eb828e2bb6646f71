"""The angle of reach of a failure source: fixed, or from its volume.

The angle of reach is the crown-to-tip travel angle, tan(alpha) = H / L,
with H the drop from the crown (top of the scarp) to the distal tip of the
deposit and L the horizontal distance between them (docs/methods.md,
"Runout reach"). Without a fixed angle, each source takes the angle of the
regression of H/L on volume for debris flows of Corominas (1996),

    log10(H/L) = -0.012 - 0.105 log10(V),     V in m^3,

clipped to the accepted range of 5-45 degrees. The coefficients are
recalled from memory (Corominas 1996, Canadian Geotechnical Journal
33(2), 260-271), not checked against the paper. The debris-flow line is the
more mobile (lower H/L) of that paper's relations for small slides, so it is
the conservative default for shallow soil slides that may become debris
flows in channels; calibrate it regionally where runout has been mapped.
"""

from __future__ import annotations

import math

import numpy as np

from ..scenario.model import ANGLE_OF_REACH_RANGE_DEG

VOLUME_RELATION = (-0.012, -0.105)
"""(intercept, slope) of log10(H/L) on log10(V / m^3): debris flows, Corominas (1996),
from memory."""


def angle_of_reach_deg(volume_m3, fixed_deg: float | None = None) -> np.ndarray:
    """Angle of reach of each source, degrees.

    Parameters
    ----------
    volume_m3 : array_like of float
        Volume of each source, m^3 (> 0).
    fixed_deg : float, optional
        One angle for every source (``[runout] angle_of_reach_deg``).

    Returns
    -------
    numpy.ndarray of float64
        Degrees, inside 5-45 degrees.

    References
    ----------
    Corominas, J. (1996). The angle of reach as a mobility index for small
    and large landslides. Canadian Geotechnical Journal 33(2), 260-271 (from
    memory). docs/methods.md, "Runout reach".

    Examples
    --------
    >>> angle_of_reach_deg([1000.0]).round(2)      # H/L = 10**(-0.012 - 0.315) = 0.471
    array([25.22])
    >>> angle_of_reach_deg([10.0, 1e6], fixed_deg=22.0)
    array([22., 22.])
    """
    v = np.asarray(volume_m3, dtype=np.float64)
    lo, hi = ANGLE_OF_REACH_RANGE_DEG
    if fixed_deg is not None:
        return np.full(v.shape, float(fixed_deg))
    a, b = VOLUME_RELATION
    with np.errstate(divide="ignore"):
        ratio = 10.0 ** (a + b * np.log10(np.maximum(v, 1e-12)))
    return np.clip(np.degrees(np.arctan(ratio)), lo, hi)


def reach_ratio(angle_deg) -> np.ndarray:
    """tan of the angle of reach (H/L), for the path kernel.

    Examples
    --------
    >>> float(reach_ratio(26.565051177077994).round(6))
    0.5
    """
    return np.tan(np.radians(np.asarray(angle_deg, dtype=np.float64)))


def source_volume_note(fixed_deg: float | None) -> str:
    """One phrase saying where the angle of reach came from (manifest, report)."""
    if fixed_deg is not None:
        return f"fixed angle of reach {fixed_deg:g} degrees (H/L = {math.tan(math.radians(fixed_deg)):.3f})"
    a, b = VOLUME_RELATION
    return (f"angle of reach from each source's volume: log10(H/L) = {a:g} {b:+g} log10(V/m^3) "
            "(debris flows, Corominas 1996; coefficients from memory), within 5-45 degrees")
