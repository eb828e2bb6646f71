"""Step 1: per-metre charge errors of each scheme over all margin normals."""
import sys
import numpy as np
import prototype as P
from methods import weights, nb_of

DELTAS = [0, 10, 22.5, 30, 45]
RATIOS = [(t, h) for t in (0.5, 1.0, 3.0) for h in (0.05, 0.3)]
METHODS = ["four", "cc", "sharp", "nnls_full", "nnls_even", "two_stage", "linear", "convex_cc"]


def thrust_err(b, nb, delta, dx=1.0, dy=1.0):
    psi = P._PSI_EVAL
    rho = P.charge(b, nb, dx, dy, psi)
    t = P.target(psi, 0, 1.0, 0, delta)
    half = len(psi) // 2
    e = rho - t
    ee = 0.5 * (e + np.roll(e, -half))
    return np.abs(e).max(), np.abs(ee).max()


def run(dx=1.0, dy=1.0, out=sys.stdout, nbs=(8, 16), deltas=DELTAS):
    rows = {}
    for nb in nbs:
        for m in METHODS:
            if m == "four" and nb != nbs[0]:
                continue
            for dd in deltas:
                dl = np.radians(dd)
                for toe, head in RATIOS:
                    a, b = weights(m, nb, toe, head, 1.0, 1.0, dl, dx, dy)
                    k = nb_of(m, nb)
                    e = P.errors(a, k, toe, head, 1.0, dl, dx, dy)
                    te = thrust_err(b, k, dl, dx, dy)
                    rows[(m, k, dd, toe, head)] = e + te
    return rows


def floors(deltas=DELTAS):
    out = {}
    for dd in deltas:
        dl = np.radians(dd)
        for toe, head in RATIOS:
            out[(dd, toe, head)] = (P.floor_minimax(toe, head, 1.0, dl),
                                    P.floor_even(0.5 * (toe + head), 1.0, dl))
    return out


if __name__ == "__main__":
    import pickle
    rows = run()
    fl = floors()
    pickle.dump((rows, fl), open("fit_errors.pkl", "wb"))
    # summary per method: worst over delta, per ratio
    print("| scheme | N | " + " | ".join(f"toe {t}/head {h}" for t, h in RATIOS) + " |")
    print("|---|---|" + "---|" * len(RATIOS))
    keys = sorted({(m, k) for (m, k, *_r) in rows}, key=lambda x: (x[1], METHODS.index(x[0])))
    for col, name in ((0, "full max"), (1, "full rms"), (2, "even max"), (3, "even rms"),
                      (4, "thrust max/thrust"), (5, "thrust even max/thrust")):
        print(f"\n**{name}** (worst over downslope directions {DELTAS})\n")
        print("| scheme | N | " + " | ".join(f"{t}/{h}" for t, h in RATIOS) + " |")
        print("|---|---|" + "---|" * len(RATIOS))
        for m, k in keys:
            vals = [max(rows[(m, k, dd, t, h)][col] for dd in DELTAS) for t, h in RATIOS]
            print(f"| {m} | {k} | " + " | ".join(f"{v:.3f}" for v in vals) + " |")
        if col in (0, 2):
            vals = [max(fl[(dd, t, h)][0 if col == 0 else 1] for dd in DELTAS) for t, h in RATIOS]
            print("| floor (any nbhd) | inf | " + " | ".join(f"{v:.3f}" for v in vals) + " |")
