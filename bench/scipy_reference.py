# Reference side of `deno task bench`: numpy and scipy (Debian python3-scipy) doing the same work
# as rbfield, timed here with time.perf_counter so that process start-up, imports and data loading
# are never counted. bench/reference.ts starts this script once per run and talks to it in JSON
# lines on stdin/stdout (one request, one answer):
#   {"op": "info"}                                 versions and the BLAS library numpy/scipy use
#   {"op": "load", "id": ..., "kind": ..., ...}    prepare a case (untimed); kinds below
#   {"op": "run", "id": ...}                       one timed run: {"seconds": s, "summary": {...}}
#   {"op": "result", "id": ..., "path": ...}       write the last run's array (float64, little-endian)
#   {"op": "drop", "id": ...}                      forget a case
# Inputs arrive as raw little-endian float64 files written by the benchmark (seeded, invented data).
import ctypes
import io
import json
import platform
import sys
import time
import contextlib

import numpy as np
import scipy
import scipy.linalg as sla
from scipy.interpolate import RBFInterpolator


def f64(path, shape=None):
    a = np.fromfile(path, dtype="<f8")
    return a if shape is None else a.reshape(shape)


def blas_info():
    """Which BLAS numpy and scipy call, and which kernel (core type) it picked at run time."""
    info = {}
    try:
        import threadpoolctl  # not in Debian's python3-scipy dependencies; used when present

        info["via"] = "threadpoolctl"
        info["libraries"] = [
            {k: d.get(k) for k in ("internal_api", "version", "architecture", "num_threads", "filepath")}
            for d in threadpoolctl.threadpool_info()
            if d.get("user_api") == "blas"
        ]
        return info
    except ImportError:
        pass
    info["via"] = "numpy.show_config() and the loaded library (threadpoolctl not installed)"
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        np.show_config()
    text = buf.getvalue()
    # numpy 1.x prints sections; keep the libraries named under blas_opt_info / lapack_opt_info.
    build = []
    section = None
    for line in text.splitlines():
        if line and not line.startswith(" "):
            section = line.rstrip(":").strip()
        elif section in ("blas_opt_info", "lapack_opt_info") and "libraries" in line:
            build.append(f"{section}: {line.strip()}")
    info["numpy_build"] = build or [line for line in text.splitlines() if "blas" in line.lower()][:4]
    # The library actually mapped into this process, and OpenBLAS's own report of its kernel.
    libs = []
    seen = set()
    with open("/proc/self/maps") as maps:
        for line in maps:
            path = line.split()[-1]
            if ("blas" in path or "lapack" in path) and path.startswith("/") and path not in seen:
                seen.add(path)
    for path in sorted(seen):
        entry = {"filepath": path}
        try:
            lib = ctypes.CDLL(path)
            corename = lib.openblas_get_corename
            corename.restype = ctypes.c_char_p
            config = lib.openblas_get_config
            config.restype = ctypes.c_char_p
            entry.update(
                internal_api="openblas",
                architecture=corename().decode(),
                config=config().decode(),
                num_threads=int(lib.openblas_get_num_threads()),
            )
        except (OSError, AttributeError):
            continue
        libs.append(entry)
    # One entry per distinct library configuration is enough.
    unique = {}
    for entry in libs:
        unique.setdefault((entry.get("config"), entry.get("architecture")), entry)
    info["libraries"] = list(unique.values())
    return info


class Case:
    """A prepared reference case: run() does the timed work and returns (summary, array or None)."""

    last = None


def grid_points(spec):
    cols, rows, xmin, ymax, cell = spec["cols"], spec["rows"], spec["xmin"], spec["ymax"], spec["cell"]
    gx = xmin + (np.arange(cols) + 0.5) * cell
    gy = ymax - (np.arange(rows) + 0.5) * cell
    X, Y = np.meshgrid(gx, gy)
    return np.column_stack([X.ravel(), Y.ravel()]), cols, rows


