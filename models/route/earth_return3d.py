"""Earth-return currents in 3-D: the complex-image field of straight current segments.

The earth is represented as in the 2-D engine (:func:`models.magnetic.complex_depth_m`,
Deri et al.): a perfect conductor at the complex depth ``p = sqrt(rho / (j omega mu0))``
below the ground plane z = 0.  A current segment from ``a`` to ``b`` then has an image
from ``a'`` to ``b'`` with the heights mirrored about the plane at depth ``p``::

    a' = (a_x, a_y, -(a_z + 2 p)),   b' = (b_x, b_y, -(b_z + 2 p)),   current -I (a' -> b')

so horizontal current components reverse and the vertical one keeps its sign, as
for a mirror image.  Its field at a real point is eq. (1) of
:mod:`models.route.magnetic3d` continued analytically to the complex image heights:
R1 = p_obs - a', R2 = p_obs - b' are complex vectors (only their z components are
complex, all with the same imaginary part 2 Im p), ``|R| = sqrt(R . R)`` without
conjugation (principal root), and cross and dot products are bilinear.  The
geometric factor is complex and multiplies the complex current phasor in full complex
arithmetic.  For an infinitely long horizontal segment this is exactly the 2-D
image term of :func:`models.magnetic.earth_return_phasors`.

Branch of the square root
-------------------------
With ``w = z_obs + a_z + 2 p`` the z component of R and ``p = c (1 - j)``, c = delta / 2
> 0 (skin depth delta), ``R . R = d^2 + w^2`` (d = horizontal distance, real) has

    Re(R . R) = d^2 + h^2 + 4 c h >= 0,   Im(R . R) = -4 c (h + 2 c) < 0,   h = z_obs + a_z,

so for an observation point above ground (z_obs >= 0) and a source above ground
(a_z > 0) the argument of R . R lies in (-90 deg, 0): never on the negative real axis,
the branch cut of the principal root.  As rho varies from 0 (real mirror image,
R . R > 0) to any value, R . R therefore never crosses the cut, and the principal root
is the analytic continuation of the real distance (Re |R| > 0).  The same holds with
``h > -2c``; :func:`image_flux_density_segments` requires ``z_obs >= 0``.

Cancellation near a long segment is avoided as in the free-space kernel: Lagrange's
identity (R1.R1)(R2.R2) = (R1.R2)^2 + (R1 x R2).(R1 x R2) holds for bilinear products,
so eq. (2) of :mod:`models.route.magnetic3d` is exact here too; it is used where
``Re(R1.R2 * conj(|R1||R2|)) < 0`` (R1.R2 closer to -|R1||R2| than to +|R1||R2|).

Underground (screened) cables get no image, as in the 2-D engine.

The numba kernel (``parallel=True`` over tiles of points, ``cache=True``) groups
segments into runs of one current like the free-space kernel (one complex square root
per vertex), and works in real arithmetic on (re, im) pairs so that the loop over a
tile's points vectorises.  :func:`image_flux_density_segments_numpy` is the plain
complex-numpy reference.  Figures: benchmarks/README.md.

References
----------
.. [1] A. Deri, G. Tevan, A. Semlyen and A. Castanheira, "The complex ground return
   plane: a simplified model for homogeneous and multi-layer earth return", IEEE
   Trans. Power App. Syst., vol. PAS-100, no. 8, pp. 3686-3693, 1981,
   doi:10.1109/TPAS.1981.317011 (from memory).
"""

from __future__ import annotations

import cmath
import functools
import math
import time

import numpy as np

from ..errors import GeometryError, must_be
from ..units import MU0_H_PER_M
from .magnetic3d import KERNEL_LOCK, DEFAULT_CHUNK_SIZE, segment_runs, segment_arrays
from .types import SegmentSet

__all__ = ["image_flux_density_segments", "image_flux_density_segments_numpy", "warm_up"]

_K = MU0_H_PER_M / (4.0 * math.pi)


def _check_depth(complex_depth_m) -> complex:
    try:
        p = complex(complex_depth_m)
    except (TypeError, ValueError):
        raise must_be("complex_depth_m", "a complex number", complex_depth_m, GeometryError) from None
    if not (cmath.isfinite(p) and p.real >= 0.0 and p.imag <= 0.0):
        raise must_be("complex_depth_m", "finite with Re >= 0 and Im <= 0 (models.magnetic.complex_depth_m)",
                      complex_depth_m, GeometryError)
    return p


