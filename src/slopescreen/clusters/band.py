r"""Least-stable connected cluster of a window within an area band: exact MILP with proven bounds.

Without size limits the least-stable set is found exactly by minimum cuts
(:mod:`slopescreen.clusters.search`). An area band [A_min, A_max] makes the
problem hard; here it is solved by a mixed-integer linear program in cvxpy
with HiGHS, per window, with a time limit, warm-started from the heuristic of
:mod:`slopescreen.clusters.heuristic`, and bracketed from below by three
proven bounds.

The program (Dinkelbach over lambda, one MILP per step)
------------------------------------------------------
Cells i of the window: x_i in {0, 1}. Faces f = (p, q) between two valid
cells: z_f = x_p x_q. With the terms of
:func:`~slopescreen.clusters.heuristic.band_terms`::

    N(x, z) = sum_i c_N[i] x_i - sum_f p_N[f] z_f
    D(x, z) = sum_i c_D[i] x_i - sum_f p_D[f] z_f
    min  N - lam D   s.t.  z_f <= x_p,  z_f <= x_q,  z_f >= 0
                           (z_f >= x_p + x_q - 1 where p_N - lam p_D < 0)
                           kmin <= sum_i x_i <= kmax,   connectivity

One z_f per unordered pair of valid cells among the 16 pairs of
:mod:`slopescreen.clusters._faces`. z_f equals x_p x_q at every integer point: where the coefficient
-(p_N - lam p_D) of z_f is <= 0 (the face is submodular; docs/methods.md,
"Multi-cell failure clusters") the minimum pushes z_f up to min(x_p, x_q);
elsewhere the lower McCormick inequality is added and z_f is pushed down to max(0, x_p + x_q - 1).

Connectivity by a single-commodity flow from a root chosen by the program:
r_i in {0, 1}, sum r_i = 1, r_i <= x_i; flow f_a >= 0 on each directed
arc a = (i -> j) between 4-neighbours, f_a <= (kmax - 1) x_i and
f_a <= (kmax - 1) x_j; at every cell inflow - outflow >= x_i - kmax r_i.
Every chosen non-root cell must receive one unit net, flow runs only
between chosen cells, so a component without the root would need a
positive net inflow that no arc can bring: the chosen set is connected.
Flow constraints were preferred to accepting any set and reporting its
components because an area band makes a disconnected optimum possible
(several small weak pieces whose total area reaches A_min), and such a set
is not a landslide; without a lower limit the least-FS set is always
attained by one of its components, so nothing is lost there.

The root is restricted to U (or the warm-start set, which keeps that start
feasible), U the least minimiser of the rounded-down
g_lam0 without limits (one exact cut; see :func:`_improving_region`): every
set with FS < lam_0 meets U, so no improving set is lost, and U is usually a
few dozen cells where the window has a thousand or more. Being connected
with at most kmax cells, an improving set also lies within kmax - 1 steps
of U: cells farther away are fixed out. If U is empty, no
set of the window has FS < lam_0 and the heuristic set is optimal.

Dinkelbach (1967): lam_0 = FS of the heuristic set; at lam_k the MILP
returns S_{k+1}; lam_{k+1} = FS(S_{k+1}) until the MILP shows
min (N - lam D) >= 0. Each MILP is warm-started from the previous set
(the heuristic for the first), which has N - lam D = 0.

Proven bounds
-------------
* Cut bound: the proven Dinkelbach bound of the window without limits
  (:func:`~slopescreen.clusters.search.least_stable_in_window`), a lower
  bound for every set of the window, so also for the band.
* Relaxation bound: the convex relaxation x in [0, 1]^n of the fractional
  program with the area limits, solved as one linear program by the
  Charnes-Cooper transformation (variables x' = t x, z' = t z, t >= 0;
  min N(x', z') s.t. D(x', z') = 1, 0 <= x' <= t, McCormick with t in place
  of 1, kmin t <= sum x' <= kmax t). With every face submodular it is the
  Lovasz-extension relaxation (docs/methods.md, "Multi-cell failure clusters").
  It **cannot see the upper area limit**: N and D are positively homogeneous, so FS(alpha x) = FS(x)
  and x = alpha 1_S meets any A_max for alpha <= 1; kmax t >= sum x' is
  always met by raising t. Only the lower limit tightens it (x <= 1 stops
  scaling up). Connectivity is not in it either. This plain bound is the
  ``relaxation_bound`` reported.
* Perimeter bound: the same LP with one more valid inequality. A set of k
  grid cells has at least 2 ceil(2 sqrt(k)) margin sides (the minimum
  perimeter of polyominoes), so at most 2k - ceil(2 sqrt(k)) inner pairs
  of side-sharing cells; with the chord a + b k of 2 sqrt(k) over the band
  (concave, so the chord lies below) every set of the band satisfies
  sum z <= (2 - b) sum x - a over those pairs (homogenised: - a t), and
  likewise over the diagonal pairs and over each of two families of knight
  pairs (the same bound in the lattice the two steps span; see
  ``_isoperimetric_line``): four inequalities. A scaled-down large set
  x = alpha 1_S has sum z close to 2 sum x and violates it, so this bound
  sees the upper area limit in part: it pays for the margin a small set
  cannot avoid. The MILP carries the same inequality (a cut that no integer
  point of the band violates). Measured on the demo valley's hardest small
  bands (7-24 cells, 10 s): time-limited answers 12 of 16 before, 10 after;
  worst gap 8.6 % before, 2.9 % after.
* MILP bound: if HiGHS's dual bound at lam is beta, every connected set of
  the band has N - lam D >= min(beta, 0) (sets the restrictions above leave
  out have N - lam D >= 0), so FS >= lam + beta / D_lo for beta < 0 and
  FS >= lam for beta >= 0, with D_lo the sum of the kmin smallest basal
  driving forces (H >= 0), a lower bound on D over the band.

An answer is **proven** when the best of these bounds (``lower_bound``) reaches its FS
within a relative 1e-4 (0.01 %; the exact cut alone proves its clusters to about 1e-5, the
rounding of its integer capacities, so a relaxation LP is no longer solved just to close
that last gap). The relaxation and MILP bounds hold up to HiGHS's
tolerances (primal and dual feasibility 1e-7 for the LP, 1e-6 on MILP
constraints, absolute MIP gap 1e-7 lam D_lo); the cut bound is exact for the
integer capacities (rounded down, see :mod:`slopescreen.clusters.cut`). The
FS reported is always recomputed from the force terms for the set found.

Hard cases: when A_min forces sets much larger than the window's
least-stable cluster, or A_max much smaller, the relaxation is weak (the
plain one cannot see A_max; the perimeter bound sees only the margin a small
set must have) and branch and bound may not close the gap within the
time limit; the answer is then reported with method "time_limit",
``proven`` False and the best proven lower bound beside it.
"""

