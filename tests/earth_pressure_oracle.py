"""Outside reference shared by the cluster tests: inclined Rankine for a cohesionless backfill."""

import math


def inclined_rankine(beta_deg, phi_deg):
    """(K_a, K_p) of a cohesionless backfill inclined at beta, pressure K sigma'_v parallel
    to the ground: K = cos b (cos b -/+ sqrt(cos^2 b - cos^2 phi)) / (cos b +/- sqrt(...)),
    the classical inclined Rankine form (Craig, Soil Mechanics, from memory). Beyond
    beta = phi (no Rankine state) the rule of docs/methods.md, "Multi-cell failure
    clusters": no passive, active K' = 1, i.e. K_a = cos b.
    """
    cb, cp = math.cos(math.radians(beta_deg)), math.cos(math.radians(phi_deg))
    if cb < cp:
        return cb, 0.0
    r = math.sqrt(cb * cb - cp * cp)
    return cb * (cb - r) / (cb + r), cb * (cb + r) / (cb - r)
