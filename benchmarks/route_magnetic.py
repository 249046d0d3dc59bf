"""Benchmark: 3-D B of a discretised route on a 100,000-point grid.

Scenario (invented): two 3-phase circuits with twin bundles (12 subconductors)
over five spans of 320-380 m with 8-10 m sag and one 20 deg angle, cut to about
2,400 straight segments; a 500 x 200 grid at 1 m above ground.  The same segments
and points are given to magpylib (``magpylib.core.current_polyline_Hfield``,
pairwise) and to the plain chunked-numpy version of the same formula; both run
on a subset of the points and are scaled linearly (stated in the output).

Run from the repository root::

    .venv/bin/python benchmarks/route_magnetic.py [--quick]

Timing notes: wall-clock best of several repeats (the machine is shared and
loses a core for seconds at a time), numba thread count set with
``numba.set_num_threads``; a short pause before each timed kernel call lets
OpenBLAS worker threads (spinning after any BLAS call) go to sleep, and
``OPENBLAS_THREAD_TIMEOUT`` is set low before numpy is imported.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_THREAD_TIMEOUT", "4")  # 2^4 cycles of spin after a BLAS call

import argparse  # noqa: E402
import math  # noqa: E402
import resource  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import numba  # noqa: E402

from models.geometry import Bundle  # noqa: E402
from models.route.discretise import discretise_route  # noqa: E402
from models.route.magnetic3d import (  # noqa: E402
    flux_density_segments,
    flux_density_segments_numpy,
    warm_up,
)
from models.route.types import Route, RouteCircuit, RouteConductor, Support  # noqa: E402
from models.units import MU0_H_PER_M  # noqa: E402


def scenario() -> Route:
    """Invented double-circuit route: 6 supports, 5 spans, a 20 deg angle at the third support."""
    lengths = [340.0, 380.0, 320.0, 360.0, 350.0]
    heading = [0.0, 0.0, 20.0, 20.0, 20.0]
    xy = [(0.0, 0.0)]
    for L, h in zip(lengths, heading):
        x, y = xy[-1]
        xy.append((x + L * math.cos(math.radians(h)), y + L * math.sin(math.radians(h))))
    supports = tuple(Support(f"T{i + 1}", x, y, ground_elevation_m=2.0 * (i % 3)) for i, (x, y) in enumerate(xy))
    bundle = Bundle(0.0286, 2, 0.4)
    left = RouteCircuit("west", "overhead", 400.0, 1600.0,
                        (RouteConductor("L1", -9.0, 24.0, 9.0), RouteConductor("L2", -10.0, 32.0, 9.5),
                         RouteConductor("L3", -9.0, 40.0, 10.0)), bundle)
    right = RouteCircuit("east", "overhead", 400.0, 1400.0,
                         (RouteConductor("L3", 9.0, 24.0, 9.0), RouteConductor("L2", 10.0, 32.0, 9.5),
                          RouteConductor("L1", 9.0, 40.0, 10.0)), bundle)
    return Route(supports, (left, right))


def grid(route: Route, n_points: int) -> np.ndarray:
    xs = np.array([s.x_m for s in route.supports])
    ys = np.array([s.y_m for s in route.supports])
    nx = int(round(math.sqrt(n_points * 2.5)))
    ny = n_points // nx
    gx, gy = np.meshgrid(np.linspace(xs.min() - 20, xs.max() + 20, nx), np.linspace(ys.min() - 80, ys.max() + 80, ny))
    pts = np.column_stack([gx.ravel(), gy.ravel(), np.full(gx.size, 1.0)])
    if len(pts) < n_points:
        pts = np.vstack([pts, pts[: n_points - len(pts)] + [0.37, 0.11, 0.0]])
    return pts[:n_points]


def best_time(fn, repeats: int, pause_s: float = 0.25, cpu: bool = False):
    """Best wall time of ``repeats`` calls (and, with ``cpu``, the best process CPU time too)."""
    best, best_cpu = math.inf, math.inf
    for _ in range(repeats):
        time.sleep(pause_s)
        c0 = time.process_time()
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
        best_cpu = min(best_cpu, time.process_time() - c0)
    return (best, best_cpu) if cpu else best


def magpylib_b(points: np.ndarray, start: np.ndarray, end: np.ndarray, current: np.ndarray,
               chunk: int = 100) -> np.ndarray:
    """B phasors from magpylib's segment field (pairwise arrays, chunks of points), real and imaginary parts."""
    import magpylib

    out = np.zeros((len(points), 3), dtype=complex)
    m = len(start)
    for lo in range(0, len(points), chunk):
        p = points[lo:lo + chunk]
        obs = np.repeat(p, m, axis=0)
        s = np.tile(start, (len(p), 1))
        e = np.tile(end, (len(p), 1))
        for part, scale in ((current.real, 1.0), (current.imag, 1j)):
            h = magpylib.core.current_polyline_Hfield(obs, s, e, np.tile(part, len(p)))
            out[lo:lo + chunk] += scale * MU0_H_PER_M * h.reshape(len(p), m, 3).sum(axis=1)
    return out


