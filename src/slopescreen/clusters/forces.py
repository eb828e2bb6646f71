"""Forces on a multi-cell slide: basal terms per cell, earth-pressure terms per cell pair.

A candidate slide is a set S of grid cells. Each cell i carries a driving
force D_i and a basal resisting force R_i (kN) such that a lone cell with no
margins has the infinite-slope factor of safety R_i / D_i of
:mod:`slopescreen.stability`. Towards each of 16 partners j = i + e_k (the
8 neighbours and the 8 knight moves, :data:`FACE_DROW`, :data:`FACE_DCOL`)
cell i carries a resistance W[k, i] and an active thrust H[k, i] (kN) that
count when i is in S and j is not. Then (docs/methods.md, "Multi-cell
failure clusters")::

    FS(S) = (R(S) + B(S)) / (D(S) + H(S))

with B and H summed over the margin pairs of S. The pair weights are
Cauchy-Crofton weights (Boykov and Kolmogorov 2003), so the resistance
charged along a straight margin does not depend on its angle to the grid.
"""

import math
from typing import NamedTuple

import numpy as np

from .. import _validate
from .._kernels.slope_stability import FS_CAP, GAMMA_W
from ..errors import InputError
from ._faces import (FACE_DCOL, FACE_DROW, HALF, N_FACES, OPPOSITE, REACH, face_geometry,
                     pair_slices)
from ._force_kernels import _face_per_length, _forces_kernel
from .inputs import ClusterStrength, _nodata_faces_free

__all__ = [
    "N_FACES",
    "FACE_DROW",
    "FACE_DCOL",
    "ClusterForces",
    "earth_pressure_coefficients",
    "face_pressures",
    "cluster_forces",
    "cluster_factor_of_safety",
    "nonsubmodular_faces",
]


class ClusterForces(NamedTuple):
    """Per-cell and per-face force terms of :func:`cluster_forces` (float64, kN).

    Invalid (nodata) cells hold NaN and ``valid`` is False there.
    """

    driving: np.ndarray
    """D_i = W_col A sin(theta), shape (rows, cols)."""
    resisting: np.ndarray
    """R_i = max(0, C + (W_col cos^2 - u) tan phi) A / cos(theta), shape (rows, cols)."""
    face_resistance: np.ndarray
    """W[k, i]: resistance of pair k of cell i when i is in S and i + e_k is not, (16, rows, cols)."""
    face_thrust: np.ndarray
    """H[k, i]: active thrust on pair k of cell i (towards upslope partners), (16, rows, cols)."""
    valid: np.ndarray
    """Cells that can belong to a cluster (every input finite)."""
    cell_fs: np.ndarray
    """Infinite-slope FS of each cell (float32, clipped to [0, FS_CAP] as in stability)."""
    depth_m: np.ndarray
    """Vertical soil depth z per cell, m (float64)."""
    downslope: np.ndarray
    """Unit downslope direction (east, north) per cell, shape (2, rows, cols); 0 on flat cells."""
    dx: float
    """Cell width east-west, m."""
    dy: float
    """Cell height north-south, m."""


