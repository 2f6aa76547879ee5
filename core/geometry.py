"""The 2.5-D body hull and the panels a straight 3-D path crosses, vectorised over paths.

A point (x, y, z) is inside the hull when it is inside the top outline at (x, y), inside the
side outline at (x, z), and not inside a wheelhouse. A wheelhouse is the side-view arch around a
wheel -- the upper half disc of radius (tire radius + clearance) about the wheel centre and the
strip below the centre of the same half width -- from the wheelhouse inner wall
(|y| = |y_wheel| - tire width / 2 - clearance) outward.

Each crossing of the hull surface costs the loss of the panel crossed:
- through a wall of the top outline (side or end faces): the side-view zone at (x, z);
- through an edge of the side outline (roof, floor, hood, screens): the top-view zone at (x, y)
  (honouring the zone's z limits);
- through a wheelhouse surface: the body's wheelhouse material.
A point in no zone takes the body's default panel material (metal).

Where the path passes through the hull (in and out again), the loss of that passage is the
smaller of penetrating both walls and diffracting over the dominant edge of the passage
(ITU-R P.526-15 single knife edge, section 4.1). The dominant edge is found among
``DIFFRACTION_SAMPLES`` equally spaced points of the passage: at each point the escape
clearance h is the smallest displacement that clears the hull (over the roof, under the floor,
or around the plan outline at that x); the point with the largest v is the edge.

References
----------
ITU-R P.526-15, section 4.1 (single knife edge, eq. 26 and 31); the dominant-obstacle idea is
that of ITU-R P.526 section 4.5 (Deygout's principal edge).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from core import kernels  # imports numba here, at start-up, not in the middle of a front end's event loop
from core.propagation import knife_edge_loss_db, wavelength_m

DIFFRACTION_SAMPLES = 8
_EPS = 1e-12
#: growth of a segment's bounding box in the culling tests, m (covers round-off of the crossing t)
_BOX_SLACK_M = 1e-9
#: (points x edges) elements per block of the point-in-polygon test
_PIP_BLOCK = 1 << 16
_ROOT_SIGNS = np.array([[-1.0], [1.0]])  # the two roots of a quadratic, smaller first
_LINE_SIGNS = np.array([[1.0], [-1.0]])  # the arch's vertical lines x = xc + r, then x = xc - r

# event kinds
KIND_TOP = 0  # wall of the top outline -> side-view zones
KIND_SIDE = 1  # edge of the side outline -> top-view zones
KIND_WH_ARCH = 2  # wheelhouse arch surface
KIND_WH_WALL = 3  # wheelhouse inner wall

# what a hull crossing went through (``Flips.kind``)
CROSS_WALL = 1  # a wall of the top outline (side or end face): side-view zones
CROSS_ROOF_FLOOR = 2  # an edge of the side outline (roof, floor, bonnet, screens): top-view zones
CROSS_WHEELHOUSE = 3  # a wheelhouse surface: the wheelhouse material
CROSSING_NAMES = {CROSS_WALL: "side or end wall", CROSS_ROOF_FLOOR: "roof, floor or screen", CROSS_WHEELHOUSE: "wheelhouse"}


@dataclass(frozen=True)
class PolygonEdges:
    """A polygon's edges prepared once for the crossing-number test and for segment crossings.

    All arrays in the polygon's units (m). ``p0``, ``p1`` (E, 2): start and end of each edge
    (vertex i to vertex i + 1, closing the ring); ``e = p1 - p0``; ``lo``, ``hi``: each edge's
    bounding box. The crossing-number test uses the non-horizontal edges only, as (E', 1) columns
    ``x0``, ``y0``, ``y1``, ``run = x1 - x0`` and ``rise = y1 - y0``.
    """

    p0: np.ndarray
    p1: np.ndarray
    e: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    x0: np.ndarray
    y0: np.ndarray
    y1: np.ndarray
    run: np.ndarray
    rise: np.ndarray


def polygon_edges(poly) -> PolygonEdges:
    """Prepare the edges of a closed polygon ((n, 2) vertices, the last joined to the first)."""
    p0 = np.asarray(poly, float).reshape(-1, 2)
    p1 = np.concatenate([p0[1:], p0[:1]])
    slanted = p0[:, 1] != p1[:, 1]
    x0, y0 = p0[slanted, 0], p0[slanted, 1]
    x1, y1 = p1[slanted, 0], p1[slanted, 1]
    return PolygonEdges(
        p0=p0, p1=p1, e=p1 - p0, lo=np.minimum(p0, p1), hi=np.maximum(p0, p1),
        x0=x0[:, None], y0=y0[:, None], y1=y1[:, None], run=(x1 - x0)[:, None], rise=(y1 - y0)[:, None],
    )


@dataclass(frozen=True)
class ZoneTable:
    """Polygons with their crossing loss, dB; optional z limits (top-view zones only), m.

    ``names`` and ``materials`` (one per polygon, may be empty) say which zone and material each
    polygon is, for outputs that list the panels a path crosses (core.budget, core.sensitivity)."""

    polygons: tuple[np.ndarray, ...]
    loss_db: np.ndarray
    z_min: np.ndarray
    z_max: np.ndarray
    edges: tuple[PolygonEdges, ...] = ()  # the polygons prepared (polygon_edges)
    names: tuple[str, ...] = ()
    materials: tuple[str, ...] = ()


@dataclass(frozen=True)
class Hull:
    """The body prepared for fast path queries (all lengths in m, losses in dB)."""

    top: np.ndarray  # (Nt, 2) x, y
    side: np.ndarray  # (Ns, 2) x, z
    wh_xc: np.ndarray  # (H,) wheelhouse centre x
    wh_zc: np.ndarray  # (H,) centre z
    wh_r: np.ndarray  # (H,) arch radius
    wh_sign: np.ndarray  # (H,) +1 left, -1 right
    wh_inner: np.ndarray  # (H,) inner wall at sign*y = wh_inner
    top_zones: ZoneTable  # govern side-outline (roof/floor) crossings at (x, y)
    side_zones: ZoneTable  # govern top-outline (wall) crossings at (x, z)
    default_loss_db: float
    wheelhouse_loss_db: float
    env_x: np.ndarray  # breakpoints of the envelope tables
    env_ztop: np.ndarray
    env_zbot: np.ndarray
    env_ymax: np.ndarray
    env_ymin: np.ndarray
    arch_xc: np.ndarray  # (G,) distinct arches in x-z (wheels of one axle share one)
    arch_zc: np.ndarray
    arch_r: np.ndarray
    arch_bits: np.ndarray  # (G,) int64: the arch bits of every wheelhouse with that arch
    arch_members: tuple  # (G,) tuples of the wheelhouse indices with that arch
    box_lo: np.ndarray  # (3,) lower corner of the hull's bounding box
    box_hi: np.ndarray  # (3,) upper corner
    top_edges: PolygonEdges  # the outlines prepared (polygon_edges)
    side_edges: PolygonEdges
    default_material: str = "metal"  # material name of a panel in no zone
    wheelhouse_material: str = "metal"  # material name of the wheelhouse surfaces

    def crossing_material(self, kind: int, zone: int) -> str:
        """Material name of a crossing of the given kind (CROSS_*, as in :class:`Flips`) and zone index."""
        if kind == CROSS_WHEELHOUSE:
            return self.wheelhouse_material
        table = self.side_zones if kind == CROSS_WALL else self.top_zones
        if zone < 0 or zone >= len(table.materials):
            return self.default_material
        return table.materials[zone]

    def crossing_zone(self, kind: int, zone: int) -> str:
        """Zone name of a crossing ("" when in no zone or a wheelhouse)."""
        if kind == CROSS_WHEELHOUSE or zone < 0:
            return ""
        table = self.side_zones if kind == CROSS_WALL else self.top_zones
        return table.names[zone] if zone < len(table.names) else ""


def _envelope(poly: np.ndarray, xs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Upper and lower boundary of a polygon over vertical lines at xs (nan where none)."""
    p0, p1 = poly, np.roll(poly, -1, axis=0)
    x0, x1 = p0[:, 0][None, :], p1[:, 0][None, :]
    lo, hi = np.minimum(x0, x1), np.maximum(x0, x1)
    x = xs[:, None]
    ok = (lo <= x) & (x <= hi) & (hi > lo)
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.where(ok, (x - x0) / np.where(hi > lo, x1 - x0, 1.0), 0.0)
    v = p0[:, 1][None, :] + t * (p1[:, 1] - p0[:, 1])[None, :]
    top = np.where(ok, v, -np.inf).max(axis=1)
    bot = np.where(ok, v, np.inf).min(axis=1)
    return top, bot


def build_hull(
    top_outline,
    side_outline,
    wheelhouses: list[tuple[float, float, float, float, float]],
    top_zones: list[tuple[np.ndarray, float, float, float]],
    side_zones: list[tuple[np.ndarray, float]],
    default_loss_db: float,
    wheelhouse_loss_db: float,
    top_zone_labels: list[tuple[str, str]] | None = None,
    side_zone_labels: list[tuple[str, str]] | None = None,
    default_material: str = "metal",
    wheelhouse_material: str = "metal",
) -> Hull:
    """Prepare a hull.

    Parameters
    ----------
    top_outline, side_outline : (n, 2) arrays, m (x, y) and (x, z)
    wheelhouses : (x_centre, z_centre, arch_radius, side_sign, inner_wall_abs_y) per wheelhouse, m
    top_zones : (polygon (x, y), loss_db, z_min, z_max) each (use -inf/inf for no limit)
    side_zones : (polygon (x, z), loss_db) each
    default_loss_db : loss of a panel in no zone, dB
    wheelhouse_loss_db : loss of a wheelhouse surface crossing, dB
    top_zone_labels, side_zone_labels : (zone name, material name) per zone, for outputs (optional)
    default_material, wheelhouse_material : material names of a panel in no zone and of the wheelhouses
    """
    top = np.asarray(top_outline, float)
    side = np.asarray(side_outline, float)
    wh = np.asarray(wheelhouses, float).reshape(-1, 5)
    xs = np.unique(np.concatenate([top[:, 0], side[:, 0]]))
    # sample just inside each breakpoint interval so vertical edges do not create ambiguity
    mids = 0.5 * (xs[1:] + xs[:-1])
    ex = np.sort(np.concatenate([xs + 1e-9, xs - 1e-9, mids]))
    ztop, zbot = _envelope(side, ex)
    ymax, ymin = _envelope(top, ex)

    def table(zs, with_z, labels):
        polys = tuple(np.asarray(z[0], float) for z in zs)
        loss = np.array([z[1] for z in zs], float)
        zmin = np.array([z[2] if with_z else -np.inf for z in zs], float)
        zmax = np.array([z[3] if with_z else np.inf for z in zs], float)
        labels = list(labels or ())
        return ZoneTable(polys, loss, zmin, zmax, tuple(polygon_edges(p) for p in polys),
                         tuple(str(a) for a, _ in labels), tuple(str(b) for _, b in labels))

    return Hull(
        top=top,
        side=side,
        wh_xc=wh[:, 0].copy(),
        wh_zc=wh[:, 1].copy(),
        wh_r=wh[:, 2].copy(),
        wh_sign=wh[:, 3].copy(),
        wh_inner=wh[:, 4].copy(),
        top_zones=table(top_zones, True, top_zone_labels),
        side_zones=table(side_zones, False, side_zone_labels),
        default_loss_db=float(default_loss_db),
        wheelhouse_loss_db=float(wheelhouse_loss_db),
        env_x=ex,
        env_ztop=np.where(np.isfinite(ztop), ztop, np.nan),
        env_zbot=np.where(np.isfinite(zbot), zbot, np.nan),
        env_ymax=np.where(np.isfinite(ymax), ymax, np.nan),
        env_ymin=np.where(np.isfinite(ymin), ymin, np.nan),
        **_arch_groups(wh),
        box_lo=np.array([min(top[:, 0].min(), side[:, 0].min()), top[:, 1].min(), side[:, 1].min()]),
        box_hi=np.array([max(top[:, 0].max(), side[:, 0].max()), top[:, 1].max(), side[:, 1].max()]),
        top_edges=polygon_edges(top),
        side_edges=polygon_edges(side),
        default_material=default_material,
        wheelhouse_material=wheelhouse_material,
    )


def _arch_groups(wh: np.ndarray) -> dict:
    """Distinct (x, z, radius) arches of the wheelhouses and the membership bits each one flips."""
    groups: dict[tuple, int] = {}
    for h, (xc, zc, r) in enumerate(wh[:, :3]):
        key = (round(float(xc), 9), round(float(zc), 9), round(float(r), 9))
        groups[key] = groups.get(key, 0) | (1 << (2 + 2 * h))
    keys = list(groups)
    members = tuple(tuple(h for h in range(len(wh)) if groups[k] >> (2 + 2 * h) & 1) for k in keys)
    return {
        "arch_members": members,
        "arch_xc": np.array([k[0] for k in keys], float),
        "arch_zc": np.array([k[1] for k in keys], float),
        "arch_r": np.array([k[2] for k in keys], float),
        "arch_bits": np.array([groups[k] for k in keys], np.int64),
    }


# ----- point tests -----------------------------------------------------------------------
def points_in_polygon(px: np.ndarray, py: np.ndarray, poly) -> np.ndarray:
    """Crossing-number point-in-polygon test, vectorised over points (any shape) and edges.

    ``poly``: (n, 2) vertices, or the polygon prepared by :func:`polygon_edges`. A point counts
    the polygon edges (horizontal edges skipped) that cross the horizontal line through it to its
    right; it is inside when the count is odd. The points are handled in blocks so the (edges,
    points) work arrays stay small.
    """
    ed = poly if isinstance(poly, PolygonEdges) else polygon_edges(poly)
    px, py = np.broadcast_arrays(np.asarray(px, float), np.asarray(py, float))
    shape = px.shape
    fx, fy = px.reshape(-1), py.reshape(-1)
    inside = np.zeros(fx.shape, bool)
    n_edges = len(ed.x0)
    if n_edges == 0:
        return inside.reshape(shape)
    step = max(1, _PIP_BLOCK // n_edges)
    for i in range(0, len(fx), step):
        bx, by = fx[i : i + step], fy[i : i + step]
        c = (ed.y0 > by) != (ed.y1 > by)  # (edges, points)
        xc = ed.x0 + (by - ed.y0) * ed.run / ed.rise
        c &= bx < xc
        np.bitwise_xor.reduce(c, axis=0, out=inside[i : i + step])
    return inside.reshape(shape)


def in_wheelhouse_parts(hull: Hull, x, y, z) -> tuple[np.ndarray, np.ndarray]:
    """Per wheelhouse: (arch test in x-z, lateral test in y); arrays (..., H)."""
    x = np.asarray(x)[..., None]
    y = np.asarray(y)[..., None]
    z = np.asarray(z)[..., None]
    dx = x - hull.wh_xc
    dz = z - hull.wh_zc
    arch = np.where(dz >= 0, dx * dx + dz * dz < hull.wh_r**2, np.abs(dx) < hull.wh_r)
    lateral = hull.wh_sign * y > hull.wh_inner
    return arch, lateral


def inside_hull(hull: Hull, x, y, z) -> np.ndarray:
    """True where (x, y, z) lies inside the 2.5-D hull."""
    x, y, z = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float), np.asarray(z, float))
    t = points_in_polygon(x, y, hull.top_edges)
    s = points_in_polygon(x, z, hull.side_edges)
    arch, lat = in_wheelhouse_parts(hull, x, y, z)
    return t & s & ~np.any(arch & lat, axis=-1)


