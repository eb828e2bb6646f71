"""Finite-size (corner) deficit: margin charge B of rasterised W x L slabs vs the exact perimeter charge."""
import math
import numpy as np
import prototype as P
from methods import weights, nb_of
toe, head, side, thrust = 20.0, 2.0, 8.0, 5.0
print("| scheme | slab | rot | B / B_exact (vertex-centred) | mean over 25 offsets, B per metre of true perimeter / exact |")
print("|---|---|---|---|---|")
OFFS = [(ox, oy) for ox in np.linspace(0, 1, 5, endpoint=False) for oy in np.linspace(0, 1, 5, endpoint=False)]
for m, nb in [("four", 4), ("convex_cc", 8), ("convex_cc", 16), ("cc", 8), ("cc", 16)]:
    for W, L in [(4, 16), (16, 64)]:
        for rot in (0.0, 22.5, 45.0):
            d = math.radians(-90 - rot)
            a, b = weights(m, nb, toe, head, side, thrust, d)
            k = nb_of(m, nb)
            n = 100
            bex = W * (toe + head) + 2 * L * side
            B0 = P.margin_counts(P.rect_mask(n, W, L, d), k) @ a
            Bm = np.mean([P.margin_counts(P.rect_mask(n, W, L, d, o), k) @ a for o in OFFS])
            print(f"| {m}{k} | {W}x{L} | {rot} | {B0 / bex:.4f} | {Bm / bex:.4f} |")
