"""Side-by-side benchmark: ringtrue against scipy's solve_ivp on RC ladders and RC meshes.

Each case is written by `ringtrue generate`, so both tools solve the same circuit. scipy solves the
node equations C v' = -G v + b (every capacitor 1 pF to ground, so C = c I) with BDF and Radau given
the constant sparse Jacobian, and LSODA given it in banded form. The error of a run is the largest
absolute difference at the watched node from the exact solution v(t) = 1 - Q exp(-L t / (R C)) Q^T 1
(the eigen-decomposition of the conductance matrix L, steady state 1 V everywhere), taken at 200
uniform times from 0 to the stop time. For every tool and method an rtol ladder in half decades gives
an error-vs-time curve; the time at the matched error is interpolated on it, log-log, between the two
rungs that bracket it (never extrapolated). This is a benchmark script, not part of the test suite.
"""

import argparse
import csv
import json
import math
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np
import scipy
import scipy.linalg
import scipy.sparse
from scipy.integrate import solve_ivp

R = 1000.0  # ohm, every resistor
CAP = 1e-12  # farad, every capacitor
POINTS = 200

CASES = {
    "ladder100": ("ladder", 100),
    "ladder1000": ("ladder", 1000),
    "ladder10000": ("ladder", 10000),
    "mesh30": ("mesh", 30),
    "mesh100": ("mesh", 100),
}

RINGTRUE_METHODS = ["backward-euler", "trapezoidal", "bdf2", "tr-bdf2"]
SCIPY_METHODS = ["BDF", "Radau", "LSODA"]


def half_decades(loose, tight):
    """rtol values 10^-k/2 from `loose` down to `tight` (both powers of ten)."""
    a, b = round(-2 * math.log10(loose)), round(-2 * math.log10(tight))
    return [10.0 ** (-k / 2) for k in range(a, b + 1)]


# ---------------------------------------------------------------- circuits and exact solutions


def generate(ringtrue, kind, size, folder):
    path = os.path.join(folder, f"{kind}{size}.yaml")
    flag = "--stages" if kind == "ladder" else "--size"
    if not os.path.exists(path):
        subprocess.run([ringtrue, "generate", kind, flag, str(size), "--out", path], check=True,
                       stdout=subprocess.DEVNULL)
    return path


def stop_time(path):
    """The stop time the generated file states (five slowest time constants)."""
    with open(path) as f:
        for line in f:
            s = line.strip()
            if s.startswith("stop:"):
                return float(s.split(":", 1)[1].split("#")[0].strip())
    raise SystemExit(f"{path}: no stop time found")


def laplacian(kind, size):
    """Conductance matrix in units of 1/R: node order n1..nN (ladder) or n<row>_<col> row-major (mesh).
    Returns (L as CSR, index of the driven node, index of the watched node, lower/upper bandwidth)."""
    if kind == "ladder":
        n = size
        main = np.full(n, 2.0)
        main[-1] = 1.0  # the far end has only its left neighbour
        off = -np.ones(n - 1)
        lap = scipy.sparse.diags([off, main, off], [-1, 0, 1], format="csr")
        return lap, 0, n - 1, 1
    k = size
    n = k * k
    rows, cols, vals = [], [], []
    deg = np.zeros(n)
    for r in range(k):
        for c in range(k):
            i = r * k + c
            for j in ([i + 1] if c + 1 < k else []) + ([i + k] if r + 1 < k else []):
                rows += [i, j]
                cols += [j, i]
                vals += [-1.0, -1.0]
                deg[i] += 1
                deg[j] += 1
    deg[0] += 1  # the drive resistor from the source to n1_1
    lap = scipy.sparse.csr_matrix((vals, (rows, cols)), shape=(n, n)) + scipy.sparse.diags(deg)
    return lap.tocsr(), 0, n - 1, k