import math
import time
from typing import NamedTuple

import cvxpy as cp
import numpy as np
from scipy import ndimage
from scipy import sparse

from ..errors import InputError
from ..stability import FS_CAP
from ._solve import solve_checked
from .cut import pair_terms
from ._faces import HALF, pair_slices
from .forces import cluster_factor_of_safety
from .small_sets import ENUMERATION_MAX_CELLS, least_stable_small
from .heuristic import _cut, band_heuristic, band_terms, set_ratio
from .search import FOUR_CONNECTED, _sub, least_stable_in_window

__all__ = ["BandResult", "band_cells", "least_stable_in_band", "relaxation_bound", "WindowBands"]

_PROVEN_REL = 1e-4


class BandResult(NamedTuple):
    """Least-stable connected cluster of one window in one area band."""

    window: tuple
    """(r0, r1, c0, c1) of the window."""
    kmin: int
    """Fewest cells of the band."""
    kmax: int
    """Most cells of the band."""
    fs: float
    """FS of the best connected cluster found (NaN when the window holds no connected set of
    the band, or only sets without driving force)."""
    mask: np.ndarray
    """The cluster, bool array of the window's shape."""
    heuristic_fs: float
    """FS of the heuristic start (the warm start)."""
    relaxation_bound: float
    """Lower bound from the convex relaxation with the area limits (blind to A_max)."""
    lower_bound: float
    """Best proven lower bound on the FS of every connected cluster of the band in the window."""
    proven: bool
    """lower_bound meets fs within a relative 1e-4 (True also for "none": nothing to find)."""
    method: str
    """What settled it: "cut", "enumeration", "relaxation", "milp", "time_limit" (unproven) or "none"."""
    milp_solves: int
    """MILPs solved (warm start included)."""
    seconds: float
    """Wall time for this band, s."""


