"""The built-in demo: a fictional valley of our own, generated deterministically.

*Verrow valley* does not exist. It is a west-to-east valley about 2.2 km
long and 1.5 km across, cut into a dissected upland:

* two valley sides rising to ridge crests that run inside the grid, with the
  ground falling away again beyond them toward the neighbouring valleys;
* branching hollows down both sides: main hollows at irregular spacing
  (lognormal steps, median about 140 m) and of varied length, many of them
  joined upslope of the valley floor by one to three tributary hollows;
  spurs between them, with low convex spur noses in the wider gaps; a larger
  tributary valley on each side;
* a bench along the contour on each side, where the slope nearly levels out
  over a band some 40 m wide, with steeper ground above and below it;
* power-law (spectral-synthesis) roughness of a few metres over everything
  but the floodplain;
* a narrow floodplain with a meandering stream incised into it;
* a forest road along the north-facing (south) valley side, benched into the
  slope with a cut slope above it and a short fill below it where it crosses
  hollows;
* three soils (colluvium in hollows and on footslopes, thin residual soil on
  spurs and upper slopes, alluvium on the floodplain) under forest or in
  clear-cut harvest units, mapped as five soil units because root cohesion
  differs between forest and clear-cut;
* a steady wet-season case and a storm case;
* a small inventory of mapped landslides (GeoJSON polygons) on hollow axes
  where the ground is concave and steep, and the road centreline (GeoJSON
  line) for the corridor stage.

Everything comes from fixed seeds, so every run sees the same valley. The
parameter values are screening values in the ranges of common practice
(methods reference, typical screening ranges), not values of any site.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError
from .scenario import load_scenario

__all__ = ["DEMO_CRS", "DEMO_ORIGIN", "DEMO_SCENARIO", "Valley", "build_valley", "valley_dem",
           "write_demo_inputs", "run_demo"]

DEMO_CRS = "EPSG:32633"
"""Projected CRS of the demo (metres). The coordinates are fictional."""

DEMO_ORIGIN = (512_000.0, 5_103_000.0)
"""Map coordinates of the demo's north-west corner (fictional)."""

DEMO_SEED = 20261201
"""Seed of every random choice in the demo terrain."""

SOIL_UNITS = {
    1: "colluvium under forest",
    2: "colluvium, clear-cut",
    3: "residual soil under forest",
    4: "residual soil, clear-cut",
    5: "alluvium (floodplain meadow)",
}
"""Codes of the demo soil map."""


def _fractal_noise(shape, rng, beta=3.0):
    """Gaussian random field with a power-law spectrum, unit standard deviation."""
    ky = np.fft.fftfreq(shape[0])[:, None]
    kx = np.fft.rfftfreq(shape[1])[None, :]
    k = np.hypot(kx, ky)
    k[0, 0] = np.inf
    amp = k ** (-beta / 2.0)
    phase = rng.uniform(0, 2 * np.pi, amp.shape)
    noise = np.fft.irfft2(amp * np.exp(1j * phase), s=shape)
    return (noise - noise.mean()) / noise.std()


def _smooth_field(shape, rng, length_cells):
    """Smooth random field (Gaussian-filtered white noise), unit standard deviation."""
    from scipy import ndimage

    f = ndimage.gaussian_filter(rng.standard_normal(shape), length_cells, mode="wrap")
    return (f - f.mean()) / f.std()


def _s_curve(u):
    """0 at u = 0, 1 at u = 1, steepest at u = 1/2 (a hillside from toe to crest)."""
    return 0.5 * (1.0 - np.cos(np.pi * np.clip(u, 0.0, 1.0)))


PLAIN_M = 28.0
"""Half-width of the demo floodplain, m."""


def _stream_y(x, height_m):
    """Stream line: metres south of the grid's north edge at eastings ``x`` (m from the west edge)."""
    return (0.53 * height_m + 38.0 * np.sin(2 * np.pi * x / 1500.0 + 0.7)
            + 12.0 * np.sin(2 * np.pi * x / 430.0 + 1.3))