# ----- crossings ---------------------------------------------------------------------------
def _edge_hits(au, av, du, dv, poly: PolygonEdges, box_lo, box_hi):
    """Crossings of 2-D segments (au, av) + t (du, dv) (1-D arrays) with the polygon's edges, as flat (rows, t).

    Edges whose bounding box misses (box_lo, box_hi) -- the union box of all segments -- are skipped.
    """
    keep = np.all((poly.hi >= box_lo) & (poly.lo <= box_hi), axis=1)
    p0, p1 = poly.p0[keep], poly.p1[keep]
    if len(p0) == 0:
        return np.empty(0, np.intp), np.empty(0)
    e = p1 - p0
    ax, ay = au[:, None], av[:, None]
    dx, dy = du[:, None], dv[:, None]
    ex, ey = e[None, :, 0], e[None, :, 1]
    wx = p0[None, :, 0] - ax
    wy = p0[None, :, 1] - ay
    den = dx * ey - dy * ex
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = 1.0 / den
        t = (wx * ey - wy * ex) * inv
        s = (wx * dy - wy * dx) * inv
    ok = (np.abs(den) > _EPS) & (t > 0.0) & (t < 1.0) & (s >= 0.0) & (s < 1.0)
    rows, cols = np.nonzero(ok)
    return rows, t[rows, cols]


