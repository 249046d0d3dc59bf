"""Magnetic flux density of straight finite current segments (3-D Biot–Savart).

For a straight filament from ``a`` to ``b`` carrying current I (from a to b),
the field at ``p`` is, with R1 = p - a, R2 = p - b::

    B = mu0 I / (4 pi) * (R1 x R2) (|R1| + |R2|) / (|R1| |R2| (|R1| |R2| + R1 . R2))     (1)

(the Biot–Savart integral in closed form [1]_; on the perpendicular bisector at
distance d it reduces to mu0 I / (4 pi d) * 2 sin(theta), and for an infinitely
long segment to mu0 I / (2 pi d)).  Currents are rms phasors: the kernel carries
the real and imaginary parts of every segment's current together and returns
complex B phasors [T].

A point within a wire's radius of its segment (the conductor axis, the
segment's end spheres included) is inside the conductor, where (1) does not
hold; such points raise :class:`models.errors.GeometryError` (or are reported
in a mask, see ``on_conductor``).  Points on the axis *beyond* a segment's ends
get the exact zero of (1).

The kernel is compiled with numba (``parallel=True``, cached on disk in numba's
cache directory, see :func:`warm_up`).  It is blocked: points in tiles, each
tile swept over the segments in blocks that stay in the L1 cache, and
consecutive segments of one wire share the vertex distances |p - v| (one square
root per vertex rather than two per segment).  Points are processed in chunks
of ``chunk_size`` so that temporary memory stays bounded.

References
----------
.. [1] J. D. Hanson and S. P. Hirshman, "Compact expressions for the Biot-Savart
   fields of a filamentary segment", *Phys. Plasmas* 9(10):4410-4412, 2002,
   doi:10.1063/1.1507589 (form (1); from memory).
"""

from __future__ import annotations

import math
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


def _segment_arrays(segments, current_a=None, radius_m=None):
    """(start, end, current, radius) arrays from a SegmentSet or from arrays."""
    if isinstance(segments, SegmentSet):
        start = np.asarray(segments.start_m, dtype=float)
        end = np.asarray(segments.end_m, dtype=float)
        cur = np.asarray(segments.current_a, dtype=complex)
        rad = np.asarray(segments.wire_radius_m, dtype=float)[np.asarray(segments.wire_index)]
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
                                chunk_size: int = 4096) -> np.ndarray:
    """Plain chunked-numpy evaluation of eq. (1) (reference and fallback; no inside check).

    Parameters
    ----------
    points_m : ndarray, shape (n, 3)
        Observation points [m].
    segments : SegmentSet or (start_m, end_m)
        Segments; with arrays, ``current_a`` (complex, shape (m,)) is required.
    current_a, radius_m : ndarray, optional
        Currents [A] and radii [m] when ``segments`` is a pair of arrays.
    chunk_size : int
        Points per chunk (memory ~ 100 bytes x chunk_size x m).

    Returns
    -------
    complex ndarray, shape (n, 3)
        B phasors [T]; 0 on a segment's line (where eq. (1) is singular).
    """
    start, end, cur, _ = _segment_arrays(segments, current_a, radius_m)
    p = np.asarray(points_m, dtype=float).reshape(-1, 3)
    out = np.zeros((len(p), 3), dtype=complex)
    ic = np.stack([cur.real, cur.imag])  # (2, m)
    for lo in range(0, len(p), chunk_size):
        q = p[lo:lo + chunk_size, None, :]
        r1 = q - start[None]
        r2 = q - end[None]
        n1 = np.sqrt(np.einsum("ijk,ijk->ij", r1, r1))
        n2 = np.sqrt(np.einsum("ijk,ijk->ij", r2, r2))
        d = np.einsum("ijk,ijk->ij", r1, r2)
        c = np.cross(r1, r2)
        den = n1 * n2 * (n1 * n2 + d)
        with np.errstate(divide="ignore", invalid="ignore"):
            f = np.where(den > 0.0, (n1 + n2) / np.where(den > 0.0, den, 1.0), 0.0)
        cf = c * f[..., None]  # (k, m, 3)
        re = np.einsum("ijk,j->ik", cf, ic[0])
        im = np.einsum("ijk,j->ik", cf, ic[1])
        out[lo:lo + chunk_size] = _K * (re + 1j * im)
    return out


# --------------------------------------------------------------------------- numba kernel

_kernel = None