def exact_modes(kind, size, lap, watched, cache):
    """Eigenvalues of L and, per mode, the weight of the watched node's response:
    v_w(t) = 1 - sum_k q_wk (q_k . 1) exp(-lambda_k t / (R C)). Cached as .npz."""
    path = os.path.join(cache, f"modes-{kind}{size}.npz")
    if os.path.exists(path):
        z = np.load(path)
        return z["lam"], z["weight"]
    if kind == "ladder":
        d = lap.diagonal()
        e = lap.diagonal(1)
        lam, q = scipy.linalg.eigh_tridiagonal(d, e)
    else:
        lam, q = scipy.linalg.eigh(lap.toarray(), driver="evd")
    weight = q[watched, :] * q.sum(axis=0)
    np.savez(path, lam=lam, weight=weight)
    return lam, weight


def exact_watched(lam, weight, times):
    tau = R * CAP
    return 1.0 - np.exp(-np.outer(times, lam) / tau) @ weight


# ---------------------------------------------------------------- the two tools


def run_ringtrue(ringtrue, path, method, rtol, tmp, cap):
    out_csv = os.path.join(tmp, "rt.csv")
    out_json = os.path.join(tmp, "rt.json")
    cmd = [ringtrue, "simulate", path, "--method", method, "--rtol", repr(rtol), "--scale", "circuit_peak",
           "--points", str(POINTS), "--csv", out_csv, "--json", out_json]
    t0 = time.perf_counter()
    p = subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, timeout=cap)
    wall = time.perf_counter() - t0
    if p.returncode != 0:
        raise RuntimeError(f"ringtrue failed ({p.returncode}): {p.stderr.decode()[-400:]}")
    with open(out_json) as f:
        stats = json.load(f)
    with open(out_csv) as f:
        rows = list(csv.reader(f))
    times = np.array([float(r[0]) for r in rows[1:]])
    values = np.array([float(r[1]) for r in rows[1:]])
    return (times, values, stats), wall


def scipy_problem(kind, size, lap, driven, band):
    n = lap.shape[0]
    a = (-lap / (R * CAP)).tocsr()
    b = np.zeros(n)
    b[driven] = 1.0 / (R * CAP)  # 1 V through R into the driven node

    def fun(_t, y):
        return a @ y + b

    # LSODA's banded Jacobian in packed form: packed[u + i - j, j] = J[i, j].
    lo = up = band
    dense_band = np.zeros((lo + up + 1, n))
    coo = a.tocoo()
    dense_band[up + coo.row - coo.col, coo.col] = coo.data

    def jac_banded(_t, _y):
        return dense_band

    return fun, a, jac_banded, lo, up


def run_scipy(problem, method, rtol, stop, times, n):
    fun, a, jac_banded, lo, up = problem
    kw = dict(method=method, t_eval=times, rtol=rtol, atol=rtol * 1.0)
    if method == "LSODA":
        kw.update(jac=jac_banded, lband=lo, uband=up)
    else:
        kw.update(jac=a)
    y0 = np.zeros(n)
    t0 = time.perf_counter()
    sol = solve_ivp(fun, (0.0, stop), y0, **kw)
    wall = time.perf_counter() - t0
    if not sol.success:
        raise RuntimeError(f"solve_ivp {method} failed: {sol.message}")
    return sol, wall


# ---------------------------------------------------------------- matched-error interpolation


def time_at_error(points, target):
    """points: [(rtol, error, seconds)] loose to tight. Log-log interpolation between consecutive rungs
    whose errors bracket the target; the cheapest such crossing. None if no pair brackets it."""
    best = None
    for (r1, e1, s1), (r2, e2, s2) in zip(points, points[1:]):
        if e1 <= 0 or e2 <= 0 or not (min(e1, e2) <= target <= max(e1, e2)):
            continue
        if e1 == e2:
            s = min(s1, s2)
        else:
            w = (math.log(target) - math.log(e1)) / (math.log(e2) - math.log(e1))
            s = math.exp(math.log(s1) + w * (math.log(s2) - math.log(s1)))
        best = s if best is None else min(best, s)
    return best


