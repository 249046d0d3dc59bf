"""Benchmark of the 3-D electric field (models.route.electric3d) against the 3-D B kernel.

Scenario (invented): four 3-phase circuits on one route (12 single conductors,
400 kV, 1000 A), five level spans of 300 m with 9 m mid-span sag, cut by the route
helper (``discretise_route(for_electric=True, max_segment_m=7.5)``) into 40 straight
segments per span and wire: 2,400 segments.  Grid: 500 x 200 = 100,000 points at
1 m above ground over the whole route.

Measured, in this process:

* the charge simulation: building the 2,400 x 2,400 matching matrix
  (:func:`models.route.electric3d.matching_matrix`) and the solve of the real
  matrix with Re/Im of V as two right-hand sides, both as the engine does it (float32
  LU refined to double precision, :func:`models.route.refined_solve.solve_refined`)
  and as the double-precision LU ``numpy.linalg.solve`` (the baseline; the two
  solutions' difference is printed), and :func:`line_charges` end to end;
* E on the grid (:func:`electric_field_segments`, charges given) and B on the same
  grid for the same segments (:func:`models.route.magnetic3d.flux_density_segments`),
  interleaved round by round; ratio E/B (best vs best and median of the rounds),
  with numba at 2 threads and at 1 thread;
* time against the number of points (25k .. 200k), and peak resident memory after
  evaluating 10^6 points;
* the start-up cost: ``warm_up()`` in a fresh interpreter (kernels loaded from numba's
  on-disk cache).

Wall-clock times (time.perf_counter), best of several runs: the machine is shared, so
the best run is the one least disturbed.  After a BLAS call OpenBLAS worker threads
spin for ~0.1-0.2 s and slow a numba kernel started then; the script sets
OPENBLAS_THREAD_TIMEOUT=4 before numpy is imported (as deploy/gunicorn.conf.py does
for the service) and pauses 0.5 s after every solve before timing a kernel.  The single-thread BLAS figure comes from a
child process started with OPENBLAS_NUM_THREADS=1.

Run from the repository root:  .venv/bin/python benchmarks/route_electric.py
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_THREAD_TIMEOUT", "4")  # 2^4 cycles of spin after a BLAS call (see docstring)

import argparse  # noqa: E402
import pathlib  # noqa: E402
import resource  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import numba  # noqa: E402
import numpy as np  # noqa: E402

from models.geometry import Bundle  # noqa: E402
from models.route import electric3d as e3  # noqa: E402
from models.route.discretise import discretise_route  # noqa: E402
from models.route.magnetic3d import flux_density_segments  # noqa: E402
from models.route.magnetic3d import warm_up as warm_up_b  # noqa: E402
from models.route.refined_solve import solve_refined  # noqa: E402
from models.route.types import Route, RouteCircuit, RouteConductor, Support  # noqa: E402

SPAN_M = 300.0
N_SPANS = 5
PAUSE_S = 0.5


def scenario_route() -> Route:
    """Four invented 400 kV circuits (12 conductors) over five 300 m spans."""
    single = Bundle(0.0286)
    circuits = []
    for c, (off, h) in enumerate(((-16.0, 22.0), (-8.0, 30.0), (8.0, 30.0), (16.0, 22.0))):
        conds = tuple(RouteConductor(ph, off + dx, h + dh, 9.0)
                      for ph, dx, dh in (("L1", -1.5, 0.0), ("L2", 0.0, 6.0), ("L3", 1.5, 12.0)))
        circuits.append(RouteCircuit(f"c{c}", "overhead", 400.0, 1000.0, conds, single))
    supports = tuple(Support(f"t{i}", SPAN_M * i, 0.0) for i in range(N_SPANS + 1))
    return Route(supports, tuple(circuits))


def grid(nx: int, ny: int, z_m: float = 1.0) -> np.ndarray:
    xs = np.linspace(-100.0, SPAN_M * N_SPANS + 100.0, nx)
    ys = np.linspace(-120.0, 120.0, ny)
    gx, gy = np.meshgrid(xs, ys, indexing="ij")
    return np.column_stack([gx.ravel(), gy.ravel(), np.full(gx.size, z_m)])


def best_of(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def solve_only(repeat: int) -> None:
    """Child mode: time the matrix build and the LU solve (BLAS threads from the environment)."""
    seg = discretise_route(scenario_route(), for_electric=True, max_segment_m=7.5)
    e3.warm_up()
    p = e3.matching_matrix(seg)
    v = seg.wire_voltage_v[seg.wire_index]
    rhs = np.column_stack([v.real, v.imag])
    t_solve = best_of(lambda: np.linalg.solve(p, rhs), repeat)
    t_refined = best_of(lambda: solve_refined(p, rhs), repeat)
    print(f"{t_solve:.6f} {t_refined:.6f}")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--solve-only", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--rounds", type=int, default=5)
    args = parser.parse_args()
    if args.solve_only:
        solve_only(args.repeat)
        return

    route = scenario_route()
    seg = discretise_route(route, for_electric=True, max_segment_m=7.5)
    seg_b = discretise_route(route, max_segment_m=7.5)
    m = seg.start_m.shape[0]
    assert seg_b.start_m.shape[0] == m, "single conductors: same segments for E and B"
    pts = grid(500, 200)
    n = pts.shape[0]
    print(f"scenario: 12 conductors x {N_SPANS} spans of {SPAN_M:.0f} m -> {m} segments; grid {n:,} points at 1 m")
    print(f"numba {numba.__version__}, numpy {np.__version__}, threading layer after warm-up: ", end="")
    t0 = time.perf_counter()
    e3.warm_up()
    warm_up_b()
    print(numba.threading_layer(), f"(warm-up in this process {time.perf_counter() - t0:.2f} s)")

    # --- charge simulation
    v = seg.wire_voltage_v[seg.wire_index]
    rhs = np.column_stack([v.real, v.imag])
    for nt in (2, 1):
        numba.set_num_threads(nt)
        t_build = best_of(lambda: e3.matching_matrix(seg), args.repeat)
        print(f"matching matrix {m}x{m}, numba {nt} thread(s): {t_build * 1e3:7.1f} ms (best of {args.repeat})")
    numba.set_num_threads(2)
    p = e3.matching_matrix(seg)
    t_solve = best_of(lambda: np.linalg.solve(p, rhs), args.repeat)
    t_refined = best_of(lambda: solve_refined(p, rhs), args.repeat)
    x_lu = np.linalg.solve(p, rhs)
    x_ref, steps = solve_refined(p, rhs)
    t_charges = best_of(lambda: e3.line_charges(seg), args.repeat)
    env1 = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    out1 = subprocess.run([sys.executable, __file__, "--solve-only", "--repeat", str(args.repeat)],
                          capture_output=True, text=True, env=env1, check=True).stdout
    t_solve1, t_refined1 = (float(x) for x in out1.strip().splitlines()[-1].split())
    print(f"float64 LU solve (numpy), 2 right-hand sides: {t_solve * 1e3:7.1f} ms (OpenBLAS default threads), "
          f"{t_solve1 * 1e3:7.1f} ms (OPENBLAS_NUM_THREADS=1)")
    print(f"float32 LU + refinement (engine):             {t_refined * 1e3:7.1f} ms (OpenBLAS default threads), "
          f"{t_refined1 * 1e3:7.1f} ms (OPENBLAS_NUM_THREADS=1); {steps} refinement steps, "
          f"max |dq| / max |q| vs the float64 LU {np.abs(x_ref - x_lu).max() / np.abs(x_lu).max():.1e}; "
          f"speed-up {t_solve / t_refined:.2f}x")
    print(f"line_charges end to end (checks + matrix + solve): {t_charges * 1e3:7.1f} ms (best of {args.repeat})")
    q = e3.line_charges(seg)

    # --- E vs B on the grid, interleaved
    time.sleep(PAUSE_S)
    pairs = m * n
    for nt in (2, 1):
        numba.set_num_threads(nt)
        te, tb = [], []
        for _ in range(args.rounds):
            t0 = time.perf_counter()
            e3.electric_field_segments(pts, seg, q)
            te.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            flux_density_segments(pts, seg_b)
            tb.append(time.perf_counter() - t0)
        ratios = [a / b for a, b in zip(te, tb)]
        print(f"numba {nt} thread(s): E {min(te):.3f} s ({pairs / min(te) / 1e9:.2f} G segment-points/s), "
              f"B {min(tb):.3f} s ({pairs / min(tb) / 1e9:.2f} G/s); E/B best vs best {min(te) / min(tb):.2f}, "
              f"median of {args.rounds} rounds {statistics.median(ratios):.2f}")
    numba.set_num_threads(2)

    # --- linear in points
    print("E time against points (numba 2 threads, best of 3):")
    for nx in (125, 250, 500, 1000):
        sub = grid(nx, 200)
        t = best_of(lambda: e3.electric_field_segments(sub, seg, q), 3)
        print(f"  {sub.shape[0]:>8,} points: {t:.3f} s, {t / sub.shape[0] * 1e6:.2f} us/point")

    # --- memory
    rss0 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    big = grid(5000, 200)
    e = e3.electric_field_segments(big, seg, q)
    rss1 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak RSS before the 10^6-point call {rss0:.0f} MiB, after {rss1:.0f} MiB "
          f"(points {big.nbytes / 2**20:.0f} MiB + E {e.nbytes / 2**20:.0f} MiB are inputs/outputs)")

    # --- start-up
    code = ("import time; t0 = time.perf_counter(); from models.route import electric3d as e3; "
            "t1 = time.perf_counter(); e3.warm_up(); t2 = time.perf_counter(); "
            "print(f'{t1 - t0:.3f} {t2 - t1:.3f}')")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         cwd=str(ROOT), env=dict(os.environ, PYTHONPATH=str(ROOT))).stdout.split()
    print(f"fresh interpreter: import {float(out[0]):.2f} s, warm_up() {float(out[1]):.2f} s (on-disk cache)")


if __name__ == "__main__":
    main()
