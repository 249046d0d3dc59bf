"""Magnetic flux density of straight finite current segments (3-D Biot–Savart).

For a straight filament from ``a`` to ``b`` carrying current I (from a to b),
the field at ``p`` is, with R1 = p - a, R2 = p - b::

    B = mu0 I / (4 pi) * (R1 x R2) (|R1| + |R2|) / (|R1| |R2| (|R1| |R2| + R1 . R2))     (1)

(the Biot–Savart integral in closed form [1]_; on the perpendicular bisector at
distance d it reduces to mu0 I / (4 pi d) * 2 sin(theta), and for an infinitely
long segment to mu0 I / (2 pi d)).  Near a long segment R1 and R2 are almost
opposite and |R1||R2| + R1 . R2 cancels (relative error ~ eps (L/d)^2); with
Lagrange's identity |R1|^2 |R2|^2 = (R1 . R2)^2 + |R1 x R2|^2 it equals
|R1 x R2|^2 / (|R1||R2| - R1 . R2), which the kernels use when R1 . R2 < 0::

    B = mu0 I / (4 pi) * (R1 x R2) (|R1| + |R2|) (|R1||R2| - R1 . R2) / (|R1||R2| |R1 x R2|^2)   (2)

Currents are rms phasors: the kernel carries the real and imaginary parts of
every segment's current together and returns complex B phasors [T].

A point within a wire's radius of its segment (the conductor axis, the
segment's end spheres included) is inside the conductor, where (1) does not
hold; such points raise :class:`models.errors.GeometryError` (or are reported
in a mask, see ``on_conductor``).  Points on the axis *beyond* a segment's ends
get the exact zero of (1).

The kernel is compiled with numba (``parallel=True``, ``fastmath`` limited to
contraction/reassociation so that IEEE comparisons stay valid, cached on disk in
numba's cache directory, see :func:`warm_up`).  It is cache-blocked: points in
tiles of 256 (parallel over tiles), each tile's arrays kept in L1 while the
segments stream from L2.  Segments are grouped into *runs* (continuous
polylines of one current, i.e. one wire): consecutive segments share the vertex
distance |p - v| (one square root per vertex, not two per segment), four links
are evaluated per sweep over the tile, and a run's geometric sum is multiplied
by its current's real and imaginary parts once.  Points go through in chunks
of ``chunk_size``, so temporary memory is bounded (a few arrays of chunk_size
doubles) whatever the number of points.  Figures: benchmarks/README.md.

References
----------
.. [1] J. D. Hanson and S. P. Hirshman, "Compact expressions for the Biot-Savart
   fields of a filamentary segment", *Phys. Plasmas* 9(10):4410-4412, 2002,
   doi:10.1063/1.1507589 (form (1); from memory).
"""

from __future__ import annotations

import math
import threading
import time

import numpy as np

from ..errors import GeometryError, must_be
from ..units import MU0_H_PER_M
from .types import SegmentSet

__all__ = ["DEFAULT_CHUNK_SIZE", "flux_density_segments", "flux_density_segments_numpy", "warm_up"]

#: Points per chunk: bounds the temporaries (a few hundred bytes per point).
DEFAULT_CHUNK_SIZE = 65536

_K = MU0_H_PER_M / (4.0 * math.pi)


# --------------------------------------------------------------------------- input handling


def segment_arrays(segments, current_a=None, radius_m=None):
    """(start, end, current, radius) arrays from a SegmentSet or from arrays."""
    if isinstance(segments, SegmentSet):
        start = np.asarray(segments.start_m, dtype=float)
        end = np.asarray(segments.end_m, dtype=float)
        cur = np.asarray(segments.current_a, dtype=complex)
        radii = np.asarray(segments.wire_radius_m, dtype=float)
        idx = np.asarray(segments.wire_index)
        if idx.shape != cur.shape or (idx.size and (idx.min() < 0 or idx.max() >= len(radii))):
            raise must_be("segments.wire_index", f"one index in 0..{len(radii) - 1} per segment", idx.shape,
                          GeometryError)
        rad = radii[idx]
    else:
        start, end = (np.asarray(x, dtype=float) for x in segments)
        if current_a is None:
            raise must_be("current_a", "given with segment arrays", None, GeometryError)
        cur = np.asarray(current_a, dtype=complex)
        rad = np.zeros(len(start)) if radius_m is None else np.asarray(radius_m, dtype=float)
    m = start.shape[0] if start.ndim == 2 else -1
    if start.shape != (m, 3) or end.shape != (m, 3):
        raise must_be("segments", "start and end arrays of shape (m, 3)", (start.shape, end.shape), GeometryError)
    cur = np.broadcast_to(cur, (m,))
    rad = np.broadcast_to(rad, (m,))
    if not (np.all(np.isfinite(start)) and np.all(np.isfinite(end)) and np.all(np.isfinite(cur))
            and np.all(np.isfinite(rad))):
        raise must_be("segments", "finite", "non-finite values", GeometryError)
    return start, end, cur, rad