def _wheelhouse_hits(hull: Hull, a: tuple, d: tuple, lo_s: np.ndarray, hi_s: np.ndarray):
    """Crossings of segments a + t d (t in 0..1, coordinates as 1-D arrays, m) with the wheelhouse
    arch surfaces and inner walls, as flat (rows, t, event bits) arrays (arch of wheelhouse h: bit
    2+2h; inner wall: bit 3+2h). An arch shared by the wheelhouses of one axle is solved once and
    flips all their arch bits.

    ``lo_s``, ``hi_s`` (3, N) are the segments' own bounding boxes, m. Only the segments whose box
    (grown by ``_BOX_SLACK_M``) meets an arch's region [xc - r, xc + r] x (-inf, zc + r] in x-z are
    solved for that arch and its inner walls: a segment that never comes near the arch cannot be
    inside its wheelhouse, so its wall crossings change no membership that matters. The survivors
    are solved with the same arithmetic as for all segments (the same t, to the last bit)."""
    empty = (np.empty(0, np.intp), np.empty(0), np.empty(0, np.int64))
    if len(hull.wh_xc) == 0:
        return empty
    ax, ay, az = a
    dx, dy, dz = d
    lo_x, lo_y, lo_z = lo_s
    hi_x, hi_y, hi_z = hi_s
    out_r, out_t, out_b = [], [], []
    slack = _BOX_SLACK_M
    with np.errstate(invalid="ignore", divide="ignore"):
        for g in range(len(hull.arch_xc)):
            xc, zc, r = float(hull.arch_xc[g]), float(hull.arch_zc[g]), float(hull.arch_r[g])
            near = (hi_x >= xc - r - slack) & (lo_x <= xc + r + slack) & (lo_z <= zc + r + slack)
            rows = np.flatnonzero(near)
            if len(rows) == 0:
                continue
            gdx, gdz = dx[rows], dz[rows]
            ox, oz = ax[rows] - xc, az[rows] - zc
            # circle in x-z: |o + t dxz|^2 = r^2, only its upper half (z >= zc)
            qa = gdx * gdx + gdz * gdz
            qb = 2.0 * (ox * gdx + oz * gdz)
            qc = ox * ox + oz * oz - r * r
            disc = qb * qb - 4.0 * qa * qc
            sq = np.sqrt(disc)
            inv2a = 0.5 / qa
            # both roots at once, (2, n): the smaller root first
            t = (-qb + _ROOT_SIGNS * sq) * inv2a
            sel, k = np.nonzero((disc > 0) & (qa > _EPS) & (t > 0) & (t < 1) & (oz + t * gdz >= 0))
            out_r.append(rows[k])
            out_t.append(t[sel, k])
            # vertical lines x = xc +- r below the centre, (2, n)
            t = (_LINE_SIGNS * r - ox) * (1.0 / gdx)
            sel, k = np.nonzero((np.abs(gdx) > _EPS) & (t > 0) & (t < 1) & (oz + t * gdz < 0))
            out_r.append(rows[k])
            out_t.append(t[sel, k])
            n_arch = len(out_r[-1]) + len(out_r[-2])
            out_b.append(np.full(n_arch, hull.arch_bits[g], np.int64))
            # inner walls sg * y = inner of the wheelhouses with this arch, on the segments that reach them
            for h in hull.arch_members[g]:
                sg, inner = float(hull.wh_sign[h]), float(hull.wh_inner[h])
                reach = hi_y[rows] >= inner - slack if sg > 0 else lo_y[rows] <= -inner + slack
                wrows = rows[reach]
                sdy = sg * dy[wrows]
                t = (inner - sg * ay[wrows]) / sdy
                ok = np.flatnonzero((np.abs(sdy) > _EPS) & (t > 0) & (t < 1))
                out_r.append(wrows[ok])
                out_t.append(t[ok])
                out_b.append(np.full(len(ok), 1 << (3 + 2 * h), np.int64))
    if not out_r:
        return empty
    return np.concatenate(out_r), np.concatenate(out_t), np.concatenate(out_b)


