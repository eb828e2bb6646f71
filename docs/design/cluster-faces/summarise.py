"""Condensed tables for REPORT.md from slabs.pkl and fit_errors.pkl."""
import pickle
from slabs import CASES, SHAPES
res = pickle.load(open("slabs.pkl", "rb"))
keys = ["four4", "cc8", "convex_cc8", "nnls_full8", "two_stage8", "linear8", "cc16", "convex_cc16", "two_stage16"]
print("| case | slab | continuum FS | " + " | ".join(keys) + " |")
print("|---|---|---|" + "---|" * len(keys))
for c in CASES:
    for W, L in SHAPES:
        cont = res[(c, W, L, "continuum")][0][0]
        cells = []
        for k in keys:
            fs0, fsm, fss, area = res[(c, W, L, k)]
            s0 = 100 * (max(fs0) / min(fs0) - 1)
            sm = 100 * (max(fsm) / min(fsm) - 1)
            cells.append(f"{sm:.1f} ({s0:.1f}) [{100 * (fsm[0] / cont - 1):+.1f}]")
        print(f"| {c.split()[0]} | {W}x{L} | {cont:.3f} | " + " | ".join(cells) + " |")