def earth_pressure_coefficients(friction_deg):
    """Rankine active and passive, and Jaky at-rest earth-pressure coefficients.

    Parameters
    ----------
    friction_deg : array_like
        Effective friction angle phi', degrees in [0, 60].

    Returns
    -------
    k_a, k_p, k0_simplified, k0_jaky : numpy.ndarray of float64
        Rankine K_a and K_p for a level backfill and a smooth vertical face;
        the usual simplified Jaky K_0 = 1 - sin(phi') and Jaky's 1944 full
        expression.

    Raises
    ------
    InputError
        Friction angle outside [0, 60] degrees, infinite, or all NaN.

    Notes
    -----
    ::

        K_a = tan^2(45 - phi'/2) = (1 - sin phi') / (1 + sin phi'),    K_p = 1 / K_a
        K_0 = 1 - sin phi'                                   (simplified form)
        K_0 = (1 - sin phi') (1 + 2/3 sin phi') / (1 + sin phi')    (Jaky 1944)

    At phi' = 30 degrees: K_a = 1/3, K_p = 3, K_0 = 0.5 (simplified) and
    0.444 (full). The cluster faces use the inclined-backfill pressures of
    :func:`face_pressures` instead, which equal these at a level surface.

    References
    ----------
    Rankine, W.J.M. (1857). On the stability of loose earth. Phil. Trans. R.
    Soc. London 147, 9-27 (from memory).
    Jaky, J. (1944). A nyugalmi nyomas tenyezoje (The coefficient of earth
    pressure at rest). J. Soc. Hungarian Architects and Engineers 78(22),
    355-358 (journal, volume and pages from memory).
    Michalowski, R.L. (2005). Coefficient of earth pressure at rest. J.
    Geotech. Geoenviron. Eng. 131(11), 1429-1433.
    doi 10.1061/(ASCE)1090-0241(2005)131:11(1429)

    Examples
    --------
    >>> ka, kp, k0, k0j = earth_pressure_coefficients(30.0)
    >>> round(float(ka), 6), round(float(kp), 6), round(float(k0), 6), round(float(k0j), 6)
    (0.333333, 3.0, 0.5, 0.444444)
    """
    phi = _validate.physical_field(friction_deg, "friction_deg").astype(np.float64)
    s = np.sin(np.radians(phi))
    ka = (1.0 - s) / (1.0 + s)
    kp = (1.0 + s) / (1.0 - s)
    k0 = 1.0 - s
    k0j = (1.0 - s) * (1.0 + 2.0 / 3.0 * s) / (1.0 + s)
    return ka, kp, k0, k0j