# ---------------------------------------------------------------- driver


def timed(repeats, long_run, f):
    """Median wall time of `repeats` runs (one run when the first takes longer than `long_run` s)."""
    first = f()
    walls = [first[1]]
    result = first
    if first[1] < long_run:
        for _ in range(repeats - 1):
            result = f()
            walls.append(result[1])
    return result, statistics.median(walls), len(walls)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--ringtrue", required=True, help="path of the ringtrue binary")
    ap.add_argument("--cases", default=",".join(CASES), help="comma-separated: " + ",".join(CASES))
    ap.add_argument("--out", default=os.path.join(os.path.dirname(__file__), "out"))
    ap.add_argument("--target", type=float, default=1e-4, help="matched maximum error, volts")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--long-run", type=float, default=5.0, help="runs longer than this are timed once")
    ap.add_argument("--cap", type=float, default=120.0, help="a rung slower than this ends its ladder")
    ap.add_argument("--stop-below", type=float, default=1e-5,
                    help="a ladder ends after its first rung with error below this")
    args = ap.parse_args()

    circuits = os.path.join(args.out, "circuits")
    cache = os.path.join(args.out, "cache")
    os.makedirs(circuits, exist_ok=True)
    os.makedirs(cache, exist_ok=True)
    rows = []
    summary = {}
    with tempfile.TemporaryDirectory() as tmp:
        for name in args.cases.split(","):
            kind, size = CASES[name]
            path = generate(args.ringtrue, kind, size, circuits)
            stop = stop_time(path)
            lap, driven, watched, band = laplacian(kind, size)
            n = lap.shape[0]
            t_ref = time.perf_counter()
            lam, weight = exact_modes(kind, size, lap, watched, cache)
            print(f"{name}: {n} unknowns, stop {stop:.6g} s, exact modes in "
                  f"{time.perf_counter() - t_ref:.1f} s", file=sys.stderr)
            times = np.linspace(0.0, stop, POINTS)
            exact = exact_watched(lam, weight, times)
            problem = scipy_problem(kind, size, lap, driven, band)
            curves = {}
            for tool, methods, ladder in (("ringtrue", RINGTRUE_METHODS, half_decades(1e-2, 1e-7)),
                                          ("scipy", SCIPY_METHODS, half_decades(1e-2, 1e-8))):
                for method in methods:
                    pts_wall, pts_engine = [], []
                    for rtol in ladder:
                        try:
                            if tool == "ringtrue":
                                ((t, v, stats), wall), med, reps = timed(
                                    args.repeats, args.long_run,
                                    lambda: run_ringtrue(args.ringtrue, path, method, rtol, tmp, args.cap))
                                if np.max(np.abs(t - times)) > 1e-9 * stop:
                                    raise RuntimeError("ringtrue's sample times differ from the 200 uniform times")
                                err = float(np.max(np.abs(v - exact)))
                                steps = f"steps {stats.get('steps')} lu {stats.get('factorizations')}"
                                engine = stats.get("cpu_seconds")
                            else:
                                (sol, wall), med, reps = timed(
                                    args.repeats, args.long_run,
                                    lambda: run_scipy(problem, method, rtol, stop, times, n))
                                err = float(np.max(np.abs(sol.y[watched] - exact)))
                                steps, engine = f"nfev {sol.nfev} nlu {sol.nlu}", None
                        except (RuntimeError, subprocess.TimeoutExpired) as e:
                            print(f"  {tool} {method} rtol {rtol:.1e}: {e}", file=sys.stderr)
                            break
                        rows.append(dict(case=name, unknowns=n, tool=tool, method=method, rtol=rtol,
                                         max_error=err, wall_s=med, engine_s=engine, repeats=reps,
                                         work=steps))
                        pts_wall.append((rtol, err, med))
                        if engine is not None:
                            pts_engine.append((rtol, err, engine))
                        print(f"  {tool:8s} {method:14s} rtol {rtol:.1e}: error {err:.2e}, "
                              f"{med:.4f} s", file=sys.stderr)
                        if err < args.stop_below or med > args.cap:
                            break
                    curves[(tool, method)] = (time_at_error(pts_wall, args.target),
                                              time_at_error(pts_engine, args.target) if pts_engine else None)
            summary[name] = (n, curves)
    write_outputs(args, rows, summary)


