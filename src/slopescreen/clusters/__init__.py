r"""Multi-cell failure clusters: exact failing clusters, least-stable clusters, FS bound.

A cluster is a set S of grid cells. With the force terms of
:mod:`slopescreen.clusters.forces` (per cell D_i, R_i; per margin face a
resistance and, on head faces, an active thrust; METHODS.md section 9)::

    FS(S) = (R(S) + B(S)) / (D(S) + H(S))
    g_lam(S) = R(S) + B(S) - lam (D(S) + H(S)),      FS(S) < lam  <=>  g_lam(S) < 0

Modules: ``forces`` (force model; its numba kernels in ``_force_kernels``),
``cut`` (exact minimisation of g_lam by an s-t minimum cut with integer
capacities), ``search`` (tiles with halos at lam = 1, Dinkelbach least-stable
clusters in windows, the FS bound raster), ``heuristic`` (area-price sweep
and greedy repair for connected sets in an area band; its single-cell moves in
``local_search``), ``band`` (the exact mixed-integer program per window and
area band, with the relaxation and MILP bounds; ``_solve`` checks every cvxpy
solve and runs it in the killable child process of ``_highs_process``), ``sizes``
(candidate windows, area bands, the size-resolved table), ``probability``
(Monte Carlo probability that a found cluster fails) and ``stage`` (the stage
function and the cluster table).

Why the components of the lam = 1 minimiser are failing clusters
-----------------------------------------------------------------
Let S be the **least** minimiser of g = g_1 (the intersection of all
minimisers; it is itself a minimiser because g is submodular, and it is
the set reachable from the source in the residual graph of a maximum flow).
Split S into its 4-connected components C_1 .. C_m.

1. Components share no face: two cells of different components are never
   4-neighbours, so every margin face of S has exactly one cell in exactly
   one component and the other cell outside S. The basal terms are sums
   over cells. Hence g(S) = sum_j g(C_j).
2. For the same reason g(S \ C_j) = g(S) - g(C_j).
3. If some g(C_j) >= 0, then g(S \ C_j) <= g(S), so S \ C_j is also a
   minimiser, strictly smaller than S: impossible for the least minimiser.
   So g(C_j) < 0 for every j, i.e. FS(C_j) < 1: each component fails.
4. Any failing set T (g(T) < 0) satisfies g(S) <= g(T) < 0, so failure
   anywhere implies a non-empty minimiser.

With integer capacities the argument holds for the rounded-down function
g~ <= sigma g; a component with g~ < 0 can have FS marginally >= 1 (within
the rounding bound of :mod:`slopescreen.clusters.cut`), which is why every
reported cluster is rechecked from the force terms and kept only if FS < 1.

Convexity and tightness (Lovasz 1983; the min-cut form of submodular
pseudo-boolean minimisation, e.g. Kolmogorov and Zabih 2004, both from
memory): when every face has phi(1,0) + phi(0,1) >= 0, g_lam is a sum of
unary terms and nonnegative cut terms, its Lovasz extension is convex and
piecewise linear, the LP over [0,1]^n is tight and is the dual of the
s-t minimum cut solved here. The tests check this against every subset of
small grids, against the LP in cvxpy/HiGHS and against networkx.

References
----------
Milledge, D.G., Bellugi, D., McKean, J.A., Densmore, A.L., Dietrich, W.E.
(2014). A multidimensional stability model for predicting shallow landslide
size and shape across landscapes. J. Geophys. Res. Earth Surface 119,
2481-2504. doi 10.1002/2014JF003135
Lovasz, L. (1983). Submodular functions and convexity. In: Mathematical
Programming: The State of the Art, Springer, 235-257 (from memory).
Picard, J.-C., Queyranne, M. (1980). On the structure of all minimum cuts in
a network and applications. Math. Programming Study 13, 8-16 (from memory).
Kolmogorov, V., Zabih, R. (2004). What energy functions can be minimized via
graph cuts? IEEE TPAMI 26(2), 147-159 (from memory).
Topkis, D.M. (1978). Minimizing a submodular function on a lattice.
Operations Research 26(2), 305-321 (from memory).
Dinkelbach, W. (1967). On nonlinear fractional programming. Management
Science 13(7), 492-498 (from memory).
"""

from .forces import (
    ClusterForces,
    cluster_factor_of_safety,
    cluster_forces,
    earth_pressure_coefficients,
    face_pressures,
    nonsubmodular_faces,
)
from .band import BandResult, least_stable_in_band
from .probability import ClusterProbability, cluster_failure_probability, cluster_parameter_draws
from .search import WindowResult, failing_set, fs_bound_map, least_stable_in_window
from .sizes import (
    SIZE_COLUMNS,
    SizeResolved,
    area_bands,
    candidate_windows,
    size_resolved_clusters,
)
from .stage import TABLE_COLUMNS, ClusterResult, cluster_table, failure_clusters

__all__ = [
    "BandResult",
    "ClusterForces",
    "ClusterProbability",
    "ClusterResult",
    "SIZE_COLUMNS",
    "SizeResolved",
    "TABLE_COLUMNS",
    "WindowResult",
    "area_bands",
    "candidate_windows",
    "cluster_factor_of_safety",
    "cluster_failure_probability",
    "cluster_forces",
    "cluster_parameter_draws",
    "cluster_table",
    "earth_pressure_coefficients",
    "face_pressures",
    "failing_set",
    "failure_clusters",
    "fs_bound_map",
    "least_stable_in_band",
    "least_stable_in_window",
    "nonsubmodular_faces",
    "size_resolved_clusters",
]