def face_pressures(depth_m, wetness, *, cohesion_kpa, lateral_root_cohesion_kpa, friction_deg,
                   unit_weight_kn_m3, saturated_unit_weight_kn_m3=None, passive_fraction=0.5,
                   jaky_full=False, ground_slope_deg=0.0):
    """Earth-pressure forces per metre of a vertical face through the soil mantle.

    Parameters
    ----------
    depth_m : float
        Vertical face height z (the soil depth), m (> 0).
    wetness : float
        Saturated fraction m = h_w / z in [0, 1] (water table h_w above the base).
    cohesion_kpa : float
        Effective soil cohesion c', kPa (>= 0).
    lateral_root_cohesion_kpa : float
        Root cohesion across the side and head faces, kPa (>= 0), depth-uniform.
    friction_deg : float
        phi', degrees in [0, 60].
    unit_weight_kn_m3 : float
        Moist unit weight gamma_m, kN/m^3.
    saturated_unit_weight_kn_m3 : float, optional
        gamma_sat (>= 9.81), default gamma_m.
    passive_fraction : float
        Share eta in [0, 1] of full Rankine passive resistance counted at the toe.
    jaky_full : bool
        Use Jaky's full 1944 K_0 instead of 1 - sin(phi').
    ground_slope_deg : float
        Inclination beta of the ground surface behind and in front of the
        face, degrees in [0, 90) (default 0: level ground).

    Returns
    -------
    dict
        ``toe`` (eta P_p), ``head`` (root resistance c_r,lat z), ``side``
        (at-rest friction plus cohesion) and ``active`` (P_a), all kN/m.

    Raises
    ------
    InputError
        A value outside its range.

    Notes
    -----
    With sigma'_v(zeta) the effective vertical stress at depth zeta
    (gamma_m above the water table, gamma_sat - gamma_w below), s its value
    and beta the ground slope, the Rankine pressures on a vertical plane
    under an inclined cohesive backfill (Mazindrani and Ganjali 1997, with
    gamma z replaced by s) act parallel to the ground surface::

        sigma_a,p(s) = cos(beta) { [2 s cos^2 beta + 2 c' sin phi' cos phi' -/+ sqrt(Q)] / cos^2 phi' - s }
        Q = 4 s^2 cos^2 beta (cos^2 beta - cos^2 phi') + 4 c'^2 cos^2 phi'
            + 8 c' s cos^2 beta sin phi' cos phi'

        P_p  = int_0^z sigma_p dzeta,   P_a = int_0^z max(0, sigma_a) dzeta
        side = int_0^z [c' + c_r,lat + K_0 sigma'_v tan phi'] dzeta
        head = c_r,lat z

    At beta = 0 they are level Rankine, K_p s + 2 c' sqrt K_p and
    K_a s - 2 c' sqrt K_a. Where Q < 0 (no Rankine state: beta > phi' at
    that stress) the conservative rule takes no passive pressure and the
    full conjugate stress s cos(beta) (K' = 1) as active pressure
    (docs/methods.md, "Multi-cell failure clusters"). The integrals are
    8-point Gauss-Legendre on the pieces between the water table, the
    tension-crack stress 2 c' (1 + sin phi') / cos phi' and the end of the
    Rankine state, so exact to rounding for c' = 0.

    Faces carry effective stresses only: for a water table of one height
    the hydrostatic thrusts on a slide's head and toe are equal and
    opposite, and they are left out. Soil cohesion at the head is taken as
    lost to the tension crack (it only reduces the active thrust); roots
    crossing the head scarp resist there. Lateral root cohesion is a
    depth-average (Milledge et al. 2014 let it decay with depth).

    References
    ----------
    Milledge, D.G., Bellugi, D., McKean, J.A., Densmore, A.L., Dietrich,
    W.E. (2014). A multidimensional stability model for predicting shallow
    landslide size and shape across landscapes. J. Geophys. Res. Earth
    Surface 119, 2481-2504. doi 10.1002/2014JF003135
    Mazindrani, Z.H., Ganjali, M.H. (1997). Lateral earth pressure problem
    of cohesive backfill with inclined surface. J. Geotech. Geoenviron. Eng.
    123(2), 110-112. doi 10.1061/(ASCE)1090-0241(1997)123:2(110) (from memory).
    Rankine (1857); Jaky (1944): see :func:`earth_pressure_coefficients`.

    Examples
    --------
    >>> f = face_pressures(1.0, 0.0, cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
    ...     friction_deg=30.0, unit_weight_kn_m3=18.0, passive_fraction=1.0)
    >>> round(f["toe"], 6), round(f["active"], 6)   # 1/2 K gamma z^2
    (27.0, 3.0)
    """
    vals = {}
    for key, v, lo, hi in (("depth_m", depth_m, 0.0, math.inf), ("wetness", wetness, 0.0, 1.0),
                           ("cohesion_kpa", cohesion_kpa, 0.0, math.inf),
                           ("lateral_root_cohesion_kpa", lateral_root_cohesion_kpa, 0.0, math.inf),
                           ("friction_deg", friction_deg, 0.0, 60.0),
                           ("unit_weight_kn_m3", unit_weight_kn_m3, 0.0, 30.0),
                           ("passive_fraction", passive_fraction, 0.0, 1.0),
                           ("ground_slope_deg", ground_slope_deg, 0.0, 90.0)):
        vals[key] = float(_validate.field(v, key, lo, hi, allow_nan=False))
    gs = vals["unit_weight_kn_m3"] if saturated_unit_weight_kn_m3 is None else float(
        _validate.field(saturated_unit_weight_kn_m3, "saturated_unit_weight_kn_m3", GAMMA_W,
                        30.0, allow_nan=False))
    if gs < GAMMA_W and vals["wetness"] > 0.0:
        raise InputError("saturated_unit_weight_kn_m3: must be >= 9.81 kN/m^3 under water")
    if vals["ground_slope_deg"] >= 90.0:
        raise InputError("ground_slope_deg: must be < 90 degrees")
    phi = math.radians(vals["friction_deg"])
    toe, head, side, thrust = _face_per_length(
        vals["depth_m"], vals["wetness"], vals["unit_weight_kn_m3"], gs, vals["cohesion_kpa"],
        vals["lateral_root_cohesion_kpa"], math.tan(phi), math.sin(phi), vals["passive_fraction"],
        bool(jaky_full), vals["ground_slope_deg"])
    return {"toe": toe, "head": head, "side": side, "active": thrust}


