# Reference timing for `deno task bench`: scipy.interpolate.RBFInterpolator (Debian python3-scipy)
# with a FIXED kernel, shape, trend degree and smoothing (no selection), fitted to the same points and
# evaluated on the same 500 x 500 grid of cell centres. Prints one JSON line.
# Arguments: points.csv cols rows xmin ymax cell smoothing [kernel epsilon degree]
import json, sys, time
import numpy as np
from scipy import __version__ as scipy_version
from scipy.interpolate import RBFInterpolator

points_file, cols, rows, xmin, ymax, cell, smoothing = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), float(sys.argv[4]), float(sys.argv[5]), float(sys.argv[6]), float(sys.argv[7])
kernel = sys.argv[8] if len(sys.argv) > 8 else "thin_plate_spline"
epsilon = float(sys.argv[9]) if len(sys.argv) > 9 else 1.0
degree = int(sys.argv[10]) if len(sys.argv) > 10 else 1
data = np.loadtxt(points_file, delimiter=",", skiprows=1)
xy, z = data[:, 0:2], data[:, 2]
t0 = time.perf_counter()
f = RBFInterpolator(xy, z, kernel=kernel, epsilon=epsilon, degree=degree, smoothing=smoothing)
t1 = time.perf_counter()
gx = xmin + (np.arange(cols) + 0.5) * cell
gy = ymax - (np.arange(rows) + 0.5) * cell
X, Y = np.meshgrid(gx, gy)
values = f(np.column_stack([X.ravel(), Y.ravel()]))
t2 = time.perf_counter()
print(json.dumps({"scipy": scipy_version, "fit": t1 - t0, "grid": t2 - t1, "total": t2 - t0,
                  "checksum": float(np.sum(values)), "centre": float(values[(rows // 2) * cols + cols // 2])}))