_INSIDE_BLOCK = 16

#: Serialises kernel calls within a process: each call already uses every numba thread,
#: and numba's fallback "workqueue" threading layer (used when OpenMP/TBB are missing)
#: aborts on concurrent calls from several Python threads.
KERNEL_LOCK = threading.Lock()


def _link_boxes(verts, link_rad, block):
    """Bounding box of every block of ``block`` links, grown by the block's largest radius.

    Returns ndarray, shape (nblocks, 6): xmin, xmax, ymin, ymax, zmin, zmax [m].
    """
    nl = len(verts) - 1
    if nl <= 0:
        return np.empty((0, 6))
    first = np.arange(0, nl, block)
    lo = np.minimum.reduceat(np.minimum(verts[:-1], verts[1:]), first, axis=0)
    hi = np.maximum.reduceat(np.maximum(verts[:-1], verts[1:]), first, axis=0)
    r = np.maximum.reduceat(link_rad, first)[:, None]
    box = np.empty((len(first), 6))
    box[:, 0::2] = lo - r
    box[:, 1::2] = hi + r
    return box


_SWEEP = 4  # links per sweep of the field kernel


def segment_runs(start, end, cur):
    """Group segments into runs: continuous polylines of one current, padded to whole sweeps.

    Returns ``(verts, run_start, run_links, run_current, run_box)``: run r's links join
    vertices ``run_start[r] + j`` and ``+ j + 1`` for j < run_links[r] (a multiple of 4);
    padding links repeat the last vertex (zero length: they add exactly nothing).
    ``run_box[r]`` = (xmin, xmax, ymin, ymax, zmin, zmax, (longest link / 30)^2).
    Segments with zero current or zero length are dropped.
    """
    keep = (cur != 0) & np.any(start != end, axis=1)
    start, end, cur = start[keep], end[keep], cur[keep]
    m = len(start)
    if m == 0:
        return np.zeros((1, 3)), np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0, complex), np.zeros((0, 7))
    brk = ~(np.all(end[:-1] == start[1:], axis=1) & (cur[:-1] == cur[1:]))
    first = np.flatnonzero(np.concatenate([[True], brk]))
    stop = np.concatenate([first[1:], [m]])
    pieces, run_start, run_links = [], [], []
    run_box = np.empty((len(first), 7))
    pos = 0
    for r, (a, b) in enumerate(zip(first, stop)):
        links = b - a
        pad = -links % _SWEEP
        v = np.vstack([start[a:b], end[b - 1:b], np.repeat(end[b - 1:b], pad, axis=0)])
        run_box[r, 0:6:2] = v.min(axis=0)
        run_box[r, 1:6:2] = v.max(axis=0)
        run_box[r, 6] = (np.max(np.linalg.norm(end[a:b] - start[a:b], axis=1)) / 30.0) ** 2
        pieces.append(v)
        run_start.append(pos)
        run_links.append(links + pad)
        pos += len(v)
    return (np.vstack(pieces), np.asarray(run_start, np.int64), np.asarray(run_links, np.int64),
            np.ascontiguousarray(cur[first]), run_box)