def write_outputs(args, rows, summary):
    with open(os.path.join(args.out, "runs.csv"), "w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=list(rows[0].keys()))
        w.writeheader()
        w.writerows(rows)
    fmt = lambda s: "—" if s is None else f"{s:.4g}"
    lines = [f"# ringtrue vs scipy solve_ivp at matched maximum error {args.target:g} V", ""]
    lines.append("Seconds to reach the matched error, interpolated log-log on each method's rtol ladder "
                 "(— : the ladder does not bracket it). ringtrue: process wall time (parse, solve, "
                 "write the CSV) and, in brackets, engine time; scipy: wall time of `solve_ivp` alone.")
    lines.append("")
    head = "| case | unknowns | " + " | ".join(f"rt {m}" for m in RINGTRUE_METHODS) + " | " + \
        " | ".join(f"scipy {m}" for m in SCIPY_METHODS) + " | ratio (wall) | ratio (engine) |"
    lines += [head, "|" + " --- |" * (head.count("|") - 1)]
    for name, (n, curves) in summary.items():
        cells = []
        for m in RINGTRUE_METHODS:
            wall, eng = curves.get(("ringtrue", m), (None, None))
            cells.append(f"{fmt(wall)} ({fmt(eng)})")
        for m in SCIPY_METHODS:
            cells.append(fmt(curves.get(("scipy", m), (None, None))[0]))
        rt_wall = [curves[("ringtrue", m)][0] for m in RINGTRUE_METHODS if curves.get(("ringtrue", m), (None,))[0]]
        rt_eng = [curves[("ringtrue", m)][1] for m in RINGTRUE_METHODS if curves.get(("ringtrue", m), (None, None))[1]]
        sp = [curves[("scipy", m)][0] for m in SCIPY_METHODS if curves.get(("scipy", m), (None,))[0]]
        ratio_w = f"{min(sp) / min(rt_wall):.2f}" if sp and rt_wall else "—"
        ratio_e = f"{min(sp) / min(rt_eng):.2f}" if sp and rt_eng else "—"
        lines.append(f"| {name} | {n} | " + " | ".join(cells) + f" | {ratio_w} | {ratio_e} |")
    lines += ["", "Ratio = scipy's fastest method / ringtrue's fastest method (above 1: ringtrue is faster).", ""]
    rt_version = subprocess.run([args.ringtrue, "--version"], capture_output=True, text=True).stdout.strip()
    lines += [f"- machine: {platform.machine()}, {os.cpu_count()} logical cores, {platform.platform()}",
              f"- {rt_version}; Python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}",
              f"- BLAS threads: OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', 'unset')}",
              f"- ringtrue: `simulate --scale circuit_peak --points {POINTS}`, rtol 1e-2..1e-7 in half decades; "
              "scipy: atol = rtol x 1 V, rtol 1e-2..1e-8 in half decades, `t_eval` at the same 200 times",
              f"- median of {args.repeats} runs (one run when the first takes more than {args.long_run:g} s); "
              f"a ladder ends after its first rung with error below {args.stop_below:g} V",
              f"- every run: `runs.csv`", ""]
    with open(os.path.join(args.out, "table.md"), "w") as f:
        f.write("\n".join(lines))
    print("\n".join(lines))


if __name__ == "__main__":
    main()