def band_cells(min_area_m2, max_area_m2, cell_area_m2):
    """Band in whole cells: (kmin, kmax) = (ceil(A_min / a), floor(A_max / a)), kmin >= 1.

    Parameters
    ----------
    min_area_m2, max_area_m2 : float
        Area limits, m^2 (max may be inf).
    cell_area_m2 : float
        Plan area a of one cell, m^2.

    Returns
    -------
    (int, int)

    Raises
    ------
    InputError
        A band that holds no whole number of cells, or bad limits.

    Examples
    --------
    >>> band_cells(30.0, 100.0, 25.0)
    (2, 4)
    """
    lo = float(min_area_m2)
    hi = float(max_area_m2)
    if not (math.isfinite(lo) and lo >= 0.0 and hi >= lo):
        raise InputError(f"min_area_m2, max_area_m2: expected 0 <= min <= max, got {lo}, {hi}")
    kmin = max(1, math.ceil(lo / cell_area_m2 - 1e-9))
    kmax = math.floor(hi / cell_area_m2 + 1e-9) if math.isfinite(hi) else 2**62
    if kmax < kmin:
        raise InputError(f"min_area_m2, max_area_m2: the band [{lo:g}, {hi:g}] m^2 holds no "
                         f"whole number of {cell_area_m2:g} m^2 cells; widen it")
    return kmin, kmax


# four families of two independent pair directions (codes of slopescreen.clusters._faces):
# sides (east, north), diagonals, and two pairs of knight moves (each spanning a lattice of
# index 5); the perimeter cut holds for each family
_FAMILY = np.full(16, -1, dtype=np.int64)
_FAMILY[[0, 2]] = 0
_FAMILY[[1, 3]] = 1
_FAMILY[[8, 10]] = 2
_FAMILY[[9, 11]] = 3


