"""Step 2: FS of rasterised slope-aligned slabs on a uniform plane rotated 0, 22.5, 45 deg."""
import math
import numpy as np
import prototype as P
from methods import weights, nb_of
from slopescreen.clusters._force_kernels import _face_per_length, _basal_forces
from slopescreen.clusters import cluster_forces, cluster_factor_of_safety

SLOPE = 34.0
ROTS = [0.0, 22.5, 45.0]
SHAPES = [(4, 16), (2, 24)]
OFFS = [(ox, oy) for ox in np.linspace(0, 1, 5, endpoint=False) for oy in np.linspace(0, 1, 5, endpoint=False)]
SCHEMES = [("four", 4), ("cc", 8), ("sharp", 8), ("nnls_full", 8), ("two_stage", 8), ("linear", 8), ("convex_cc", 8),
           ("cc", 16), ("sharp", 16), ("nnls_full", 16), ("two_stage", 16), ("linear", 16), ("convex_cc", 16)]


def soil_case(coh, phi, wet, lat):
    t = math.radians(phi)
    toe, head, side, thr = _face_per_length(1.0, wet, 18.0, 20.0, coh, lat, math.tan(t), math.sin(t),
                                            0.5, False, SLOPE)
    D, R, _ = _basal_forces(SLOPE, 1.0, wet, 18.0, 20.0, coh, 0.0, phi, 1.0)
    return dict(toe=toe, head=head, side=side, thrust=thr, R=R, D=D,
                kw=dict(cohesion_kpa=coh, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=lat,
                        friction_deg=phi, unit_weight_kn_m3=18.0, saturated_unit_weight_kn_m3=20.0),
                wet=wet)


CASES = {
    "A brief (toe 20, head 2, side 8, thrust 5)": dict(toe=20.0, head=2.0, side=8.0, thrust=5.0,
                                                        R=soil_case(2, 33, 0, 0)["R"],
                                                        D=soil_case(2, 33, 0, 0)["D"]),
    "B kernels c'=2 phi'=33 dry": soil_case(2.0, 33.0, 0.0, 0.0),
    "C kernels c'=2 phi'=33 wet 0.5": soil_case(2.0, 33.0, 0.5, 0.0),
    "D kernels c'=0 phi'=33 lat.roots 2": soil_case(0.0, 33.0, 0.0, 2.0),
}


def run(n=44):
    res = {}
    for cname, cs in CASES.items():
        for W, L in SHAPES:
            cont = ((W * L * cs["R"] + W * (cs["toe"] + cs["head"]) + 2 * L * cs["side"])
                    / (W * L * cs["D"] + W * cs["thrust"]))
            res[(cname, W, L, "continuum")] = [cont] * 3, [cont] * 3, [0] * 3, [W * L] * 3
            for m, nb in SCHEMES:
                fs0, fsm, fss, area = [], [], [], []
                for rot in ROTS:
                    delta = math.radians(-90.0 - rot)
                    a, b = weights(m, nb, cs["toe"], cs["head"], cs["side"], cs["thrust"], delta)
                    k = nb_of(m, nb)
                    vals = []
                    for off in OFFS:
                        mask = P.rect_mask(n, W, L, delta, off)
                        vals.append(P.slab_fs(mask, k, a, b, cs["R"], cs["D"]))
                    mask0 = P.rect_mask(n, W, L, delta)
                    fs0.append(P.slab_fs(mask0, k, a, b, cs["R"], cs["D"]))
                    fsm.append(np.mean(vals))
                    fss.append(np.std(vals))
                    area.append(mask0.sum())
                res[(cname, W, L, f"{m}{nb}")] = fs0, fsm, fss, area
    return res


def check_project_four(n=44):
    """Today's rule through the project's own cluster_forces / cluster_factor_of_safety."""
    out = []
    for cname, cs in CASES.items():
        if "kw" not in cs:
            continue
        for W, L in SHAPES:
            for rot in ROTS:
                delta = math.radians(-90.0 - rot)
                mask = P.rect_mask(n, W, L, delta)
                f = cluster_forces(np.full((n, n), SLOPE), np.full((n, n), 180.0 + rot), 1.0, cs["wet"],
                                   dx=1.0, dy=1.0, passive_fraction=0.5, **cs["kw"])
                fs_proj = cluster_factor_of_safety(f, mask)
                a, b = weights("four", 4, cs["toe"], cs["head"], cs["side"], cs["thrust"], delta)
                fs_mine = P.slab_fs(mask, 4, a, b, cs["R"], cs["D"])
                out.append((cname, W, L, rot, fs_proj, fs_mine))
    return out


def spread(v):
    return max(v) / min(v) - 1.0


if __name__ == "__main__":
    chk = check_project_four()
    print("Check: today's 4-neighbour rule, project cluster_factor_of_safety vs prototype")
    print("max |diff| =", max(abs(p - q) for *_x, p, q in chk))
    res = run()
    import pickle
    pickle.dump(res, open("slabs.pkl", "wb"))
    for cname, cs in CASES.items():
        print(f"\n### {cname}: toe {cs['toe']:.2f}, head {cs['head']:.2f}, side {cs['side']:.2f}, "
              f"thrust {cs['thrust']:.2f} kN/m; R {cs['R']:.2f}, D {cs['D']:.2f} kN per cell\n")
        for W, L in SHAPES:
            print(f"\n{W} x {L} slab. FS at rotation 0 / 22.5 / 45 (vertex-centred; cells), spread; "
                  f"mean over 25 centre offsets, spread; largest std over offsets\n")
            print("| scheme | FS 0 | FS 22.5 | FS 45 | cells | spread | mean FS 0/22.5/45 | spread of means | std |")
            print("|---|---|---|---|---|---|---|---|---|")
            for key in ["continuum"] + [f"{m}{nb}" for m, nb in SCHEMES]:
                fs0, fsm, fss, area = res[(cname, W, L, key)]
                print(f"| {key} | {fs0[0]:.4f} | {fs0[1]:.4f} | {fs0[2]:.4f} | {'/'.join(map(str, area))} | "
                      f"{100 * spread(fs0):.2f} % | {'/'.join(f'{x:.4f}' for x in fsm)} | "
                      f"{100 * spread(fsm):.2f} % | {max(fss):.4f} |")