def _polylines(start, end, cur, rad):
    """Chain segments into vertex lists: links k -> k+1 carry ``cur``; breaks carry 0.

    Consecutive segments with ``end[i] == start[i+1]`` share a vertex; elsewhere a
    zero-current link bridges the gap (it adds no field and is never "inside").
    Segments with zero current and zero length are dropped.
    """
    keep = (cur != 0) & np.any(start != end, axis=1)
    start, end, cur, rad = start[keep], end[keep], cur[keep], rad[keep]
    m = len(start)
    if m == 0:
        z = np.zeros((0,))
        return np.zeros((1, 3)), z.astype(complex), z
    joined = np.all(end[:-1] == start[1:], axis=1)
    # vertices: start[0], end[0], then for each break: start[i+1], end[i+1]...
    n_break = int(np.count_nonzero(~joined))
    nv = m + 1 + n_break
    verts = np.empty((nv, 3))
    link_cur = np.zeros(nv - 1, dtype=complex)
    link_rad = np.zeros(nv - 1)
    # position of segment i's start vertex
    offset = np.concatenate([[0], np.cumsum(~joined)])  # breaks before segment i
    s_idx = np.arange(m) + offset
    verts[s_idx] = start
    verts[s_idx + 1] = end
    link_cur[s_idx] = cur
    link_rad[s_idx] = rad
    return verts, link_cur, link_rad


# --------------------------------------------------------------------------- numpy reference


def flux_density_segments_numpy(points_m, segments, current_a=None, radius_m=None, *,
                                chunk_size: int = 16) -> np.ndarray:
    """Plain chunked-numpy evaluation of eqs. (1)/(2): the reference for tests and benchmarks.

    Not used by :func:`flux_density_segments` (no inside-conductor check, no fallback);
    ``tests/models/route/test_magnetic3d.py`` checks that both agree to 1e-12.

    Parameters
    ----------
    points_m : ndarray, shape (n, 3)
        Observation points [m].
    segments : SegmentSet or (start_m, end_m)
        Segments; with arrays, ``current_a`` (complex, shape (m,)) is required.
    current_a, radius_m : ndarray, optional
        Currents [A] and radii [m] when ``segments`` is a pair of arrays.
    chunk_size : int
        Points per chunk (about 200 bytes x chunk_size x m of temporaries).

    Returns
    -------
    complex ndarray, shape (n, 3)
        B phasors [T]; 0 on a segment's line (where eq. (1) is singular).
    """
    start, end, cur, _ = segment_arrays(segments, current_a, radius_m)
    p = np.asarray(points_m, dtype=float).reshape(-1, 3)
    out = np.zeros((len(p), 3), dtype=complex)
    ic = np.stack([cur.real, cur.imag], axis=1)  # (m, 2)
    for lo in range(0, len(p), chunk_size):
        q = p[lo:lo + chunk_size]
        ax, ay, az = (q[:, k, None] - start[None, :, k] for k in range(3))
        bx, by, bz = (q[:, k, None] - end[None, :, k] for k in range(3))
        n1 = np.sqrt(ax * ax + ay * ay + az * az)
        n2 = np.sqrt(bx * bx + by * by + bz * bz)
        cx = ay * bz - az * by
        cy = az * bx - ax * bz
        cz = ax * by - ay * bx
        nn = n1 * n2
        d = ax * bx + ay * by + az * bz
        neg = d < 0.0
        num = (n1 + n2) * np.where(neg, nn - d, 1.0)
        den = nn * np.where(neg, cx * cx + cy * cy + cz * cz, nn + d)  # eq. (2) where R1 . R2 < 0
        with np.errstate(divide="ignore", invalid="ignore"):
            f = np.where(den > 0.0, num / np.where(den > 0.0, den, 1.0), 0.0)
        for k, c in enumerate((cx, cy, cz)):
            ri = (c * f) @ ic  # (chunk, 2): real and imaginary current together
            out[lo:lo + chunk_size, k] = _K * (ri[:, 0] + 1j * ri[:, 1])
    return out


# --------------------------------------------------------------------------- numba kernel

_kernels = None


