#!/usr/bin/python3
"""Reference values for rbfield from scipy.interpolate.RBFInterpolator.

Run with Debian's python3 (python3-scipy), from the repository root:

    /usr/bin/python3 test/reference/scipy_rbf.py

Writes test/reference/fixtures/scipy-<dataset>.json. The data are made here, from Franke's (1982)
test function with seeded Gaussian noise (numpy.random.default_rng), never by rbfield.

Parametrisation (scipy 1.10 docs and source, scipy/interpolate/_rbfinterp.py): RBFInterpolator
solves (K + smoothing*I) a + P b = d, P^T a = 0 with K_ij = phi(epsilon * |y_i - y_j|) and
  gaussian exp(-r^2), multiquadric -sqrt(1 + r^2), inverse_multiquadric 1/sqrt(1 + r^2),
  thin_plate_spline r^2 log r (epsilon left at its default 1, so r is in map units);
`degree` is the total degree of the polynomial P (-1 for none). That is rbfield's convention with
shape = epsilon, smoothing = lambda and trend none/constant/linear/quadratic = degree -1/0/1/2.

For every case the script also solves the same system a second way (numpy: null-space
reduction with eigh, no scipy) and records the largest difference between the two, relative to
the data range, as `selfCheck`: a measure of how precise the reference itself is.
"""
import json
import os
import sys

import numpy as np
import scipy
from scipy.interpolate import RBFInterpolator
from scipy.spatial import cKDTree

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "fixtures")

SCIPY_KERNEL = {
    "thin-plate": "thin_plate_spline",
    "gaussian": "gaussian",
    "multiquadric": "multiquadric",
    "inverse-multiquadric": "inverse_multiquadric",
}
TREND_DEGREE = {"none": -1, "constant": 0, "linear": 1, "quadratic": 2}


def franke(x, y):
    """Franke's test function (R. Franke, 1982, 'Scattered data interpolation: tests of some
    methods', Math. Comp. 38(157), 181-200), on the unit square."""
    return (0.75 * np.exp(-((9 * x - 2) ** 2 + (9 * y - 2) ** 2) / 4)
            + 0.75 * np.exp(-((9 * x + 1) ** 2) / 49 - (9 * y + 1) / 10)
            + 0.5 * np.exp(-((9 * x - 7) ** 2 + (9 * y - 3) ** 2) / 4)
            - 0.2 * np.exp(-(9 * x - 4) ** 2 - (9 * y - 7) ** 2))


def median_spacing(x, y):
    pts = np.column_stack([x, y])
    d, _ = cKDTree(pts).query(pts, k=2)
    return float(np.median(d[:, 1]))


def phi(kernel, eps, r):
    if kernel == "thin-plate":
        with np.errstate(divide="ignore", invalid="ignore"):
            v = r * r * np.log(r)
        return np.where(r > 0, v, 0.0)
    er2 = (eps * r) ** 2
    if kernel == "gaussian":
        return np.exp(-er2)
    if kernel == "multiquadric":
        return -np.sqrt(1 + er2)
    if kernel == "inverse-multiquadric":
        return 1 / np.sqrt(1 + er2)
    raise ValueError(kernel)


def monomials(u, v, degree):
    cols = []
    for d in range(degree + 1):
        for j in range(d + 1):
            cols.append(u ** (d - j) * v ** j)
    return np.column_stack(cols) if cols else np.zeros((len(u), 0))