def _check_points(points_m) -> np.ndarray:
    p = np.asarray(points_m, dtype=float)
    if p.ndim != 2 or p.shape[1] != 3:
        raise must_be("points_m", "an array of shape (n, 3)", p.shape, GeometryError)
    if not np.all(np.isfinite(p)):
        raise must_be("points_m", "finite", "non-finite values", GeometryError)
    if p.size and p[:, 2].min() < 0.0:
        i = int(np.argmin(p[:, 2]))
        raise must_be(f"points_m[{i}]", "at or above the ground plane (z >= 0) for the earth-return image",
                      tuple(float(v) for v in p[i]), GeometryError)
    return p


def _image_sources(segments, current_a):
    """(start, end, current) of the segments that get an image: all but screened (underground) wires."""
    start, end, cur, _ = segment_arrays(segments, current_a)
    if isinstance(segments, SegmentSet):
        screened = np.asarray(segments.wire_screened, dtype=bool)[np.asarray(segments.wire_index)]
        start, end, cur = start[~screened], end[~screened], cur[~screened]
    return start, end, cur


# --------------------------------------------------------------------------- numpy reference


def image_flux_density_segments_numpy(points_m, segments, complex_depth_m, current_a=None, *,
                                      chunk_size: int = 16) -> np.ndarray:
    """Complex-numpy evaluation of the image field: the reference for tests and benchmarks.

    Parameters
    ----------
    points_m : ndarray, shape (n, 3)
        Observation points, z >= 0 [m].
    segments : SegmentSet or (start_m, end_m)
        Source segments (heights above the ground plane z = 0); with arrays,
        ``current_a`` (complex, shape (m,)) is required.
    complex_depth_m : complex
        ``p`` from :func:`models.magnetic.complex_depth_m` [m].
    chunk_size : int
        Points per chunk (about 400 bytes x chunk_size x m of temporaries).

    Returns
    -------
    complex ndarray, shape (n, 3)
        B phasors of the images alone [T].
    """
    p_c = _check_depth(complex_depth_m)
    pts = _check_points(points_m)
    start, end, cur = _image_sources(segments, current_a)
    ia = start.astype(complex)
    ib = end.astype(complex)
    ia[:, 2] = -(start[:, 2] + 2.0 * p_c)
    ib[:, 2] = -(end[:, 2] + 2.0 * p_c)
    out = np.zeros((len(pts), 3), dtype=complex)
    for lo in range(0, len(pts), chunk_size):
        q = pts[lo:lo + chunk_size, None, :]
        r1 = q - ia[None]                      # (chunk, m, 3) complex
        r2 = q - ib[None]
        n1 = np.sqrt(np.sum(r1 * r1, axis=2))  # principal root, no conjugation
        n2 = np.sqrt(np.sum(r2 * r2, axis=2))
        c = np.cross(r1, r2)                   # bilinear
        nn = n1 * n2
        dot = np.sum(r1 * r2, axis=2)
        neg = (dot * np.conj(nn)).real < 0.0
        num = (n1 + n2) * np.where(neg, nn - dot, 1.0)
        den = nn * np.where(neg, np.sum(c * c, axis=2), nn + dot)   # eq. (2) / eq. (1)
        f = num / den
        out[lo:lo + chunk_size] = -_K * np.einsum("pmk,pm,m->pk", c, f, cur)   # image current -I
    return out


# --------------------------------------------------------------------------- numba kernel

