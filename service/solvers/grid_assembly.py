"""Stages 2 and 3 of the grid solver: material properties, conductances, boundary terms and the
sparse system.

Discrete energy balance of cell P (finite-volume form of div(k grad T) + q = rho c dT/dt)::

    C_P dT_P/dt = sum_nb G_Pnb (T_nb - T_P) + sum_faces (Q_f - G_f T_P) + q_P V_P

with interior conductances G_Pnb = 1 / (1/(k_P s_P) + 1/(k_nb s_nb)) (two half-cell
resistances in series: the harmonic mean, exact for layered media) and boundary faces written as
an affine heat inflow Q_f - G_f T_P:

* temperature T_b:        G_f = g_h, Q_f = g_h T_b, with g_h = k_P s (half-cell conductance);
* flux q (into the body): G_f = 0, Q_f = q A;
* convection h, T_inf and radiation eps, T_sur: the surface resistance 1/((h + h_r) A) in
  series with the half cell, G_f = 1/(1/g_h + 1/((h + h_r) A)), Q_f = G_f T_eff with
  T_eff = (h T_inf + h_r T_sur) / (h + h_r);
* insulated (and the axis):  G_f = Q_f = 0.

Radiation eps sigma (T_sur^4 - T_s^4) (absolute temperatures) is linearised about the surface
temperature T_0 of the current iterate (Newton's tangent): h_r = 4 eps sigma T_0^3 and
T_rad = T_0 + eps sigma (T_sur^4 - T_0^4) / h_r, so the face acts as a convective one with
coefficient h_r towards T_rad; at convergence the flux is the exact radiative one.

References
----------
Patankar, S. V., *Numerical Heat Transfer and Fluid Flow*, Hemisphere, 1980, eq. 4.8-4.9
(harmonic interface conductivity) and sect. 4.2-5 (boundary treatment; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from .grid_mesh import Mesh
from .grid_model import GridProblem, Segment, TimedValue, is_table, segment_extent, table_at

_Array = np.ndarray

#: Stefan-Boltzmann constant, W/(m^2 K^4) (CODATA 2018, exact in SI 2019).
STEFAN_BOLTZMANN = 5.670374419e-8
#: Offset between degC and K.
KELVIN = 273.15


@dataclass(frozen=True)
class Materials:
    """Material of each cell and per-material properties (index 0 the body, i + 1 zone i)."""

    ids: _Array  # (ny, nx) int
    conductivity: tuple[float | tuple[tuple[float, float], ...], ...]
    generation: tuple[object, ...]  # float or time table per material
    heat_capacity: _Array | None  # (ny, nx) rho c V, J/K (per m depth planar)
    constant_k: _Array | None  # (ny, nx) when no material has a table, else None

    @property
    def linear(self) -> bool:
        return not any(is_table(k) for k in self.conductivity)


def build_materials(problem: GridProblem, mesh: Mesh) -> Materials:
    """Assign each cell its material by its centre (later zones override earlier ones)."""
    ids = np.zeros((mesh.ny, mesh.nx), dtype=np.int32)
    for i, z in enumerate(problem.zones):
        x0, y0, x1, y1 = z.region
        cols = (mesh.x > x0) & (mesh.x < x1)
        rows = (mesh.y > y0) & (mesh.y < y1)
        ids[np.ix_(rows, cols)] = i + 1
    ks = (
        problem.conductivity,
        *(
            z.conductivity if z.conductivity is not None else problem.conductivity
            for z in problem.zones
        ),
    )
    gens = (
        problem.generation,
        *(z.generation if z.generation is not None else problem.generation for z in problem.zones),
    )
    heat_capacity = None
    if problem.transient is not None:
        rho = np.array(
            [
                problem.density,
                *(z.density if z.density is not None else problem.density for z in problem.zones),
            ],
            dtype=float,
        )
        c = np.array(
            [
                problem.specific_heat,
                *(
                    z.specific_heat if z.specific_heat is not None else problem.specific_heat
                    for z in problem.zones
                ),
            ],
            dtype=float,
        )
        heat_capacity = (rho * c)[ids] * mesh.volume
    constant_k = None
    if not any(is_table(k) for k in ks):
        constant_k = np.array(ks, dtype=float)[ids]
    return Materials(
        ids=ids,
        conductivity=ks,
        generation=gens,
        heat_capacity=heat_capacity,
        constant_k=constant_k,
    )


def cell_conductivity(materials: Materials, temperature: _Array) -> _Array:
    """Conductivity of each cell, W/(m K), tables interpolated at the cell temperature."""
    if materials.constant_k is not None:
        return materials.constant_k
    k = np.empty(materials.ids.shape)
    for m, km in enumerate(materials.conductivity):
        mask = materials.ids == m
        if is_table(km):
            tab = np.asarray(km, dtype=float)
            k[mask] = np.interp(temperature[mask], tab[:, 0], tab[:, 1])
        else:
            k[mask] = float(km)  # type: ignore[arg-type]
    return k


def table_range_warnings(materials: Materials, temperature: _Array) -> list[str]:
    """Say where the field left a conductivity table's range (values were held constant)."""
    out = []
    for m, km in enumerate(materials.conductivity):
        if not is_table(km):
            continue
        mask = materials.ids == m
        if not mask.any():
            continue
        tab = np.asarray(km, dtype=float)
        lo, hi = float(temperature[mask].min()), float(temperature[mask].max())
        if lo < tab[0, 0] or hi > tab[-1, 0]:
            where = "conductivity" if m == 0 else f"zones.{m - 1}.conductivity"
            out.append(
                f"{where}: temperatures {lo:.4g} to {hi:.4g} degC leave the table's "
                f"range {tab[0, 0]:g} to {tab[-1, 0]:g} degC; the end values were used"
            )
    return out


