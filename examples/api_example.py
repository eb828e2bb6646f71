"""Short example of the Python API on a generated surface (no files needed).

Run: python examples/api_example.py
"""

import numpy as np

from slopescreen.routing import specific_catchment_area
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