def _build_kernels():
    """Compile (or load from numba's on-disk cache) the field and inside-conductor kernels."""
    import numba as nb

    # No nnan/ninf: the kernels must keep IEEE semantics for the guards below.
    fm = {"contract", "reassoc", "nsz", "arcp"}

    @nb.njit(parallel=True, fastmath=fm, cache=True, nogil=True, boundscheck=False)
    def field_kernel(px, py, pz, vx, vy, vz, run_start, run_links, run_re, run_im, run_box, scale, out,  # pragma: no cover
                     tile):
        # Points in tiles (parallel over tiles).  For each run (a polyline of one current,
        # links k -> k+1 for k in run_start .. run_start + run_links, run_links a multiple
        # of 4), the links are swept four at a time; the inner loop runs over the tile's
        # points (SIMD lanes) and carries |p - v_k| from one link to the next, so each
        # vertex costs one square root.  The geometric sum of a run is multiplied by its
        # current (real and imaginary parts) once at the end of the run.  A tile's arrays
        # (13 x tile doubles) stay in L1, the vertex arrays in L2.  Where the tile's bounding
        # box is farther from the run's than 1/30 of its longest link (run_box[r, 6] holds that
        # distance squared), eq. (1) loses nothing to cancellation (< 1e-13) and the sweep uses
        # it; otherwise it uses eq. (2) where R1 . R2 < 0.
        n = px.shape[0]
        nr = run_start.shape[0]
        ntile = (n + tile - 1) // tile
        for t in nb.prange(ntile):
            lo = t * tile
            hi = min(lo + tile, n)
            m = hi - lo
            qx = px[lo:hi].copy()
            qy = py[lo:hi].copy()
            qz = pz[lo:hi].copy()
            an = np.empty(m)
            tx = np.empty(m)
            ty = np.empty(m)
            tz = np.empty(m)
            s0 = np.zeros(m)
            s1 = np.zeros(m)
            s2 = np.zeros(m)
            s3 = np.zeros(m)
            s4 = np.zeros(m)
            s5 = np.zeros(m)
            x0 = qx.min()
            x1 = qx.max()
            y0 = qy.min()
            y1 = qy.max()
            z0 = qz.min()
            z1 = qz.max()
            for r in range(nr):
                k0 = run_start[r]
                gx = max(0.0, run_box[r, 0] - x1, x0 - run_box[r, 1])
                gy = max(0.0, run_box[r, 2] - y1, y0 - run_box[r, 3])
                gz = max(0.0, run_box[r, 4] - z1, z0 - run_box[r, 5])
                far = gx * gx + gy * gy + gz * gz > run_box[r, 6]
                for i in range(m):
                    dx = qx[i] - vx[k0]
                    dy = qy[i] - vy[k0]
                    dz = qz[i] - vz[k0]
                    an[i] = math.sqrt(dx * dx + dy * dy + dz * dz)
                    tx[i] = 0.0
                    ty[i] = 0.0
                    tz[i] = 0.0
                for k in range(k0, k0 + run_links[r], 4):
                    v0x = vx[k]
                    v0y = vy[k]
                    v0z = vz[k]
                    v1x = vx[k + 1]
                    v1y = vy[k + 1]
                    v1z = vz[k + 1]
                    v2x = vx[k + 2]
                    v2y = vy[k + 2]
                    v2z = vz[k + 2]
                    v3x = vx[k + 3]
                    v3y = vy[k + 3]
                    v3z = vz[k + 3]
                    v4x = vx[k + 4]
                    v4y = vy[k + 4]
                    v4z = vz[k + 4]
                    if far:  # eq. (1)
                        for i in range(m):
                            x = qx[i]
                            y = qy[i]
                            z = qz[i]
                            ax = x - v0x
                            ay = y - v0y
                            az = z - v0z
                            n1 = an[i]
                            bx = x - v1x
                            by = y - v1y
                            bz = z - v1z
                            n2 = math.sqrt(bx * bx + by * by + bz * bz)
                            cx = ay * bz - az * by
                            cy = az * bx - ax * bz
                            cz = ax * by - ay * bx
                            nn = n1 * n2
                            f = (n1 + n2) / (nn * (nn + ax * bx + ay * by + az * bz) + 1e-300)
                            ux = cx * f
                            uy = cy * f
                            uz = cz * f
                            ax = x - v2x
                            ay = y - v2y
                            az = z - v2z
                            n1 = math.sqrt(ax * ax + ay * ay + az * az)
                            cx = by * az - bz * ay
                            cy = bz * ax - bx * az
                            cz = bx * ay - by * ax
                            nn = n1 * n2
                            f = (n1 + n2) / (nn * (nn + ax * bx + ay * by + az * bz) + 1e-300)
                            ux += cx * f
                            uy += cy * f
                            uz += cz * f
                            bx = x - v3x
                            by = y - v3y
                            bz = z - v3z
                            n2 = math.sqrt(bx * bx + by * by + bz * bz)
                            cx = ay * bz - az * by
                            cy = az * bx - ax * bz
                            cz = ax * by - ay * bx
                            nn = n1 * n2
                            f = (n1 + n2) / (nn * (nn + ax * bx + ay * by + az * bz) + 1e-300)
                            ux += cx * f
                            uy += cy * f
                            uz += cz * f
                            ax = x - v4x
                            ay = y - v4y
                            az = z - v4z
                            n1 = math.sqrt(ax * ax + ay * ay + az * az)
                            cx = by * az - bz * ay
                            cy = bz * ax - bx * az
                            cz = bx * ay - by * ax
                            nn = n1 * n2
                            f = (n1 + n2) / (nn * (nn + ax * bx + ay * by + az * bz) + 1e-300)
                            tx[i] += ux + cx * f
                            ty[i] += uy + cy * f
                            tz[i] += uz + cz * f
                            an[i] = n1
                    else:  # eq. (1), or (2) where R1 . R2 < 0
                        for i in range(m):
                            x = qx[i]
                            y = qy[i]
                            z = qz[i]
                            # Each link: R1 = p - v_k (a*), R2 = p - v_k+1 (b*), c = R1 x R2, and
                            # eq. (1), or its cancellation-free form (2) when R1 . R2 < 0.  The tiny
                            # term keeps 0/0 (a point on a link's line, where c = 0) finite; points
                            # inside a wire are caught by the inside kernel.
                            ax = x - v0x
                            ay = y - v0y
                            az = z - v0z
                            n1 = an[i]
                            bx = x - v1x
                            by = y - v1y
                            bz = z - v1z
                            n2 = math.sqrt(bx * bx + by * by + bz * bz)
                            cx = ay * bz - az * by
                            cy = az * bx - ax * bz
                            cz = ax * by - ay * bx
                            nn = n1 * n2
                            dot = ax * bx + ay * by + az * bz
                            neg = dot < 0.0
                            f = ((n1 + n2) * ((nn - dot) if neg else 1.0)) / (
                                nn * ((cx * cx + cy * cy + cz * cz) if neg else (nn + dot)) + 1e-300)
                            ux = cx * f
                            uy = cy * f
                            uz = cz * f
                            ax = x - v2x
                            ay = y - v2y
                            az = z - v2z
                            n1 = math.sqrt(ax * ax + ay * ay + az * az)
                            cx = by * az - bz * ay
                            cy = bz * ax - bx * az
                            cz = bx * ay - by * ax
                            nn = n1 * n2
                            dot = ax * bx + ay * by + az * bz
                            neg = dot < 0.0
                            f = ((n1 + n2) * ((nn - dot) if neg else 1.0)) / (
                                nn * ((cx * cx + cy * cy + cz * cz) if neg else (nn + dot)) + 1e-300)
                            ux += cx * f
                            uy += cy * f
                            uz += cz * f
                            bx = x - v3x
                            by = y - v3y
                            bz = z - v3z
                            n2 = math.sqrt(bx * bx + by * by + bz * bz)
                            cx = ay * bz - az * by
                            cy = az * bx - ax * bz
                            cz = ax * by - ay * bx
                            nn = n1 * n2
                            dot = ax * bx + ay * by + az * bz
                            neg = dot < 0.0
                            f = ((n1 + n2) * ((nn - dot) if neg else 1.0)) / (
                                nn * ((cx * cx + cy * cy + cz * cz) if neg else (nn + dot)) + 1e-300)
                            ux += cx * f
                            uy += cy * f
                            uz += cz * f
                            ax = x - v4x
                            ay = y - v4y
                            az = z - v4z
                            n1 = math.sqrt(ax * ax + ay * ay + az * az)
                            cx = by * az - bz * ay
                            cy = bz * ax - bx * az
                            cz = bx * ay - by * ax
                            nn = n1 * n2
                            dot = ax * bx + ay * by + az * bz
                            neg = dot < 0.0
                            f = ((n1 + n2) * ((nn - dot) if neg else 1.0)) / (
                                nn * ((cx * cx + cy * cy + cz * cz) if neg else (nn + dot)) + 1e-300)
                            tx[i] += ux + cx * f
                            ty[i] += uy + cy * f
                            tz[i] += uz + cz * f
                            an[i] = n1
                cr = run_re[r]
                ci = run_im[r]
                for i in range(m):
                    s0[i] += tx[i] * cr
                    s1[i] += tx[i] * ci
                    s2[i] += ty[i] * cr
                    s3[i] += ty[i] * ci
                    s4[i] += tz[i] * cr
                    s5[i] += tz[i] * ci
            for i in range(m):
                out[lo + i, 0, 0] = scale * s0[i]
                out[lo + i, 0, 1] = scale * s1[i]
                out[lo + i, 1, 0] = scale * s2[i]
                out[lo + i, 1, 1] = scale * s3[i]
                out[lo + i, 2, 0] = scale * s4[i]
                out[lo + i, 2, 1] = scale * s5[i]

    @nb.njit(parallel=True, cache=True, nogil=True, boundscheck=False)
    def inside_kernel(px, py, pz, vx, vy, vz, r2, box, block, tile, hit):  # pragma: no cover - compiled
        # hit[i] = first link whose wire contains point i (distance to the segment
        # below the radius), else -1.  Points go in tiles (parallel over tiles); a block
        # of links is skipped for the whole tile when the tile's bounding box misses the
        # block's box (grown by its largest radius), and for a point outside that box.
        # Blocks are visited in order for every point, so the first hit is the same
        # whatever the tiling.
        n = px.shape[0]
        nl = vx.shape[0] - 1
        nblk = box.shape[0]
        ntile = (n + tile - 1) // tile
        for t in nb.prange(ntile):
            lo = t * tile
            hi = min(lo + tile, n)
            x0 = px[lo:hi].min()
            x1 = px[lo:hi].max()
            y0 = py[lo:hi].min()
            y1 = py[lo:hi].max()
            z0 = pz[lo:hi].min()
            z1 = pz[lo:hi].max()
            for i in range(lo, hi):
                hit[i] = -1
            for b in range(nblk):
                if (x1 < box[b, 0] or x0 > box[b, 1] or y1 < box[b, 2] or y0 > box[b, 3]
                        or z1 < box[b, 4] or z0 > box[b, 5]):
                    continue
                for i in range(lo, hi):
                    if hit[i] >= 0:
                        continue
                    x = px[i]
                    y = py[i]
                    z = pz[i]
                    if (x < box[b, 0] or x > box[b, 1] or y < box[b, 2] or y > box[b, 3]
                            or z < box[b, 4] or z > box[b, 5]):
                        continue
                    for k in range(b * block, min((b + 1) * block, nl)):
                        rr = r2[k]
                        if rr <= 0.0:
                            continue
                        ux = vx[k + 1] - vx[k]
                        uy = vy[k + 1] - vy[k]
                        uz = vz[k + 1] - vz[k]
                        wx = x - vx[k]
                        wy = y - vy[k]
                        wz = z - vz[k]
                        uu = ux * ux + uy * uy + uz * uz
                        s = (wx * ux + wy * uy + wz * uz) / uu if uu > 0.0 else 0.0
                        s = min(max(s, 0.0), 1.0)
                        dx = wx - s * ux
                        dy = wy - s * uy
                        dz = wz - s * uz
                        if dx * dx + dy * dy + dz * dz < rr:
                            hit[i] = k
                            break

    return field_kernel, inside_kernel