class _Model:
    """The MILP and the relaxation LP of one window, parametrised by lam and the band.

    Each cvxpy problem is built on first use (the relaxation alone settles
    many bands).
    """

    def __init__(self, terms, lam_max):
        valid = terms.valid
        h, w = valid.shape
        self.valid = valid
        index = -np.ones((h, w), dtype=np.int64)
        n = int(valid.sum())
        index[valid] = np.arange(n)
        self.index = index
        ps, qs, wn, wd, family = [], [], [], [], []
        for k in HALF:  # every unordered pair of valid cells once
            pi, qi = pair_slices(k, h, w)
            both = valid[pi] & valid[qi]
            ps.append(index[pi][both])
            qs.append(index[qi][both])
            wn.append(terms.pn[k][pi][both])
            wd.append(terms.pd[k][pi][both])
            family.append(np.full(int(both.sum()), _FAMILY[k]))
        self.p = np.concatenate(ps)
        self.q = np.concatenate(qs)
        self.pn = np.concatenate(wn)
        self.pd = np.concatenate(wd)
        family = np.concatenate(family)
        # pairs of cells that share a side carry the connectivity flow; every family of two
        # pair directions gets a perimeter cut (see _isoperimetric_line)
        self.side = np.flatnonzero(family == 0)
        self.families = [np.flatnonzero(family == j) for j in range(4)]
        self.n = n
        self.m = self.p.size
        self.cnx = terms.cn[valid]
        self.cdx = terms.cd[valid]
        rows = np.arange(self.m)
        self.sp = sparse.csr_array((np.ones(self.m), (rows, self.p)), shape=(self.m, n))
        self.sq = sparse.csr_array((np.ones(self.m), (rows, self.q)), shape=(self.m, n))
        self.nonsub = np.flatnonzero(self.pn - lam_max * self.pd < 0.0)
        self.lam_max = lam_max
        self.lam = cp.Parameter(nonneg=True, value=1.0)
        self.kmin = cp.Parameter(nonneg=True, value=1.0)
        self.kmax = cp.Parameter(nonneg=True, value=float(n))
        self.big_m = cp.Parameter(nonneg=True, value=float(max(n - 1, 0)))
        self.lo = cp.Parameter(n, nonneg=True, value=np.zeros(n))
        self.hi = cp.Parameter(n, nonneg=True, value=np.ones(n))
        self.root_ok = cp.Parameter(n, nonneg=True, value=np.ones(n))
        # isoperimetric cut: sum z <= (2 - iso_b) sum x - iso_a (see _isoperimetric_line)
        self.iso_a = cp.Parameter(value=0.0)
        self.iso_b = cp.Parameter(value=0.0)
        self.has_driving = bool((self.cdx > 0).any())
        self._milp = None
        self._relax = None
        self.x = None

    @property
    def milp(self):
        if self._milp is None:
            n, m, sp, sq = self.n, self.m, self.sp, self.sq
            x = cp.Variable(n, boolean=True)
            z = cp.Variable(m, nonneg=True)
            root = cp.Variable(n, boolean=True)
            # the connectivity flow runs between cells that share a side (clusters are
            # 4-connected sets)
            sp_, sq_ = self.p[self.side], self.q[self.side]
            ma = sp_.size
            tail = np.concatenate([sp_, sq_])
            head = np.concatenate([sq_, sp_])
            arcs = np.arange(2 * ma)
            t_mat = sparse.csr_array((np.ones(2 * ma), (arcs, tail)), shape=(2 * ma, n))
            h_mat = sparse.csr_array((np.ones(2 * ma), (arcs, head)), shape=(2 * ma, n))
            flow = cp.Variable(2 * ma, nonneg=True)
            cons = [z <= sp @ x, z <= sq @ x, cp.sum(x) >= self.kmin, cp.sum(x) <= self.kmax,
                    cp.sum(root) == 1, root <= x, root <= self.root_ok,
                    flow <= self.big_m * (t_mat @ x), flow <= self.big_m * (h_mat @ x),
                    h_mat.T @ flow - t_mat.T @ flow >= x - self.kmax * root,
                    x >= self.lo, x <= self.hi]
            cons += [cp.sum(z[f]) <= (2.0 - self.iso_b) * cp.sum(x) - self.iso_a
                     for f in self.families if f.size]
            ns = self.nonsub
            if ns.size:
                cons.append(z[ns] >= sp[ns] @ x + sq[ns] @ x - 1.0)
            n_expr = self.cnx @ x - self.pn @ z
            d_expr = self.cdx @ x - self.pd @ z
            self.x = x
            self._milp = cp.Problem(cp.Minimize(n_expr - self.lam * d_expr), cons)
        return self._milp

    @property
    def relax(self):
        if self._relax is None:
            n, m, sp, sq = self.n, self.m, self.sp, self.sq
            xr = cp.Variable(n, nonneg=True)
            zr = cp.Variable(m, nonneg=True)
            t = cp.Variable(nonneg=True)
            cons = [self.cdx @ xr - self.pd @ zr == 1.0, xr <= t, zr <= sp @ xr, zr <= sq @ xr,
                    cp.sum(xr) >= self.kmin * t, cp.sum(xr) <= self.kmax * t]
            cons += [cp.sum(zr[f]) <= (2.0 - self.iso_b) * cp.sum(xr) - self.iso_a * t
                     for f in self.families if f.size]
            ns = self.nonsub
            if ns.size:
                cons.append(zr[ns] >= sp[ns] @ xr + sq[ns] @ xr - t)
            self._relax = cp.Problem(cp.Minimize(self.cnx @ xr - self.pn @ zr), cons)
        return self._relax

    def vector(self, mask):
        """Values of a window mask in the order of the model's cells (float 0/1)."""
        out = np.zeros(self.n)
        out[self.index[self.valid]] = mask[self.valid]
        return out

    def set_band(self, kmin, kmax):
        self.kmin.value = float(kmin)
        self.kmax.value = float(kmax)
        self.big_m.value = float(max(kmax - 1, 0))
        self.iso_a.value, self.iso_b.value = _isoperimetric_line(kmin, kmax)

    def mask(self):
        v = None if self.x is None else self.x.value
        out = np.zeros(self.valid.shape, dtype=bool)
        if v is not None:
            out[self.valid] = np.asarray(v).ravel()[self.index[self.valid]] > 0.5
        return out


