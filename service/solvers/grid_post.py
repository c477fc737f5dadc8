"""Stage 5 of the grid solver: face and point temperatures, heat flows, extremes and the
energy balance, from a solved state."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .grid_assembly import surface_temperatures
from .grid_mesh import Mesh
from .grid_model import EDGE_NAMES
from .grid_solve import Setup, State, boundary_inflow
from .safety import Limits, Location, SafetyReport, Scope, check_limits

_Array = np.ndarray


@dataclass(frozen=True)
class SegmentFlow:
    """Heat flow through one boundary segment (positive into the body).

    Attributes
    ----------
    edge : str
        ``bottom``, ``right``, ``top`` or ``left``.
    index : int
        Position of the segment in that edge's list.
    start, end : float
        Extent along the edge, m.
    type : str
    heat_flow : float
        W per m depth (planar) or W (axisymmetric); at the final time for transients.
    mean_surface_temperature : float
        Area-weighted mean surface temperature, degC.
    """

    edge: str
    index: int
    start: float
    end: float
    type: str
    heat_flow: float
    mean_surface_temperature: float


@dataclass(frozen=True)
class EdgeFlow:
    """Heat flow through one edge (sum of its segments; uncovered parts are insulated)."""

    edge: str
    heat_flow: float
    segments: tuple[SegmentFlow, ...]


@dataclass(frozen=True)
class EnergyBalance:
    """Global energy balance.

    Steady: ``boundary_inflow`` (W) + ``generation`` (W) = ``imbalance`` (should be 0),
    ``stored`` = 0. Transient (from t = 0 to the final time): ``boundary_inflow`` and
    ``generation`` are time integrals (J), ``stored`` is the change of stored energy (J) and
    ``imbalance`` = boundary_inflow + generation - stored. Per metre of depth for planar
    bodies. ``relative_error`` = |imbalance| / the gross heat throughput.
    """

    boundary_inflow: float
    generation: float
    stored: float
    imbalance: float
    relative_error: float


def face_temperatures(setup: Setup, state: State) -> tuple[_Array, _Array, _Array]:
    """Temperatures on x faces (ny, nx+1), y faces (ny+1, nx) and boundary faces (F,), degC.

    Interior faces: the flux-continuous value (a T_P + b T_E) / (a + b) with a, b the two
    half-cell conductances, exact at material interfaces of layered media.
    """
    mesh, bf, lin, temp = setup.mesh, setup.boundary, state.lin, state.temperature
    k = lin.k
    tx = np.empty((mesh.ny, mesh.nx + 1))
    ty = np.empty((mesh.ny + 1, mesh.nx))
    a = k[:, :-1] * mesh.s_east[:, :-1]
    b = k[:, 1:] * mesh.s_west[:, 1:]
    tx[:, 1:-1] = (a * temp[:, :-1] + b * temp[:, 1:]) / (a + b)
    c = k[:-1, :] * mesh.s_north[:-1, :]
    d = k[1:, :] * mesh.s_south[1:, :]
    ty[1:-1, :] = (c * temp[:-1, :] + d * temp[1:, :]) / (c + d)
    surf = surface_temperatures(bf, k, lin.G, lin.Q, temp)
    nx, ny = mesh.nx, mesh.ny
    ty[0, :] = surf[:nx]
    tx[:, -1] = surf[nx : nx + ny]
    ty[-1, :] = surf[nx + ny : 2 * nx + ny]
    tx[:, 0] = surf[2 * nx + ny :]
    return tx, ty, surf


def vertex_temperatures(
    mesh: Mesh,
    ids: _Array,
    tx: _Array,
    ty: _Array,
    i_f: _Array,
    j_f: _Array,
    k: _Array | None = None,
) -> _Array:
    """Temperatures at grid vertices (i_f, j_f), degC, from the face temperatures around them.

    Along each grid line through the vertex the two nearest face temperatures are interpolated
    (linearly in y; in x linearly, or in ln r for axisymmetric bodies). A vertex on an edge
    takes the value along that edge (or, where a material interface meets the edge, along the
    interface, extrapolated to the edge). A corner of the domain takes the mean of the values
    extrapolated along its two edges (no extrapolation across a material interface or towards
    the axis), kept within the range of the faces used. Elsewhere the line lying on a material
    interface is used (its faces carry the flux-continuous values, whereas interpolating
    across the interface would miss the kink in the profile); with no interface, the mean of
    the two lines. Where both a vertical and a horizontal interface pass through an interior
    vertex (a corner or junction of materials) and the cell conductivities ``k`` (ny, nx),
    W/(m K), are given, the heat balance of the vertex's dual control volume (below); without
    ``k`` there, the mean of the two lines.

    Notes
    -----
    Dual-volume balance at a junction of materials. The dual control volume is the rectangle
    around the vertex reaching halfway to the four neighbouring cell centres; each quarter of
    it lies in one cell, so in one material. Its four arms run along the grid lines from the
    vertex to the four face centres around it, where the flux-continuous face temperatures
    T_f are known. The heat flowing in through the side crossed by an arm is estimated along
    that arm, in each of the two materials the side passes through::

        Q_f = g_f (T_f - T_v),   g_f = sum over the two quarters q of k_q A_q / L_f

    with L_f the arm length (vertex to face centre) and A_q the part of the side in quarter
    q (planar: half the quarter's extent across the arm; axisymmetric: that times 2 pi r at
    a radial side, the annulus between the vertex radius and the side at an axial side).
    Steady conduction without a source in the small volume (sum of Q_f = 0, the energy
    balance) then gives::

        T_v = sum g_f T_f / sum g_f

    a conductance-weighted mean in which a highly conductive material dominates, as the
    continuous temperature does at the tip of a metal profile in insulation, where the
    field in the low-conductivity material is singular (gradients growing like r^(lambda-1),
    lambda < 1, towards the corner) and the cell values there approach T_v only slowly.
    These are the vertex equations of linear finite elements on the triangles (vertex, two
    face centres) of each quarter (right triangles, so the weights are positive and the
    value stays within the range of the four faces). The balance is exact for
    piecewise-linear fields with continuous flux (layered media, a linear field in one
    material). In one material on a planar grid (zones of equal conductivity) both grid
    lines give the bilinear interpolation of the four cells and the balance, a weighted mean
    of the two lines there, gives the same value. Generation inside the small volume is
    neglected (it changes T_v by O(q h^2 / k)).

    References
    ----------
    Baliga, B. R. and Patankar, S. V., "A control volume finite-element method for
    two-dimensional fluid flow and heat transfer", Numerical Heat Transfer 6 (1983) 245-261
    (the control-volume finite-element vertex balance; from memory).
    """
    nx, ny = mesh.nx, mesh.ny
    xf, yf, xc, yc = mesh.x_faces, mesh.y_faces, mesh.x, mesh.y
    ja = np.clip(j_f - 1, 0, ny - 1)
    jb = np.clip(j_f, 0, ny - 1)
    ia = np.clip(i_f - 1, 0, nx - 1)
    ib = np.clip(i_f, 0, nx - 1)
    # rows whose x faces are interpolated along the vertical line x = xf[i_f]: the two either
    # side of the vertex, or at the bottom/top edge the first two rows (extrapolation)
    r0 = np.where(j_f == 0, 0, np.where(j_f == ny, max(ny - 2, 0), ja))
    r1 = np.where(j_f == 0, min(1, ny - 1), np.where(j_f == ny, ny - 1, jb))
    col = np.where(i_f == nx, nx - 1, ib)
    with np.errstate(divide="ignore", invalid="ignore"):
        wy = np.where(r1 > r0, (yf[j_f] - yc[r0]) / np.where(r1 > r0, yc[r1] - yc[r0], 1.0), 0.0)
    same_y = (ids[r0, col] == ids[r1, col]) & (ids[r0, ia] == ids[r1, ia])
    wy = np.where(same_y, wy, np.clip(wy, 0.0, 1.0))
    along_x = tx[r0, i_f] + wy * (tx[r1, i_f] - tx[r0, i_f])
    # columns whose y faces are interpolated along the horizontal line y = yf[j_f]
    c0 = np.where(i_f == 0, 0, np.where(i_f == nx, max(nx - 2, 0), ia))
    c1 = np.where(i_f == 0, min(1, nx - 1), np.where(i_f == nx, nx - 1, ib))
    row = np.where(j_f == ny, ny - 1, jb)
    split = c1 > c0
    with np.errstate(divide="ignore", invalid="ignore"):
        if mesh.geometry == "axisymmetric":
            ok = split & (xf[i_f] > 0.0)  # never extrapolate in ln r towards the axis
            num = np.log(np.where(ok, xf[i_f], xc[c0]) / xc[c0])
            den = np.log(np.where(ok, xc[c1], 2.0 * xc[c0]) / xc[c0])
            wx = np.where(ok, num / den, 0.0)
        else:
            wx = np.where(split, (xf[i_f] - xc[c0]) / np.where(split, xc[c1] - xc[c0], 1.0), 0.0)
    same_x = (ids[row, c0] == ids[row, c1]) & (ids[ja, c0] == ids[ja, c1])
    wx = np.where(same_x, wx, np.clip(wx, 0.0, 1.0))
    along_y = ty[j_f, c0] + wx * (ty[j_f, c1] - ty[j_f, c0])
    on_x_edge = (i_f == 0) | (i_f == nx)
    on_y_edge = (j_f == 0) | (j_f == ny)
    faces = np.stack([tx[r0, i_f], tx[r1, i_f], ty[j_f, c0], ty[j_f, c1]])
    corner = np.clip(0.5 * (along_x + along_y), faces.min(axis=0), faces.max(axis=0))
    # material interfaces through an interior vertex: a vertical one separates columns ia
    # and ib, a horizontal one rows ja and jb
    vertical = (ib > ia) & ((ids[ja, ia] != ids[ja, ib]) | (ids[jb, ia] != ids[jb, ib]))
    horizontal = (jb > ja) & ((ids[ja, ia] != ids[jb, ia]) | (ids[ja, ib] != ids[jb, ib]))
    junction = 0.5 * (along_x + along_y)
    if k is not None:
        junction = np.where(
            vertical & horizontal,
            _junction_balance(mesh, k, tx, ty, i_f, j_f, ia, ib, ja, jb),
            junction,
        )
    interior = np.where(
        vertical & ~horizontal,
        along_x,
        np.where(horizontal & ~vertical, along_y, junction),
    )
    # on an edge, the line along the edge unless a material interface meets the edge there:
    # then the line along the interface (extrapolated to the edge)
    x_edge = np.where(horizontal, along_y, along_x)
    y_edge = np.where(vertical, along_x, along_y)
    return np.where(
        on_x_edge & on_y_edge,
        corner,
        np.where(on_x_edge, x_edge, np.where(on_y_edge, y_edge, interior)),
    )


def _junction_balance(
    mesh: Mesh,
    k: _Array,
    tx: _Array,
    ty: _Array,
    i_f: _Array,
    j_f: _Array,
    ia: _Array,
    ib: _Array,
    ja: _Array,
    jb: _Array,
) -> _Array:
    """Vertex temperatures, degC, from the heat balance of each vertex's dual control volume.

    See `vertex_temperatures` (Notes). Meaningful at interior vertices (ia < ib, ja < jb);
    elsewhere it returns finite values that the caller discards.
    """
    xv, yv = mesh.x_faces[i_f], mesh.y_faces[j_f]
    # arm lengths: vertex to the face centres west, east (y faces), south, north (x faces)
    aw = np.maximum(xv - mesh.x[ia], 0.0)
    ae = np.maximum(mesh.x[ib] - xv, 0.0)
    bs = np.maximum(yv - mesh.y[ja], 0.0)
    bn = np.maximum(mesh.y[jb] - yv, 0.0)
    k_sw, k_se, k_nw, k_ne = k[ja, ia], k[ja, ib], k[jb, ia], k[jb, ib]
    # sides of the dual volume: the west and east sides, per unit of their height (the
    # part in a quarter is half the quarter's height), and the parts of the south and north
    # sides west and east of the vertex (half the quarter's width)
    if mesh.geometry == "axisymmetric":
        rw, re = xv - 0.5 * aw, xv + 0.5 * ae  # radii of the west and east sides
        side_w = math.pi * rw  # 2 pi r x (half the quarter's height) / that height
        side_e = math.pi * re
        ring_w = math.pi * (xv * xv - rw * rw)  # annuli between the vertex and the sides
        ring_e = math.pi * (re * re - xv * xv)
    else:
        side_w = side_e = np.full(xv.shape, 0.5)
        ring_w, ring_e = 0.5 * aw, 0.5 * ae
    with np.errstate(divide="ignore", invalid="ignore"):
        # conductances of the four arms, W/K per m depth (planar) or W/K: the parallel
        # conductance of the two quarters each side of the dual volume passes through
        g_w = np.where(aw > 0.0, side_w * (k_sw * bs + k_nw * bn) / aw, 0.0)
        g_e = np.where(ae > 0.0, side_e * (k_se * bs + k_ne * bn) / ae, 0.0)
        g_s = np.where(bs > 0.0, (k_sw * ring_w + k_se * ring_e) / bs, 0.0)
        g_n = np.where(bn > 0.0, (k_nw * ring_w + k_ne * ring_e) / bn, 0.0)
        total = g_w + g_e + g_s + g_n
        # energy balance of the dual volume: sum g_f (T_f - T_v) = 0
        balance = (
            g_w * ty[j_f, ia] + g_e * ty[j_f, ib] + g_s * tx[ja, i_f] + g_n * tx[jb, i_f]
        ) / np.where(total > 0.0, total, 1.0)
    mean = 0.25 * (ty[j_f, ia] + ty[j_f, ib] + tx[ja, i_f] + tx[jb, i_f])
    return np.where(total > 0.0, balance, mean)


def interpolate_points(
    mesh: Mesh,
    ids: _Array,
    temperature: _Array,
    tx: _Array,
    ty: _Array,
    points: _Array,
    k: _Array | None = None,
) -> _Array:
    """Temperatures at points, degC, from the containing cell and its face temperatures.

    The point lies in one quadrant of its cell, spanned by the centre (T_P), the nearest x
    face (T_x), the nearest y face (T_y) and the cell vertex between them (T_v). Bilinear
    interpolation over that quadrant::

        T = T_P + f_x (T_x - T_P) + f_y (T_y - T_P) + f_x f_y (T_v - T_x - T_y + T_P)

    with f_x linear in x (in ln r for axisymmetric radial faces, exact for a source-free shell)
    and f_y linear in y. The cell holds one material and its face values are the
    flux-continuous ones, so the interpolation stays honest across zone boundaries. ``k``
    (ny, nx), W/(m K), the cell conductivities, gives vertices where materials meet their
    dual-volume balance value (see `vertex_temperatures`).
    """
    if points.size == 0:
        return np.zeros(0)
    px, py = points[:, 0], points[:, 1]
    xf, yf = mesh.x_faces, mesh.y_faces
    i = np.clip(np.searchsorted(xf, px, side="right") - 1, 0, mesh.nx - 1)
    j = np.clip(np.searchsorted(yf, py, side="right") - 1, 0, mesh.ny - 1)
    tc = temperature[j, i]
    xc, yc = mesh.x[i], mesh.y[j]
    east = px >= xc
    i_f = np.where(east, i + 1, i)
    xface = xf[i_f]
    tfx = tx[j, i_f]
    if mesh.geometry == "axisymmetric":
        with np.errstate(divide="ignore", invalid="ignore"):
            ok = (xface > 0.0) & (px > 0.0)
            fx = np.where(
                ok,
                np.log(np.where(ok, px, 1.0) / xc) / np.log(np.where(ok, xface, 2.0 * xc) / xc),
                1.0,
            )
    else:
        fx = (px - xc) / (xface - xc)
    north = py >= yc
    j_f = np.where(north, j + 1, j)
    tfy = ty[j_f, i]
    fy = (py - yc) / (yf[j_f] - yc)
    tv = vertex_temperatures(mesh, ids, tx, ty, i_f, j_f, k)
    return tc + fx * (tfx - tc) + fy * (tfy - tc) + fx * fy * (tv - tfx - tfy + tc)


def segment_flows(setup: Setup, state: State, surface: _Array) -> tuple[EdgeFlow, ...]:
    """Heat flow through each segment and edge (positive into the body)."""
    bf = setup.boundary
    inflow = boundary_inflow(setup, state.lin, state.temperature)
    per_edge: dict[str, list[SegmentFlow]] = {e: [] for e in EDGE_NAMES}
    totals = np.bincount(bf.edge, weights=inflow, minlength=4)
    for s, (edge, n, seg) in enumerate(bf.segments):
        f = bf.faces_of[s]
        length = setup.problem.width if edge in ("bottom", "top") else setup.problem.height
        s0 = 0.0 if seg.start is None else float(seg.start)
        s1 = length if seg.end is None else float(seg.end)
        area = bf.area[f]
        mean = (
            float((surface[f] * area).sum() / area.sum())
            if area.sum() > 0.0
            else float(surface[f].mean())
            if f.size
            else math.nan
        )
        per_edge[edge].append(
            SegmentFlow(
                edge=edge,
                index=n,
                start=s0,
                end=s1,
                type=seg.type,
                heat_flow=float(inflow[f].sum()),
                mean_surface_temperature=mean,
            )
        )
    return tuple(
        EdgeFlow(edge=e, heat_flow=float(totals[m]), segments=tuple(per_edge[e]))
        for m, e in enumerate(EDGE_NAMES)
    )


class Scopes:
    """Masks of the regions whose extremes are tracked: body, exposed segments, limited zones.

    Extremes are kept as (temperature, x, y, time) for hottest and coldest, updated at every
    state (every time step of a transient, including t = 0).
    """

    def __init__(self, setup: Setup) -> None:
        mesh, bf, p = setup.mesh, setup.boundary, setup.problem
        self.setup = setup
        xx, yy = np.meshgrid(mesh.x, mesh.y)
        yfx, xfx = np.meshgrid(mesh.y, mesh.x_faces, indexing="ij")  # x faces (ny, nx+1)
        yfy, xfy = np.meshgrid(mesh.y_faces, mesh.x, indexing="ij")  # y faces (ny+1, nx)
        self.cell_xy = (xx.ravel(), yy.ravel())
        self.face_xy = (bf.x, bf.y)
        self.names: list[str] = ["body"]
        self.kinds: list[str] = ["body"]
        # each scope: (cell mask, x-face mask, y-face mask, boundary-face mask) or None = all
        self.masks: list[tuple[_Array | None, _Array | None, _Array | None, _Array | None]] = [
            (None, None, None, None)
        ]
        for s, (edge, n, seg) in enumerate(bf.segments):
            if seg.type in ("convection", "radiation") and bf.faces_of[s].size:
                fm = np.zeros(bf.cell.size, dtype=bool)
                fm[bf.faces_of[s]] = True
                self.names.append(f"edges.{edge}.{n}")
                self.kinds.append("surface")
                self.masks.append((np.zeros(mesh.cells, dtype=bool), None, None, fm))
        self.zone_limits: list[tuple[str, float, int]] = []
        ids = setup.materials.ids
        for i, z in enumerate(p.zones):
            if z.max_temperature is None:
                continue
            cm = ids == i + 1
            if not cm.any():
                continue
            xm = np.zeros((mesh.ny, mesh.nx + 1), dtype=bool)
            xm[:, :-1] |= cm
            xm[:, 1:] |= cm
            ym = np.zeros((mesh.ny + 1, mesh.nx), dtype=bool)
            ym[:-1, :] |= cm
            ym[1:, :] |= cm
            fm = cm.ravel()[bf.cell]
            self.zone_limits.append(
                (f"zones.{i}.max_temperature", float(z.max_temperature), len(self.names))
            )
            self.names.append(z.name)
            self.kinds.append("zone")
            self.masks.append((cm.ravel(), xm.ravel(), ym.ravel(), fm))
        self._xface_xy = (xfx.ravel(), yfx.ravel())
        self._yface_xy = (xfy.ravel(), yfy.ravel())
        self.hot: list[tuple[float, float, float, float | None, str]] = [
            (-math.inf, 0.0, 0.0, None, "")
        ] * len(self.names)
        self.cold: list[tuple[float, float, float, float | None, str]] = [
            (math.inf, 0.0, 0.0, None, "")
        ] * len(self.names)
        self.history: list[list[tuple[float, float, float]]] = [[] for _ in self.names]

    def update(
        self, time: float | None, temperature: _Array, tx: _Array, ty: _Array, surf: _Array
    ) -> None:
        t = temperature.ravel()
        for s, (cm, xm, ym, fm) in enumerate(self.masks):
            cands = []
            if cm is None:
                cands.append((t, self.cell_xy, "cell centre"))
                cands.append((surf, self.face_xy, "boundary face"))
            else:
                if cm.any():
                    cands.append((t[cm], (self.cell_xy[0][cm], self.cell_xy[1][cm]), "cell centre"))
                if xm is not None:
                    cands.append(
                        (
                            tx.ravel()[xm],
                            (self._xface_xy[0][xm], self._xface_xy[1][xm]),
                            "cell face",
                        )
                    )
                if ym is not None:
                    cands.append(
                        (
                            ty.ravel()[ym],
                            (self._yface_xy[0][ym], self._yface_xy[1][ym]),
                            "cell face",
                        )
                    )
                if fm is not None and fm.any():
                    cands.append(
                        (surf[fm], (self.face_xy[0][fm], self.face_xy[1][fm]), "boundary face")
                    )
            hi = lo = None
            for vals, (xs, ys), what in cands:
                if vals.size == 0:
                    continue
                a, b = int(np.argmax(vals)), int(np.argmin(vals))
                if hi is None or vals[a] > hi[0]:
                    hi = (float(vals[a]), float(xs[a]), float(ys[a]), time, what)
                if lo is None or vals[b] < lo[0]:
                    lo = (float(vals[b]), float(xs[b]), float(ys[b]), time, what)
            if hi is None or lo is None:
                continue
            if hi[0] > self.hot[s][0] or not math.isfinite(hi[0]):
                self.hot[s] = hi
            if lo[0] < self.cold[s][0] or not math.isfinite(lo[0]):
                self.cold[s] = lo
            if time is not None:
                self.history[s].append((time, hi[0], lo[0]))

    def scope(self, s: int) -> Scope:
        def loc(rec: tuple[float, float, float, float | None, str], which: str) -> Location:
            temp, x, y, time, what = rec
            return Location(
                temperature=temp,
                description=f"{which} of {self.names[s]} ({what})",
                position=(x, y),
                time=time,
            )

        return Scope(
            name=self.names[s],
            hottest=loc(self.hot[s], "hottest"),
            coldest=loc(self.cold[s], "coldest"),
            history=tuple(self.history[s]),
        )

    def safety(self, limits: Limits) -> SafetyReport:
        surfaces = [self.scope(s) for s, k in enumerate(self.kinds) if k == "surface"]
        materials = [(name, value, self.scope(s)) for name, value, s in self.zone_limits]
        return check_limits(limits, self.scope(0), surfaces, materials)


def energy_balance(
    boundary: float, generation: float, stored: float, gross: float
) -> EnergyBalance:
    imbalance = boundary + generation - stored
    scale = max(gross, abs(stored))
    rel = abs(imbalance) / scale if scale > 0.0 else 0.0
    return EnergyBalance(
        boundary_inflow=boundary,
        generation=generation,
        stored=stored,
        imbalance=imbalance,
        relative_error=rel,
    )