def peak_memory(n_points: int) -> tuple[float, float, float, float]:
    """Peak RSS [MiB] of a fresh process: after start-up, with the points, after evaluating B on them."""
    code = f"""
import resource, time, sys
sys.path.insert(0, {str(ROOT)!r})
import numpy as np
from benchmarks.route_magnetic import scenario, grid
from models.route.discretise import discretise_route
from models.route.magnetic3d import flux_density_segments, warm_up
warm_up()
route = scenario()
segs = discretise_route(route, tolerance_m=0.005)
rss = lambda: resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
r0 = rss()
pts = grid(route, {n_points})
r1 = rss()
t0 = time.perf_counter()
b = flux_density_segments(pts, segs)
print(r0, r1, rss(), time.perf_counter() - t0)
"""
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT)
    return tuple(float(v) for v in out.stdout.split())


def first_call_latency() -> tuple[float, float, float]:
    """(cold, warm, import) seconds for import + warm_up() in fresh processes with a private cache dir."""
    code = ("import time; t0 = time.perf_counter(); import models.route.magnetic3d as m; t1 = time.perf_counter();"
            " m.warm_up(); t2 = time.perf_counter(); print(t2 - t0, t1 - t0)")
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache, PYTHONPATH=str(ROOT))
        runs = []
        for _ in range(3):
            out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True,
                                 cwd=ROOT)
            runs.append([float(v) for v in out.stdout.split()])
    cold = runs[0][0]
    warm = min(r[0] for r in runs[1:])
    imp = min(r[1] for r in runs[1:])
    return cold, warm, imp


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats, no 200k/1M runs")
    args = parser.parse_args()
    reps = 3 if args.quick else 5

    route = scenario()
    segs = discretise_route(route, tolerance_m=0.005)
    m = len(segs.current_a)
    n_wires = len(segs.wire_radius_m)
    print(f"scenario: 2 circuits x 3 phases x twin bundles = {n_wires} wires, 5 spans, "
          f"{m} straight segments (tolerance 5 mm)")
    print(f"machine : {os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.1f} at start; "
          f"numba {numba.__version__}, numpy {np.__version__}")
    t_w = warm_up()
    print(f"warm_up : {t_w:.3f} s in this process (disk cache)")

    pts = grid(route, 100_000)
    pairs = len(pts) * m
    results = {}
    for threads in (2, 1):
        numba.set_num_threads(threads)
        flux_density_segments(pts[:1000], segs)
        n_rep = reps if threads == 2 else max(2, reps - 2)
        t, cpu = best_time(lambda: flux_density_segments(pts, segs), n_rep, cpu=True)
        results[threads] = t
        print(f"numba {threads} thread{'s' if threads > 1 else ' '}: 100,000 points x {m} segments in {t:.3f} s "
              f"(best of {n_rep}) = {pairs / t / 1e9:.2f} G segment-point/s wall; CPU time {cpu:.3f} s "
              f"= {pairs / cpu * threads / 1e9:.2f} G/s if the {threads} core{'s' if threads > 1 else ''} were free")
    numba.set_num_threads(2)
    b = flux_density_segments(pts, segs)

    # plain chunked numpy (same formula) on a subset, scaled
    sub_np = pts[:: len(pts) // 2000][:2000]
    t_np = best_time(lambda: flux_density_segments_numpy(sub_np, segs), 2, pause_s=0.0)
    t_np_scaled = t_np * len(pts) / len(sub_np)
    b_np = flux_density_segments_numpy(sub_np, segs)

    # magpylib on a subset, scaled
    sub_mp = pts[:: len(pts) // 500][:500]
    t_mp = best_time(lambda: magpylib_b(sub_mp, segs.start_m, segs.end_m, segs.current_a), 2, pause_s=0.0)
    t_mp_scaled = t_mp * len(pts) / len(sub_mp)
    b_mp = magpylib_b(sub_mp, segs.start_m, segs.end_m, segs.current_a)
    b_sub = flux_density_segments(sub_mp, segs)
    scale = np.linalg.norm(np.abs(b_mp), axis=1)
    err_re = np.max(np.linalg.norm(b_sub.real - b_mp.real, axis=1) / scale)
    err_im = np.max(np.linalg.norm(b_sub.imag - b_mp.imag, axis=1) / scale)
    b_np_ref = flux_density_segments(sub_np, segs)
    err_np = np.max(np.linalg.norm(b_np_ref - b_np, axis=1) / np.linalg.norm(b_np, axis=1))
    print(f"numpy   : {len(sub_np)} points in {t_np:.3f} s -> {t_np_scaled:.2f} s scaled to 100,000 "
          f"= {len(sub_np) * m / t_np / 1e6:.0f} M segment-point/s")
    print(f"magpylib: {len(sub_mp)} points in {t_mp:.3f} s -> {t_mp_scaled:.1f} s scaled to 100,000 "
          f"= {len(sub_mp) * m / t_mp / 1e6:.1f} M segment-point/s")
    print(f"ratio   : numba(2 thr) vs magpylib {t_mp_scaled / results[2]:.0f}x, vs numpy {t_np_scaled / results[2]:.0f}x;"
          f" numba 1 thread vs magpylib {t_mp_scaled / results[1]:.0f}x; 2 vs 1 thread {results[1] / results[2]:.2f}x")
    print(f"agree   : vs magpylib max |dB|/|B| real {err_re:.1e}, imag {err_im:.1e}; vs numpy {err_np:.1e}")
    print(f"field   : max |B| on the grid {np.max(np.linalg.norm(np.abs(b), axis=1)) * 1e6:.2f} uT (resultant rms)")

    sizes = [25_000, 50_000, 100_000] + ([] if args.quick else [200_000])
    line = []
    for n in sizes:
        p = grid(route, n)
        t = best_time(lambda: flux_density_segments(p, segs), 3)
        line.append(f"{n // 1000}k {t:.3f} s ({t / n * 1e6:.2f} us/pt)")
    print("linear  : " + ", ".join(line))

    if not args.quick:
        rss = peak_memory(2_000_000)
        print(f"memory  : fresh process, 2,000,000 points: peak RSS {rss[0]:.0f} MiB after import + warm_up, "
              f"{rss[1]:.0f} MiB with the points (48 MB), {rss[2]:.0f} MiB after the call (output 96 MB; "
              f"chunks of 65,536 points); call {rss[3]:.1f} s")

    cold, warm, imp = first_call_latency()
    print(f"startup : fresh process, import + warm_up(): cold cache {cold:.2f} s, warm disk cache {warm:.2f} s "
          f"(import alone {imp:.2f} s)")


if __name__ == "__main__":
    main()