def _crest_m(x, north, height_m):
    """Distance (m) from the stream to the ridge crest of the north (or south) side at ``x``."""
    return np.where(north, 0.38 * height_m + 45.0 * np.sin(2 * np.pi * x / 900.0),
                    0.36 * height_m + 35.0 * np.cos(2 * np.pi * x / 1100.0))


def _side_y(x, u, north, height_m):
    """Metres south of the north edge of the point at height fraction ``u`` of a valley side.

    ``u`` is 0 at the foot of the side (the edge of the floodplain) and 1 at its crest.

    Examples
    --------
    >>> y_toe = _side_y(np.array([500.0]), np.array([0.0]), True, 1520.0)
    >>> bool(abs(_stream_y(500.0, 1520.0) - y_toe[0] - PLAIN_M) < 1e-9)
    True
    """
    dist = PLAIN_M + u * (_crest_m(x, north, height_m) - PLAIN_M)
    stream = _stream_y(x, height_m)
    return stream - dist if north else stream + dist


def _bench_u(u, strength):
    """Height fraction ``u`` warped so that a valley side levels out into a bench.

    The gradient of the warped fraction along ``u`` is proportional to
    ``1 - strength * exp(-((u - BENCH_U) / BENCH_W) ** 2)``: a band of low slope along the
    contour at ``BENCH_U``, with slightly steeper ground above and below it. The warp keeps
    0 at the toe and 1 at the crest, so the side's relief is unchanged; ``strength`` 0 leaves
    ``u`` as it is.

    Parameters
    ----------
    u : numpy.ndarray of float64
        Height fraction of each cell (0 toe, 1 crest; outside [0, 1] left unchanged).
    strength : numpy.ndarray of float64
        0 (no bench) to below 1 (nearly level), per cell.

    Examples
    --------
    >>> u = np.array([0.0, 0.3, BENCH_U, 1.0])
    >>> w = _bench_u(u, np.full(4, 0.85))
    >>> bool(w[0] == 0.0 and abs(w[-1] - 1.0) < 1e-12 and np.all(np.diff(w) > 0))
    True
    """
    from scipy.special import erf

    half = 0.5 * math.sqrt(math.pi) * BENCH_W
    uc = np.clip(u, 0.0, 1.0)
    lowered = erf((uc - BENCH_U) / BENCH_W) + erf(BENCH_U / BENCH_W)
    whole = math.erf((1.0 - BENCH_U) / BENCH_W) + math.erf(BENCH_U / BENCH_W)
    warped = (uc - strength * half * lowered) / (1.0 - strength * half * whole)
    return np.where((u >= 0.0) & (u <= 1.0), warped, u)


BENCH_U = 0.6
"""Height fraction of the demo's benches (0 toe, 1 crest)."""

BENCH_W = 0.05
"""Half-width of a bench in height fraction (about 25 m on the ground)."""

BENCHES = ((True, 0.33, 0.60, 0.85), (False, 0.74, 1.05, 0.8))
"""Benches: (north side?, west end, east end as fractions of the valley length, strength)."""


@dataclass(frozen=True)
class _Axis:
    """The axis of one hollow (or spur) on a valley side, sampled along the height fraction.

    Attributes
    ----------
    north : bool
        On the north valley side (else the south).
    u : numpy.ndarray of float64
        Height fractions along the axis, increasing (0 toe, 1 crest).
    x : numpy.ndarray of float64
        Easting of the axis at each ``u``, m from the west edge.
    depth : numpy.ndarray of float64
        Depth of the hollow (height of the spur) on its axis, m.
    width : numpy.ndarray of float64
        Gaussian half-width across the axis, m.
    """

    north: bool
    u: np.ndarray
    x: np.ndarray
    depth: np.ndarray
    width: np.ndarray


def _main_positions(rng, width_m, avoid):
    """Eastings (m) of the main hollows of one side: irregular, lognormal steps (median 140 m).

    ``avoid`` lists (easting, half-width) of tributary valleys, where no hollow is put.
    """
    xs = [float(rng.uniform(15.0, 70.0))]
    while True:
        step = float(np.clip(rng.lognormal(math.log(140.0), 0.6), 45.0, 360.0))
        if xs[-1] + step > width_m - 15.0:
            break
        xs.append(xs[-1] + step)
    return np.array([x for x in xs if all(abs(x - a) > h for a, h in avoid)], dtype=np.float64)