def nullspace_solve(x, y, z, kernel, eps, degree, lam, xt, yt):
    """Independent solve: centre the coordinates, P = QR, B = Q2' K Q2, w = Q2 (B + lam I)^-1 Q2' z."""
    cx, cy = x.mean(), y.mean()
    s = max(np.ptp(x), np.ptp(y))
    u, v = (x - cx) / s, (y - cy) / s
    r = np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])
    k = phi(kernel, eps, r)
    p = monomials(u, v, degree)
    m = p.shape[1]
    q, _ = np.linalg.qr(p, mode="complete") if m else (np.eye(len(x)), None)
    q2 = q[:, m:]
    b = q2.T @ k @ q2
    mu, vec = np.linalg.eigh(b)
    h = vec.T @ (q2.T @ z)
    w = q2 @ (vec @ (h / (mu + lam)))
    resid = z - k @ w - lam * w  # = P c
    c = np.linalg.lstsq(p, resid, rcond=None)[0] if m else np.zeros(0)
    rt = np.hypot(xt[:, None] - x[None, :], yt[:, None] - y[None, :])
    est = phi(kernel, eps, rt) @ w + (monomials((xt - cx) / s, (yt - cy) / s, degree) @ c if m else 0)
    edf = len(x) - float(np.sum(lam / (mu + lam))) if lam > 0 else float(len(x))
    cond = float((mu.max() + lam) / (mu.min() + lam))
    return est, edf, cond


def make_dataset(name, seed, n, x0, y0, size, zbase, zscale, sigma, n_test):
    rng = np.random.default_rng(seed)
    u = rng.uniform(0, 1, n)
    v = rng.uniform(0, 1, n)
    z = zbase + zscale * franke(u, v) + rng.normal(0, sigma, n)
    x = x0 + size * u
    y = y0 + size * v
    # Test points inside the data's bounding box, 5 % margin.
    ut = rng.uniform(0.05, 0.95, n_test)
    vt = rng.uniform(0.05, 0.95, n_test)
    if size != 1:  # projected-size metres: keep centimetres, as a survey file would
        x, y = np.round(x, 2), np.round(y, 2)
        xt, yt = np.round(x0 + size * ut, 2), np.round(y0 + size * vt, 2)
        z = np.round(z, 3)
    else:
        xt, yt = ut, vt
    return dict(name=name, seed=seed, x=x, y=y, z=z, xt=xt, yt=yt,
                recipe=(f"numpy.random.default_rng({seed}); u, v ~ U(0,1) ({n} each); "
                        f"z = {zbase} + {zscale}*franke(u, v) + N(0, {sigma}^2); "
                        f"x = {x0} + {size}*u, y = {y0} + {size}*v; test points "
                        f"u, v ~ U(0.05, 0.95) ({n_test} each) drawn next"
                        + ("; x, y, test points rounded to 0.01, z to 0.001" if size != 1 else "")))


def run_dataset(ds, cases):
    x, y, z, xt, yt = ds["x"], ds["y"], ds["z"], ds["xt"], ds["yt"]
    h = median_spacing(x, y)
    zrange = float(np.ptp(z))
    out_cases = []
    for kernel, eps_times_h, trend, lam in cases:
        eps = None if kernel == "thin-plate" else eps_times_h / h
        degree = TREND_DEGREE[trend]
        interp = RBFInterpolator(np.column_stack([x, y]), z, kernel=SCIPY_KERNEL[kernel],
                                 epsilon=1.0 if eps is None else eps, degree=degree, smoothing=lam)
        est = interp(np.column_stack([xt, yt]))
        chk, edf, cond = nullspace_solve(x, y, z, kernel, 1.0 if eps is None else eps, degree, lam, xt, yt)
        self_check = float(np.max(np.abs(est - chk)) / zrange)
        label = f"{kernel} eps={'-' if eps is None else f'{eps:.6g}'} trend={trend} smoothing={lam:g}"
        print(f"  {ds['name']:>12} {label:<64} edf={edf:8.3f} cond={cond:9.2e} selfCheck={self_check:.1e}")
        extra = {}
        if degree < 0:
            # No polynomial: scipy's surface tends to 0 away from the data. Also record the surface
            # of the same scipy call on the mean-removed values, plus the mean (a fixed constant
            # trend equal to the sample mean), and the trace of that smoother, A + (I - A) 11'/n.
            zm = float(np.mean(z))
            centred = RBFInterpolator(np.column_stack([x, y]), z - zm, kernel=SCIPY_KERNEL[kernel],
                                      epsilon=eps, degree=-1, smoothing=lam)
            extra["estimatesMeanRemoved"] = (centred(np.column_stack([xt, yt])) + zm).tolist()
            a1 = centred(np.column_stack([x, y])) - RBFInterpolator(
                np.column_stack([x, y]), z - zm - 1.0, kernel=SCIPY_KERNEL[kernel],
                epsilon=eps, degree=-1, smoothing=lam)(np.column_stack([x, y]))  # = A 1
            extra["edfMeanRemoved"] = edf + float(len(x) - np.sum(a1)) / len(x)
            print(f"  {'':>12} mean removed: max change {np.max(np.abs(np.array(extra['estimatesMeanRemoved']) - est)) / zrange:.2e} of range,"
                  f" edf of that smoother {extra['edfMeanRemoved']:.3f}")
        out_cases.append({
            "label": label,
            "kernel": kernel,
            "scipyKernel": SCIPY_KERNEL[kernel],
            "shape": eps,
            "trend": trend,
            "degree": degree,
            "smoothing": lam,
            "estimates": est.tolist(),
            "edf": edf,
            "condition": cond,
            "selfCheck": self_check,
            **extra,
        })
    return {
        "source": f"scipy {scipy.__version__} scipy.interpolate.RBFInterpolator (numpy {np.__version__})",
        "scipyVersion": scipy.__version__,
        "numpyVersion": np.__version__,
        "generator": "test/reference/scipy_rbf.py",
        "dataset": ds["name"],
        "recipe": ds["recipe"],
        "medianSpacing": h,
        "points": {"x": ds["x"].tolist(), "y": ds["y"].tolist(), "z": ds["z"].tolist()},
        "test": {"x": xt.tolist(), "y": yt.tolist()},
        "cases": out_cases,
    }


