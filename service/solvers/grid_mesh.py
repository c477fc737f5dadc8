"""Stage 1 of the grid solver: the non-uniform tensor grid and its geometric factors.

Grid lines are placed on every zone boundary and every segment boundary, so that each cell holds
one material and each boundary face belongs to one segment: thin layers are then represented
exactly (a layer of any thickness gets at least one cell, and the face conductances between
layers are exact series resistances). The requested ``nx`` (``ny``) cells are shared among the
intervals between those lines in proportion to their lengths, uniform within each interval.

Geometric factors per cell (all shapes (ny, nx)):

* ``volume``: planar dx dy (m^3 per m depth); axisymmetric pi (r_e^2 - r_w^2) dy (m^3).
* half-cell shape factors ``s_west``, ``s_east``, ``s_south``, ``s_north`` (m per m depth, or
  m): the conductance from the cell centre to that face is ``k * s``. Planar x faces:
  dy / (dx / 2). Axisymmetric radial faces: 2 pi r_face dy / |r_face - r_centre| (face area
  over distance; zero at the axis). Axial faces: face area / (dy / 2).

Layers are exact along x and y for planar bodies and along the axis of axisymmetric ones
(series half-cell resistances); across radial layers the face-area form is second order.
* boundary face areas ``area_bottom`` (nx,), ``area_top`` (nx,), ``area_left`` (ny,),
  ``area_right`` (ny,).

References
----------
Patankar, S. V., *Numerical Heat Transfer and Fluid Flow*, Hemisphere, 1980, sect. 4.2-4.3
(cell-centred control volumes, harmonic-mean interface conductivity; from memory).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .errors import TooLargeError
from .grid_model import GridProblem, segment_extent

_Array = np.ndarray


@dataclass(frozen=True)
class Mesh:
    """A tensor grid with its geometric factors (see module docstring for units)."""

    geometry: str
    x_faces: _Array
    y_faces: _Array
    x: _Array
    y: _Array
    volume: _Array
    s_west: _Array
    s_east: _Array
    s_south: _Array
    s_north: _Array
    area_bottom: _Array
    area_top: _Array
    area_left: _Array
    area_right: _Array
    breaks_x: tuple[float, ...]
    breaks_y: tuple[float, ...]
    counts_x: tuple[int, ...]
    counts_y: tuple[int, ...]

    @property
    def nx(self) -> int:
        return int(self.x.size)

    @property
    def ny(self) -> int:
        return int(self.y.size)

    @property
    def cells(self) -> int:
        return self.nx * self.ny


def breakpoints(length: float, cuts: Sequence[float]) -> tuple[float, ...]:
    """Sorted grid lines 0, cuts..., length with near-duplicates (1e-10 of length) merged."""
    tol = 1e-10 * length
    pts = sorted({0.0, float(length), *(min(max(float(c), 0.0), length) for c in cuts)})
    out = [0.0]
    for p in pts[1:]:
        if p - out[-1] > tol:
            out.append(p)
    out[-1] = float(length)
    return tuple(out)


def distribute(breaks: Sequence[float], n: int) -> tuple[int, ...]:
    """Share `n` cells among the intervals of `breaks`, at least one each.

    The count of each interval is its length over a common spacing h, rounded, with h chosen so
    the counts add up to max(n, number of intervals); the cells are therefore as close to
    uniform as the fixed lines allow.
    """
    lengths = np.diff(np.asarray(breaks, dtype=float))
    m = lengths.size
    n = max(n, m)
    counts = np.maximum(1, np.floor(n * lengths / lengths.sum())).astype(int)
    # largest-spacing-first: give the next cell to the interval whose cells are widest
    while counts.sum() < n:
        counts[np.argmax(lengths / counts)] += 1
    while counts.sum() > n:
        widths = np.where(counts > 1, lengths / np.maximum(counts - 1, 1), np.inf)
        counts[np.argmin(widths)] -= 1
    return tuple(int(c) for c in counts)


def _lines(breaks: Sequence[float], counts: Sequence[int]) -> _Array:
    parts = [
        np.linspace(a, b, c + 1)[:-1]
        for a, b, c in zip(breaks[:-1], breaks[1:], counts, strict=True)
    ]
    return np.concatenate([*parts, [breaks[-1]]])


def grid_breaks(problem: GridProblem) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """Grid lines that must exist: zone edges and segment ends, along x and along y."""
    cx: list[float] = []
    cy: list[float] = []
    for z in problem.zones:
        x0, y0, x1, y1 = z.region
        cx += [x0, x1]
        cy += [y0, y1]
    for edge, segs in problem.edges.named():
        along_x = edge in ("bottom", "top")
        length = problem.width if along_x else problem.height
        for seg in segs:
            (cx if along_x else cy).extend(segment_extent(seg, length))
    return breakpoints(problem.width, cx), breakpoints(problem.height, cy)


def plan_mesh(
    problem: GridProblem, scale: float = 1.0
) -> tuple[tuple[float, ...], tuple[float, ...], tuple[int, ...], tuple[int, ...]]:
    """Grid lines and per-interval cell counts, without allocating anything large.

    `scale` multiplies the count of every interval (2: refine, 0.5: coarsen, at least 1 each).
    """
    bx, by = grid_breaks(problem)
    cx = distribute(bx, problem.cells.nx)
    cy = distribute(by, problem.cells.ny)
    if scale != 1.0:
        cx = tuple(max(1, int(math.floor(c * scale + 1e-9))) for c in cx)
        cy = tuple(max(1, int(math.floor(c * scale + 1e-9))) for c in cy)
    return bx, by, cx, cy


def build_mesh(problem: GridProblem, scale: float = 1.0) -> Mesh:
    """Stage 1: grid lines, cell centres and geometric factors.

    Parameters
    ----------
    problem : GridProblem
    scale : float
        Per-interval refinement factor (see `plan_mesh`).

    Raises
    ------
    TooLargeError
        The grid would have more than ``problem.max_cells`` cells (checked before any array is
        allocated).
    """
    bx, by, cx, cy = plan_mesh(problem, scale)
    cells = sum(cx) * sum(cy)
    if cells > problem.max_cells:
        raise TooLargeError(
            f"cells: the grid needs {sum(cx)} x {sum(cy)} = {cells} cells, "
            f"beyond the cap of {problem.max_cells}",
            field="cells",
        )
    xf = _lines(bx, cx)
    yf = _lines(by, cy)
    xc = 0.5 * (xf[:-1] + xf[1:])
    yc = 0.5 * (yf[:-1] + yf[1:])
    dx = np.diff(xf)
    dy = np.diff(yf)
    if problem.geometry == "planar":
        volume = np.outer(dy, dx)
        sx = np.outer(dy, 2.0 / dx)  # dy / (dx/2), same for west and east halves
        s_west = sx
        s_east = sx
        sy = np.outer(2.0 / dy, dx)  # dx / (dy/2)
        s_south = sy
        s_north = sy
        area_bottom = dx.copy()
        area_top = dx.copy()
        area_left = dy.copy()
        area_right = dy.copy()
    else:
        ring = math.pi * (xf[1:] ** 2 - xf[:-1] ** 2)  # annulus area of each radial column
        volume = np.outer(dy, ring)
        # half-cell resistance (r_face - r_centre) / (2 pi r_face k dy), with the face's own
        # area. The cylindrical-shell form ln(r_face/r_centre) would be exact for source-free
        # radial layers but was measured to spoil second-order accuracy next to the axis,
        # where regular solutions are even in r; the face-area form is second order throughout.
        inv_w = np.where(xf[:-1] > 0.0, xf[:-1] / (xc - xf[:-1]), 0.0)  # zero at the axis
        inv_e = xf[1:] / (xf[1:] - xc)
        s_west = np.outer(2.0 * math.pi * dy, inv_w)
        s_east = np.outer(2.0 * math.pi * dy, inv_e)
        sy = np.outer(2.0 / dy, ring)
        s_south = sy
        s_north = sy
        area_bottom = ring.copy()
        area_top = ring.copy()
        area_left = np.zeros_like(dy)  # the axis
        area_right = 2.0 * math.pi * xf[-1] * dy
    return Mesh(
        geometry=problem.geometry,
        x_faces=xf,
        y_faces=yf,
        x=xc,
        y=yc,
        volume=volume,
        s_west=s_west,
        s_east=s_east,
        s_south=s_south,
        s_north=s_north,
        area_bottom=area_bottom,
        area_top=area_top,
        area_left=area_left,
        area_right=area_right,
        breaks_x=bx,
        breaks_y=by,
        counts_x=cx,
        counts_y=cy,
    )
