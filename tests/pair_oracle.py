"""The 16 cell pairs of the cluster margins and their Cauchy-Crofton weights, written out by hand.

A reference for the tests, independent of slopescreen.clusters._faces: the steps are listed
literally and the weights come from the formula a_k = dphi_k dx dy / (2 |e_k|), dphi_k half
the angle between the two step directions next to e_k going round the circle (so the dphi_k
sum to 2 pi; Boykov and Kolmogorov 2003, from memory; docs/methods.md, "Multi-cell failure
clusters").
"""

import math

# the 16 steps (row step, column step); rows grow southward, columns eastward. k = 0..7: the 8
# neighbours counter-clockwise from east; k = 8..15: the knight moves counter-clockwise from
# 26.57 degrees
STEPS = [(0, 1), (-1, 1), (-1, 0), (-1, -1), (0, -1), (1, -1), (1, 0), (1, 1),
         (-1, 2), (-2, 1), (-2, -1), (-1, -2), (1, -2), (2, -1), (2, 1), (1, 2)]
# one step of each opposite pair: every unordered pair of cells once
HALF_STEPS = (0, 1, 2, 3, 8, 9, 10, 11)
# the four steps to cells that share a side (the connectivity of size-resolved clusters)
SIDE_STEPS = ((0, 1), (-1, 0), (0, -1), (1, 0))


def opposite(k):
    """The step seen from the partner: e_opposite(k) = -e_k."""
    return (k // 8) * 8 + (k % 8 + 4) % 8


def cc_factors(dx, dy):
    """Cauchy-Crofton factor a_k of each step, m (its own angle sort)."""
    ang = [math.atan2(-dr * dy, dc * dx) % (2.0 * math.pi) for dr, dc in STEPS]
    order = sorted(range(len(STEPS)), key=ang.__getitem__)
    out = [0.0] * len(STEPS)
    for pos, k in enumerate(order):
        prev = ang[order[pos - 1]] - (2.0 * math.pi if pos == 0 else 0.0)
        nxt = ang[order[(pos + 1) % len(order)]] + (2.0 * math.pi if pos == len(order) - 1
                                                   else 0.0)
        dr, dc = STEPS[k]
        out[k] = 0.5 * (nxt - prev) * dx * dy / (2.0 * math.hypot(dc * dx, dr * dy))
    return out


def pair_geometry(dx, dy):
    """[(unit east, unit north, a_k)] of the 16 steps."""
    out = []
    for (dr, dc), a in zip(STEPS, cc_factors(dx, dy)):
        e, n = dc * dx, -dr * dy
        length = math.hypot(e, n)
        out.append((e / length, n / length, a))
    return out