def cell_generation(materials: Materials, mesh: Mesh, time: float) -> _Array:
    """Heat generated in each cell, W (per m depth planar), at `time`."""
    q = np.array([table_at(g, time) for g in materials.generation])  # type: ignore[arg-type]
    if not q.any():
        return np.zeros_like(mesh.volume)
    return q[materials.ids] * mesh.volume


def interior_conductances(mesh: Mesh, k: _Array) -> tuple[_Array, _Array]:
    """Face conductances between neighbours, W/K: (ny, nx-1) along x, (ny-1, nx) along y.

    Two half-cell conductances in series (harmonic mean): exact for layered media.
    """
    a = k[:, :-1] * mesh.s_east[:, :-1]
    b = k[:, 1:] * mesh.s_west[:, 1:]
    gx = a * b / (a + b)
    c = k[:-1, :] * mesh.s_north[:-1, :]
    d = k[1:, :] * mesh.s_south[1:, :]
    gy = c * d / (c + d)
    return gx, gy


@dataclass(frozen=True)
class BoundaryFaces:
    """All boundary faces, edge by edge (bottom, right, top, left), with their segment."""

    edge: _Array  # (F,) int, index into EDGE order
    cell: _Array  # (F,) flat index of the adjacent cell
    shape: _Array  # (F,) half-cell shape factor (conductance = k * shape)
    area: _Array  # (F,) face area, m^2 (per m depth planar)
    along: _Array  # (F,) face midpoint along the edge's own coordinate, m
    x: _Array  # (F,) face midpoint x, m
    y: _Array  # (F,) face midpoint y, m
    segment: _Array  # (F,) index into `segments`, -1 where not covered (insulated)
    segments: tuple[tuple[str, int, Segment], ...]
    faces_of: tuple[_Array, ...]  # face indices of each segment


def build_boundary(problem: GridProblem, mesh: Mesh) -> BoundaryFaces:
    """Stage 3a: list the boundary faces and the segment each belongs to."""
    nx, ny = mesh.nx, mesh.ny
    jj = np.arange(ny)
    ii = np.arange(nx)
    parts = {
        "bottom": (
            ii,
            ii,
            mesh.s_south[0, :],
            mesh.area_bottom,
            mesh.x,
            mesh.x,
            np.full(nx, mesh.y_faces[0]),
        ),
        "right": (
            jj * nx + nx - 1,
            jj,
            mesh.s_east[:, -1],
            mesh.area_right,
            mesh.y,
            np.full(ny, mesh.x_faces[-1]),
            mesh.y,
        ),
        "top": (
            (ny - 1) * nx + ii,
            ii,
            mesh.s_north[-1, :],
            mesh.area_top,
            mesh.x,
            mesh.x,
            np.full(nx, mesh.y_faces[-1]),
        ),
        "left": (
            jj * nx,
            jj,
            mesh.s_west[:, 0],
            mesh.area_left,
            mesh.y,
            np.full(ny, mesh.x_faces[0]),
            mesh.y,
        ),
    }
    edge_l, cell_l, shape_l, area_l, along_l, x_l, y_l, seg_l = [], [], [], [], [], [], [], []
    segments: list[tuple[str, int, Segment]] = []
    for e, (name, segs) in enumerate(problem.edges.named()):
        cell, _, shape, area, along, fx, fy = parts[name]
        length = problem.width if name in ("bottom", "top") else problem.height
        seg_id = np.full(along.size, -1, dtype=np.int64)
        for n, seg in enumerate(segs):
            s0, s1 = segment_extent(seg, length)
            seg_id[(along > s0) & (along < s1)] = len(segments)
            segments.append((name, n, seg))
        edge_l.append(np.full(along.size, e))
        cell_l.append(cell)
        shape_l.append(shape)
        area_l.append(area)
        along_l.append(along)
        x_l.append(fx)
        y_l.append(fy)
        seg_l.append(seg_id)
    segment = np.concatenate(seg_l)
    faces_of = tuple(np.flatnonzero(segment == s) for s in range(len(segments)))
    return BoundaryFaces(
        edge=np.concatenate(edge_l),
        cell=np.concatenate(cell_l),
        shape=np.concatenate(shape_l),
        area=np.concatenate(area_l),
        along=np.concatenate(along_l),
        x=np.concatenate(x_l),
        y=np.concatenate(y_l),
        segment=segment,
        segments=tuple(segments),
        faces_of=faces_of,
    )