def _zone_index(table: ZoneTable, u: np.ndarray, v: np.ndarray, z: np.ndarray | None) -> np.ndarray:
    """Index of the zone containing each point (u, v) (later zones win); -1 in no zone."""
    idx = np.full(u.shape, -1, np.intp)
    edges = table.edges or tuple(polygon_edges(p) for p in table.polygons)
    for k, (ed, zmin, zmax) in enumerate(zip(edges, table.z_min, table.z_max)):
        hit = points_in_polygon(u, v, ed)
        if z is not None:
            hit &= (z >= zmin) & (z <= zmax)
        idx[hit] = k
    return idx


def zone_loss_at(table: ZoneTable, u: np.ndarray, v: np.ndarray, z: np.ndarray | None, default: float) -> np.ndarray:
    """Crossing loss of the zone containing each point (u, v) (later zones win; z within the zone's
    band when given), dB; ``default`` in no zone."""
    return _zone_loss(table, _zone_index(table, u, v, z), default)


def _zone_loss(table: ZoneTable, idx: np.ndarray, default: float) -> np.ndarray:
    """Crossing loss of the zones ``idx`` (:func:`_zone_index`), dB; ``default`` in no zone."""
    if len(table.loss_db) == 0:
        return np.full(idx.shape, default)
    return np.where(idx >= 0, table.loss_db[np.maximum(idx, 0)], default)