@functools.cache
def _get_kernel():
    """Compile (or load from numba's on-disk cache) the image-field kernel."""
    import numba as nb

    fm = {"contract", "nsz"}   # no reassoc/arcp: vector and remainder loops give the same sums (chunking-invariant)

    @nb.njit(parallel=True, fastmath=fm, cache=True, nogil=True, boundscheck=False, error_model="numpy")
    def image_kernel(px, py, pz, vx, vy, vz, run_start, run_links, run_re, run_im, depth_re, depth_im,  # pragma: no cover
                     scale, out, tile):
        # Points in tiles (parallel over tiles).  For each run (a polyline of one current),
        # the links are visited in order; the inner loop runs over the tile's points and
        # carries the complex distance |R| to the shared image vertex from one link to the
        # next.  Complex numbers are (re, im) pairs of floats.  The z component of R is
        # w = z + v_z + 2 Re p + j s with the same s = 2 Im p for every point and vertex.
        n = px.shape[0]
        nr = run_start.shape[0]
        ntile = (n + tile - 1) // tile
        dr = 2.0 * depth_re
        s = 2.0 * depth_im
        s2 = s * s
        for t in nb.prange(ntile):
            lo = t * tile
            hi = min(lo + tile, n)
            m = hi - lo
            qx = px[lo:hi].copy()
            qy = py[lo:hi].copy()
            qz = pz[lo:hi].copy() + dr
            ar = np.empty(m)
            ai = np.empty(m)
            tx = np.empty(m)
            txi = np.empty(m)
            ty = np.empty(m)
            tyi = np.empty(m)
            tz = np.empty(m)
            tzi = np.empty(m)
            s0 = np.zeros(m)
            s1 = np.zeros(m)
            s2_ = np.zeros(m)
            s3 = np.zeros(m)
            s4 = np.zeros(m)
            s5 = np.zeros(m)
            for r in range(nr):
                k0 = run_start[r]
                for i in range(m):
                    dx = qx[i] - vx[k0]
                    dy = qy[i] - vy[k0]
                    wr = qz[i] + vz[k0]
                    xr = dx * dx + dy * dy + wr * wr - s2
                    xi = 2.0 * wr * s
                    g = math.sqrt(0.5 * (math.sqrt(xr * xr + xi * xi) + abs(xr)))
                    hh = abs(xi) / (2.0 * g)
                    pos = xr >= 0.0
                    ar[i] = g if pos else hh
                    ai[i] = math.copysign(hh if pos else g, xi)
                    tx[i] = 0.0
                    txi[i] = 0.0
                    ty[i] = 0.0
                    tyi[i] = 0.0
                    tz[i] = 0.0
                    tzi[i] = 0.0
                for k in range(k0, k0 + run_links[r]):
                    v0x = vx[k]
                    v0y = vy[k]
                    v0z = vz[k]
                    v1x = vx[k + 1]
                    v1y = vy[k + 1]
                    v1z = vz[k + 1]
                    cxi = s * (v1y - v0y)      # Im(R1 x R2)_x = s (a_y - b_y) with a, b = R1, R2
                    cyi = s * (v0x - v1x)      # Im(R1 x R2)_y = s (b_x - a_x)
                    for i in range(m):
                        x = qx[i]
                        y = qy[i]
                        z = qz[i]
                        ax = x - v0x
                        ay = y - v0y
                        war = z + v0z
                        bx = x - v1x
                        by = y - v1y
                        wbr = z + v1z
                        # |R2| = sqrt(R2 . R2), principal root (Re(R2 . R2) >= 0 above ground)
                        xr = bx * bx + by * by + wbr * wbr - s2
                        xi = 2.0 * wbr * s
                        # sqrt(xr + j xi) = (g, xi / 2g) for xr >= 0, else (|xi| / 2g, sign(xi) g),
                        # g = sqrt((|x| + |xr|) / 2): no cancellation, one division, no branch
                        g = math.sqrt(0.5 * (math.sqrt(xr * xr + xi * xi) + abs(xr)))
                        hh = abs(xi) / (2.0 * g)
                        pos = xr >= 0.0
                        n2r = g if pos else hh
                        n2i = math.copysign(hh if pos else g, xi)
                        n1r = ar[i]
                        n1i = ai[i]
                        # C = R1 x R2 (bilinear)
                        cxr = ay * wbr - war * by
                        cyr = war * bx - ax * wbr
                        cz = ax * by - ay * bx
                        # dot = R1 . R2, nn = |R1| |R2|
                        dtr = ax * bx + ay * by + war * wbr - s2
                        dti = s * (war + wbr)
                        nnr = n1r * n2r - n1i * n2i
                        nni = n1r * n2i + n1i * n2r
                        neg = dtr * nnr + dti * nni < 0.0
                        # eq. (1): f = (n1 + n2) / (nn (nn + dot));
                        # eq. (2): f = (n1 + n2)(nn - dot) / (nn C.C)
                        ccr = cxr * cxr - cxi * cxi + cyr * cyr - cyi * cyi + cz * cz
                        cci = 2.0 * (cxr * cxi + cyr * cyi)
                        qr = (nnr - dtr) if neg else 1.0
                        qi = (nni - dti) if neg else 0.0
                        er = ccr if neg else nnr + dtr
                        ei = cci if neg else nni + dti
                        sr = n1r + n2r
                        si = n1i + n2i
                        numr = sr * qr - si * qi
                        numi = sr * qi + si * qr
                        denr = nnr * er - nni * ei
                        deni = nnr * ei + nni * er
                        inv = 1.0 / (denr * denr + deni * deni + 1e-300)
                        fr = (numr * denr + numi * deni) * inv
                        fi = (numi * denr - numr * deni) * inv
                        tx[i] += cxr * fr - cxi * fi
                        txi[i] += cxr * fi + cxi * fr
                        ty[i] += cyr * fr - cyi * fi
                        tyi[i] += cyr * fi + cyi * fr
                        tz[i] += cz * fr
                        tzi[i] += cz * fi
                        ar[i] = n2r
                        ai[i] = n2i
                cr = run_re[r]
                ci = run_im[r]
                for i in range(m):
                    s0[i] += tx[i] * cr - txi[i] * ci
                    s1[i] += tx[i] * ci + txi[i] * cr
                    s2_[i] += ty[i] * cr - tyi[i] * ci
                    s3[i] += ty[i] * ci + tyi[i] * cr
                    s4[i] += tz[i] * cr - tzi[i] * ci
                    s5[i] += tz[i] * ci + tzi[i] * cr
            for i in range(m):
                out[lo + i, 0, 0] = scale * s0[i]
                out[lo + i, 0, 1] = scale * s1[i]
                out[lo + i, 1, 0] = scale * s2_[i]
                out[lo + i, 1, 1] = scale * s3[i]
                out[lo + i, 2, 0] = scale * s4[i]
                out[lo + i, 2, 1] = scale * s5[i]

    return image_kernel