def downslope_vectors(slope, aspect_deg):
    """Unit downslope vectors (east, north), shape (2, rows, cols); 0 on flat or NaN-aspect cells.

    Parameters
    ----------
    slope : numpy.ndarray
        Slope, degrees (a cell with slope 0 has no direction).
    aspect_deg : numpy.ndarray
        Downslope direction, degrees clockwise from north.
    """
    a = np.radians(np.asarray(aspect_deg, dtype=np.float64))
    down = np.zeros((2,) + a.shape)
    has_dir = np.isfinite(a) & (np.asarray(slope) > 0.0)
    down[0][has_dir] = np.sin(a[has_dir])
    down[1][has_dir] = np.cos(a[has_dir])
    return down


def cluster_forces(slope_deg, aspect_deg, depth_m, wetness, *, dx, dy, strength=None,
                   passive_fraction=0.5, jaky_full=False, depth_measured="vertical",
                   nodata_faces="free",
                   **strength_fields):
    """Per-cell basal forces and per-face earth-pressure forces of candidate slides.

    Parameters
    ----------
    slope_deg : array_like, shape (rows, cols)
        Slope of ground and slip plane, degrees in [0, 90). NaN is nodata.
    aspect_deg : array_like, shape (rows, cols)
        Downslope direction, degrees clockwise from north (as
        :func:`slopescreen.terrain.slope_aspect`); NaN on flat cells (no
        direction: every face of such a cell acts as a side).
    depth_m : array_like
        Vertical soil depth z, m (> 0). Per cell or one value.
    wetness : array_like
        Saturated fraction W = h_w / z in [0, 1].
    dx, dy : float
        Cell width (east-west) and height (north-south), m.
    depth_measured : {"vertical", "slope_normal"}, keyword-only
        How ``depth_m`` was measured. ``"slope_normal"``: it is the thickness
        H normal to the slope, and z = H / cos(theta) per cell is used for the
        columns and the face heights (docs/methods.md, "Slope-normal soil
        thickness"); ``depth_m`` of the result is z.
    strength : ClusterStrength
        c' (on the base, the sides and the toe), basal and lateral root
        cohesion, phi' (0-60 degrees), gamma_m and the optional gamma_sat
        (default gamma_m, then in [9.81, 30]); each per cell or one value.
    passive_fraction : float
        Share eta in [0, 1] of full Rankine passive resistance at the toe (default 0.5).
    jaky_full : bool
        Use Jaky's full K_0 on the sides (default: the simplified 1 - sin phi').
    nodata_faces : {"free", "charged"}
        A margin face towards a nodata cell inside the grid is ``"free"``
        (W = H = 0: nodata there is usually a cut, a bank or water, which
        neither resists nor pushes; the default) or ``"charged"`` like any
        margin with the cell's own values (the rule before inclined earth
        pressures). Faces on the grid edge are always charged.
    **strength_fields
        Instead of ``strength``: its fields as loose keywords
        (``cohesion_kpa=..., lateral_root_cohesion_kpa=...``, and so on),
        from which a :class:`ClusterStrength` is built.

    Returns
    -------
    ClusterForces

    Raises
    ------
    InputError
        Values out of range, shapes that do not broadcast to the grid, a grid
        smaller than 1x1, no valid cell.

    Notes
    -----
    Per cell (A = dx dy plan area, h_w = W z; docs/methods.md, "Infinite-slope factor of safety")::

        W_col = gamma_m (z - h_w) + gamma_sat h_w,   u = gamma_w h_w cos^2(theta)
        D_i = W_col A sin(theta)
        R_i = max(0, c' + c_r + (W_col cos^2(theta) - u) tan phi') A / cos(theta)

    so R_i / D_i is the infinite-slope FS. Per pair k of cell i (step e_k to
    the partner j = i + e_k, one of the 8 neighbours or the 8 knight moves),
    with c the cosine of the angle between e_k and the downslope direction
    and a_k = dphi_k dx dy / (2 |e_k|) its Cauchy-Crofton factor (dphi_k half
    the angle between the directions next to e_k; Boykov and Kolmogorov
    2003)::

        W[k, i] = a_k [ max(c,0)^2 toe + max(-c,0)^2 head + (1 - c^2) side ]
        H[k, i] = a_k max(-c,0)^2 P_a

    A straight margin of length l with outward normal n is crossed by
    l (e_k . n)_+ / (dx dy) pairs of direction k, so it is charged close to
    l [c_n+^2 toe + c_n-^2 head + (1 - c_n^2) side] whatever its angle to the
    grid (the quadrature smooths the c^2 anisotropy by a factor of 3 and
    counts corners short on small clusters; docs/methods.md, "Multi-cell
    failure clusters").

    toe, head, side and P_a per metre from :func:`face_pressures` with the
    face height equal to the vertical soil depth and the ground slope beta
    equal to the face's slope (inclined-backfill Rankine pressures,
    Mazindrani and Ganjali 1997, acting parallel to the ground and so along
    the slip direction: in full into the balance, nothing normal to the
    base). Between two valid cells the pair takes the mean of their
    properties (slope included) and the normalised sum of their downslope
    vectors, so the pair seen from either side has opposite c. A partner off
    the grid gives the cell's own values; a partner at nodata is free
    (W = H = 0) or, with ``nodata_faces="charged"``, like the grid edge. The
    active thrust on head faces is counted as a driving force
    (denominator), as in docs/methods.md, "Multi-cell failure clusters". Forces of cells facing
    different ways are added as scalars (each along its own downslope
    direction), the approximation that makes the set function FS(S) above
    additive over cells and faces.

    References
    ----------
    Milledge, D.G., Bellugi, D., McKean, J.A., Densmore, A.L., Dietrich,
    W.E. (2014). J. Geophys. Res. Earth Surface 119, 2481-2504.
    doi 10.1002/2014JF003135

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.clusters import ClusterStrength
    >>> soil = ClusterStrength(cohesion_kpa=2.0, root_cohesion_kpa=0.0,
    ...     lateral_root_cohesion_kpa=5.0, friction_deg=32.0, unit_weight_kn_m3=18.0)
    >>> f = cluster_forces(np.full((3, 3), 35.0), np.full((3, 3), 180.0), 1.0, 0.5, dx=5.0,
    ...     dy=5.0, strength=soil)
    >>> bool(f.face_thrust[2, 1, 1] > 0)   # pair 2 (north) is at the head of a south-facing slope
    True

    The same call with the strength as loose keywords:

    >>> f = cluster_forces(np.full((3, 3), 35.0), np.full((3, 3), 180.0), 1.0, 0.5, dx=5.0,
    ...     dy=5.0, cohesion_kpa=2.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=5.0,
    ...     friction_deg=32.0, unit_weight_kn_m3=18.0)
    >>> bool(f.face_thrust[2, 1, 1] > 0)
    True
    """
    slope, valid = _validate.surface(slope_deg, name="slope_deg", min_size=1)
    dx, dy = _validate.cell_size(dx, dy)
    shape = slope.shape
    _validate.slope_field(slope)
    slope = slope.astype(np.float64)
    grid = _validate.grid_field
    aspect = grid(aspect_deg, shape, "aspect_deg", 0.0, 360.0)
    depth = grid(depth_m, shape, "depth_m", 0.0, math.inf, open_low=True)
    if _validate.depth_measured(depth_measured):  # the per-cell depth grid is made here anyway
        depth = depth / np.cos(np.radians(slope))
    wet = grid(wetness, shape, "wetness", 0.0, 1.0)
    (s,) = _validate.parameter_objects("cluster_forces", strength_fields,
                                       ("strength", ClusterStrength, strength))
    coh, root_b, root_l, phi, gm = (
        _validate.on_grid(getattr(s, key), shape, key)
        for key in ("cohesion_kpa", "root_cohesion_kpa", "lateral_root_cohesion_kpa",
                    "friction_deg", "unit_weight_kn_m3"))
    gs = _validate.on_grid(_validate.saturated_unit_weight(s), shape,
                           "saturated_unit_weight_kn_m3")
    eta = float(_validate.field(passive_fraction, "passive_fraction", 0.0, 1.0, allow_nan=False))
    free_nodata = _nodata_faces_free(nodata_faces)
    for arr in (depth, wet, coh, root_b, root_l, phi, gm, gs):
        valid &= np.isfinite(arr)
    if not valid.any():
        raise InputError("slope_deg and the soil inputs: no cell has every input defined")
    down = downslope_vectors(slope, aspect)
    driving = np.empty(shape)
    resisting = np.empty(shape)
    face_w = np.empty((N_FACES,) + shape)
    face_h = np.empty((N_FACES,) + shape)
    cell_fs = np.empty(shape, dtype=np.float32)
    geometry = np.array(face_geometry(dx, dy))
    _forces_kernel(slope, aspect, depth, wet, coh, root_b, root_l, phi, gm, gs, valid, dx, dy,
                   geometry, eta, bool(jaky_full), free_nodata, driving, resisting, face_w,
                   face_h, cell_fs, down)
    return ClusterForces(driving, resisting, face_w, face_h, valid, cell_fs,
                         np.where(valid, depth, np.nan), down, dx, dy)


