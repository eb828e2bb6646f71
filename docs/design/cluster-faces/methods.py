"""Edge-weight schemes compared in the report: (resistance weights, thrust weights)."""
import numpy as np
import prototype as P

_TABLES = {}


def table(nb, delta, dx=1.0, dy=1.0):
    key = (nb, round(float(delta), 9), dx, dy)
    if key not in _TABLES:
        _TABLES[key] = P.linear_table_signed(nb, delta, dx, dy)
    return _TABLES[key]


def weights(method, nb, toe, head, side, thrust, delta, dx=1.0, dy=1.0):
    if method == "four":
        return P.fit_four(toe, head, side, delta, dx, dy), P.fit_four(0, thrust, 0, delta, dx, dy)
    if method == "cc":
        return (P.fit_cc(nb, toe, head, side, delta, dx, dy),
                P.fit_cc(nb, 0, thrust, 0, delta, dx, dy))
    if method == "sharp":
        return (P.fit_sharp(nb, toe, head, side, delta, dx, dy),
                P.fit_sharp(nb, 0, thrust, 0, delta, dx, dy))
    if method == "nnls_full":
        return (P.fit_nnls_rel(nb, toe, head, side, delta, dx, dy),
                thrust * P.basis_tables(nb, delta, dx, dy)[1])
    if method == "nnls_even":
        a = P.fit_even_directed(nb, toe, head, side, delta, dx, dy, "nnls")
        # thrust: same directed pattern as the head share (t_e = thrust c^2 / 2)
        return a, thrust * P.fit_two_stage(nb, 0.0, 1.0, 0.0, delta, dx, dy, absolute=True)
    if method == "convex_cc":
        return (P.fit_convex_cc(nb, toe, head, side, delta, dx, dy),
                P.fit_convex_cc(nb, 0.0, thrust, 0.0, delta, dx, dy))
    if method == "two_stage":
        return (P.fit_two_stage(nb, toe, head, side, delta, dx, dy),
                thrust * P.fit_two_stage(nb, 0.0, 1.0, 0.0, delta, dx, dy, absolute=True))
    if method == "linear":
        a, H = P.fit_linear(nb, toe, head, side, delta, dx, dy, table=table(nb, delta, dx, dy))
        return a, thrust * H
    raise ValueError(method)


def nb_of(method, nb):
    return 4 if method == "four" else nb