def _get_kernels():
    global _kernels
    if _kernels is None:
        _kernels = _build_kernels()
    return _kernels


def warm_up() -> float:
    """Compile the kernels (or load them from numba's disk cache) before serving.

    Call it in every server worker at start-up, after any fork (e.g. in the app
    factory without ``preload_app``, or gunicorn's ``post_fork``): numba's OpenMP
    threading layer must not be started in a process that later forks.

    Returns
    -------
    float
        Seconds spent (about 0.2-0.5 s from a warm disk cache, several seconds cold;
        see benchmarks/README.md).
    """
    t0 = time.perf_counter()
    segs = (np.array([[0.0, 0.0, 0.0]]), np.array([[0.0, 0.0, 1.0]]))
    flux_density_segments(np.array([[1.0, 0.0, 0.5]]), segs, current_a=np.array([1.0 + 1.0j]),
                          radius_m=np.array([0.01]))
    return time.perf_counter() - t0


def flux_density_segments(
    points_m,
    segments,
    current_a=None,
    radius_m=None,
    *,
    chunk_size: int = DEFAULT_CHUNK_SIZE,
    on_conductor: str = "raise",
    tile: int = 256,
):
    """B phasors of straight current segments at observation points, eq. (1).

    Parameters
    ----------
    points_m : array_like, shape (n, 3)
        Observation points (x, y, z) [m].
    segments : SegmentSet or tuple (start_m, end_m)
        The segments; as arrays, ``start_m`` and ``end_m`` have shape (m, 3) [m].
    current_a : complex array_like, shape (m,), optional
        rms current phasor of each segment, flowing from start to end [A]
        (required with arrays; taken from the SegmentSet otherwise).
    radius_m : array_like, shape (m,), optional
        Wire radius of each segment [m] (with arrays; default 0 = no inside check).
    chunk_size : int
        Points per chunk (bounds temporary memory; the result itself is 48 bytes a point).
    on_conductor : {"raise", "mask"}
        A point inside a wire (closer to a segment than its radius): ``"raise"``
        (default) raises GeometryError naming the first such point; ``"mask"``
        returns ``(b, inside)`` with ``b`` = 0 at those points.
    tile : int
        Points per parallel tile (cache blocking; 256 keeps a tile's arrays in L1).

    Returns
    -------
    complex ndarray, shape (n, 3)
        rms B phasors [T] (and the bool mask ``inside``, shape (n,), with ``"mask"``).

    Raises
    ------
    GeometryError
        Bad shapes, non-finite values, or a point inside a conductor (field ``points_m[i]``).

    Examples
    --------
    >>> seg = (np.array([[0.0, 0.0, -1e4]]), np.array([[0.0, 0.0, 1e4]]))
    >>> b = flux_density_segments(np.array([[10.0, 0.0, 0.0]]), seg, current_a=np.array([1000.0]))
    >>> round(float(b[0, 1].real) * 1e6, 6)   # mu0 I / (2 pi d) = 20 uT
    19.99999
    """
    if on_conductor not in ("raise", "mask"):
        raise must_be("on_conductor", "'raise' or 'mask'", on_conductor, GeometryError)
    if not (isinstance(chunk_size, (int, np.integer)) and chunk_size >= 1):
        raise must_be("chunk_size", "an integer >= 1", chunk_size, GeometryError)
    p = np.asarray(points_m, dtype=float)
    if p.ndim != 2 or p.shape[1] != 3:
        raise must_be("points_m", "an array of shape (n, 3)", p.shape, GeometryError)
    if not np.all(np.isfinite(p)):
        raise must_be("points_m", "finite", "non-finite values", GeometryError)
    start, end, cur, rad = segment_arrays(segments, current_a, radius_m)
    verts, link_cur, link_rad = _polylines(start, end, cur, rad)
    vx, vy, vz = (np.ascontiguousarray(verts[:, k]) for k in range(3))
    r2 = np.ascontiguousarray(link_rad**2)
    box = _link_boxes(verts, link_rad, _INSIDE_BLOCK)
    rverts, run_start, run_links, run_cur, run_box = segment_runs(start, end, cur)
    wx, wy, wz = (np.ascontiguousarray(rverts[:, k]) for k in range(3))
    run_re = np.ascontiguousarray(run_cur.real)
    run_im = np.ascontiguousarray(run_cur.imag)
    field_kernel, inside_kernel = _get_kernels()
    from numba import parallel_chunksize

    n = len(p)
    out = np.empty((n, 3), dtype=complex)
    hit = np.empty(n, dtype=np.int64)
    ov = out.view(np.float64).reshape(n, 3, 2)
    for lo in range(0, n, chunk_size):
        hi = min(lo + chunk_size, n)
        qx, qy, qz = (np.ascontiguousarray(p[lo:hi, k]) for k in range(3))
        with KERNEL_LOCK, parallel_chunksize(1):  # tiles handed out one at a time: a busy core takes fewer
            field_kernel(qx, qy, qz, wx, wy, wz, run_start, run_links, run_re, run_im, run_box, _K, ov[lo:hi],
                         int(tile))
            inside_kernel(qx, qy, qz, vx, vy, vz, r2, box, _INSIDE_BLOCK, int(tile), hit[lo:hi])
    hits = hit >= 0
    if on_conductor == "mask":
        out[hits] = 0.0
        return out, hits
    if hits.any():
        i = int(np.argmax(hits))
        raise must_be(f"points_m[{i}]", "outside every conductor (farther from its axis than its radius)",
                      tuple(float(v) for v in p[i]), GeometryError)
    return out
