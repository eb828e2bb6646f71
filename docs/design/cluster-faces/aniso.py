"""dx != dy: per-metre errors (even part, worst over directions) and slab FS spreads for cells 1 x dy m."""
import math
import numpy as np
import prototype as P
from methods import weights, nb_of
from fit_errors import RATIOS
from slabs import CASES, OFFS

DELTAS = [0, 10, 22.5, 30, 45, 60, 90]
print("| scheme | dy/dx | even max (worst ratio, direction) | even rms (worst) | full rms (worst) |")
print("|---|---|---|---|---|")
for dy in (1.0, 1.5, 2.0):
    for m, nb in [("four", 4), ("cc", 8), ("convex_cc", 8), ("cc", 16), ("convex_cc", 16)]:
        em, er, fr = 0, 0, 0
        for dd in DELTAS:
            for toe, head in RATIOS:
                if toe == 0.5:
                    continue  # non-convex ratios reported separately
                a, b = weights(m, nb, toe, head, 1.0, 1.0, math.radians(dd), 1.0, dy)
                e = P.errors(a, nb_of(m, nb), toe, head, 1.0, math.radians(dd), 1.0, dy)
                em, er, fr = max(em, e[2]), max(er, e[3]), max(fr, e[1])
        print(f"| {m} | {nb_of(m, nb)} | {dy} | {em:.3f} | {er:.3f} | {fr:.3f} |".replace(f"| {nb_of(m, nb)} | {dy}", f"{nb_of(m, nb)} | {dy}"))
print()
print("Slab 4 m x 16 m, case B, cells 1 m x 2 m: mean FS over 25 offsets at rotations 0/22.5/45/90, spread")
print()
print("| scheme | FS | spread |")
print("|---|---|---|")
cs = CASES["B kernels c'=2 phi'=33 dry"]
dy = 2.0
for m, nb in [("four", 4), ("cc", 8), ("convex_cc", 8), ("cc", 16), ("convex_cc", 16)]:
    fs = []
    for rot in (0.0, 22.5, 45.0, 90.0):
        d = math.radians(-90 - rot)
        a, b = weights(m, nb, cs["toe"], cs["head"], cs["side"], cs["thrust"], d, 1.0, dy)
        v = [P.slab_fs(P.rect_mask(60, 4, 16, d, (o[0], o[1] * dy), 1.0, dy), nb_of(m, nb), a, b,
                       cs["R"] * dy, cs["D"] * dy) for o in OFFS]
        fs.append(np.mean(v))
    print(f"| {m}{nb_of(m, nb)} | {'/'.join(f'{x:.4f}' for x in fs)} | {100 * (max(fs) / min(fs) - 1):.2f} % |")
