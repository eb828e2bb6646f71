"""The 16 cell pairs of the cluster margins and their Cauchy-Crofton weights, written out by hand.

A reference for the tests, independent of slopescreen.clusters._faces: the steps are listed
literally and the weights come from the formula factor_k = dphi_k dx dy / (2 |e_k|), dphi_k
half the angle between the two step directions next to e_k going round the circle (Boykov
and Kolmogorov 2003, from memory; docs/methods.md, "Multi-cell failure clusters").
"""

import math

# the 16 pair steps (row step, column step), row growing south: the 8 neighbours
# counter-clockwise from east, then the 8 knight moves counter-clockwise from 26.6 degrees
STEPS = [(0, 1), (-1, 1), (-1, 0), (-1, -1), (0, -1), (1, -1), (1, 0), (1, 1),
         (-1, 2), (-2, 1), (-2, -1), (-1, -2), (1, -2), (2, -1), (2, 1), (1, 2)]


def pair_geometry(dx, dy):
    """[(unit east, unit north, factor)] of the 16 steps (the dphi_k found by the smallest gaps)."""
    vec = [(dc * dx, -dr * dy) for dr, dc in STEPS]
    ang = [math.atan2(n, e) for e, n in vec]
    out, total = [], 0.0
    for k, (e, n) in enumerate(vec):
        gaps = [(a - ang[k]) % (2 * math.pi) for j, a in enumerate(ang) if j != k]
        dphi = 0.5 * (min(gaps) + min(2 * math.pi - g for g in gaps))
        total += dphi
        length = math.hypot(e, n)
        out.append((e / length, n / length, dphi * dx * dy / (2 * length)))
    if abs(total - 2 * math.pi) > 1e-12 * 2 * math.pi:
        raise AssertionError(f"the dphi_k sum to {total}, not 2 pi")
    return out