def _main_hollow(rng, north, x0, room):
    """One main hollow from the valley floor up to a head at a random height fraction.

    ``room`` is the smaller distance (m) to the neighbouring hollows, which bounds its bend.
    """
    top = 0.42 + 0.55 * float(rng.beta(2.2, 1.3))            # varied lengths
    depth = float(rng.uniform(4.0, 9.0))
    half = float(rng.uniform(16.0, 26.0))
    bend = float(rng.uniform(-1.0, 1.0)) * min(60.0, 0.35 * room)
    wiggle, wave, phase = rng.uniform(2.0, 8.0), rng.uniform(0.25, 0.6), rng.uniform(0.0, 2 * np.pi)
    u = np.linspace(0.03, top, 64)
    t = (u - u[0]) / (top - u[0])
    x = x0 + bend * t ** 1.5 + wiggle * np.sin(2 * np.pi * u / wave + phase) * np.sin(np.pi * t)
    return _Axis(north, u, x, depth * np.sin(np.pi * t) ** 0.6, half * (0.7 + 0.8 * t))


def _tributary(rng, trunk, share, sign, reach):
    """A tributary hollow leaving ``trunk`` at ``share`` of its length, diverging upslope.

    It bends ``sign`` (+1 east) by up to ``reach`` m into the gap beside the trunk, quickly
    at first and then more nearly downslope, and heads somewhat above the junction.
    """
    foot, top = trunk.u[0], trunk.u[-1]
    uj = foot + share * (top - foot)
    head = min(0.97, uj + float(rng.uniform(0.22, 0.5)))
    u = np.linspace(uj, head, 48)
    t = (u - uj) / (head - uj)
    x = np.interp(u, trunk.u, trunk.x) + sign * reach * t ** 0.45
    depth_j = float(np.interp(uj, trunk.u, trunk.depth)) * float(rng.uniform(0.6, 0.9))
    width_j = float(np.interp(uj, trunk.u, trunk.width)) * 0.8
    return _Axis(trunk.north, u, x, depth_j * np.cos(0.5 * np.pi * t) ** 0.6,
                 width_j * (1.0 + 0.5 * t))


def _spur(rng, north, x0):
    """A spur nose: a low convex ridge down the middle of a wide gap between hollows."""
    top = float(rng.uniform(0.6, 0.9))
    u = np.linspace(0.06, top, 32)
    t = (u - u[0]) / (top - u[0])
    x = x0 + float(rng.uniform(-10.0, 10.0)) * t
    return _Axis(north, u, x, float(rng.uniform(2.0, 4.5)) * np.sin(np.pi * t) ** 0.8,
                 np.full(u.shape, float(rng.uniform(22.0, 35.0))))


def _side_network(rng, north, width_m, avoid):
    """Hollows (main ones, some branching) and spur noses of one valley side.

    Main hollows sit at irregular spacing (:func:`_main_positions`) with varied lengths;
    a long one sends one or two tributary hollows upslope into the wider gaps beside it;
    a wide gap that no tributary takes gets a spur nose.

    Returns
    -------
    hollows, spurs : list of _Axis
    """
    xs = _main_positions(rng, width_m, avoid)
    edges = np.concatenate([[0.0], xs, [width_m]])
    gaps = np.diff(edges)                                      # gaps[i] west of xs[i], gaps[i+1] east
    taken = np.zeros(gaps.size, dtype=bool)
    hollows = []
    for i, x0 in enumerate(xs):
        trunk = _main_hollow(rng, north, x0, min(gaps[i], gaps[i + 1]))
        hollows.append(trunk)
        if trunk.u[-1] < 0.5:
            continue
        wanted = int(rng.choice(4, p=[0.15, 0.35, 0.35, 0.15]))
        shares = np.sort(rng.uniform(0.15, 0.6, wanted))       # junctions, lowest first
        east = gaps[i + 1] >= gaps[i]                          # the wider gap first, then alternate
        used = {True: 0, False: 0}
        for share in shares:
            gap = gaps[i + 1] if east else gaps[i]
            if gap >= 75.0:
                # a lower tributary reaches farther, so branches on one side never cross
                reach = min(120.0, 0.42 * gap) * (1.0 - 0.35 * used[east]) * float(rng.uniform(0.75, 1.0))
                hollows.append(_tributary(rng, trunk, float(share), 1.0 if east else -1.0, reach))
                taken[i + 1 if east else i] = True
                used[east] += 1
            east = not east
    spurs = [_spur(rng, north, 0.5 * (edges[j] + edges[j + 1]))
             for j in range(1, gaps.size - 1) if gaps[j] > 150.0 and not taken[j]]
    return hollows, spurs