@dataclass(frozen=True)
class Flips:
    """Hull-surface crossings of N segments as flat arrays sorted by (row, t).

    rows : segment index; t : parameter along the segment (0..1); loss_db : panel loss, dB;
    direction : +1 entering the hull, -1 leaving it. start_inside : (N,) bool.
    kind : what was crossed (CROSS_WALL, CROSS_ROOF_FLOOR, CROSS_WHEELHOUSE); zone : index of the
    zone in the governing table (side-view zones for a wall, top-view zones for a roof or floor),
    -1 for none (Hull.crossing_material / crossing_zone name them).
    """

    n: int
    rows: np.ndarray
    t: np.ndarray
    loss_db: np.ndarray
    direction: np.ndarray
    start_inside: np.ndarray
    kind: np.ndarray | None = None
    zone: np.ndarray | None = None


@dataclass(frozen=True)
class Crossings:
    """Hull crossings along N segments, in order: parameter t (0..1), loss dB, +1 entering / -1 leaving.

    Arrays are (N, K); unused slots have t = nan, loss 0, direction 0.
    """

    t: np.ndarray
    loss_db: np.ndarray
    direction: np.ndarray
    start_inside: np.ndarray  # (N,) bool


def start_bits(hull: Hull, x, y, z) -> np.ndarray:
    """Packed membership bits of points: bit 0 top outline, bit 1 side outline, and per wheelhouse h
    bit 2+2h its arch, bit 3+2h its lateral half-space (int64, any shape)."""
    x, y, z = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float), np.asarray(z, float))
    bits = points_in_polygon(x, y, hull.top_edges).astype(np.int64)
    bits |= points_in_polygon(x, z, hull.side_edges).astype(np.int64) << 1
    if len(hull.wh_xc):
        arch, lat = in_wheelhouse_parts(hull, x, y, z)
        shifts = 2 + 2 * np.arange(len(hull.wh_xc), dtype=np.int64)
        bits |= np.bitwise_or.reduce(arch.astype(np.int64) << shifts, axis=-1)
        bits |= np.bitwise_or.reduce(lat.astype(np.int64) << (shifts + 1), axis=-1)
    return bits