def _isoperimetric_line(kmin, kmax):
    """(a, b) with a + b k <= ceil(2 sqrt(k)) for every whole k in [kmin, kmax].

    A set of k cells has at least 2 ceil(2 sqrt(k)) margin sides (Harary and
    Harborth 1976, minimum perimeter of polyominoes; from memory), so at most
    2k - ceil(2 sqrt(k)) pairs of side-sharing cells inside it. The same holds
    for each family of two independent pair directions (:data:`_FAMILY`): in
    the basis of the two steps every coset of the lattice they span is a grid
    of its own; m cells of a coset meet at least ``u + v >= 2 sqrt(m)`` lines
    of the two directions (u v >= m), each line ends a run, and sum sqrt(m_i)
    >= sqrt(k), so at most 2k - ceil(2 sqrt(k)) pairs of the family lie
    inside the set. 2 sqrt(k) is concave, so its chord over
    the band lies below it: sum z <= 2 sum x - (a + b sum x) holds at every set of
    the band. It removes the scaled-down large sets (x = alpha 1_S) that make the
    relaxations blind to the upper area limit.
    """
    kmin, kmax = int(kmin), int(kmax)
    if kmax <= kmin:
        return float(math.ceil(2.0 * math.sqrt(kmin) - 1e-12)), 0.0
    b = (2.0 * math.sqrt(kmax) - 2.0 * math.sqrt(kmin)) / (kmax - kmin)
    return 2.0 * math.sqrt(kmin) - b * kmin, b


def relaxation_bound(model, kmin, kmax, *, perimeter=False):
    """Least FS of the convex relaxation with the area limits (one LP; FS_CAP without driving).

    Parameters
    ----------
    model : _Model
        The window's model (``WindowBands.ensure_model``).
    kmin, kmax : int
        Band in cells (without ``perimeter`` kmax has no effect: see the module
        text).
    perimeter : bool
        Add the isoperimetric cut of :func:`_isoperimetric_line` (a valid
        inequality of every set of the band), which lets the bound see kmax.

    Returns
    -------
    float
        min N(x', z') of the Charnes-Cooper LP, clipped to [0, FS_CAP].

    Raises
    ------
    SolverError
        HiGHS does not return optimal.
    """
    if not model.has_driving:
        return FS_CAP
    model.set_band(kmin, kmax)
    if not perimeter:
        model.iso_a.value, model.iso_b.value = 0.0, 0.0  # sum z <= 2 sum x always holds
    # interior point with crossover (a basic optimal point, so the same optimum as simplex):
    # with the 16 cell pairs the LPs of large failing windows are 4-5x larger, and there it
    # is ~10x faster than the primal simplex (stress window of 40 x 30 failing cells: 3.9 s
    # against 36.9 s); on 40 x 40 hillslope windows both take 2.7-3.4 s
    out = solve_checked(model.relax, solver="ipm")
    return float(min(max(out.value, 0.0), FS_CAP))


