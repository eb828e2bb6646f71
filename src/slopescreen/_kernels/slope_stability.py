"""Infinite-slope factor of safety of one point, the one place the formula is written.

:func:`_fs_point` takes the stresses on the slip plane; :func:`_steady_fs_point`
puts a slope-parallel water table at h_w = W z (vertical) into it. The
stability, storm, probability and cluster kernels all call these (see
docs/methods.md, "Infinite-slope factor of safety").
"""

import math

import numpy as np
from numba import types
from numba.extending import overload

from .._numba import njit


GAMMA_W = 9.81
"""Unit weight of water, kN/m^3."""

FS_CAP = 100.0
"""Largest factor of safety reported; flat cells get this value."""


@njit
def _rad(deg):
    """Degrees to radians in float64 (a float32 raster value must not make trig float32)."""
    return np.float64(deg) * (math.pi / 180.0)


def _vertical_depth(depth, cos_t, slope_normal):
    """Vertical soil depth z of a unit's soil depth at a cell of slope theta.

    A depth measured normal to the slope (H) is z = H / cos(theta); a vertical
    one is z itself (docs/methods.md, "Slope-normal soil thickness"). This is
    the one place the conversion is written; every kernel that reads a unit's
    depth calls it. Compiled, z keeps the float type of ``depth`` (a float32
    raster value stays float32), so a vertical depth gives the kernels the very
    value, and type, they read before the conversion existed.
    """
    return depth / cos_t if slope_normal else depth


@overload(_vertical_depth, jit_options={"cache": True})
def _vertical_depth_typed(depth, cos_t, slope_normal):
    kind = np.float32 if depth == types.float32 else np.float64

    def impl(depth, cos_t, slope_normal):
        return kind(depth / cos_t) if slope_normal else kind(depth)

    return impl


@njit
def _fs_point(cohesion, tan_phi, sin_t, cos_t, column_weight, pore_pressure):
    """Infinite-slope FS from stresses on the slip plane (one point).

    FS = [C + (W cos^2 - u) tan(phi)] / (W sin cos), clipped to [0, FS_CAP];
    W is the weight of the column per unit plan area (kPa), u the pore
    pressure on the slip plane (kPa). No driving stress gives FS_CAP. NaN in,
    NaN out. This is the one place the formula is written; the storm model
    calls it with u = gamma_w psi.
    """
    shear = column_weight * sin_t * cos_t
    resist = cohesion + (column_weight * cos_t * cos_t - pore_pressure) * tan_phi
    # selects rather than early returns, and IEEE division (np.true_divide,
    # no zero-divisor check), so loops over many samples vectorise; a NaN
    # fails every comparison and comes out as NaN
    fs = np.true_divide(resist, shear)
    fs = FS_CAP if resist >= FS_CAP * shear else fs
    fs = 0.0 if resist <= 0.0 else fs
    return FS_CAP if shear <= 0.0 else fs


@njit
def _steady_fs_point(cohesion, tan_phi, sin_t, cos_t, depth, wetness, gamma_m, gamma_sat):
    """FS with the water table at h_w = W z (vertical), gamma_m above it, gamma_sat below."""
    hw = wetness * depth
    column = gamma_m * (depth - hw) + gamma_sat * hw
    u = GAMMA_W * hw * cos_t * cos_t
    return _fs_point(cohesion, tan_phi, sin_t, cos_t, column, u)