def _build_kernel():
    """Compile (or load from numba's on-disk cache) the blocked kernel."""
    import numba as nb

    fm = {"contract", "reassoc", "nsz", "arcp"}  # no nnan/ninf: inside points produce inf that we select away

    @nb.njit(parallel=True, fastmath=fm, cache=True, nogil=True, boundscheck=False)
    def kernel(px, py, pz, vx, vy, vz, ire, iim, r2, out, inside, tile, vblock):
        n = px.shape[0]
        nv = vx.shape[0]
        nl = nv - 1
        ntile = (n + tile - 1) // tile
        for t in nb.prange(ntile):
            lo = t * tile
            hi = min(lo + tile, n)
            # per-tile buffers of vertex quantities (one vertex block)
            bx = np.empty(vblock + 1)
            by = np.empty(vblock + 1)
            bz = np.empty(vblock + 1)
            bn = np.empty(vblock + 1)
            for i in range(lo, hi):
                x = px[i]
                y = py[i]
                z = pz[i]
                sxr = 0.0
                syr = 0.0
                szr = 0.0
                sxi = 0.0
                syi = 0.0
                szi = 0.0
                hit = 0
                for v0 in range(0, nl, vblock):
                    v1 = min(v0 + vblock, nl)
                    # vertex pass: R = p - v, |R|
                    for k in range(v0, v1 + 1):
                        dx = x - vx[k]
                        dy = y - vy[k]
                        dz = z - vz[k]
                        j = k - v0
                        bx[j] = dx
                        by[j] = dy
                        bz[j] = dz
                        bn[j] = math.sqrt(dx * dx + dy * dy + dz * dz)
                    # link pass: eq. (1) from the two end vertices
                    for k in range(v0, v1):
                        j = k - v0
                        ax = bx[j]
                        ay = by[j]
                        az = bz[j]
                        cx = bx[j + 1]
                        cy = by[j + 1]
                        cz = bz[j + 1]
                        n1 = bn[j]
                        n2 = bn[j + 1]
                        crx = ay * cz - az * cy
                        cry = az * cx - ax * cz
                        crz = ax * cy - ay * cx
                        dot = ax * cx + ay * cy + az * cz
                        nn = n1 * n2
                        den = nn * (nn + dot)
                        # inside the wire: distance to the segment below its radius
                        ux = ax - cx
                        uy = ay - cy
                        uz = az - cz
                        uu = ux * ux + uy * uy + uz * uz
                        cc = crx * crx + cry * cry + crz * crz
                        rr = r2[k]
                        proj = -(ax * ux + ay * uy + az * uz)  # (p-a).(b-a) with u = b - a = -(R1 - R2)
                        ins = ((cc < rr * uu) and (proj <= 0.0) and (proj >= -uu)) or (n1 * n1 < rr) or (n2 * n2 < rr)
                        f = 0.0
                        if not ins and den > 0.0:
                            f = (n1 + n2) / den
                        if ins:
                            hit += 1
                        a_re = f * ire[k]
                        a_im = f * iim[k]
                        sxr += crx * a_re
                        syr += cry * a_re
                        szr += crz * a_re
                        sxi += crx * a_im
                        syi += cry * a_im
                        szi += crz * a_im
                out[i, 0, 0] = sxr
                out[i, 0, 1] = sxi
                out[i, 1, 0] = syr
                out[i, 1, 1] = syi
                out[i, 2, 0] = szr
                out[i, 2, 1] = szi
                inside[i] = hit

    return kernel


def _get_kernel():
    global _kernel
    if _kernel is None:
        _kernel = _build_kernel()
    return _kernel


def warm_up() -> float:
    """Compile the kernel (or load it from numba's disk cache) before serving.

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
    tile: int = 64,
    vertex_block: int = 512,
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
    tile, vertex_block : int
        Cache blocking: points per parallel tile, vertices per block.

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
    19.999995
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
    start, end, cur, rad = _segment_arrays(segments, current_a, radius_m)
    verts, link_cur, link_rad = _polylines(start, end, cur, rad)
    vx, vy, vz = (np.ascontiguousarray(verts[:, k]) for k in range(3))
    ire = np.ascontiguousarray(link_cur.real)
    iim = np.ascontiguousarray(link_cur.imag)
    r2 = np.ascontiguousarray(link_rad**2)
    kernel = _get_kernel()

    n = len(p)
    out = np.zeros((n, 3), dtype=complex)
    inside = np.zeros(n, dtype=np.int64)
    ov = out.view(np.float64).reshape(n, 3, 2)
    for lo in range(0, n, chunk_size):
        hi = min(lo + chunk_size, n)
        q = p[lo:hi]
        kernel(np.ascontiguousarray(q[:, 0]), np.ascontiguousarray(q[:, 1]), np.ascontiguousarray(q[:, 2]),
               vx, vy, vz, ire, iim, r2, ov[lo:hi], inside[lo:hi], int(tile), int(vertex_block))
    out *= _K
    hits = inside > 0
    if on_conductor == "mask":
        out[hits] = 0.0
        return out, hits
    if hits.any():
        i = int(np.argmax(hits))
        raise must_be(f"points_m[{i}]", "outside every conductor (farther from its axis than its radius)",
                      tuple(float(v) for v in p[i]), GeometryError)
    return out