def has_radiation(bf: BoundaryFaces) -> bool:
    return any(seg.emissivity is not None for _, _, seg in bf.segments)


def _given(value: TimedValue | None) -> TimedValue:
    """A value that `validate` guarantees to be present."""
    if value is None:
        raise ValueError("a required boundary value is missing (validate the problem first)")
    return value


def boundary_terms(
    bf: BoundaryFaces, k_cells: _Array, surface: _Array, time: float
) -> tuple[_Array, _Array]:
    """Stage 3b: affine inflow Q_f - G_f T_P of each boundary face at `time`.

    Parameters
    ----------
    bf : BoundaryFaces
    k_cells : (ny, nx) conductivity, W/(m K)
    surface : (F,) surface temperature estimate, degC (used by radiation only)
    time : s

    Returns
    -------
    G, Q : (F,) arrays, W/K and W (per m depth planar)
    """
    g_half = k_cells.ravel()[bf.cell] * bf.shape
    G = np.zeros(bf.cell.size)
    Q = np.zeros(bf.cell.size)
    for s, (_, _, seg) in enumerate(bf.segments):
        f = bf.faces_of[s]
        if f.size == 0 or seg.type == "insulated":
            continue
        if seg.type == "temperature":
            tb = (
                np.interp(bf.along[f], *np.asarray(seg.profile, dtype=float).T)
                if seg.profile is not None
                else table_at(_given(seg.value), time)
            )
            G[f] = g_half[f]
            Q[f] = g_half[f] * tb
        elif seg.type == "flux":
            qs = (
                np.interp(bf.along[f], *np.asarray(seg.profile, dtype=float).T)
                if seg.profile is not None
                else table_at(_given(seg.value), time)
            )
            Q[f] = qs * bf.area[f]
        else:  # convection and/or radiation
            h = 0.0 if seg.film_coefficient is None else table_at(seg.film_coefficient, time)
            t_amb = 0.0 if seg.ambient is None else table_at(seg.ambient, time)
            h_tot = np.full(f.size, h)
            h_t = np.full(f.size, h * t_amb)
            if seg.emissivity is not None:
                t_sur = table_at(
                    _given(seg.surroundings if seg.surroundings is not None else seg.ambient), time
                )
                ts_k = np.maximum(surface[f] + KELVIN, 1.0)
                sur_k = t_sur + KELVIN
                # radiation linearised about the surface estimate T0 (Newton's tangent):
                # eps sigma (Tsur^4 - Ts^4) ~ q0 + h_r (T0 - Ts) = h_r (T_rad - Ts) with
                # h_r = 4 eps sigma T0^3 and T_rad = T0 + q0 / h_r
                es = seg.emissivity * STEFAN_BOLTZMANN
                h_r = 4.0 * es * ts_k**3
                t_rad = surface[f] + es * (sur_k**4 - ts_k**4) / h_r
                h_tot = h_tot + h_r
                h_t = h_t + h_r * t_rad
            g_surf = h_tot * bf.area[f]
            gh = g_half[f]
            with np.errstate(divide="ignore", invalid="ignore"):
                g = np.where((gh > 0.0) & (g_surf > 0.0), gh * g_surf / (gh + g_surf), 0.0)
                t_eff = np.where(h_tot > 0.0, h_t / np.where(h_tot > 0.0, h_tot, 1.0), 0.0)
            G[f] = g
            Q[f] = g * t_eff
    return G, Q


