"""Step 3: submodularity of the pair terms phi(1,0) + phi(0,1) = a_k + a_k' - lam (h_k + h_k')
on uniform fields, over a sweep of realistic per-metre values from the project's kernels."""
import itertools
import math
import numpy as np
import prototype as P
from methods import weights, nb_of
from slopescreen.clusters._force_kernels import _face_per_length

SCHEMES = [("four", 4), ("cc", 8), ("convex_cc", 8), ("nnls_full", 8), ("two_stage", 8), ("linear", 8),
           ("cc", 16), ("convex_cc", 16), ("two_stage", 16)]
DELTAS = [0, 10, 22.5, 30, 45]


def pair_sums(a, b, nb, lam):
    opp = opposite = P.opposite(nb)
    j = P.pair_index(nb)
    return (a[j] + a[opp[j]]) - lam * (b[j] + b[opp[j]])


def sweep(lam=1.0):
    cases = []
    for slope, coh, phi, wet, lat in itertools.product(range(26, 46, 2), (0.0, 2.0, 5.0), (30.0, 33.0, 36.0),
                                                       (0.0, 0.5, 1.0), (0.0, 2.0, 5.0)):
        t = math.radians(phi)
        toe, head, side, thr = _face_per_length(1.0, wet, 18.0, 20.0, coh, lat, math.tan(t), math.sin(t),
                                                0.5, False, float(slope))
        cases.append((toe, head, side, thr))
    out = {}
    for m, nb in SCHEMES:
        ok = np.zeros((len(cases), len(DELTAS)), bool)
        frac = np.zeros((len(cases), len(DELTAS)))
        for i, (toe, head, side, thr) in enumerate(cases):
            for jd, dd in enumerate(DELTAS):
                d = math.radians(dd)
                a, b = weights(m, nb, toe, head, side, thr, d)
                k = nb_of(m, nb)
                s = pair_sums(a, b, k, lam)
                tol = 1e-9 * max(1.0, np.abs(a).max())
                ok[i, jd] = np.all(s >= -tol)
                frac[i, jd] = np.mean(s < -tol)
        out[(m, nb)] = ok, frac
    return cases, out


if __name__ == "__main__":
    for lam in (1.0, 0.8):
        cases, out = sweep(lam)
        ok4 = out[("four", 4)][0]
        print(f"\n**lambda = {lam}**: {len(cases)} soil/slope cases x {len(DELTAS)} downslope directions "
              f"= {ok4.size} uniform fields\n")
        print("| scheme | N | fields with every pair submodular | pass with 4-nbhd but fail here | fail with 4 but pass here | mean share of failing pair directions |")
        print("|---|---|---|---|---|---|")
        for (m, nb), (ok, frac) in out.items():
            print(f"| {m} | {nb} | {ok.mean() * 100:.1f} % | {(ok4 & ~ok).mean() * 100:.1f} % | "
                  f"{(~ok4 & ok).mean() * 100:.1f} % | {frac.mean() * 100:.1f} % |")
        # per-direction view for 4-nbhd and convex_cc8 / 16
        print("\nfields all-submodular by downslope direction (deg): " + ", ".join(map(str, DELTAS)) + "\n")
        print("| scheme | N | " + " | ".join(str(d) for d in DELTAS) + " |")
        print("|---|---|" + "---|" * len(DELTAS))
        for (m, nb), (ok, frac) in out.items():
            print(f"| {m} | {nb} | " + " | ".join(f"{ok[:, j].mean() * 100:.1f} %" for j in range(len(DELTAS))) + " |")
