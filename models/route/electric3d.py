"""3-D electric field of a route by charge simulation with segmented line charges.

Every straight segment of every unscreened wire carries one unknown uniform rms
line-charge phasor ``q_j`` [C/m]; its mirror image in the perfectly conducting
ground plane z = 0 carries ``-q_j``.  On the conductor surface around each
segment's midpoint, the mean potential of four matching points must equal the
wire's voltage (0 V for earth wires).  That gives the real square system ``P q = V`` of
potential coefficients of finite segments, solved once (one LU, with the real
and imaginary parts of ``V`` as two right-hand sides; float32 LU refined to
double precision, :mod:`models.route.refined_solve`).  The field at any point
is then the closed-form field of the finite charged segments and their images.

Screened underground cables carry no charge in this model (their field stays
inside the screen); their segments get ``q = 0``.

Formulas (``k = 1 / (4 pi eps0)``, segment from ``A`` to ``B`` of length ``L``,
observation point ``p``, ``r1 = |p - A|``, ``r2 = |p - B|``, ``S = r1 + r2``):

* potential of a uniformly charged straight segment
  ``V = k q ln((S + L) / (S - L))``;
* its field, ``E = -grad V = k q (2 L / (S^2 - L^2)) (d1 / r1 + d2 / r2)`` with
  ``d1 = p - A``, ``d2 = p - B``, since ``grad S = d1/r1 + d2/r2``.

The potential is the integral of the point-charge potential ``k q ds / |p - s|``
along the segment (the finite line charge worked in standard texts, e.g.
D. J. Griffiths, *Introduction to Electrodynamics*, ch. 2, from memory); potential
and field are checked against numerical quadrature of the point-charge integrals
in the tests.  The ground images are the method of images for a perfectly
conducting plane (ibid., ch. 3, from memory), the 3-D form of the Maxwell potential-coefficient method
of the 2-D cross-section (CIGRE Technical Brochure 21, 1980; EPRI *Transmission
Line Reference Book, 345 kV and Above*, 2nd ed., 1982, ch. 8; from memory).

Matching points (a choice, documented): common practice is a point on the
conductor surface at the segment midpoint.  We take four, at distance ``r``
(wire radius, or equivalent bundle radius) from the axis at the midpoint, on the
horizontal and the vertical-ish radius on both sides, and match their mean
potential to the wire voltage.  By the mean-value property of harmonic functions
the mean over the circle of the potential of the other wires (and of the own
image) equals its value on the axis up to ``(r/d)^4`` terms, so a long level wire
reproduces the 2-D Maxwell coefficients ``ln(2h/r)`` and ``ln(D'/d)`` and the
result does not depend on the direction of the segments.  A single point on one
side would shift the charges by about ``r/d`` times the coupling (2e-3 for a
400 kV flat line with 0.13 m equivalent bundle radius, measured).

Coordinates as in :mod:`models.route.types`: x east, y north, z up, ground z = 0.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from ..errors import GeometryError, must_be
from ..units import EPS0_F_PER_M
from .refined_solve import solve_refined
from .types import SegmentSet

__all__ = [
    "DEFAULT_CHUNK_SIZE",
    "MAX_CHARGE_SEGMENTS",
    "electric_field_segments",
    "electric_potential_segments",
    "line_charges",
    "matching_matrix",
    "matching_points",
    "potential_coefficients",
    "warm_up",
]

K_E = 1.0 / (4.0 * math.pi * EPS0_F_PER_M)
"""Coulomb constant 1/(4 pi eps0) [m/F]."""

DEFAULT_CHUNK_SIZE = 65536
"""Observation points per call of the field kernel (bounds the working memory)."""

MAX_CHARGE_SEGMENTS = 6000
"""Largest number of unscreened segments :func:`line_charges` accepts: the dense matrix and
its LU copy take 16 m^2 bytes (576 MB at 6,000), which keeps a request under 1 GiB."""

_POINT_BLOCK = 64      # points per tile in the field kernel (SIMD lanes; 11 x 64 doubles in L1)
_SEGMENT_BLOCK = 256   # segments per block in the matching-matrix kernel
_BOX_GROUP = 16        # segments per bounding box in the inside-a-wire test


# --------------------------------------------------------------------------- kernels


@numba.njit(cache=True, inline="always", error_model="numpy")
def _coef_ratio(px, py, pz, ax, ay, az, bx, by, bz):  # pragma: no cover - compiled
    """(S+L)(S'-L) / ((S-L)(S'+L)) for the point p and segment A->B with its image (z -> -z).

    ``S - L`` of the real segment is evaluated as ``(r1 - t) + (r2 - (L - t))`` with each
    bracket in the cancellation-free form ``rho^2 / (r + t)`` when t > 0.
    """
    dx = bx - ax
    dy = by - ay
    dz = bz - az
    length = math.sqrt(dx * dx + dy * dy + dz * dz)
    ux = dx / length
    uy = dy / length
    uz = dz / length
    d1x = px - ax
    d1y = py - ay
    d1z = pz - az
    r1 = math.sqrt(d1x * d1x + d1y * d1y + d1z * d1z)
    d2x = d1x - dx
    d2y = d1y - dy
    d2z = d1z - dz
    r2 = math.sqrt(d2x * d2x + d2y * d2y + d2z * d2z)
    t = d1x * ux + d1y * uy + d1z * uz
    s = length - t
    qx = d1x - t * ux
    qy = d1y - t * uy
    qz = d1z - t * uz
    rho2 = qx * qx + qy * qy + qz * qz
    e1 = rho2 / (r1 + t) if t > 0.0 else r1 - t
    e2 = rho2 / (r2 + s) if s > 0.0 else r2 - s
    # image segment: never close to a point above ground, direct form is accurate
    d1zi = pz + az
    d2zi = pz + bz
    r1i = math.sqrt(d1x * d1x + d1y * d1y + d1zi * d1zi)
    r2i = math.sqrt(d2x * d2x + d2y * d2y + d2zi * d2zi)
    si = r1i + r2i
    return ((r1 + r2 + length) * (si - length)) / ((e1 + e2) * (si + length))


@numba.njit(parallel=True, cache=True, error_model="numpy", boundscheck=False)
def _potential_matrix_kernel(pts, seg_a, seg_b, out):  # pragma: no cover - compiled
    """out[i, j] = ln ratio: potential at pts[i] of unit k*q on segment j and -q on its image."""
    n = pts.shape[0]
    m = seg_a.shape[0]
    for i in numba.prange(n):
        for j in range(m):
            out[i, j] = math.log(_coef_ratio(pts[i, 0], pts[i, 1], pts[i, 2], seg_a[j, 0], seg_a[j, 1],
                                             seg_a[j, 2], seg_b[j, 0], seg_b[j, 1], seg_b[j, 2]))


@numba.njit(parallel=True, cache=True, error_model="numpy", boundscheck=False)
def _matching_matrix_kernel(mp, vert, sdir, blocks, out):  # pragma: no cover - compiled
    """out[i, j] = mean over the matching points mp[i, :] of the ln ratio of segment j (one log per entry).

    Segments as polylines (see _polylines): ``vert`` (3, nv) vertices, ``sdir[:, k]`` =
    ux, uy, uz, L of the segment starting at vertex k, ``blocks[b] = (k0, k1, col0)``:
    segments k0..k1-1 are matrix columns col0..col0+k1-k0-1.  Vertex distances are shared
    by adjacent segments.  For each point the ratio ``(S+L)(S'-L) / ((S-L)(S'+L))`` is
    kept as numerator and denominator, multiplied over the matching points, and divided
    and logged once; beside the segment (0 < t < L) ``1/(S-L)`` is written as
    ``(r1+t)(r2+L-t) / (rho^2 (S+L))`` (no cancellation).
    """
    m = mp.shape[0]
    nk = mp.shape[1]
    nv = vert.shape[1]
    vx = vert[0]
    vy = vert[1]
    vz = vert[2]
    for i in numba.prange(m):
        num = np.ones(m)
        den = np.ones(m)
        rv = np.empty(nv)
        rvi = np.empty(nv)
        for c in range(nk):
            px = mp[i, c, 0]
            py = mp[i, c, 1]
            pz = mp[i, c, 2]
            for k in range(nv):
                dx = px - vx[k]
                dy = py - vy[k]
                dz = pz - vz[k]
                dzi = pz + vz[k]
                h = dx * dx + dy * dy
                rv[k] = math.sqrt(h + dz * dz)
                rvi[k] = math.sqrt(h + dzi * dzi)
            for b in range(blocks.shape[0]):
                k0 = blocks[b, 0]
                k1 = blocks[b, 1]
                ns = k1 - k0
                bx = vx[k0:k1 + 1]
                by = vy[k0:k1 + 1]
                bz = vz[k0:k1 + 1]
                br = rv[k0:k1 + 1]
                bri = rvi[k0:k1 + 1]
                ux = sdir[0, k0:k1]
                uy = sdir[1, k0:k1]
                uz = sdir[2, k0:k1]
                ul = sdir[3, k0:k1]
                bnum = num[blocks[b, 2]:blocks[b, 2] + ns]
                bden = den[blocks[b, 2]:blocks[b, 2] + ns]
                for t in range(ns):
                    d1x = px - bx[t]
                    d1y = py - by[t]
                    d1z = pz - bz[t]
                    length = ul[t]
                    r1 = br[t]
                    r2 = br[t + 1]
                    si = bri[t] + bri[t + 1]
                    tt = d1x * ux[t] + d1y * uy[t] + d1z * uz[t]
                    ss = length - tt
                    qx = d1x - tt * ux[t]
                    qy = d1y - tt * uy[t]
                    qz = d1z - tt * uz[t]
                    rho2 = qx * qx + qy * qy + qz * qz
                    ssum = r1 + r2
                    if tt > 0.0 and ss > 0.0:
                        fn = (si - length) * (r1 + tt) * (r2 + ss)
                        fd = rho2 * (si + length)
                    else:
                        fn = (ssum + length) * (si - length)
                        fd = (ssum - length) * (si + length)
                    bnum[t] *= fn
                    bden[t] *= fd
        scale = 1.0 / nk
        for j in range(m):
            out[i, j] = math.log(num[j] / den[j]) * scale


@numba.njit(cache=True, inline="always", fastmath=True, error_model="numpy")
def _link_field(x, y, z, d1x, d1y, d1z, d1zi, r1, r1i, bx, by, bz, two_l, l2):  # pragma: no cover - compiled
    """Field geometry g of one link (segment + image) from its first vertex's carried values.

    ``d1 = p - A`` (``d1zi = z + A_z`` for the image), ``r1``/``r1i`` the distances to A and
    its image; ``B`` the second vertex, ``two_l = 2L``, ``l2 = L^2``.  Returns g (so that
    E = k q g) and the same quantities for B, carried to the next link:
    ``g = f (d1 r2 + d2 r1) - fi (d1' r2' + d2' r1')``, ``f = 2L / (r1 r2 (S^2 - L^2))``,
    with one division for segment and image.
    """
    d2x = x - bx
    d2y = y - by
    d2z = z - bz
    d2zi = z + bz              # image vertex: z negated
    h2 = d2x * d2x + d2y * d2y
    r2 = math.sqrt(h2 + d2z * d2z)
    r2i = math.sqrt(h2 + d2zi * d2zi)
    ssum = r1 + r2
    si = r1i + r2i
    den = r1 * r2 * (ssum * ssum - l2)
    deni = r1i * r2i * (si * si - l2)
    inv = two_l / (den * deni)
    f = inv * deni
    fi = inv * den
    c1 = f * r2
    c2 = f * r1
    c1i = fi * r2i
    c2i = fi * r1i
    w1 = c1 - c1i
    w2 = c2 - c2i
    gx = d1x * w1 + d2x * w2
    gy = d1y * w1 + d2y * w2
    gz = d1z * c1 + d2z * c2 - d1zi * c1i - d2zi * c2i
    return gx, gy, gz, d2x, d2y, d2z, d2zi, r2, r2i


@numba.njit(parallel=True, cache=True, fastmath=True, error_model="numpy", boundscheck=False)
def _field_kernel(pts, vert, sdat, runs, out):  # pragma: no cover - compiled
    """Field of all charged segments + images at pts (without the factor k = 1/(4 pi eps0)).

    Segments are stored as polylines (see _pack_segments): link k joins vertices k and
    k+1 of ``vert`` (rows x, y, z); ``sdat[:, k]`` = 2L, L, q_re, q_im of that link;
    ``runs[r] = (k0, n)``: links k0..k0+n-1 form one polyline, n even (a zero-length,
    zero-charge link pads odd polylines).  out[i, c, 0/1]: real/imag part of component c.

    Threads take tiles of _POINT_BLOCK points; the innermost loop runs over the tile's
    points (SIMD lanes, vectorised by LLVM: numpy error model, no wrap-around indexing)
    and sweeps two links at a time, carrying the distances to the shared vertex (and
    to its image) from one link to the next: 2 square roots + 1 division per
    segment-point pair, accumulators loaded and stored once per two links.  The tile's
    arrays (11 x 64 doubles) stay in L1.  Points inside a wire must be rejected beforehand.
    """
    n = pts.shape[0]
    ntile = (n + _POINT_BLOCK - 1) // _POINT_BLOCK
    vx = vert[0]
    vy = vert[1]
    vz = vert[2]
    for tb in numba.prange(ntile):
        lo = tb * _POINT_BLOCK
        hi = min(lo + _POINT_BLOCK, n)
        m = hi - lo
        qx = pts[lo:hi, 0].copy()
        qy = pts[lo:hi, 1].copy()
        qz = pts[lo:hi, 2].copy()
        r1a = np.empty(m)
        r1ia = np.empty(m)
        s0 = np.zeros(m)
        s1 = np.zeros(m)
        s2 = np.zeros(m)
        s3 = np.zeros(m)
        s4 = np.zeros(m)
        s5 = np.zeros(m)
        for r in range(runs.shape[0]):
            k0 = runs[r, 0]
            nl = runs[r, 1]
            ax = vx[k0]
            ay = vy[k0]
            az = vz[k0]
            for i in range(m):
                dx = qx[i] - ax
                dy = qy[i] - ay
                dz = qz[i] - az
                dzi = qz[i] + az
                h = dx * dx + dy * dy
                r1a[i] = math.sqrt(h + dz * dz)
                r1ia[i] = math.sqrt(h + dzi * dzi)
            for k in range(k0, k0 + nl, 2):
                ax = vx[k]
                ay = vy[k]
                az = vz[k]
                b0x = vx[k + 1]
                b0y = vy[k + 1]
                b0z = vz[k + 1]
                tl_0 = sdat[0, k + 0]
                l2_0 = sdat[1, k + 0] * sdat[1, k + 0]
                qr_0 = sdat[2, k + 0]
                qi_0 = sdat[3, k + 0]
                b1x = vx[k + 2]
                b1y = vy[k + 2]
                b1z = vz[k + 2]
                tl_1 = sdat[0, k + 1]
                l2_1 = sdat[1, k + 1] * sdat[1, k + 1]
                qr_1 = sdat[2, k + 1]
                qi_1 = sdat[3, k + 1]
                for i in range(m):
                    x = qx[i]
                    y = qy[i]
                    z = qz[i]
                    d1x = x - ax
                    d1y = y - ay
                    d1z = z - az
                    d1zi = z + az
                    r1 = r1a[i]
                    r1i = r1ia[i]
                    e0 = s0[i]
                    e1 = s1[i]
                    e2 = s2[i]
                    e3 = s3[i]
                    e4 = s4[i]
                    e5 = s5[i]
                    gx, gy, gz, d2x, d2y, d2z, d2zi, r2, r2i = _link_field(
                        x, y, z, d1x, d1y, d1z, d1zi, r1, r1i, b0x, b0y, b0z, tl_0, l2_0)
                    e0 += qr_0 * gx
                    e1 += qi_0 * gx
                    e2 += qr_0 * gy
                    e3 += qi_0 * gy
                    e4 += qr_0 * gz
                    e5 += qi_0 * gz
                    gx, gy, gz, d2x, d2y, d2z, d2zi, r2, r2i = _link_field(
                        x, y, z, d2x, d2y, d2z, d2zi, r2, r2i, b1x, b1y, b1z, tl_1, l2_1)
                    e0 += qr_1 * gx
                    e1 += qi_1 * gx
                    e2 += qr_1 * gy
                    e3 += qi_1 * gy
                    e4 += qr_1 * gz
                    e5 += qi_1 * gz
                    s0[i] = e0
                    s1[i] = e1
                    s2[i] = e2
                    s3[i] = e3
                    s4[i] = e4
                    s5[i] = e5
                    r1a[i] = r2
                    r1ia[i] = r2i
        for i in range(m):
            out[lo + i, 0, 0] = s0[i]
            out[lo + i, 0, 1] = s1[i]
            out[lo + i, 1, 0] = s2[i]
            out[lo + i, 1, 1] = s3[i]
            out[lo + i, 2, 0] = s4[i]
            out[lo + i, 2, 1] = s5[i]


@numba.njit(parallel=True, cache=True, error_model="numpy", boundscheck=False)
def _inside_kernel(pts, seg_a, seg_b, radius, box_lo, box_hi, hit):  # pragma: no cover - compiled
    """hit[i] = index of the first segment whose capsule (radius[j] around it) contains pts[i], else -1.

    Segments are taken in groups of _BOX_GROUP with an axis-aligned bounding box
    (inflated by the group's largest radius); only points inside a box are tested
    exactly (distance to the segment < radius).
    """
    n = pts.shape[0]
    m = seg_a.shape[0]
    ng = box_lo.shape[0]
    for i in numba.prange(n):
        hit[i] = -1
        px = pts[i, 0]
        py = pts[i, 1]
        pz = pts[i, 2]
        for g in range(ng):
            if (px < box_lo[g, 0] or px > box_hi[g, 0] or py < box_lo[g, 1] or py > box_hi[g, 1]
                    or pz < box_lo[g, 2] or pz > box_hi[g, 2]):
                continue
            for j in range(g * _BOX_GROUP, min((g + 1) * _BOX_GROUP, m)):
                dx = seg_b[j, 0] - seg_a[j, 0]
                dy = seg_b[j, 1] - seg_a[j, 1]
                dz = seg_b[j, 2] - seg_a[j, 2]
                wx = px - seg_a[j, 0]
                wy = py - seg_a[j, 1]
                wz = pz - seg_a[j, 2]
                t = (wx * dx + wy * dy + wz * dz) / (dx * dx + dy * dy + dz * dz)
                t = min(max(t, 0.0), 1.0)
                ex = wx - t * dx
                ey = wy - t * dy
                ez = wz - t * dz
                if ex * ex + ey * ey + ez * ez < radius[j] * radius[j]:
                    hit[i] = j
                    break
            if hit[i] >= 0:
                break


# --------------------------------------------------------------------------- helpers


def _check_segments(segments: SegmentSet) -> None:
    """Shape/physics checks of a SegmentSet for the electric model (raises EngineInputError/GeometryError)."""
    start = np.asarray(segments.start_m, dtype=float)
    end = np.asarray(segments.end_m, dtype=float)
    if start.ndim != 2 or start.shape[1] != 3 or end.shape != start.shape:
        raise must_be("segments.start_m", "an (m, 3) array matching end_m", (start.shape, end.shape))
    widx = np.asarray(segments.wire_index)
    nw = np.asarray(segments.wire_radius_m).shape[0]
    if widx.shape != (start.shape[0],) or (widx.size and (widx.min() < 0 or widx.max() >= nw)):
        raise must_be("segments.wire_index", f"an (m,) array of wire rows in [0, {nw})", widx.shape)
    for name in ("wire_voltage_v", "wire_screened"):
        if np.asarray(getattr(segments, name)).shape != (nw,):
            raise must_be(f"segments.{name}", f"an array of shape ({nw},)", np.asarray(getattr(segments, name)).shape)
    for name, arr in (("start_m", start), ("end_m", end)):
        bad = ~np.isfinite(arr).all(axis=1)
        if bad.any():
            j = int(np.flatnonzero(bad)[0])
            raise must_be(f"segments.{name}[{j}]", "finite", arr[j].tolist())
    volts = np.asarray(segments.wire_voltage_v)
    badv = ~np.isfinite(volts)
    if badv.any():
        w = int(np.flatnonzero(badv)[0])
        raise must_be(f"segments.wire_voltage_v[{w}]", "finite", complex(volts[w]))
    radius = np.asarray(segments.wire_radius_m, dtype=float)
    active = ~np.asarray(segments.wire_screened, dtype=bool)
    badr = active & ~(radius > 0)
    if badr.any():
        w = int(np.flatnonzero(badr)[0])
        raise must_be(f"segments.wire_radius_m[{w}]", "> 0", float(radius[w]), GeometryError)
    length = np.linalg.norm(end - start, axis=1)
    seg_active = active[widx]
    short = seg_active & ~(length > 0)
    if short.any():
        j = int(np.flatnonzero(short)[0])
        raise must_be(f"segments.end_m[{j}]", "different from start_m (zero-length segment)", end[j].tolist(),
                      GeometryError)
    zmin = np.minimum(start[:, 2], end[:, 2])
    low = seg_active & ~(zmin > radius[widx])
    if low.any():
        j = int(np.flatnonzero(low)[0])
        raise must_be(f"segments.start_m[{j}]", f"above ground by more than the wire radius {radius[widx[j]]!r} m",
                      float(zmin[j]), GeometryError)


def _active(segments: SegmentSet) -> np.ndarray:
    """Boolean mask of segments that carry charge (wire not screened)."""
    screened = np.asarray(segments.wire_screened, dtype=bool)
    return ~screened[np.asarray(segments.wire_index)]


def matching_points(segments: SegmentSet) -> np.ndarray:
    """Matching points of the charge simulation, four per segment.

    Parameters
    ----------
    segments : SegmentSet

    Returns
    -------
    ndarray, shape (m, 4, 3)
        Points on the surface of the wire around each segment's midpoint [m]:
        midpoint ``+ r n1``, ``+ r n2``, ``- r n1``, ``- r n2`` with ``r`` the wire
        radius, ``u`` the segment direction, ``n1 = u x z / |u x z|`` (horizontal; the
        x axis for a vertical segment) and ``n2 = n1 x u`` (upward for a level segment).

    Notes
    -----
    The matching condition is that the mean potential over these four points
    equals the wire voltage.  The mean over a circle of a potential from sources
    outside it equals its value on the axis up to terms of order ``(r/d)^4``
    (mean-value property of harmonic functions), so the four points reproduce the
    2-D coefficients ``ln(2h/r)``, ``ln(D'/d)`` of the cross-section model for a long
    level wire, and the condition does not depend on the segment's direction
    (a single point on one side would, by ``r/d`` times the external field).
    """
    start = np.asarray(segments.start_m, dtype=float)
    end = np.asarray(segments.end_m, dtype=float)
    radius = np.asarray(segments.wire_radius_m, dtype=float)[np.asarray(segments.wire_index)]
    d = end - start
    length = np.linalg.norm(d, axis=1)
    u = d / np.where(length > 0, length, 1.0)[:, None]
    n1 = np.column_stack([u[:, 1], -u[:, 0], np.zeros(len(d))])  # u x z
    norm = np.linalg.norm(n1, axis=1)
    vertical = norm <= 1e-12
    n1[vertical] = (1.0, 0.0, 0.0)
    n1 /= np.where(vertical, 1.0, norm)[:, None]
    n2 = np.cross(n1, u)
    mid = 0.5 * (start + end)
    rn1 = radius[:, None] * n1
    rn2 = radius[:, None] * n2
    return np.stack([mid + rn1, mid + rn2, mid - rn1, mid - rn2], axis=1)


def potential_coefficients(points_m: np.ndarray, segments: SegmentSet) -> np.ndarray:
    """Potential coefficients of finite straight segments with their ground images.

    Parameters
    ----------
    points_m : ndarray, shape (n, 3)
        Points [m] (z up, ground at z = 0).
    segments : SegmentSet
        All segments are used as given (screened ones included; the caller filters).

    Returns
    -------
    ndarray, shape (n, m)
        ``P[i, j]`` = potential at point i of a uniform line charge of 1 C/m on
        segment j and -1 C/m on its image in z = 0 [V m/C]:
        ``k [ln((S+L)/(S-L)) - ln((S'+L)/(S'-L))]``, ``S = r1 + r2`` to the segment's
        ends and ``S'`` to the image's ends, ``k = 1/(4 pi eps0)``.

    Notes
    -----
    ``S - L`` is computed as ``(r1 - t) + (r2 - (L - t))`` with each bracket in a
    cancellation-free form (``rho^2/(r + t)``), so the self coefficient at a matching
    point a wire radius from the axis keeps full precision.
    """
    pts = np.ascontiguousarray(points_m, dtype=float)
    out = np.empty((pts.shape[0], np.asarray(segments.start_m).shape[0]))
    _potential_matrix_kernel(pts, np.ascontiguousarray(segments.start_m, dtype=float),
                             np.ascontiguousarray(segments.end_m, dtype=float), out)
    out *= K_E
    return out


def matching_matrix(segments: SegmentSet) -> np.ndarray:
    """Square matrix of the charge simulation: mean potential coefficient over each segment's matching points.

    Parameters
    ----------
    segments : SegmentSet
        All segments are used as given (the caller drops screened ones).

    Returns
    -------
    ndarray, shape (m, m)
        ``P[i, j]`` = mean over the four :func:`matching_points` of segment i of
        :func:`potential_coefficients` for segment j [V m/C].
    """
    mp = np.ascontiguousarray(matching_points(segments))
    a = np.asarray(segments.start_m, dtype=float)
    b = np.asarray(segments.end_m, dtype=float)
    vert, k, blocks = _polylines(a, b)
    d = b - a
    length = np.linalg.norm(d, axis=1)
    sdir = np.zeros((4, vert.shape[1]))
    sdir[0:3, k] = (d / length[:, None]).T
    sdir[3, k] = length
    m = mp.shape[0]
    out = np.empty((m, m))
    _matching_matrix_kernel(mp, vert, sdir, blocks, out)
    out *= K_E
    return out


def _active_subset(segments: SegmentSet, mask: np.ndarray) -> SegmentSet:
    return SegmentSet(
        start_m=np.asarray(segments.start_m, dtype=float)[mask],
        end_m=np.asarray(segments.end_m, dtype=float)[mask],
        current_a=np.asarray(segments.current_a)[mask],
        wire_index=np.asarray(segments.wire_index)[mask],
        wire_voltage_v=segments.wire_voltage_v,
        wire_radius_m=segments.wire_radius_m,
        wire_screened=segments.wire_screened,
    )


# --------------------------------------------------------------------------- public API


def line_charges(segments: SegmentSet) -> np.ndarray:
    """Solve the charge simulation: the uniform line charge on every segment.

    Parameters
    ----------
    segments : SegmentSet
        Straight segments of the route's wires (for E a bundle is one wire of
        equivalent radius), with ``wire_voltage_v`` (rms phasor to ground, 0 for
        earth wires) and ``wire_radius_m``.

    Returns
    -------
    complex ndarray, shape (m,)
        rms line-charge phasor of each segment [C/m]; 0 on screened wires.

    Raises
    ------
    EngineInputError, GeometryError
        Malformed arrays, zero-length segments, a wire radius <= 0, or an unscreened
        segment whose end is within a wire radius of the ground (field names
        ``segments.<attribute>[index]``); more than :data:`MAX_CHARGE_SEGMENTS`
        unscreened segments (field ``segments``).

    Notes
    -----
    The mean potential over the four matching points of each segment
    (:func:`matching_points`) must equal the wire's voltage: ``sum_j P_ij q_j = V_i``
    with ``P`` from :func:`matching_matrix`.
    ``P`` is real, so the real and imaginary parts of ``V`` are solved together as
    two right-hand sides of one LU factorisation: single precision with
    double-precision iterative refinement, falling back to the double LU
    (:func:`models.route.refined_solve.solve_refined`).
    Method: charge simulation with images in a perfectly conducting ground [1]_, [2]_,
    with the finite-segment potential of [3]_ (module notes).

    References
    ----------
    .. [1] CIGRE Working Group 36.01, "Electric and magnetic fields produced by
       transmission systems", Technical Brochure 21, 1980 (from memory).
    .. [2] J. D. Deno and L. E. Zaffanella, "Field effects of overhead transmission
       lines and stations", ch. 8 in *Transmission Line Reference Book, 345 kV and
       Above*, 2nd ed., EPRI, 1982 (from memory).
    .. [3] D. J. Griffiths, *Introduction to Electrodynamics*, 4th ed., chs. 2-3
       (finite line charge, method of images; from memory).
    """
    _check_segments(segments)
    mask = _active(segments)
    m = mask.shape[0]
    n_active = int(mask.sum())
    if n_active > MAX_CHARGE_SEGMENTS:
        raise must_be("segments", f"at most {MAX_CHARGE_SEGMENTS} unscreened segments for the charge simulation "
                      "(coarser discretisation or a shorter route)", n_active)
    charges = np.zeros(m, dtype=complex)
    if not mask.any():
        return charges
    act = _active_subset(segments, mask)
    pmat = matching_matrix(act)
    v = np.asarray(segments.wire_voltage_v, dtype=complex)[np.asarray(act.wire_index)]
    rhs = np.column_stack([v.real, v.imag])
    sol, _ = solve_refined(pmat, rhs)
    charges[mask] = sol[:, 0] + 1j * sol[:, 1]
    return charges


def _check_points(points_m) -> np.ndarray:
    pts = np.ascontiguousarray(points_m, dtype=float)
    if pts.ndim != 2 or pts.shape[1] != 3:
        raise must_be("points", "an (n, 3) array of x, y, z [m]", pts.shape)
    bad = ~np.isfinite(pts).all(axis=1)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise must_be(f"points[{i}]", "finite", pts[i].tolist())
    below = pts[:, 2] < 0.0
    if below.any():
        i = int(np.flatnonzero(below)[0])
        raise must_be(f"points[{i}]", "at or above ground (z >= 0 m)", pts[i].tolist(), GeometryError)
    return pts


def _check_charges(charges, segments: SegmentSet) -> np.ndarray:
    m = np.asarray(segments.start_m).shape[0]
    q = np.asarray(charges)
    if q.shape != (m,) or not np.isfinite(q).all():
        raise must_be("charges", f"a finite complex array of shape ({m},) [C/m]", q.shape)
    return q.astype(complex)


def _polylines(a: np.ndarray, b: np.ndarray):
    """Stack consecutive segments that share an end point (``a[j] == b[j-1]``) into polylines.

    Returns
    -------
    vert : ndarray, shape (3, nv)
        Vertex coordinates [m].
    k : int ndarray, shape (m,)
        Index of each segment's first vertex (its second is ``k + 1``).
    blocks : int64 ndarray, shape (nb, 3)
        ``(k0, k1, j0)``: segments ``k0..k1-1`` (vertex numbering) of one polyline, at most
        ``_SEGMENT_BLOCK`` of them, are the input segments ``j0..j0+k1-k0-1``.
    """
    m = a.shape[0]
    new_line = np.ones(m, dtype=bool)
    if m > 1:
        new_line[1:] = ~np.all(a[1:] == b[:-1], axis=1)
    k = np.arange(m) + np.cumsum(new_line) - 1
    vert = np.empty((3, m + int(new_line.sum())))
    vert[:, k] = a.T
    vert[:, k + 1] = b.T
    blocks = []
    starts = np.flatnonzero(new_line)
    for s0, s1 in zip(starts, np.append(starts[1:], m)):
        for j0 in range(s0, s1, _SEGMENT_BLOCK):
            j1 = min(j0 + _SEGMENT_BLOCK, s1)
            blocks.append((k[j0], k[j1 - 1] + 1, j0))
    return vert, k, np.array(blocks, dtype=np.int64).reshape(-1, 3)


def _pack_segments(segments: SegmentSet, charges: np.ndarray):
    """Polyline tables of the charged segments for the field kernel.

    Consecutive segments sharing an end point (``start_m[j] == end_m[j-1]``) form one
    polyline; an odd polyline gets a zero-length, zero-charge link at its end (its
    last vertex repeated), so that every run has an even number of links.

    Returns
    -------
    vert : ndarray, shape (3, nv)
        Vertex coordinates [m].
    sdat : ndarray, shape (4, nv)
        Per link (indexed by its first vertex): 2L, L [m], q_re, q_im [C/m].
    runs : int64 ndarray, shape (nr, 2)
        First vertex and (even) number of links of each polyline.
    """
    mask = _active(segments) & (charges != 0)
    a = np.asarray(segments.start_m, dtype=float)[mask]
    b = np.asarray(segments.end_m, dtype=float)[mask]
    q = charges[mask]
    m = a.shape[0]
    new_line = np.ones(m, dtype=bool)
    if m > 1:
        new_line[1:] = ~np.all(a[1:] == b[:-1], axis=1)
    starts = np.flatnonzero(new_line)
    links = np.diff(np.append(starts, m))
    padded = links + links % 2
    # [:len(starts)]: no charged segment at all (every conductor at 0 V) gives no polyline
    first = np.concatenate([[0], np.cumsum(padded + 1)[:-1]])[:len(starts)].astype(np.int64)
    nv = int(np.sum(padded + 1))
    line_no = np.cumsum(new_line) - 1
    k = first[line_no] + (np.arange(m) - starts[line_no])
    vert = np.empty((3, nv))
    vert[:, k] = a.T
    vert[:, k + 1] = b.T
    odd = links % 2 == 1
    last = first + links                               # last real vertex of each polyline
    vert[:, last[odd] + 1] = vert[:, last[odd]]         # pad vertex = last vertex
    length = np.linalg.norm(b - a, axis=1)
    sdat = np.zeros((4, nv))
    sdat[0, k] = 2.0 * length
    sdat[1, k] = length
    sdat[2, k] = q.real
    sdat[3, k] = q.imag
    return vert, sdat, np.column_stack([first, padded]).astype(np.int64).reshape(-1, 2)


def _raise_if_inside(pts, segments: SegmentSet, offset: int = 0) -> None:
    """GeometryError naming the first point within a wire radius of an unscreened segment."""
    mask = _active(segments)
    if not mask.any() or pts.shape[0] == 0:
        return
    a = np.ascontiguousarray(np.asarray(segments.start_m, dtype=float)[mask])
    b = np.ascontiguousarray(np.asarray(segments.end_m, dtype=float)[mask])
    widx = np.asarray(segments.wire_index)[mask]
    radius = np.ascontiguousarray(np.asarray(segments.wire_radius_m, dtype=float)[widx])
    m = a.shape[0]
    ng = (m + _BOX_GROUP - 1) // _BOX_GROUP
    pad = ng * _BOX_GROUP - m
    lo = np.minimum(a, b)
    hi = np.maximum(a, b)
    r = radius
    if pad:
        lo = np.vstack([lo, np.repeat(lo[-1:], pad, axis=0)])
        hi = np.vstack([hi, np.repeat(hi[-1:], pad, axis=0)])
        r = np.append(r, np.repeat(r[-1], pad))
    rg = r.reshape(ng, _BOX_GROUP).max(axis=1)[:, None]
    box_lo = np.ascontiguousarray(lo.reshape(ng, _BOX_GROUP, 3).min(axis=1) - rg)
    box_hi = np.ascontiguousarray(hi.reshape(ng, _BOX_GROUP, 3).max(axis=1) + rg)
    hit = np.empty(pts.shape[0], dtype=np.int64)
    _inside_kernel(pts, a, b, radius, box_lo, box_hi, hit)
    bad = np.flatnonzero(hit >= 0)
    if bad.size:
        i = int(bad[0])
        j = int(hit[i])
        raise must_be(f"points[{offset + i}]",
                      f"outside every conductor (wire {int(widx[j])} has radius {float(radius[j])!r} m)",
                      pts[i].tolist(), GeometryError)


def electric_field_segments(points_m, segments: SegmentSet, charges=None, *,
                            chunk_size: int = DEFAULT_CHUNK_SIZE) -> np.ndarray:
    """Electric field phasors of charged segments above a conducting ground.

    Parameters
    ----------
    points_m : array_like, shape (n, 3)
        Observation points [m] (x east, y north, z up; ground at z = 0).
    segments : SegmentSet
        Route discretised into straight segments.
    charges : complex ndarray, shape (m,), optional
        rms line-charge phasor of each segment [C/m], e.g. from :func:`line_charges`
        (computed here when omitted; pass it to reuse one solve for many point sets).
    chunk_size : int, optional
        Points per kernel call; working memory beyond input and output is
        O(chunk_size) (default :data:`DEFAULT_CHUNK_SIZE`).

    Returns
    -------
    complex ndarray, shape (n, 3)
        rms phasors of E_x, E_y, E_z [V/m] (unperturbed field, perfectly conducting ground).

    Raises
    ------
    GeometryError
        A point below ground (z < 0) or inside a wire (field ``points[i]``).
    EngineInputError
        Malformed points or charges.

    Notes
    -----
    Field of a uniform line charge ``q`` on the segment A->B (length L) at p:
    ``E = q/(4 pi eps0) * 2L/(S^2 - L^2) * (d1/r1 + d2/r2)``, ``d1 = p - A``,
    ``d2 = p - B``, ``S = r1 + r2``; this is ``-grad`` of ``k q ln((S+L)/(S-L))``.
    Each image (z negated) adds the same with ``-q``.  The kernel is compiled
    with numba (parallel over tiles of 64 points, SIMD over the points of a tile).

    References
    ----------
    .. [1] D. J. Griffiths, *Introduction to Electrodynamics*, 4th ed., chs. 2-3
       (field of a finite line charge, method of images; from memory).

    Examples
    --------
    >>> import numpy as np
    >>> from models.route.types import SegmentSet
    >>> xs = np.linspace(-500.0, 500.0, 101)
    >>> a = np.column_stack([xs[:-1], np.zeros(100), np.full(100, 10.0)])
    >>> b = np.column_stack([xs[1:], np.zeros(100), np.full(100, 10.0)])
    >>> seg = SegmentSet(a, b, np.zeros(100, complex), np.zeros(100, int),
    ...                  np.array([1e4 + 0j]), np.array([0.01]), np.array([False]))
    >>> e = electric_field_segments(np.array([[0.0, 0.0, 0.0]]), seg)
    >>> round(float(-e[0, 2].real), 1)   # 2-D (infinite line): 2 V / (h ln(2h/r)) = 263.1
    263.1
    """
    pts = _check_points(points_m)
    if not isinstance(chunk_size, (int, np.integer)) or chunk_size < 1:
        raise must_be("chunk_size", "a positive integer", chunk_size)
    if charges is None:
        charges = line_charges(segments)
    else:
        _check_segments(segments)
        charges = _check_charges(charges, segments)
    vert, sdat, runs = _pack_segments(segments, charges)
    n = pts.shape[0]
    out = np.zeros((n, 3, 2))
    if runs.shape[0] == 0 or n == 0:
        return out.view(np.complex128).reshape(n, 3)
    _raise_if_inside(pts, segments)
    for i0 in range(0, n, chunk_size):
        i1 = min(i0 + chunk_size, n)
        _field_kernel(pts[i0:i1], vert, sdat, runs, out[i0:i1])
    out *= K_E
    return out.view(np.complex128).reshape(n, 3)


def electric_potential_segments(points_m, segments: SegmentSet, charges=None) -> np.ndarray:
    """Potential phasor of the charged segments and their images [V] (for checks; O(n*m) memory).

    Parameters
    ----------
    points_m : array_like, shape (n, 3)
        Points [m].
    segments : SegmentSet
    charges : complex ndarray, shape (m,), optional
        Line charges [C/m] (default: :func:`line_charges`).

    Returns
    -------
    complex ndarray, shape (n,)
        rms potential phasor to ground [V].
    """
    pts = _check_points(points_m)
    charges = line_charges(segments) if charges is None else _check_charges(charges, segments)
    mask = _active(segments)
    act = _active_subset(segments, mask)
    pmat = potential_coefficients(pts, act)
    q = charges[mask]
    return pmat @ q.real + 1j * (pmat @ q.imag)


def warm_up() -> None:
    """Compile (or load from numba's on-disk cache) every kernel of this module; call once at start-up.

    With a warm cache this takes well under a second (benchmarks/README.md); without
    it, several seconds of compilation, which would otherwise fall on the first request.
    The parallel kernels use numba's threading layer (OpenMP here), which must not be
    started in a process that later forks: call this in each server worker after the
    fork (e.g. gunicorn's ``post_fork``), not in a preloading master.

    Returns
    -------
    None
    """
    a = np.array([[0.0, 0.0, 10.0], [10.0, 0.0, 10.0]])
    b = np.array([[10.0, 0.0, 10.0], [20.0, 0.0, 10.0]])
    seg = SegmentSet(a, b, np.zeros(2, complex), np.zeros(2, np.int64), np.array([1.0 + 0j]),
                     np.array([0.01]), np.array([False]))
    pts = np.array([[5.0, 1.0, 1.0], [5.0, 0.02, 10.0]])
    charges = line_charges(seg)
    electric_field_segments(pts, seg, charges)
    electric_potential_segments(pts, seg, charges)