def surface_temperatures(
    bf: BoundaryFaces, k_cells: _Array, G: _Array, Q: _Array, temperature: _Array
) -> _Array:
    """Temperature on each boundary face from the half-cell balance, degC.

    The inflow Q_f - G_f T_P crosses the half cell, so T_face = T_P + inflow / g_half; at the
    axis (g_half = 0) the face takes the cell's temperature.
    """
    tc = temperature.ravel()[bf.cell]
    g_half = k_cells.ravel()[bf.cell] * bf.shape
    inflow = Q - G * tc
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(g_half > 0.0, tc + inflow / np.where(g_half > 0.0, g_half, 1.0), tc)


def solve_surfaces(bf: BoundaryFaces, k_cells: _Array, temperature: _Array, time: float) -> _Array:
    """Surface temperature of every boundary face for given cell temperatures, degC.

    Faces without radiation follow from the linear half-cell balance. On radiating faces the
    balance g_h (T_s - T_P) = h A (T_inf - T_s) + eps sigma A (T_sur^4 - T_s^4) is solved for
    T_s by Newton's method: the residual is increasing and convex in T_s, so Newton started
    above the root (at the largest of T_P, T_inf, T_sur) descends monotonically onto it.
    """
    surface = temperature.ravel()[bf.cell].copy()
    G, Q = boundary_terms(bf, k_cells, surface, time)
    surface = surface_temperatures(bf, k_cells, G, Q, temperature)
    g_half = k_cells.ravel()[bf.cell] * bf.shape
    for s, (_, _, seg) in enumerate(bf.segments):
        f = bf.faces_of[s]
        if seg.emissivity is None or f.size == 0:
            continue
        h = 0.0 if seg.film_coefficient is None else table_at(seg.film_coefficient, time)
        t_amb = 0.0 if seg.ambient is None else table_at(seg.ambient, time)
        t_sur = table_at(
            _given(seg.surroundings if seg.surroundings is not None else seg.ambient), time
        )
        area, gh = bf.area[f], g_half[f]
        tc = temperature.ravel()[bf.cell[f]]
        k_rad = seg.emissivity * STEFAN_BOLTZMANN * area
        sur4 = (t_sur + KELVIN) ** 4
        ts = np.maximum(np.maximum(tc, t_sur), t_amb if h > 0.0 else -np.inf)
        for _ in range(100):
            tk = ts + KELVIN
            res = gh * (ts - tc) - h * area * (t_amb - ts) - k_rad * (sur4 - tk**4)
            der = gh + h * area + 4.0 * k_rad * tk**3
            step = res / der
            ts = ts - step
            if np.all(np.abs(step) <= 1e-12 * (1.0 + np.abs(ts))):
                break
        surface[f] = np.where(gh > 0.0, ts, tc)
    return surface


def build_matrix(mesh: Mesh, gx: _Array, gy: _Array, diagonal: _Array) -> sp.csr_matrix:
    """Stage 3c: the symmetric 5-point matrix, rows ordered p = j * nx + i.

    Row P: (sum_nb G_Pnb + diagonal_P) T_P - sum_nb G_Pnb T_nb. Built from its five diagonals
    (the east/west ones hold zeros where a row of cells ends; conversion to CSR drops them),
    about ten times faster at a million cells than from (row, column, value) triplets.
    """
    nx, ny = mesh.nx, mesh.ny
    ew = np.zeros((ny, nx + 1))  # conductance of each x face, boundary faces zero
    ew[:, 1:-1] = gx
    ns = np.zeros((ny + 1, nx))  # conductance of each y face
    ns[1:-1, :] = gy
    main = diagonal + ew[:, :-1] + ew[:, 1:] + ns[:-1, :] + ns[1:, :]
    east = -ew[:, 1:].ravel()  # coupling of cell p with p + 1
    north = -ns[1:, :].ravel()  # coupling of cell p with p + nx
    diagonals = [main.ravel()]
    offsets = [0]
    if nx > 1:
        diagonals += [east[:-1], east[:-1]]
        offsets += [1, -1]
    if ny > 1:
        diagonals += [north[:-nx], north[:-nx]]
        offsets += [nx, -nx]
    return sp.diags(diagonals, offsets, format="csr")


def apply_matrix(gx: _Array, gy: _Array, diagonal: _Array, temperature: _Array) -> _Array:
    """The product of `build_matrix`'s matrix with a (ny, nx) field, without building it."""
    out = diagonal * temperature
    fx = gx * (temperature[:, :-1] - temperature[:, 1:])  # flow from each cell to its east
    out[:, :-1] += fx
    out[:, 1:] -= fx
    fy = gy * (temperature[:-1, :] - temperature[1:, :])  # flow from each cell to its north
    out[:-1, :] += fy
    out[1:, :] -= fy
    return out