def rbf_case(req):
    """scipy's RBFInterpolator with a fixed kernel, shape, degree and smoothing (no selection)."""
    n = req["n"]
    xyz = f64(req["points"], (3, n))
    xy, z = np.column_stack([xyz[0], xyz[1]]), xyz[2]
    opts = dict(kernel=req["kernel"], epsilon=req["epsilon"], degree=req["degree"], smoothing=req["smoothing"])
    pts, cols, rows = grid_points(req["grid"]) if "grid" in req else (None, 0, 0)
    stage = req["stage"]  # "fit+grid", "fit" or "grid"
    case = Case()
    fixed = RBFInterpolator(xy, z, **opts) if stage == "grid" else None

    def summary(values):
        return {"centre": float(values[(rows // 2) * cols + cols // 2]), "checksum": float(np.sum(values))}

    def run():
        if stage == "fit":
            f = RBFInterpolator(xy, z, **opts)
            return {"coefficients": float(np.sum(f._coeffs))}, None
        if stage == "grid":
            values = fixed(pts)
            return summary(values), values
        t0 = time.perf_counter()
        f = RBFInterpolator(xy, z, **opts)
        t1 = time.perf_counter()
        values = f(pts)
        t2 = time.perf_counter()
        out = summary(values)
        out.update(fit=t1 - t0, grid=t2 - t1)
        return out, values

    case.run = run
    return case


def eigvalsh_case(req):
    """numpy.linalg.eigvalsh (LAPACK dsyevd: Householder tridiagonal reduction, then the eigenvalues)."""
    n = req["n"]
    a = f64(req["matrix"], (n, n))
    case = Case()

    def run():
        mu = np.linalg.eigvalsh(a)
        return {"min": float(mu[0]), "max": float(mu[-1])}, mu

    case.run = run
    return case


def thin_plate(rho):
    """rbfield's thin-plate spline in rho = r^2: 0.5 rho log rho = r^2 log r, 0 at r = 0."""
    return 0.5 * rho * np.log(np.where(rho > 0, rho, 1.0))


def loo_case(req):
    """
    diag(G), G = Q2 (B + lambda I)^-1 Q2^T with B = Q2^T K Q2, by the same algorithm as rbfield's
    influenceComplementDiagonalCholesky, in numpy/LAPACK: kernel matrix, projection by the trend's
    Householder reflectors in compact WY form Q = I - V S V^T (O(n^2 m)), Cholesky (dpotrf),
    triangular inverse (dtrtri), column norms and the rank-m corrections. The trend QR is prepared
    untimed, as rbfield's fit state holds its reflectors.
    """
    n, lam = req["n"], req["lambda"]
    uv = f64(req["points"], (2, n))
    u, v = uv[0], uv[1]
    p = np.column_stack([np.ones(n), u, v])  # linear trend: 1, u, v
    m = p.shape[1]
    (qr, tau), _ = sla.qr(p, mode="raw")
    vm = np.tril(qr[:, :m], -1)
    vm[np.arange(m), np.arange(m)] = 1.0
    s = np.zeros((m, m))
    for j in range(m):
        s[:j, j] = -tau[j] * (s[:j, :j] @ (vm[:, :j].T @ vm[:, j]))
        s[j, j] = tau[j]
    v2 = vm[m:]
    case = Case()

    def run():
        k = thin_plate((u[:, None] - u[None, :]) ** 2 + (v[:, None] - v[None, :]) ** 2)
        a = k @ vm  # K V, n x m
        c = (vm.T @ a) @ s  # V^T K V S
        a2 = a[m:]
        b = k[m:, m:] - a2 @ s @ v2.T - v2 @ s.T @ a2.T + v2 @ s.T @ c @ v2.T
        b[np.diag_indices_from(b)] += lam
        low, _ = sla.cho_factor(b, lower=True, overwrite_a=True, check_finite=False)
        x, info = sla.lapack.dtrtri(low, lower=1, overwrite_c=1)
        if info != 0:
            raise RuntimeError(f"dtrtri info {info}")
        x = np.tril(x)
        col_norm = np.einsum("ij,ij->j", x, x)
        um = x @ (v2 @ s.T)  # U = L^-1 V2 S^T, nb x m
        zm = x.T @ um  # L^-T U
        utu = um.T @ um
        gii = np.einsum("ia,ab,ib->i", vm, utu, vm)
        gii[m:] += col_norm - 2 * np.einsum("ja,ja->j", zm, vm[m:])
        return {"sum": float(np.sum(gii))}, gii

    case.run = run
    return case


def evaluate_case(req):
    """sum_i w_i phi(|u - u_i|^2) + trend, in numpy, chunked over the evaluation points."""
    n, npts = req["n"], req["points"]
    cen = f64(req["centres"], (3, n))  # scaled u, v and weights
    cu, cv, w = cen[0], cen[1], cen[2]
    xy = f64(req["at"], (2, npts))
    c = np.asarray(req["trend"], dtype=float)
    sc = req["scaling"]
    chunk = max(1, int(2**22 // max(n, 1)))  # about 32 MiB of distances per chunk
    case = Case()

    def run():
        u = (xy[0] - sc["cx"]) / sc["s"]
        v = (xy[1] - sc["cy"]) / sc["s"]
        f = np.empty(npts)
        for i in range(0, npts, chunk):
            du = u[i : i + chunk, None] - cu[None, :]
            dv = v[i : i + chunk, None] - cv[None, :]
            f[i : i + chunk] = thin_plate(du * du + dv * dv) @ w
        terms = [np.ones(npts), u, v, u * u, u * v, v * v][: len(c)]
        for cj, t in zip(c, terms):
            f += cj * t
        values = sc["zc"] + sc["zs"] * f
        return {"checksum": float(np.sum(values))}, values

    case.run = run
    return case


KINDS = {"rbf": rbf_case, "eigvalsh": eigvalsh_case, "loo": loo_case, "evaluate": evaluate_case}


def main():
    cases = {}
    out = sys.stdout
    for line in sys.stdin:
        if not line.strip():
            continue
        req = json.loads(line)
        try:
            op = req["op"]
            if op == "info":
                reply = {"python": platform.python_version(), "numpy": np.__version__, "scipy": scipy.__version__, "blas": blas_info()}
            elif op == "load":
                cases[req["id"]] = KINDS[req["kind"]](req)
                reply = {}
            elif op == "run":
                case = cases[req["id"]]
                t0 = time.perf_counter()
                summary, array = case.run()
                seconds = time.perf_counter() - t0
                case.last = array  # kept, so the work cannot be skipped and can be compared
                reply = {"seconds": seconds, "summary": summary}
            elif op == "result":
                np.ascontiguousarray(cases[req["id"]].last, dtype="<f8").tofile(req["path"])
                reply = {}
            elif op == "drop":
                cases.pop(req["id"], None)
                reply = {}
            else:
                raise ValueError(f"unknown op {op!r}")
            reply["ok"] = True
        except Exception as e:  # reported to the benchmark, which prints it and goes on
            reply = {"ok": False, "error": f"{type(e).__name__}: {e}"}
        out.write(json.dumps(reply) + "\n")
        out.flush()


if __name__ == "__main__":
    main()
