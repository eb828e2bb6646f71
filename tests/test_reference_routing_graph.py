"""Accumulation checked against graph and linear-algebra oracles.

The receivers and fractions are re-derived here, independently of the
package, from the published rules (D8: O'Callaghan & Mark 1984; D-infinity:
Tarboton 1997, with the facet formulas of that paper; MFD:
Freeman 1991) on random terrain filled by scikit-image's reconstruction by
erosion (the Priority-Flood result). Only the flat-drainage directions come
from the package (`drainage_over_flats`, tested on its own in
test_flats.py). Then:

* D8: area summed over the receiver graph in networkx's topological order;
* D-infinity and MFD: A solves (I - F^T) A = dx dy, with F the fraction
  matrix, by scipy.sparse.linalg.spsolve.

The effective widths are re-derived too: b = dx dy / sum_k f_k (e_k . u)
with u the D-infinity steepest-facet direction (docstring of
`specific_catchment_area`).
"""

import math

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from scipy.ndimage import gaussian_filter
from scipy.sparse.linalg import spsolve
from skimage.morphology import reconstruction

from slopescreen.routing import drainage_over_flats, flow_accumulation
from slopescreen.routing.links import _receivers

DROW = np.array([0, -1, -1, -1, 0, 1, 1, 1])
DCOL = np.array([1, 1, 0, -1, -1, -1, 0, 1])
FACETS = ((0, 1), (2, 1), (2, 3), (4, 3), (4, 5), (6, 5), (6, 7), (0, 7))  # Tarboton's 8 facets