def _margin_sums(forces, mask):
    """(B, H) summed over the margin pairs of ``mask`` (plain numpy)."""
    rows, cols = mask.shape
    b = 0.0
    h = 0.0
    padded = np.pad(mask, REACH)
    for k in range(N_FACES):
        r, c = REACH + FACE_DROW[k], REACH + FACE_DCOL[k]
        margin = mask & ~padded[r:r + rows, c:c + cols]
        b += float(forces.face_resistance[k][margin].sum())
        h += float(forces.face_thrust[k][margin].sum())
    return b, h


def _extent(forces, comp):
    """(length along slope, width across slope), m, of one cluster."""
    rr, cc = np.nonzero(comp)
    d = forces.downslope[:, rr, cc].sum(axis=1)
    norm = float(np.hypot(d[0], d[1]))
    de, dn = (d / norm) if norm > 0 else (0.0, -1.0)
    x = cc * forces.dx
    y = -rr * forces.dy
    along = x * de + y * dn
    across = -x * dn + y * de
    length = float(np.ptp(along)) + abs(de) * forces.dx + abs(dn) * forces.dy
    width = float(np.ptp(across)) + abs(dn) * forces.dx + abs(de) * forces.dy
    return length, width


def cluster_factor_of_safety(forces, mask):
    """Factor of safety of one set of cells, evaluated from the force terms.

    Parameters
    ----------
    forces : ClusterForces
        From :func:`cluster_forces`.
    mask : array_like of bool, shape (rows, cols)
        The cells of the slide (nodata cells are not allowed in it).

    Returns
    -------
    float
        FS(S) = (R + B) / (D + H), clipped to [0, FS_CAP]; FS_CAP when the
        set has no driving force.

    Raises
    ------
    InputError
        Wrong shape, an empty mask, or a nodata cell in the mask.

    Notes
    -----
    A pair counts when its cell is in S and the partner is not (or is
    nodata, or off the grid): the margin of S. This is a direct sum with no
    graph, used to recheck every cluster the cut reports.

    References
    ----------
    Milledge et al. (2014), doi 10.1002/2014JF003135.

    Examples
    --------
    >>> import numpy as np
    >>> f = cluster_forces(np.full((4, 4), 40.0), np.full((4, 4), 180.0), 1.0, 1.0, dx=5.0,
    ...     dy=5.0, cohesion_kpa=0.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
    ...     friction_deg=30.0, unit_weight_kn_m3=19.0)
    >>> cluster_factor_of_safety(f, np.ones((4, 4), bool)) > float(f.cell_fs[0, 0])
    True
    """
    m = np.asarray(mask, dtype=bool)
    if m.shape != forces.valid.shape:
        raise InputError(f"mask: shape {m.shape} does not match the grid {forces.valid.shape}")
    if not m.any():
        raise InputError("mask: holds no cell")
    if (m & ~forces.valid).any():
        raise InputError("mask: includes nodata cells")
    b, h = _margin_sums(forces, m)
    num = float(forces.resisting[m].sum()) + b
    den = float(forces.driving[m].sum()) + h
    if den <= 0.0 or num >= FS_CAP * den:
        return FS_CAP
    return max(0.0, num / den)