def _axis_relief(X, u, on, axis):
    """Depth (m) of one hollow, or height of one spur, at every cell of its valley side.

    Across the axis the profile is Gaussian in easting; along it, the axis's own depth and
    width, interpolated at each cell's height fraction.
    """
    inside = on & (u >= axis.u[0]) & (u <= axis.u[-1])
    uu = u[inside]
    off = (X[inside] - np.interp(uu, axis.u, axis.x)) / np.interp(uu, axis.u, axis.width)
    out = np.zeros(X.shape, dtype=np.float64)
    out[inside] = np.interp(uu, axis.u, axis.depth) * np.exp(-off * off)
    return out


@dataclass
class Valley:
    """The generated demo valley and its map layers (arrays on the demo grid).

    Attributes
    ----------
    z : numpy.ndarray of float32
        Elevations, m (row 0 north).
    soil : numpy.ndarray of uint8
        Soil-unit codes (:data:`SOIL_UNITS`).
    cell_m : float
        Cell size, m.
    road : numpy.ndarray, shape (n, 2)
        Road centreline vertices (x east, y south) in metres from the
        north-west corner.
    landslides : list of numpy.ndarray, shape (m, 2)
        Closed rings of the mapped landslides, same coordinates.
    cleared : numpy.ndarray of bool
        Clear-cut ground (harvest units and the road clearing).
    """

    z: np.ndarray
    soil: np.ndarray
    cell_m: float
    road: np.ndarray
    landslides: list = field(default_factory=list)
    cleared: np.ndarray | None = None


def _bench_strength(X, north, width_m):
    """Strength of the benches (:data:`BENCHES`) at every cell, tapered at their ends."""
    strength = np.zeros(X.shape, dtype=np.float64)
    ramp = 150.0
    for side, west, east, peak in BENCHES:
        on = north if side else ~north
        taper = _s_curve((X - west * width_m) / ramp) * _s_curve((east * width_m - X) / ramp)
        strength += on * peak * taper
    return strength


def _roughness(shape, rng, u):
    """Ground roughness, m: a broad swell and power-law (spectral-synthesis) relief.

    Calmer on the floodplain (``u`` < 0) than on the valley sides.
    """
    swell = _smooth_field(shape, rng, 35.0)
    fine = 1.5 * _fractal_noise(shape, rng, beta=3.0) + 0.4 * _fractal_noise(shape, rng, beta=2.3)
    return np.clip((u + 0.1) / 0.25, 0.15, 1.0) * (3.5 * swell + fine)


