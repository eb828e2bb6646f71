"""Short example of the Python API on a generated surface (no files needed).

Run: python examples/api_example.py

It conditions and routes a small cone, checks the specific catchment area against the
exact value, computes a steady-state factor of safety and draws it as a screening map
(PNG) over a hillshade, as the report does.
"""

import numpy as np

from slopescreen.hydrology import steady_wetness
from slopescreen.report.maps import MapFrame, hillshade, map_figure, png_bytes
from slopescreen.routing import specific_catchment_area
from slopescreen.stability import factor_of_safety
from slopescreen.terrain import fill_depressions, slope_aspect

# An outward cone (a hill) 100 m in radius on 2 m cells, with a small pit dug into it.
cell = 2.0
y, x = np.mgrid[-50:51, -50:51] * cell
r = np.hypot(x, y)
z = (120.0 - 0.6 * r).astype(np.float32)
z[70, 70] -= 3.0                      # a closed depression: filling removes it

filled = fill_depressions(z)
slope_deg, aspect_deg = slope_aspect(z, cell, cell)   # stability uses the original slope
a = specific_catchment_area(filled, cell, cell, method="dinf")

# On a cone the exact specific catchment area is r / 2 (sector area over arc length);
# a cell's own area is included, so compare at its downslope edge, r + cell / 2.
ring = (r > 30) & (r < 60)
ratio = a[ring] / ((r[ring] + cell / 2) / 2.0)
print(f"pit raised by {filled[70, 70] - z[70, 70]:.2f} m")
print(f"slope on the flank: {np.median(slope_deg[ring]):.2f} deg (exact {np.degrees(np.arctan(0.6)):.2f})")
print(f"D-infinity a / exact on the flank: median {np.median(ratio):.3f}, "
      f"5-95% {np.percentile(ratio, 5):.3f}-{np.percentile(ratio, 95):.3f}")

# Steady wetness under 20 mm/day and the infinite-slope factor of safety (median soil values).
wet = steady_wetness(a, slope_deg, recharge_mm_per_day=20.0, conductivity_m_per_day=1.5, depth_m=1.2)
fs = factor_of_safety(slope_deg, 1.2, wet, cohesion_kpa=1.0, root_cohesion_kpa=2.0,
                      friction_deg=35.0, unit_weight_kn_m3=18.0)
print(f"share of the hill below FS 1: {np.mean(fs[np.isfinite(fs)] < 1.0):.1%}")

# The screening map: FS bands over a hillshade, legend, scale bar, north arrow, caution.
half = 50.5 * cell
fig = map_figure(fs, "factor_of_safety", frame=MapFrame((-half, half, -half, half)),
                 shade=hillshade(z, cell, cell), title="Factor of safety: example cone",
                 rain_text="steady recharge 20 mm/day")
with open("api_example_fs.png", "wb") as f:
    f.write(png_bytes(fig))
print("map written to api_example_fs.png")