def filled_terrain(seed, shape, holes=True):
    """Seeded random relief, with nodata holes, filled by reconstruction by erosion."""
    rng = np.random.default_rng(seed)
    z = gaussian_filter(rng.normal(size=shape), 2.0) * 40.0
    rows, cols = np.mgrid[0:shape[0], 0:shape[1]]
    z += 0.3 * rows + 0.1 * cols
    if holes:
        z[shape[0] // 3:shape[0] // 3 + 3, shape[1] // 2:shape[1] // 2 + 4] = np.nan
        z[rng.integers(0, shape[0], 6), rng.integers(0, shape[1], 6)] = np.nan
    nan = np.isnan(z)
    mask = np.where(nan, np.nanmin(z) - 1.0, z)
    edge = np.zeros(shape, dtype=bool)
    edge[[0, -1], :] = True
    edge[:, [0, -1]] = True
    edge |= nan
    seed_img = np.where(edge, mask, mask.max())
    out = reconstruction(seed_img, mask, method="erosion", footprint=np.ones((3, 3)))
    out[nan] = np.nan
    return out


def neighbours(z, i, j):
    """Elevations of the 8 neighbours (NaN outside the grid)."""
    out = np.full(8, np.nan)
    for k in range(8):
        r, c = i + DROW[k], j + DCOL[k]
        if 0 <= r < z.shape[0] and 0 <= c < z.shape[1]:
            out[k] = z[r, c]
    return out


def oracle_links(z, dx, dy, method, p=1.1):
    """Independent receivers, fractions and effective widths for every cell."""
    ex, ey = DCOL * dx, -DROW * dy
    dist = np.hypot(ex, ey)
    flats = drainage_over_flats(z)
    lo, hi = min(dx, dy) * math.cos(math.pi / 4), math.hypot(dx, dy)
    links, width = [], np.full(z.shape, np.nan)
    for i in range(z.shape[0]):
        for j in range(z.shape[1]):
            z0 = z[i, j]
            if np.isnan(z0):
                continue
            nb = neighbours(z, i, j)
            # D-infinity steepest facet, the formulas of Tarboton (1997)
            best = None
            for card, diag in FACETS:
                e1, e2 = nb[card], nb[diag]
                if np.isnan(e1) or np.isnan(e2):
                    continue
                d1 = dist[card]
                d2 = math.hypot(ex[diag] - ex[card], ey[diag] - ey[card])
                s1, s2 = (z0 - e1) / d1, (e1 - e2) / d2
                r, s = math.atan2(s2, s1), math.hypot(s1, s2)
                if r < 0:
                    r, s = 0.0, s1
                if r > math.atan2(d2, d1):
                    r, s = math.atan2(d2, d1), (z0 - e2) / math.hypot(d1, d2)
                if s > 0 and (best is None or s > best[0]):
                    best = (s, card, diag, r, d1, d2)
            u = None
            if best is not None:
                _, card, diag, r, d1, d2 = best
                e1u = np.array([ex[card], ey[card]]) / d1
                epu = np.array([ex[diag] - ex[card], ey[diag] - ey[card]]) / d2
                u = math.cos(r) * e1u + math.sin(r) * epu
            drop = np.where(nb < z0, (z0 - nb) / dist, 0.0)
            shares = np.zeros(8)
            if method == "dinf" and best is not None:
                f = r / math.atan2(d2, d1)
                shares[card] += 1.0 - f
                shares[diag] += f
            elif method == "mfd" and drop.max() > 0:
                w = np.where(drop > 0, drop ** p, 0.0)
                shares = w / w.sum()
            elif drop.max() > 0:  # D8, and D-infinity's fallback
                shares[int(np.argmax(drop))] = 1.0
            elif flats[i, j] != 255:
                shares[flats[i, j]] = 1.0
            if shares.sum() > 0:
                if u is not None:
                    advance = float((shares * (ex * u[0] + ey * u[1])).sum())
                    width[i, j] = dx * dy / min(max(advance, lo), hi)
                else:
                    width[i, j] = dx * dy / dist[int(np.argmax(shares))]
            else:
                width[i, j] = min(dx, dy)
                for k in (0, 2, 4, 6, 1, 3, 5, 7):
                    if np.isnan(nb[k]):
                        width[i, j] = dx * dy / dist[k]
                        break
            for k in np.nonzero(shares)[0]:
                links.append((i * z.shape[1] + j, (i + DROW[k]) * z.shape[1] + j + DCOL[k],
                              shares[k]))
    return links, width


CASES = [(3, (36, 44), 1.0, 1.0), (11, (40, 31), 2.0, 3.0), (29, (33, 47), 5.0, 4.0)]


@pytest.mark.parametrize("seed,shape,dx,dy", CASES)
def test_d8_accumulation_equals_networkx_topological_sum(seed, shape, dx, dy):
    # Oracle: networkx DiGraph of the independently derived D8 receivers,
    # area summed in topological order.
    z = filled_terrain(seed, shape)
    links, _ = oracle_links(z, dx, dy, "d8")
    g = nx.DiGraph()
    valid = np.flatnonzero(np.isfinite(z))
    g.add_nodes_from(valid.tolist())
    g.add_edges_from((a, b) for a, b, _ in links)
    assert max(d for _, d in g.out_degree()) == 1
    area = {n: dx * dy for n in g.nodes}
    for n in nx.topological_sort(g):
        for m in g.successors(n):
            area[m] += area[n]
    expected = np.full(z.size, np.nan)
    expected[list(area)] = list(area.values())
    got = flow_accumulation(z, dx, dy, method="d8").area_m2.ravel()
    np.testing.assert_allclose(got, expected, rtol=1e-12, equal_nan=True)


def linear_oracle(z, dx, dy, links):
    """A = (I - F^T)^-1 (dx dy) over the valid cells, scipy spsolve."""
    n = z.size
    src = np.array([a for a, _, _ in links], dtype=np.int64)
    dst = np.array([b for _, b, _ in links], dtype=np.int64)
    f = np.array([w for _, _, w in links])
    fmat = sp.csr_matrix((f, (src, dst)), shape=(n, n))
    valid = np.isfinite(z).ravel()
    rhs = np.where(valid, dx * dy, 0.0)
    a = spsolve((sp.identity(n, format="csr") - fmat.T).tocsc(), rhs)
    a[~valid] = np.nan
    return a


@pytest.mark.parametrize("seed,shape,dx,dy", CASES)
@pytest.mark.parametrize("method", ["dinf", "mfd", "d8"])
def test_accumulation_equals_linear_system(method, seed, shape, dx, dy):
    # Oracle: sparse linear system (I - F^T) A = dx dy with the fractions
    # re-derived from the published formulas (scipy spsolve).
    z = filled_terrain(seed, shape)
    links, width = oracle_links(z, dx, dy, method)
    expected = linear_oracle(z, dx, dy, links)
    res = flow_accumulation(z, dx, dy, method=method)
    # D-infinity shares are stored as float32 in the package: 1e-6 relative.
    rtol = 1e-5 if method == "dinf" else 1e-10
    np.testing.assert_allclose(res.area_m2.ravel(), expected, rtol=rtol, equal_nan=True)
    np.testing.assert_allclose(res.width_m, width, rtol=1e-5, equal_nan=True)
    assert not res.undrained.any()


@pytest.mark.parametrize("method", ["dinf", "mfd", "d8"])
def test_internal_links_match_the_rederived_fractions(method):
    # The package's receiver lists against the independent derivation.
    z = filled_terrain(5, (30, 38))
    links, _ = oracle_links(z, 2.0, 2.5, method)
    donor, receiver, frac, outlet = _receivers(z, 2.0, 2.5, method)
    ours = {(int(a), int(b)): float(f) for a, b, f in zip(donor, receiver, frac)}
    theirs = {(a, b): f for a, b, f in links}
    assert ours.keys() == theirs.keys()
    for key, f in theirs.items():
        assert ours[key] == pytest.approx(f, rel=1e-6, abs=1e-7)