def _hull_from_bits(bits: np.ndarray, n_wheelhouses: int) -> np.ndarray:
    """Inside-hull flag from packed membership bits."""
    arch_bits = sum(1 << (2 * h) for h in range(n_wheelhouses))
    in_wh = ((bits >> 2) & (bits >> 3) & arch_bits) != 0 if n_wheelhouses else False
    return ((bits & 3) == 3) & ~in_wh


def hull_flips(hull: Hull, a: np.ndarray, b: np.ndarray, bits0: np.ndarray | None = None) -> Flips:
    """All crossings of the hull surface by the segments a -> b (N, 3) each, m, as flat arrays.

    ``bits0`` may give the start points' packed membership bits (:func:`start_bits`) when they
    are known already (e.g. shared sensor positions); otherwise they are computed.
    """
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    n = len(a)
    if bits0 is None:
        bits0 = start_bits(hull, a[:, 0], a[:, 1], a[:, 2])
    bits0 = np.asarray(bits0, np.int64)
    n_wh = len(hull.wh_xc)
    hull0 = _hull_from_bits(bits0, n_wh)
    empty = Flips(n, np.empty(0, np.intp), np.empty(0), np.empty(0), np.empty(0, np.int8), hull0,
                  np.empty(0, np.int8), np.empty(0, np.intp))
    if n == 0:
        return empty
    ac = np.ascontiguousarray(a.T)
    bc = np.ascontiguousarray(b.T)
    # only segments whose box meets the hull's box can cross it
    lo_s = np.minimum(ac, bc)
    hi_s = np.maximum(ac, bc)
    cand = np.all((hi_s >= hull.box_lo[:, None]) & (lo_s <= hull.box_hi[:, None]), axis=0)
    sub = None
    if not cand.all():
        sub = np.nonzero(cand)[0]
        if len(sub) == 0:
            return empty
        ac, bc, lo_s, hi_s = ac[:, sub], bc[:, sub], lo_s[:, sub], hi_s[:, sub]
    dc = bc - ac
    lo = lo_s.min(axis=1)
    hi = hi_s.max(axis=1)
    ax, ay, az = ac
    dx, dy, dz = dc
    r_top, t_top = _edge_hits(ax, ay, dx, dy, hull.top_edges, lo[[0, 1]], hi[[0, 1]])
    r_side, t_side = _edge_hits(ax, az, dx, dz, hull.side_edges, lo[[0, 2]], hi[[0, 2]])
    r_wh, t_wh, b_wh = _wheelhouse_hits(hull, (ax, ay, az), (dx, dy, dz), lo_s, hi_s)
    rows = np.concatenate([r_top, r_side, r_wh])
    if len(rows) == 0:
        return empty
    t = np.concatenate([t_top, t_side, t_wh])
    ebit = np.concatenate([np.full(len(r_top), 1, np.int64), np.full(len(r_side), 2, np.int64), b_wh])
    order = np.argsort(rows + t, kind="stable")  # t in (0, 1): sorts by row, then along the segment
    rows, t, ebit = rows[order], t[order], ebit[order]
    # membership after each event: start bits XOR the events so far on the same segment
    prefix = np.bitwise_xor.accumulate(ebit)
    first = np.empty(len(rows), bool)
    first[0] = True
    np.not_equal(rows[1:], rows[:-1], out=first[1:])
    run = np.cumsum(first) - 1
    first_idx = np.nonzero(first)[0]
    base = (prefix[first_idx] ^ ebit[first_idx])[run]
    b0 = bits0 if sub is None else bits0[sub]
    h0 = hull0 if sub is None else hull0[sub]
    state_in = _hull_from_bits(b0[rows] ^ prefix ^ base, n_wh)
    prev = np.empty(len(rows), bool)
    prev[1:] = state_in[:-1]
    prev[first] = h0[rows[first]]
    flip = state_in != prev
    # an end face drawn as an edge of both outlines is crossed by both at the same t: it is a wall
    # (side or end face) crossing, so it takes the side-view zone whichever event flips the state
    same = (rows[1:] == rows[:-1]) & (np.abs(t[1:] - t[:-1]) < 1e-9)
    tie = np.zeros(len(rows), bool)
    tie[1:] |= same & (ebit[:-1] == 1)
    tie[:-1] |= same & (ebit[1:] == 1)
    ebit = np.where((ebit == 2) & tie, 1, ebit)
    rows, t, ebit, entering = rows[flip], t[flip], ebit[flip], state_in[flip]
    loss = np.full(len(rows), hull.wheelhouse_loss_db)
    zone = np.full(len(rows), -1, np.intp)
    kind = np.full(len(rows), CROSS_WHEELHOUSE, np.int8)
    m_top = ebit == 1
    if m_top.any():
        r = rows[m_top]
        px = ax[r] + t[m_top] * dx[r]
        pz = az[r] + t[m_top] * dz[r]
        zone[m_top] = _zone_index(hull.side_zones, px, pz, None)
        loss[m_top] = _zone_loss(hull.side_zones, zone[m_top], hull.default_loss_db)
        kind[m_top] = CROSS_WALL
    m_side = ebit == 2
    if m_side.any():
        r = rows[m_side]
        px = ax[r] + t[m_side] * dx[r]
        py = ay[r] + t[m_side] * dy[r]
        pz = az[r] + t[m_side] * dz[r]
        zone[m_side] = _zone_index(hull.top_zones, px, py, pz)
        loss[m_side] = _zone_loss(hull.top_zones, zone[m_side], hull.default_loss_db)
        kind[m_side] = CROSS_ROOF_FLOOR
    if sub is not None:
        rows = sub[rows]
    return Flips(n, rows, t, loss, np.where(entering, 1, -1).astype(np.int8), hull0, kind, zone)