def warm_up() -> float:
    """Compile the image kernel (or load it from numba's disk cache); seconds spent.

    Call it at server start-up after any fork, like :func:`models.route.magnetic3d.warm_up`
    (``models.route.warm_up_magnetic`` does both).
    """
    t0 = time.perf_counter()
    segs = (np.array([[0.0, 0.0, 10.0]]), np.array([[1.0, 0.0, 10.0]]))
    image_flux_density_segments(np.array([[0.5, 1.0, 1.0]]), segs, 100.0 - 100.0j, current_a=np.array([1.0 + 1.0j]))
    return time.perf_counter() - t0


def image_flux_density_segments(points_m, segments, complex_depth_m, current_a=None, *,
                                chunk_size: int = DEFAULT_CHUNK_SIZE, tile: int = 256) -> np.ndarray:
    """B phasors of the earth-return images of straight current segments.

    Parameters
    ----------
    points_m : array_like, shape (n, 3)
        Observation points (x, y, z) [m], at or above the ground plane (z >= 0).
    segments : SegmentSet or tuple (start_m, end_m)
        Source segments with heights above the ground plane z = 0 [m].  Segments of
        screened (underground) wires of a SegmentSet get no image.
    complex_depth_m : complex
        ``p`` from :func:`models.magnetic.complex_depth_m` [m]; 0 gives the real mirror
        image of a perfectly conducting ground.
    current_a : complex array_like, shape (m,), optional
        rms current of each segment, start to end [A] (required with arrays).
    chunk_size : int
        Points per kernel call (bounds temporary memory: three float arrays of
        ``chunk_size``; the result itself is 48 bytes a point).
    tile : int
        Points per parallel tile (cache blocking).

    Returns
    -------
    complex ndarray, shape (n, 3)
        rms B phasors of the images alone [T]; add them to
        :func:`models.route.magnetic3d.flux_density_segments`.

    Raises
    ------
    GeometryError
        Bad shapes, non-finite values, a point below ground, a bad complex depth.

    Examples
    --------
    >>> from models.magnetic import complex_depth_m
    >>> seg = (np.array([[-1e6, 0.0, 10.0]]), np.array([[1e6, 0.0, 10.0]]))
    >>> b = image_flux_density_segments(np.array([[0.0, 0.0, 0.0]]), seg, 0.0, current_a=np.array([1000.0]))
    >>> round(float(b[0, 1].real) * 1e6, 4)   # perfect mirror: mu0 I / (2 pi 10 m), doubling the tangential field at z = 0
    20.0
    """
    if not (isinstance(chunk_size, (int, np.integer)) and not isinstance(chunk_size, bool) and chunk_size >= 1):
        raise must_be("chunk_size", "an integer >= 1", chunk_size, GeometryError)
    if not (isinstance(tile, (int, np.integer)) and not isinstance(tile, bool) and tile >= 1):
        raise must_be("tile", "an integer >= 1", tile, GeometryError)
    p_c = _check_depth(complex_depth_m)
    pts = _check_points(points_m)
    start, end, cur = _image_sources(segments, current_a)
    verts, run_start, run_links, run_cur, _ = segment_runs(start, end, cur)
    wx, wy, wz = (np.ascontiguousarray(verts[:, k]) for k in range(3))
    run_re = np.ascontiguousarray(run_cur.real)
    run_im = np.ascontiguousarray(run_cur.imag)
    n = len(pts)
    out = np.zeros((n, 3), dtype=complex)
    if n == 0 or len(run_start) == 0:
        return out
    kernel = _get_kernel()
    from numba import parallel_chunksize

    ov = out.view(np.float64).reshape(n, 3, 2)
    for lo in range(0, n, chunk_size):
        hi = min(lo + chunk_size, n)
        qx, qy, qz = (np.ascontiguousarray(pts[lo:hi, k]) for k in range(3))
        with KERNEL_LOCK, parallel_chunksize(1):
            kernel(qx, qy, qz, wx, wy, wz, run_start, run_links, run_re, run_im, p_c.real, p_c.imag, -_K,
                   ov[lo:hi], int(tile))
    return out