def main():
    os.makedirs(OUT, exist_ok=True)
    unit = make_dataset("unit-square", 19820101, 100, 0.0, 0.0, 1.0, 0.0, 1.0, 0.05, 50)
    proj = make_dataset("projected", 28355, 120, 500000.0, 6000000.0, 20000.0, 250.0, 100.0, 3.0, 50)
    # (kernel, epsilon * median spacing, trend, smoothing lambda in map units)
    unit_cases = [
        ("thin-plate", None, "linear", 0.0),
        ("thin-plate", None, "linear", 1e-3),
        ("thin-plate", None, "quadratic", 1e-2),
        ("gaussian", 0.4, "none", 0.0),
        ("gaussian", 0.4, "none", 1e-2),
        ("gaussian", 0.25, "linear", 1e-4),
        ("gaussian", 0.4, "constant", 1e-2),
        ("multiquadric", 0.3, "constant", 0.0),
        ("multiquadric", 0.2, "linear", 1e-3),
        ("multiquadric", 0.5, "quadratic", 1e-1),
        ("inverse-multiquadric", 0.5, "none", 0.0),
        ("inverse-multiquadric", 0.3, "constant", 1e-3),
        ("inverse-multiquadric", 0.5, "quadratic", 1e-2),
        # wider kernels: condition near 1e7-1e9, still far below rbfield's 1e12 limit
        ("inverse-multiquadric", 0.15, "none", 0.0),
        ("multiquadric", 0.15, "constant", 0.0),
    ]
    proj_cases = [
        ("thin-plate", None, "linear", 0.0),
        ("thin-plate", None, "linear", 2e6),
        ("thin-plate", None, "quadratic", 5e7),
        ("gaussian", 0.4, "none", 0.0),
        ("gaussian", 0.3, "linear", 1e-2),
        ("multiquadric", 0.3, "constant", 0.0),
        ("multiquadric", 0.3, "linear", 1.0),
        ("inverse-multiquadric", 0.5, "none", 0.0),
        ("inverse-multiquadric", 0.3, "quadratic", 1e-1),
        ("gaussian", 0.2, "constant", 0.0),
    ]
    for ds, cases in ((unit, unit_cases), (proj, proj_cases)):
        doc = run_dataset(ds, cases)
        path = os.path.join(OUT, f"scipy-{ds['name']}.json")
        with open(path, "w") as f:
            json.dump(doc, f, indent=1)
            f.write("\n")
        print(f"wrote {os.path.relpath(path)} ({os.path.getsize(path)} bytes)")


if __name__ == "__main__":
    sys.exit(main())
