"""Benchmark: 3-D B with and without earth-return images, same workload, same process.

Scenario: the invented double-circuit route of ``benchmarks/route_magnetic.py``
(2,640 straight segments) on its 100,000-point grid at 1 m.  Times, in interleaved
rounds at numba 2 threads and 1 thread:

* free-space B, ``models.route.magnetic3d.flux_density_segments``;
* B with earth return, the same plus
  ``models.route.earth_return3d.image_flux_density_segments`` at 100 ohm m, 50 Hz
  (what ``evaluate_route`` computes with ``soil_resistivity_ohm_m``);

and prints the ratio (best vs best, and the median of the per-round ratios), the
image kernel alone at three resistivities, and the complex-numpy reference on a
subset (scaled), with the agreement between the two.

Run from the repository root::

    .venv/bin/python benchmarks/route_earth_return.py [--rounds N]
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_THREAD_TIMEOUT", "4")  # as in route_magnetic.py

import argparse  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numba  # noqa: E402

from benchmarks.route_magnetic import best_time, grid, scenario  # noqa: E402
from models.magnetic import complex_depth_m  # noqa: E402
from models.route import warm_up_magnetic  # noqa: E402
from models.route.discretise import discretise_route  # noqa: E402
from models.route.earth_return3d import (  # noqa: E402
    image_flux_density_segments,
    image_flux_density_segments_numpy,
)
from models.route.magnetic3d import flux_density_segments  # noqa: E402


def _timed(fn) -> float:
    time.sleep(0.2)
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=5, help="interleaved rounds per thread count")
    args = parser.parse_args()

    route = scenario()
    segs = discretise_route(route, tolerance_m=0.005)
    pts = grid(route, 100_000)
    m = len(segs.current_a)
    pairs = len(pts) * m
    p = complex_depth_m(100.0, 50.0)
    print(f"scenario: {len(segs.wire_radius_m)} wires, {m} straight segments; grid {len(pts):,} points at 1 m; "
          f"soil 100 ohm m at 50 Hz (p = {p.real:.1f} {p.imag:+.1f}j m)")
    print(f"machine : {os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.1f} at start; "
          f"numba {numba.__version__}, numpy {np.__version__}")
    print(f"warm_up : {warm_up_magnetic():.3f} s (both kernels, disk cache)")

    def free():
        return flux_density_segments(pts, segs)

    def with_earth():
        return flux_density_segments(pts, segs) + image_flux_density_segments(pts, segs, p)

    for threads in (2, 1):
        numba.set_num_threads(threads)
        free(), with_earth()
        t_free, t_earth, ratios = [], [], []
        for _ in range(args.rounds):
            a = _timed(free)
            b = _timed(with_earth)
            t_free.append(a)
            t_earth.append(b)
            ratios.append(b / a)
        tf, te = min(t_free), min(t_earth)
        print(f"numba {threads} thread{'s' if threads > 1 else ' '}: B free space {tf:.3f} s "
              f"({pairs / tf / 1e9:.2f} G segment-point/s), B with earth return {te:.3f} s; "
              f"ratio best vs best {te / tf:.2f}, median of {args.rounds} rounds {statistics.median(ratios):.2f}; "
              f"image alone ~{te - tf:.3f} s ({pairs / (te - tf) / 1e9:.2f} G/s)")
    numba.set_num_threads(2)
    line = []
    for rho in (1.0, 100.0, 1e4):
        pr = complex_depth_m(rho, 50.0)
        t = best_time(lambda: image_flux_density_segments(pts, segs, pr), 3, pause_s=0.2)
        line.append(f"{rho:g} ohm m {t:.3f} s")
    print("image   : 2 threads, " + ", ".join(line))

    sub = pts[:: len(pts) // 400][:400]
    t_np = best_time(lambda: image_flux_density_segments_numpy(sub, segs, p), 2, pause_s=0.0)
    ref = image_flux_density_segments_numpy(sub, segs, p)
    got = image_flux_density_segments(sub, segs, p)
    err = np.max(np.abs(got - ref)) / np.max(np.abs(ref))
    print(f"numpy   : {len(sub)} points in {t_np:.3f} s -> {t_np * len(pts) / len(sub):.1f} s scaled to "
          f"{len(pts):,} ({len(sub) * m / t_np / 1e6:.1f} M segment-point/s); kernel vs numpy max |dB| / max |B| "
          f"{err:.1e}")
    b0 = free()
    img = image_flux_density_segments(pts, segs, p)
    rel = np.linalg.norm(np.abs(img), axis=1) / np.linalg.norm(np.abs(b0), axis=1)
    print(f"field   : image / free-space |B| on the grid: median {np.median(rel):.2e}, max {rel.max():.2e} "
          f"(balanced circuits: small)")


if __name__ == "__main__":
    main()