class WindowBands:
    """Shared state of one window across bands: force terms, cut result, model (built once)."""

    def __init__(self, forces, window):
        rows, cols = forces.valid.shape
        r0, r1, c0, c1 = (int(v) for v in window)
        if not (0 <= r0 < r1 <= rows and 0 <= c0 < c1 <= cols):
            raise InputError(f"window: {window} is empty or outside the grid {rows}x{cols}")
        self.window = (r0, r1, c0, c1)
        self.sub = _sub(forces, self.window)
        self.terms = band_terms(self.sub)
        self.cell_area = forces.dx * forces.dy
        labels, n = ndimage.label(self.terms.valid, structure=FOUR_CONNECTED)
        self.largest = int(np.bincount(labels.ravel())[1:].max()) if n else 0
        self.cut = least_stable_in_window(forces, self.window) if n else None
        self.model = None
        self._lam_max = 0.0

    def ensure_model(self, lam_max):
        """Build (or rebuild for a higher lam) the cvxpy model."""
        if self.model is None or lam_max > self._lam_max:
            self._lam_max = max(lam_max, self._lam_max)
            self.model = _Model(self.terms, self._lam_max)
        return self.model

    def seeds(self):
        if self.cut is None:
            return []
        labels, n = ndimage.label(self.cut.mask, structure=FOUR_CONNECTED)
        return [labels == i for i in range(1, n + 1)]

    def fs(self, mask):
        return cluster_factor_of_safety(self.sub, mask)

    def heuristic(self, kmin, kmax):
        return band_heuristic(self.sub, self.terms, kmin, kmax, self.seeds())


def _improving_region(st, lam):
    """Least minimiser U of the rounded-down g_lam on the window (exact cut).

    Every set S with FS(S) < lam meets U: g~ <= sigma g is submodular, so for
    S disjoint from U, g~(S u U) <= g~(S) + g~(U) - g~(empty) < g~(U),
    contradicting the minimality of U. The MILP may therefore take its flow
    root in U (or in the warm-start set, which keeps that start feasible).
    """
    unary, cap, _ = pair_terms(st.sub, lam)
    valid = st.terms.valid
    return _cut(np.where(valid, unary, 0.0), cap, valid)


def _connected(mask):
    return ndimage.label(mask, structure=FOUR_CONNECTED)[1] == 1