def _inventory(rng, hollows, z, cleared, cell_m, height_m, count=9):
    """Mapped landslide scars: ellipses on hollow axes, most of them in clear-cuts.

    A scar centre is drawn on a hollow axis between 0.3 and 0.8 of the side's height and kept
    where the smoothed ground is concave (the colluvium rule of the soil map) and steep
    (28-42 degrees), at least 80 m from the scars already kept; the ellipse's long axis runs
    down the hollow.

    Returns
    -------
    list of numpy.ndarray, shape (17, 2)
        Closed rings (x east, y south, m from the north-west corner).
    """
    from scipy import ndimage

    smooth = ndimage.gaussian_filter(z.astype(np.float64), 3.0)
    concave = ndimage.laplace(smooth) / cell_m ** 2
    gy, gx = np.gradient(smooth, cell_m)
    slope = np.degrees(np.arctan(np.hypot(gx, gy)))
    rows, cols = z.shape
    rings, centres = [], []
    for i in rng.permutation(len(hollows)):
        axis = hollows[i]
        lo, hi = max(0.3, axis.u[0]), min(0.8, axis.u[-1] - 0.05)
        if len(rings) >= count or hi <= lo:
            continue
        uu = np.array([rng.uniform(lo, hi), 0.0])
        uu[1] = uu[0] - 0.02                                   # a step downslope along the axis
        xs = np.interp(uu, axis.u, axis.x)
        ys = _side_y(xs, uu, axis.north, height_m)
        r, c = int(ys[0] // cell_m), int(xs[0] // cell_m)
        if not (0 <= r < rows and 0 <= c < cols):
            continue
        if concave[r, c] < 0.0025 or not 28.0 <= slope[r, c] <= 42.0:
            continue
        if not cleared[r, c] and rng.uniform() < 0.6:
            continue
        if any(math.hypot(xs[0] - px, ys[0] - py) < 80.0 for px, py in centres):
            continue
        down = np.array([xs[1] - xs[0], ys[1] - ys[0]])
        down /= np.hypot(*down)
        across = np.array([-down[1], down[0]])
        length, wide = rng.uniform(35.0, 70.0), rng.uniform(14.0, 24.0)
        t = np.linspace(0.0, 2 * np.pi, 17)[:, None]
        rings.append(np.array([xs[0], ys[0]]) + 0.5 * length * np.cos(t) * down
                     + 0.5 * wide * np.sin(t) * across)
        centres.append((xs[0], ys[0]))
    return rings


def build_valley(rows=380, cols=560, cell_m=4.0, seed=DEMO_SEED) -> Valley:
    """Generate the fictional Verrow valley.

    Parameters
    ----------
    rows, cols : int
        Grid size; row 0 is north.
    cell_m : float
        Square cell size, m.
    seed : int
        Seed of the hollow network, roughness, harvest units and inventory.

    Returns
    -------
    Valley

    Examples
    --------
    >>> v = build_valley(rows=120, cols=160, cell_m=8.0)
    >>> v.z.shape, v.z.dtype, v.soil.dtype
    ((120, 160), dtype('float32'), dtype('uint8'))
    >>> bool(np.array_equal(v.z, build_valley(rows=120, cols=160, cell_m=8.0).z))
    True
    """
    from scipy import ndimage

    rng = np.random.default_rng(seed)
    width_m, height_m = cols * cell_m, rows * cell_m
    x = (np.arange(cols) + 0.5) * cell_m            # eastward, m
    y = (np.arange(rows) + 0.5) * cell_m            # southward, m
    X, Y = np.meshgrid(x, y)

    # the two valley sides about the stream line, with benches along the contour
    yc = _stream_y(X, height_m)
    north = Y < yc
    d = np.abs(Y - yc)
    plain = PLAIN_M
    crest = _crest_m(X, north, height_m)
    relief = np.where(north, 230.0, 262.0) + 25.0 * np.sin(2 * np.pi * X / 1700.0 + 0.4)
    u = (d - plain) / (crest - plain)               # 0 at the valley toe, 1 at the crest
    floor = 205.0 - 0.022 * X + 0.015 * np.minimum(d, plain)
    beyond = np.clip(u - 1.0, 0.0, None) * (crest - plain) / 420.0
    rise = relief * _s_curve(_bench_u(u, _bench_strength(X, north, width_m)))
    z = floor + rise - 150.0 * _s_curve(beyond)

    # tributary valleys: one on each side, graded to the main valley floor
    avoid = {True: [], False: []}
    for side, xt, depth, half in ((True, 0.27 * width_m, 30.0, 80.0), (False, 0.66 * width_m, 38.0, 90.0)):
        on = north if side else ~north
        wander = xt + 35.0 * np.sin(2 * np.pi * d / 650.0)
        a, b = depth * np.clip((0.92 - u) / 0.3, 0.0, 1.0), 0.6 * rise
        cut = -5.0 * np.logaddexp(-a / 5.0, -b / 5.0)                 # soft minimum of a and b
        cut = np.clip(cut, 0.0, None)
        z -= on * cut * np.exp(-((X - wander) / (half * (0.55 + 0.5 * np.clip(u, 0, 1)))) ** 2)
        avoid[side].append((xt, 1.1 * half))

    # branching hollows of varied spacing and length, spur noses in the wide gaps between them
    hollows = []
    for side in (True, False):
        on = north if side else ~north
        side_hollows, spurs = _side_network(rng, side, width_m, avoid[side])
        carve = np.zeros(z.shape, dtype=np.float64)
        for axis in side_hollows:
            np.maximum(carve, _axis_relief(X, u, on, axis), out=carve)
        z -= carve
        for axis in spurs:
            z += _axis_relief(X, u, on, axis)
        hollows += side_hollows

    # roughness, then the stream channel incised into the floodplain
    z += _roughness(z.shape, rng, u)
    z -= 1.8 * np.exp(-((Y - yc) / 5.0) ** 2)

    # forest road benched into the south (north-facing) side
    road_x = np.arange(0.0, width_m + cell_m, 10.0)
    road_y = _stream_y(road_x, height_m) + plain + 95.0 + 12.0 * np.sin(2 * np.pi * road_x / 700.0)
    road_y_cells = yc + plain + 95.0 + 12.0 * np.sin(2 * np.pi * X / 700.0)
    rr = np.clip(np.round(road_y_cells / cell_m - 0.5).astype(int), 0, rows - 1)
    natural_on_line = z[rr[0], np.arange(cols)]
    grade = ndimage.gaussian_filter1d(natural_on_line.astype(np.float64), 20.0 / cell_m, mode="nearest")
    z_road = grade[None, :] - 1.5
    s = Y - road_y_cells                            # offset from the centreline, + uphill (south)
    half_road = 3.5
    bench = np.abs(s) <= half_road
    cut = s > half_road
    fill_t = -s - half_road
    fill = (fill_t > 0.0) & (fill_t < 16.0)
    z = np.where(bench, z_road, z)
    z = np.where(cut, np.minimum(z, z_road + (s - half_road) * 1.0), z)   # 45-degree cut slope
    blend = np.clip(1.0 - (fill_t - 8.0) / 8.0, 0.0, 1.0)
    filled = np.maximum(z, z_road - fill_t / 1.5)                          # 1.5:1 fill slope
    z = np.where(fill, blend * filled + (1.0 - blend) * z, z)
    road = np.column_stack([road_x, road_y])

    # soils: alluvium on the floodplain, colluvium in hollows and on footslopes, residual elsewhere
    smooth = ndimage.gaussian_filter(z.astype(np.float64), 3.0)
    curvature = ndimage.laplace(smooth) / cell_m ** 2
    alluvium = (d < plain + 6.0) & (u < 0.05)
    colluvium = (curvature > 0.0015) | (u < 0.22)
    # clear-cut harvest units (irregular blocks) and the road clearing
    blocks = _smooth_field(z.shape, rng, 30.0)
    units = ((north & (X > 0.50 * width_m) & (X < 0.92 * width_m) & (u > 0.12) & (u < 0.95))
             | (~north & (X > 0.08 * width_m) & (X < 0.42 * width_m) & (u > 0.18) & (u < 0.85)))
    cleared = (units & (blocks > -0.6)) | (np.abs(s) < 12.0)
    soil = np.where(colluvium, np.where(cleared, 2, 1), np.where(cleared, 4, 3))
    soil = np.where(alluvium, 5, soil).astype(np.uint8)

    # mapped landslides: scars in hollows at mid-slope, most of them in clear-cuts
    landslides = _inventory(rng, hollows, z, cleared, cell_m, height_m)
    return Valley(z=z.astype(np.float32), soil=soil, cell_m=cell_m, road=road,
                  landslides=landslides, cleared=cleared)


def valley_dem(rows=380, cols=560, cell_m=4.0, seed=DEMO_SEED):
    """Elevations (m, float32, row 0 north) of the fictional Verrow valley."""
    return build_valley(rows, cols, cell_m, seed).z


def _to_map(points, cell_m):
    """Metres from the north-west corner (x east, y south) to demo map coordinates."""
    del cell_m
    p = np.asarray(points, dtype=np.float64)
    return np.column_stack([DEMO_ORIGIN[0] + p[:, 0], DEMO_ORIGIN[1] - p[:, 1]])


def _geojson(features, name):
    """A GeoJSON FeatureCollection in the demo CRS (named with the 2008 ``crs`` member)."""
    epsg = DEMO_CRS.split(":")[1]
    return {"type": "FeatureCollection", "name": name,
            "crs": {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{epsg}"}},
            "features": features}


def write_demo_inputs(folder) -> Path:
    """Write the demo DEM, soil map, road, inventory and scenario into ``folder``.

    Returns
    -------
    pathlib.Path
        The scenario file.
    """
    import rasterio
    from rasterio.transform import from_origin

    folder = Path(folder)
    probe = folder
    while not probe.exists() and probe != probe.parent:
        probe = probe.parent
    if not probe.is_dir():
        raise InputError(f"{folder}: demo: {probe.name} is a file, not a folder; name a folder "
                         "for the demo (it is created if absent)")
    folder.mkdir(parents=True, exist_ok=True)
    valley = build_valley()
    z = valley.z
    cell = valley.cell_m
    profile = {
        "driver": "GTiff", "height": z.shape[0], "width": z.shape[1], "count": 1,
        "dtype": "float32", "crs": DEMO_CRS, "nodata": -9999.0,
        "transform": from_origin(DEMO_ORIGIN[0], DEMO_ORIGIN[1], cell, cell),
        "tiled": True, "blockxsize": 256, "blockysize": 256, "compress": "deflate",
    }
    with rasterio.open(folder / "verrow_dem.tif", "w", **profile) as dst:
        dst.write(z, 1)
        dst.update_tags(SOURCE="slopescreen demo: fictional Verrow valley, generated terrain")
    with rasterio.open(folder / "verrow_soils.tif", "w", **(profile | {"dtype": "uint8", "nodata": 0})) as dst:
        dst.write(valley.soil, 1)
        dst.update_tags(SOURCE="slopescreen demo: soil units of the fictional Verrow valley",
                        **{f"UNIT_{k}": v for k, v in SOIL_UNITS.items()})
    road = _to_map(valley.road, cell)
    (folder / "verrow_road.geojson").write_text(json.dumps(_geojson([{
        "type": "Feature", "properties": {"name": "Verrow valley forest road (fictional)"},
        "geometry": {"type": "LineString", "coordinates": np.round(road, 2).tolist()}}],
        "verrow_road"), indent=1) + "\n", encoding="utf-8")
    slides = []
    for i, ring in enumerate(valley.landslides, start=1):
        coords = np.round(_to_map(ring, cell), 2)
        coords[-1] = coords[0]
        slides.append({"type": "Feature", "properties": {"id": i, "type": "shallow landslide scar"},
                       "geometry": {"type": "Polygon", "coordinates": [coords.tolist()]}})
    (folder / "verrow_landslides.geojson").write_text(
        json.dumps(_geojson(slides, "verrow_landslides"), indent=1) + "\n", encoding="utf-8")
    scenario = folder / "verrow.toml"
    scenario.write_text(DEMO_SCENARIO, encoding="utf-8")
    return scenario


DEMO_SCENARIO = """\
# slopescreen demo: the fictional Verrow valley (generated terrain, not a real place).
# `slopescreen demo FOLDER` writes this file with the inputs it names and runs it.
# Soil and rain values are screening values in the usual ranges, not site data.
# Forest and clear-cut ground are separate soil units because root cohesion differs.
title = "Verrow valley demo"
dem = "verrow_dem.tif"
dem_date = 2023-08-15                # when the lidar was flown (before the landslides)
output = "results"

[routing]
method = "dinf"

[soil]
map = "verrow_soils.tif"

[soil.units.1]
label = "colluvium under forest"
depth_m = { uniform = [1.0, 2.0] }
cohesion_kpa = { uniform = [0.5, 2.5] }
root_cohesion_kpa = { uniform = [3.0, 9.0] }
lateral_root_cohesion_kpa = { uniform = [10.0, 30.0] }
friction_deg = { normal = [34.0, 2.0] }
unit_weight_kn_m3 = 18.5
conductivity_m_per_day = 5.0
diffusivity_m2_per_s = 2.0e-4

[soil.units.2]
label = "colluvium, clear-cut"
depth_m = { uniform = [1.0, 2.0] }
cohesion_kpa = { uniform = [0.5, 2.5] }
root_cohesion_kpa = { uniform = [0.5, 2.5] }
lateral_root_cohesion_kpa = { uniform = [1.0, 6.0] }
friction_deg = { normal = [34.0, 2.0] }
unit_weight_kn_m3 = 18.5
conductivity_m_per_day = 5.0
diffusivity_m2_per_s = 2.0e-4

[soil.units.3]
label = "residual soil under forest"
depth_m = { uniform = [0.5, 1.0] }
cohesion_kpa = { uniform = [2.0, 5.0] }
root_cohesion_kpa = { uniform = [3.0, 9.0] }
lateral_root_cohesion_kpa = { uniform = [10.0, 30.0] }
friction_deg = { normal = [37.0, 2.0] }
unit_weight_kn_m3 = 19.0
conductivity_m_per_day = 3.0
diffusivity_m2_per_s = 1.0e-4

[soil.units.4]
label = "residual soil, clear-cut"
depth_m = { uniform = [0.5, 1.0] }
cohesion_kpa = { uniform = [1.5, 4.0] }
root_cohesion_kpa = { uniform = [0.5, 2.5] }
lateral_root_cohesion_kpa = { uniform = [1.0, 6.0] }
friction_deg = { normal = [37.0, 2.0] }
unit_weight_kn_m3 = 19.0
conductivity_m_per_day = 3.0
diffusivity_m2_per_s = 1.0e-4

[soil.units.5]
label = "alluvium (floodplain meadow)"
depth_m = 2.0
cohesion_kpa = 0.0
root_cohesion_kpa = 1.0
friction_deg = { normal = [32.0, 2.0] }
unit_weight_kn_m3 = 19.0
conductivity_m_per_day = 10.0
diffusivity_m2_per_s = 1.0e-3

[[rain]]
name = "wet season"
steady_mm_per_day = 6

[[rain]]
name = "design storm"
storm_mm_per_h = 30
duration_h = 8
antecedent_mm_per_day = 2

[uncertainty]
samples = 300
seed = 7

[clusters]
min_area_m2 = 100
max_area_m2 = 5000
# least-stable connected cluster per area band, around the 5 least stable
# failing clusters; size_bands = 3 splits the range (slower: see docs)
size_windows = 5
size_bands = 1

[runout]
# angle of reach from each source's volume (the default relation); or fix it:
# angle_of_reach_deg = 22

[corridor]
centreline = "verrow_road.geojson"
segment_m = 100
half_width_m = 8

[inventory]
# scars mapped after the January storms; the polygons hold no deposits, so every cell is scored
landslides = "verrow_landslides.geojson"
type_field = "type"
types = ["shallow landslide scar"]
score_part = "whole"
date = 2024-01-20
"""


def run_demo(folder="slopescreen-demo", *, progress=None):
    """Write the demo inputs into ``folder`` and run them.

    Parameters
    ----------
    folder : path-like
        Where to write the inputs; the products go to ``folder/results``.
    progress : callable, optional
        Passed to :func:`slopescreen.pipeline.run`.

    Returns
    -------
    slopescreen.pipeline.RunResult
    """
    from .pipeline import run

    scenario_path = write_demo_inputs(folder)
    return run(load_scenario(scenario_path), progress=progress)