def hull_crossings(hull: Hull, a: np.ndarray, b: np.ndarray, bits0: np.ndarray | None = None) -> Crossings:
    """The crossings of :func:`hull_flips` as padded (N, K) arrays, in order along each segment."""
    f = hull_flips(hull, a, b, bits0)
    counts = np.bincount(f.rows, minlength=f.n)
    kmax = int(counts.max()) if f.n else 0
    t_out = np.full((f.n, kmax), np.nan)
    loss = np.zeros((f.n, kmax))
    direction = np.zeros((f.n, kmax), np.int8)
    if len(f.rows):
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
        slot = np.arange(len(f.rows)) - starts[f.rows]
        t_out[f.rows, slot] = f.t
        loss[f.rows, slot] = f.loss_db
        direction[f.rows, slot] = f.direction
    return Crossings(t_out, loss, direction, f.start_inside)


def escape_clearance_m(hull: Hull, x, y, z) -> np.ndarray:
    """Smallest displacement that takes a point inside the hull outside it, m (over the roof,
    under the floor, or sideways around the plan outline at that x); 0 outside the envelopes."""
    ztop = np.interp(x, hull.env_x, hull.env_ztop, left=np.nan, right=np.nan)
    zbot = np.interp(x, hull.env_x, hull.env_zbot, left=np.nan, right=np.nan)
    ymax = np.interp(x, hull.env_x, hull.env_ymax, left=np.nan, right=np.nan)
    ymin = np.interp(x, hull.env_x, hull.env_ymin, left=np.nan, right=np.nan)
    h = np.minimum(np.minimum(ztop - z, z - zbot), np.minimum(ymax - y, y - ymin))
    return np.fmax(h, 0.0)  # fmax: nan (outside an envelope) -> 0


@dataclass(frozen=True)
class BodyTerms:
    """What the body loss of N paths is made of (:func:`body_loss_terms`), flat arrays.

    Crossings (sorted by path, then along it): ``rows``, ``t`` (0..1 along the path), ``loss_db``
    (panel loss, dB), ``direction`` (+1 entering, -1 leaving), ``kind`` (CROSS_*), ``zone`` (index in
    the governing zone table, -1 none), ``in_passage`` (True for the two crossings of a passage).
    Passages (in and out again): ``p_rows``, ``p_first`` (index of the entering crossing; the leaving
    one follows it), ``p_v`` (the dominant edge's knife-edge parameter v, ITU-R P.526 eq. 26),
    ``p_j_db`` (J(v), dB), ``p_edge`` (P, 3) the dominant edge's sample point, m, and ``p_used_db``:
    the passage's loss min(both panels, J). The body loss of path n is the sum of its crossings'
    ``loss_db`` outside passages plus its passages' ``p_used_db`` (``total_db``).
    """

    n: int
    total_db: np.ndarray
    rows: np.ndarray
    t: np.ndarray
    loss_db: np.ndarray
    direction: np.ndarray
    kind: np.ndarray
    zone: np.ndarray
    in_passage: np.ndarray
    p_rows: np.ndarray
    p_first: np.ndarray
    p_v: np.ndarray
    p_j_db: np.ndarray
    p_edge: np.ndarray
    p_used_db: np.ndarray


@dataclass(frozen=True)
class BodyPaths:
    """The hull crossings of N straight paths and the knife-edge alternative of each passage, for
    re-summing with other panel losses (core.link_terms): ``rows``, ``loss_db`` of the crossings (as
    :class:`BodyTerms`), ``passage`` the index of each passage's entering crossing, ``edge_db`` its J(v)."""

    n: int
    rows: np.ndarray
    loss_db: np.ndarray
    passage: np.ndarray
    edge_db: np.ndarray

    def total_db(self, crossing_loss_db: np.ndarray | None = None) -> np.ndarray:
        """Body loss of each path (N,), dB, as :func:`body_loss_db`: the crossings' losses, each passage
        costing the smaller of its two panel losses and its knife edge. ``crossing_loss_db`` (C,)
        replaces the crossings' panel losses (default: ``loss_db``)."""
        loss = self.loss_db if crossing_loss_db is None else np.asarray(crossing_loss_db, float)
        total = np.bincount(self.rows, weights=loss, minlength=self.n).astype(float)
        if len(self.passage) == 0:
            return total
        pen = loss[self.passage] + loss[self.passage + 1]
        np.add.at(total, self.rows[self.passage], np.minimum(pen, self.edge_db) - pen)
        return total