def nonsubmodular_faces(forces, lam=1.0):
    """Cell pairs where the pair term of g_lam is not submodular.

    Parameters
    ----------
    forces : ClusterForces
    lam : float
        Threshold lambda (> 0).

    Returns
    -------
    numpy.ndarray of bool, shape (8, rows, cols)
        ``out[j, r, c]``: the pair of cell (r, c) and its partner across
        step k = HALF[j] (k = 0, 1, 2, 3, 8, 9, 10, 11: east, north-east,
        north, north-west and the four knight moves between them; each
        unordered pair once) fails the check; False where the partner is off
        the grid or nodata.

    Notes
    -----
    For the pair of i and j, phi(1, 0) = W_ij - lam H_ij and
    phi(0, 1) = W_ji - lam H_ji; the pair term is submodular iff their sum is
    >= 0 (docs/methods.md, "Multi-cell failure clusters"). With the pair
    model of :func:`cluster_forces` the sum is
    a_k [c^2 (toe + head - lam P_a) + 2 (1 - c^2) side], so it fails only
    where eta P_p + c_r,lat z < lam P_a on a pair that runs along the slope
    (c != 0): with the inclined-backfill pressures, near and beyond phi'
    unless lateral roots hold the head. Where it fails, the cut uses the
    modular lower bound W_ij x_i + W_ji x_j of that pair (see
    :mod:`slopescreen.clusters.cut`).

    Examples
    --------
    >>> import numpy as np
    >>> kw = dict(dx=5.0, dy=5.0, cohesion_kpa=0.0, root_cohesion_kpa=0.0,
    ...     lateral_root_cohesion_kpa=0.0, friction_deg=30.0, unit_weight_kn_m3=18.0)
    >>> f = cluster_forces(np.full((3, 3), 25.0), np.full((3, 3), 180.0), 1.0, 0.0, **kw)
    >>> int(nonsubmodular_faces(f, 1.0).sum())
    0

    At slope = phi' the inclined K_p and K_a are equal, so with eta = 0.5
    and no roots the pairs that run nearly along the slope fail the check:
    on a 3 x 3 grid the 6 north-south pairs and the 4 steep knight pairs
    (c^2 = 0.8); the diagonals (c^2 = 0.5) keep enough side resistance:

    >>> f = cluster_forces(np.full((3, 3), 30.0), np.full((3, 3), 180.0), 1.0, 0.0, **kw)
    >>> int(nonsubmodular_faces(f, 1.0).sum())
    10
    """
    t = forces.face_resistance - float(lam) * forces.face_thrust
    valid = forces.valid
    rows, cols = valid.shape
    out = np.zeros((HALF.size,) + valid.shape, dtype=bool)
    for j, k in enumerate(HALF):
        ps, qs = pair_slices(k, rows, cols)
        out[j][ps] = valid[ps] & valid[qs] & ((t[k][ps] + t[OPPOSITE[k]][qs]) < 0.0)
    return out