def least_stable_in_band(forces, window, *, min_area_m2, max_area_m2, time_limit_s=10.0,
                         state=None, lam_max=None, heuristic=None):
    """Least-stable connected cluster of a window in an area band, with proven bounds.

    Parameters
    ----------
    forces : ClusterForces
        From :func:`~slopescreen.clusters.forces.cluster_forces`.
    window : tuple of int
        (r0, r1, c0, c1); cells outside it count as outside every set and
        the faces on its border are charged.
    min_area_m2, max_area_m2 : float
        Area band, m^2 (plan area; whole cells only: see :func:`band_cells`).
    time_limit_s : float
        Wall-clock limit for the mixed-integer solves of this band, s (> 0).
    state : WindowBands, optional
        Shared per-window state when several bands are solved (internal).
    lam_max : float, optional
        Largest lambda the model must serve (internal; default the start FS).
    heuristic : tuple, optional
        (mask, fs, n_cuts) of :func:`~slopescreen.clusters.heuristic.band_heuristic`
        already computed for this band (internal).

    Returns
    -------
    BandResult

    Raises
    ------
    InputError
        Bad window, band or time limit.
    SolverError
        HiGHS ends with any status but optimal or a time-limit stop.

    Notes
    -----
    Order of work: (1) if the window's least-stable cluster without limits
    (exact cuts) lies in the band, it is the answer ("cut"); (2) a band of
    at most :data:`~slopescreen.clusters.small_sets.ENUMERATION_MAX_CELLS`
    cells is solved by enumerating every connected shape ("enumeration",
    exact); (3) heuristic start; (4) relaxation bound, which settles the
    band when it reaches the heuristic's FS ("relaxation"); (5) Dinkelbach
    over MILPs until proven ("milp") or out of time ("time_limit",
    unproven). See the module text
    for the program and the bounds:

        FS(S) = N(S) / D(S),   min over connected S, kmin <= |S| <= kmax

    References
    ----------
    Dinkelbach, W. (1967). On nonlinear fractional programming. Management
    Science 13(7), 492-498 (from memory).
    Charnes, A., Cooper, W.W. (1962). Programming with linear fractional
    functionals. Naval Research Logistics Quarterly 9(3-4), 181-186.
    doi 10.1002/nav.3800090303
    McCormick, G.P. (1976). Computability of global solutions to factorable
    nonconvex programs: Part I. Mathematical Programming 10, 147-175.
    doi 10.1007/BF01580665
    Harary, F., Harborth, H. (1976). Extremal animals. Journal of
    Combinatorics, Information and System Sciences 1, 1-8 (from memory).
    Milledge, D.G., Bellugi, D., McKean, J.A., Densmore, A.L., Dietrich,
    W.E. (2014). J. Geophys. Res. Earth Surface 119, 2481-2504.
    doi 10.1002/2014JF003135

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.clusters.forces import cluster_forces
    >>> f = cluster_forces(np.full((6, 6), 38.0), np.full((6, 6), 180.0), 1.2, 0.8, dx=5.0,
    ...     dy=5.0, cohesion_kpa=1.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=2.0,
    ...     friction_deg=33.0, unit_weight_kn_m3=18.5)
    >>> res = least_stable_in_band(f, (0, 6, 0, 6), min_area_m2=100.0, max_area_m2=200.0)
    >>> bool(4 <= res.mask.sum() <= 8), res.proven
    (True, True)
    """
    t0 = time.perf_counter()
    if not (isinstance(time_limit_s, (int, float)) and math.isfinite(time_limit_s)
            and time_limit_s > 0):
        raise InputError(f"time_limit_s: expected a positive number of seconds, got "
                         f"{time_limit_s!r}")
    st = state if state is not None else WindowBands(forces, window)
    kmin, kmax = band_cells(min_area_m2, max_area_m2, st.cell_area)
    shape = st.terms.valid.shape
    kmax = min(kmax, int(st.terms.valid.sum()))

    def result(fs, mask, hfs, rb, lb, method, solves):
        proven = bool(np.isfinite(fs) and lb >= fs * (1.0 - _PROVEN_REL)) or method == "none"
        return BandResult(st.window, int(kmin), int(kmax), float(fs), mask, float(hfs),
                          float(rb), float(lb), proven, method, solves,
                          time.perf_counter() - t0)

    empty = np.zeros(shape, dtype=bool)
    if st.largest < kmin or kmax < kmin:
        # no connected set of the band exists in the window
        return result(math.nan, empty, math.nan, math.nan, math.nan, "none", 0)
    cut_bound = float(st.cut.bound)
    best = st.cut.mask
    if best.any() and kmin <= int(best.sum()) <= kmax and _connected(best):
        # the least-stable cluster of the window lies in the band; the relaxation
        # (exact LP) tightens the cut bound, whose integer rounding costs ~1e-5
        fs = st.fs(best)
        lower = cut_bound
        rb = math.nan
        if lower < fs * (1.0 - _PROVEN_REL):
            rb = relaxation_bound(st.ensure_model(fs), kmin, kmax)
            lower = max(lower, rb)
        return result(fs, best.copy(), fs, rb, min(lower, fs), "cut", 0)
    if kmax <= ENUMERATION_MAX_CELLS:
        # few cells: every connected shape placed everywhere (exact, no solver)
        fs_small, small = least_stable_small(st.terms, kmin, kmax)
        if small is None:  # no connected set of the band has a driving force (flat ground)
            return result(math.nan, empty, math.nan, math.nan, cut_bound, "none", 0)
        fs = st.fs(small)
        return result(fs, small, fs, math.nan, fs, "enumeration", 0)
    hmask, hfs, _ = heuristic if heuristic is not None else st.heuristic(kmin, kmax)
    if hmask is None:  # every connected set of the band has no driving force (flat ground)
        return result(math.nan, empty, math.nan, math.nan, cut_bound, "none", 0)
    best = hmask
    fs_best = st.fs(best)
    model = st.ensure_model(max(fs_best, lam_max or 0.0))
    rb = relaxation_bound(model, kmin, kmax)
    lower = max(cut_bound, rb)
    if lower < fs_best * (1.0 - _PROVEN_REL):
        lower = max(lower, relaxation_bound(model, kmin, kmax, perimeter=True))
    if lower >= fs_best * (1.0 - _PROVEN_REL):
        return result(fs_best, best, hfs, rb, min(lower, fs_best), "relaxation", 0)
    # --- Dinkelbach over MILPs, warm-started from the heuristic
    lam = float(set_ratio(st.terms, best)[0] / set_ratio(st.terms, best)[1])
    reach = _improving_region(st, lam)
    if not reach.any():
        # no set of the window has FS < lam: the heuristic set is optimal
        return result(fs_best, best, hfs, rb, max(lower, min(lam, fs_best)), "cut", 0)
    model.set_band(kmin, kmax)
    model.lam.value = lam
    model.root_ok.value = model.vector(reach | best)
    model.lo.value = model.vector(best)
    model.hi.value = model.vector(best)
    solve_checked(model.milp)  # the heuristic set, completed with its root and flows
    model.lo.value = np.zeros(model.n)
    # an improving set meets U, is connected and has at most kmax cells: every cell of it
    # lies within kmax - 1 steps of U (the taxicab distance never exceeds the path length)
    near = ndimage.distance_transform_cdt(~reach, metric="taxicab") <= kmax - 1
    model.hi.value = model.vector(near | best)
    solves = 1
    drv = np.sort(st.terms.driving[st.terms.valid])
    d_lo = float(drv[:kmin].sum())
    method = "time_limit"
    deadline = time.perf_counter() + float(time_limit_s)
    while True:
        remaining = deadline - time.perf_counter()
        if remaining <= 0.05:
            break
        gap = 1e-7 * lam * d_lo if d_lo > 0 else 1e-6
        out = solve_checked(model.milp, time_limit_s=remaining, warm_start=True,
                            mip_rel_gap=0.0, mip_abs_gap=gap)
        solves += 1
        beta = out.dual_bound
        if beta >= 0.0:
            lower = max(lower, lam)
        elif d_lo > 0.0:
            lower = max(lower, lam + beta / d_lo)
        cand = model.mask()
        improved = False
        if cand.any() and kmin <= int(cand.sum()) <= kmax and _connected(cand):
            n_c, d_c = set_ratio(st.terms, cand)
            if d_c > 0 and n_c / d_c < lam * (1.0 - 1e-12):
                fs_c = st.fs(cand)
                if fs_c < fs_best:
                    best, fs_best = cand, fs_c
                lam = n_c / d_c
                model.lam.value = lam
                improved = True
        if improved:
            continue
        if out.status == "optimal":
            method = "milp"
        break
    return result(fs_best, best, hfs, rb, min(lower, fs_best), method, solves)