def body_paths(hull: Hull, a: np.ndarray, b: np.ndarray, freq_hz: float, bits0=None) -> BodyPaths:
    """The crossings of the paths a -> b (N, 3), m, and each passage's knife edge (:class:`BodyPaths`),
    from :func:`body_loss_terms` (the same code as the engine's body loss)."""
    t = body_loss_terms(hull, a, b, freq_hz, bits0)
    return BodyPaths(t.n, t.rows, t.loss_db, t.p_first, t.p_j_db)


def body_loss_db(hull: Hull, a: np.ndarray, b: np.ndarray, freq_hz: float, bits0=None) -> np.ndarray:
    """Body loss of the straight paths a -> b (N, 3), dB.

    Every hull crossing costs its panel loss; a passage through the hull (entering and leaving
    again) costs the smaller of its two panel losses and the knife-edge loss over its dominant edge.
    """
    return _body_loss(hull, a, b, freq_hz, bits0, False)


def body_loss_terms(hull: Hull, a: np.ndarray, b: np.ndarray, freq_hz: float, bits0=None) -> BodyTerms:
    """The body loss of :func:`body_loss_db` with what it is made of: every crossing (panel, zone,
    material via Hull.crossing_material) and every passage's diffraction alternative (:class:`BodyTerms`).
    Computed by the same code as body_loss_db, so ``total_db`` is the engine's body loss."""
    return _body_loss(hull, a, b, freq_hz, bits0, True)


def _body_loss(hull: Hull, a, b, freq_hz: float, bits0, detail: bool):
    if not detail and kernels.available():  # the compiled kernel unless WHEELREACH_KERNEL=numpy or no numba
        return kernels.body_loss_db(hull, a, b, freq_hz, bits0)
    return _body_loss_numpy(hull, a, b, freq_hz, bits0, detail)


def _body_loss_numpy(hull: Hull, a, b, freq_hz: float, bits0, detail: bool):
    """The pure-numpy body loss: the reference the compiled kernel (core.kernels) is checked against."""
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    f = hull_flips(hull, a, b, bits0)
    total = np.bincount(f.rows, weights=f.loss_db, minlength=f.n).astype(float)
    passage = np.empty(0, np.intp)
    if len(f.rows) >= 2:
        passage = np.nonzero((f.rows[1:] == f.rows[:-1]) & (f.direction[:-1] == 1) & (f.direction[1:] == -1))[0]
    if len(passage) == 0:
        if not detail:
            return total
        z = np.empty(0)
        return BodyTerms(f.n, total, f.rows, f.t, f.loss_db, f.direction, f.kind, f.zone,
                         np.zeros(len(f.rows), bool), np.empty(0, np.intp), np.empty(0, np.intp), z, z,
                         np.empty((0, 3)), z)
    lam = float(wavelength_m(freq_hz))
    rows = f.rows[passage]
    t0, t1 = f.t[passage], f.t[passage + 1]
    ar, br = a[rows], b[rows]
    d = br - ar
    length = np.linalg.norm(d, axis=1)
    frac = (np.arange(DIFFRACTION_SAMPLES) + 0.5) / DIFFRACTION_SAMPLES
    ts = t0[:, None] + frac[None, :] * (t1 - t0)[:, None]  # (R, M)
    # the M sample points of each passage, one (R, M) array per coordinate
    qx, qy, qz = (ar[:, i, None] + ts * d[:, i, None] for i in range(3))
    h = escape_clearance_m(hull, qx, qy, qz)
    d1 = np.maximum(ts * length[:, None], 1e-6)
    d2 = np.maximum((1.0 - ts) * length[:, None], 1e-6)
    v = h * np.sqrt(2.0 / lam * (1.0 / d1 + 1.0 / d2))
    v_max = v.max(axis=1)
    j_db = knife_edge_loss_db(v_max)
    pen = f.loss_db[passage] + f.loss_db[passage + 1]
    used = np.minimum(pen, j_db)
    np.add.at(total, rows, used - pen)
    if not detail:
        return total
    k = np.argmax(v, axis=1)
    r = np.arange(len(rows))
    edge = np.stack([qx[r, k], qy[r, k], qz[r, k]], axis=1)
    in_p = np.zeros(len(f.rows), bool)
    in_p[passage] = True
    in_p[passage + 1] = True
    return BodyTerms(f.n, total, f.rows, f.t, f.loss_db, f.direction, f.kind, f.zone, in_p, rows, passage,
                     v_max, j_db, edge, used)
