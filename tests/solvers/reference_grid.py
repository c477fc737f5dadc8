"""Reference cases for the grid solver: id, source, inputs, expected values and tolerances.

Every expected value is either a published benchmark value (named, "from memory" where it is
recalled rather than read) or computed here from a closed form or by an independent routine of
a general-purpose library (named), never by the solver under test.

Scenarios are invented for this product (a kiln door lining, a heated pin in a sleeve, ...).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from service.solvers.grid import Cells, Edges, GridProblem, GridResult, Segment, Zone

SIGMA = 5.670374419e-8  # Stefan-Boltzmann constant, W/(m^2 K^4), CODATA 2018


@dataclass(frozen=True)
class ReferenceCase:
    """One check: `actual(result)` against `expected` with both tolerances."""

    id: str
    source: str
    problem: GridProblem
    actual: Callable[[GridResult], np.ndarray]
    expected: tuple[float, ...]
    rtol: float
    atol: float


def _edge(result: GridResult, name: str) -> float:
    return next(e.heat_flow for e in result.edges if e.edge == name)


# --- kiln door lining: three layers in series, hot face fixed, cold face convecting ----------
# common practice, no source: series resistances R = sum(L_i / k_i) + 1/h, q = dT / R
_KILN_L = (0.006, 0.05, 0.114)  # steel skin, ceramic fibre board, firebrick, m
_KILN_K = (45.0, 0.08, 1.1)  # W/(m K)
_KILN_T_HOT, _KILN_H, _KILN_T_AIR = 900.0, 12.0, 25.0
_KILN_HEIGHT = 0.4
_kiln_x = np.cumsum((0.0,) + _KILN_L)
_kiln_r = np.array(_KILN_L) / np.array(_KILN_K)
_kiln_q = (_KILN_T_HOT - _KILN_T_AIR) / (_kiln_r.sum() + 1.0 / _KILN_H)  # W/m^2
_kiln_interfaces = _KILN_T_HOT - _kiln_q * np.cumsum(_kiln_r)  # after each layer
KILN = GridProblem(
    width=float(_kiln_x[-1]),
    height=_KILN_HEIGHT,
    cells=Cells(12, 3),
    conductivity=_KILN_K[1],
    zones=(
        Zone("steel skin", (0.0, 0.0, _kiln_x[1], _KILN_HEIGHT), conductivity=_KILN_K[0]),
        Zone("firebrick", (_kiln_x[2], 0.0, _kiln_x[3], _KILN_HEIGHT), conductivity=_KILN_K[2]),
    ),
    edges=Edges(
        left=(Segment("temperature", value=_KILN_T_HOT),),
        right=(Segment("convection", film_coefficient=_KILN_H, ambient=_KILN_T_AIR),),
    ),
    points=tuple((float(x), 0.2) for x in _kiln_x[1:]),
)

# --- a bus bar clamp: two strips side by side (parallel paths) between fixed temperatures ---
# common practice, no source: Q' = dT / L * sum(k_i t_i) per metre of depth
_CLAMP_K = (205.0, 16.0)
_CLAMP_T = (0.003, 0.007)
_CLAMP_L = 0.05
CLAMP = GridProblem(
    width=_CLAMP_L,
    height=sum(_CLAMP_T),
    cells=Cells(10, 5),
    conductivity=_CLAMP_K[1],
    zones=(Zone("aluminium strip", (0.0, 0.0, _CLAMP_L, _CLAMP_T[0]), conductivity=_CLAMP_K[0]),),
    edges=Edges(
        left=(Segment("temperature", value=80.0),), right=(Segment("temperature", value=30.0),)
    ),
    points=((0.025, 0.0), (0.025, 0.01)),
)
_clamp_q = (80.0 - 30.0) / _CLAMP_L * (_CLAMP_K[0] * _CLAMP_T[0] + _CLAMP_K[1] * _CLAMP_T[1])

# --- a heated pin in a ceramic sleeve (axisymmetric): ln(r2/r1) across the sleeve ------------
# (radial conductances are second order, not exact, so the grid is fine and the tolerance
# small; test_grid.py also checks the order of convergence towards this answer)
# common practice, no source: steady radial conduction through a cylindrical shell,
# T(r1) - T(r2) = Q / (2 pi k L) ln(r2/r1) with Q = q pi r1^2 L generated in the pin
_PIN_R1, _PIN_R2, _PIN_LEN = 0.004, 0.015, 0.05
_PIN_Q, _PIN_K_SLEEVE, _PIN_K_CORE, _PIN_TS = 2.0e7, 1.4, 22.0, 60.0
_pin_power = _PIN_Q * math.pi * _PIN_R1**2 * _PIN_LEN  # W
_pin_drop = _pin_power / (2 * math.pi * _PIN_K_SLEEVE * _PIN_LEN) * math.log(_PIN_R2 / _PIN_R1)
PIN = GridProblem(
    width=_PIN_R2,
    height=_PIN_LEN,
    geometry="axisymmetric",
    cells=Cells(88, 2),
    conductivity=_PIN_K_SLEEVE,
    zones=(
        Zone("pin", (0.0, 0.0, _PIN_R1, _PIN_LEN), conductivity=_PIN_K_CORE, generation=_PIN_Q),
    ),
    edges=Edges(right=(Segment("temperature", value=_PIN_TS),)),
    points=((_PIN_R1, 0.025), (0.009, 0.025)),
)
_pin_mid = _PIN_TS + _pin_power / (2 * math.pi * _PIN_K_SLEEVE * _PIN_LEN) * math.log(
    _PIN_R2 / 0.009
)

# --- furnace peep-hole plug: fixed hot face, radiating cold face -------------------------------
# independent: scipy.optimize.brentq on k (T1 - Ts) / L = eps sigma (Ts^4 - Tsur^4)
_PLUG_L, _PLUG_K, _PLUG_T1, _PLUG_EPS, _PLUG_SUR = 0.08, 0.9, 700.0, 0.85, 30.0


def _plug_surface() -> float:
    def f(ts: float) -> float:
        return _PLUG_K * (_PLUG_T1 - ts) / _PLUG_L - _PLUG_EPS * SIGMA * (
            (ts + 273.15) ** 4 - (_PLUG_SUR + 273.15) ** 4
        )

    return brentq(f, _PLUG_SUR, _PLUG_T1, xtol=1e-13)


_plug_ts = _plug_surface()
PLUG = GridProblem(
    width=_PLUG_L,
    height=0.05,
    cells=Cells(8, 2),
    conductivity=_PLUG_K,
    edges=Edges(
        left=(Segment("temperature", value=_PLUG_T1),),
        right=(Segment("radiation", emissivity=_PLUG_EPS, surroundings=_PLUG_SUR),),
    ),
    points=((_PLUG_L, 0.025),),
    atol=1e-10,
)

# --- insulating board with conductivity rising linearly with temperature -----------------------
# common practice, no source (Kirchhoff transform): with k = k0 (1 + b T), the heat flux is
# q = k0 [(T1 - T2) + b/2 (T1^2 - T2^2)] / L and T(x) solves k0 (T + b/2 T^2) linear in x
_BOARD_L, _BOARD_K0, _BOARD_B, _BOARD_T1, _BOARD_T2 = 0.05, 0.04, 2.0e-3, 600.0, 40.0
_board_u = lambda t: _BOARD_K0 * (t + 0.5 * _BOARD_B * t * t)  # noqa: E731
_board_q = (_board_u(_BOARD_T1) - _board_u(_BOARD_T2)) / _BOARD_L
_board_mid_u = 0.5 * (_board_u(_BOARD_T1) + _board_u(_BOARD_T2))
_board_mid = (-1.0 + math.sqrt(1.0 + 2.0 * _BOARD_B * _board_mid_u / _BOARD_K0)) / _BOARD_B
_board_table = tuple((float(t), _BOARD_K0 * (1.0 + _BOARD_B * t)) for t in (0.0, 1000.0))
BOARD = GridProblem(
    width=_BOARD_L,
    height=0.02,
    cells=Cells(100, 1),
    conductivity=_board_table,
    edges=Edges(
        left=(Segment("temperature", value=_BOARD_T1),),
        right=(Segment("temperature", value=_BOARD_T2),),
    ),
    points=((0.5 * _BOARD_L, 0.01),),
    atol=1e-9,
)

# --- a cold-store floor: insulation board under a concrete screed, insulated sides -----------
# common practice, no source: one-dimensional series resistances (film, layers, film); the
# points sit on corners and where the layer interface meets the sides, where interpolation is
# hardest to keep exact
_FLOOR_H, _FLOOR_SPLIT, _FLOOR_W = 0.0475, 0.0415, 0.5
_FLOOR_K_INS, _FLOOR_K_SCREED, _FLOOR_H_IN, _FLOOR_H_OUT = 0.029, 1.15, 9.09, 16.67
_floor_q = 20.0 / (
    1 / _FLOOR_H_IN
    + _FLOOR_SPLIT / _FLOOR_K_INS
    + (_FLOOR_H - _FLOOR_SPLIT) / _FLOOR_K_SCREED
    + 1 / _FLOOR_H_OUT
)
_floor_bottom = 20.0 - _floor_q / _FLOOR_H_IN
FLOOR = GridProblem(
    width=_FLOOR_W,
    height=_FLOOR_H,
    cells=Cells(20, 9),
    conductivity=_FLOOR_K_INS,
    zones=(
        Zone(
            "screed",
            (0.0, _FLOOR_SPLIT, _FLOOR_W, _FLOOR_H),
            conductivity=_FLOOR_K_SCREED,
        ),
    ),
    edges=Edges(
        bottom=(Segment("convection", film_coefficient=_FLOOR_H_IN, ambient=20.0),),
        top=(Segment("convection", film_coefficient=_FLOOR_H_OUT, ambient=0.0),),
        left=(Segment("insulated"),),
        right=(Segment("insulated"),),
    ),
    points=(
        (0.0, 0.0),
        (_FLOOR_W, _FLOOR_H),
        (0.0, _FLOOR_SPLIT),
        (0.3, _FLOOR_SPLIT),
        (_FLOOR_W, 0.03),
    ),
)
_floor_expected = (
    _floor_bottom,
    _floor_q / _FLOOR_H_OUT,
    _floor_bottom - _floor_q * _FLOOR_SPLIT / _FLOOR_K_INS,
    _floor_bottom - _floor_q * _FLOOR_SPLIT / _FLOOR_K_INS,
    _floor_bottom - _floor_q * 0.03 / _FLOOR_K_INS,
)

# --- NAFEMS thermal benchmark T4 ---------------------------------------------------------------
# NAFEMS, "The Standard NAFEMS Benchmarks", test T4 (2D steady conduction with convection),
# from memory: 0.6 m x 1.0 m, k = 52 W/(m K), bottom edge 100 degC, left edge insulated, right
# and top edges convecting to 0 degC with h = 750 W/(m^2 K); target 18.25 degC at (0.6, 0.2).
T4 = GridProblem(
    width=0.6,
    height=1.0,
    cells=Cells(96, 160),
    conductivity=52.0,
    edges=Edges(
        bottom=(Segment("temperature", value=100.0),),
        right=(Segment("convection", film_coefficient=750.0, ambient=0.0),),
        top=(Segment("convection", film_coefficient=750.0, ambient=0.0),),
        left=(Segment("insulated"),),
    ),
    points=((0.6, 0.2),),
)


CASES: tuple[ReferenceCase, ...] = (
    ReferenceCase(
        "kiln-door-series-heat-flow",
        "common practice, no source: series resistances",
        KILN,
        lambda r: np.array([_edge(r, "left"), -_edge(r, "right")]),
        (_kiln_q * _KILN_HEIGHT, _kiln_q * _KILN_HEIGHT),
        rtol=1e-10,
        atol=0.0,
    ),
    ReferenceCase(
        "kiln-door-series-interfaces",
        "common practice, no source: series resistances",
        KILN,
        lambda r: r.point_temperatures,
        tuple(_kiln_interfaces),
        rtol=1e-10,
        atol=0.0,
    ),
    ReferenceCase(
        "clamp-parallel-heat-flow",
        "common practice, no source: parallel conductances",
        CLAMP,
        lambda r: np.array([_edge(r, "left")]),
        (_clamp_q,),
        rtol=1e-10,
        atol=0.0,
    ),
    ReferenceCase(
        "clamp-parallel-temperatures",
        "common practice, no source: linear profile",
        CLAMP,
        lambda r: r.point_temperatures,
        (55.0, 55.0),
        rtol=1e-12,
        atol=1e-12,
    ),
    ReferenceCase(
        "pin-sleeve-log-drop",
        "common practice, no source: cylindrical shell ln(r2/r1)",
        PIN,
        lambda r: r.point_temperatures,
        (_PIN_TS + _pin_drop, _pin_mid),
        rtol=2e-4,
        atol=0.0,
    ),
    ReferenceCase(
        "pin-sleeve-power",
        "common practice, no source: generated power leaves the surface",
        PIN,
        lambda r: np.array([-_edge(r, "right")]),
        (_pin_power,),
        rtol=1e-10,
        atol=0.0,
    ),
    ReferenceCase(
        "peep-plug-radiation",
        "independent: scipy.optimize.brentq on the surface balance",
        PLUG,
        lambda r: r.point_temperatures,
        (_plug_ts,),
        rtol=1e-9,
        atol=0.0,
    ),
    ReferenceCase(
        "board-kirchhoff-flux",
        "common practice, no source: Kirchhoff transform",
        BOARD,
        lambda r: np.array([_edge(r, "left") / 0.02]),
        (_board_q,),
        rtol=2e-4,
        atol=0.0,
    ),
    ReferenceCase(
        "board-kirchhoff-mid",
        "common practice, no source: Kirchhoff transform",
        BOARD,
        lambda r: r.point_temperatures,
        (_board_mid,),
        rtol=0.0,
        atol=0.05,
    ),
    ReferenceCase(
        "cold-store-floor-corner-points",
        "common practice, no source: series resistances",
        FLOOR,
        lambda r: r.point_temperatures,
        _floor_expected,
        rtol=1e-10,
        atol=1e-10,
    ),
    ReferenceCase(
        "nafems-t4-point-e",
        "NAFEMS benchmark T4, from memory: 18.25 degC at (0.6, 0.2)",
        T4,
        lambda r: r.point_temperatures,
        (18.25,),
        rtol=0.0,
        atol=0.03,
    ),
)


# --- transient references, computed independently with numpy / scipy --------------------------


def slab_fixed_surface(
    x: np.ndarray, t: float, length: float, alpha: float, t0: float, ts: float, terms: int = 2000
) -> np.ndarray:
    """Slab 0 < x < L at t0, both faces held at ts from t = 0 (Fourier sine series).

    Common practice, no source: T = ts + (t0 - ts) sum_{n odd} 4/(n pi) sin(n pi x/L)
    exp(-(n pi/L)^2 alpha t); evaluated with numpy, terms far beyond the decay of the tail.
    """
    n = np.arange(1, 2 * terms, 2)[:, None]
    series = (
        4.0
        / (n * np.pi)
        * np.sin(n * np.pi * np.asarray(x)[None, :] / length)
        * np.exp(-((n * np.pi / length) ** 2) * alpha * t)
    )
    return ts + (t0 - ts) * series.sum(axis=0)


def slab_convection(
    x: np.ndarray,
    t: float,
    half: float,
    alpha: float,
    k: float,
    h: float,
    t0: float,
    t_inf: float,
    terms: int = 60,
) -> np.ndarray:
    """Slab of half-thickness `half` (x from the mid-plane) cooled by convection.

    Common practice, no source: eigenvalues of lam tan(lam) = Bi found independently with
    scipy.optimize.brentq, C_n = 4 sin(lam)/(2 lam + sin(2 lam)),
    theta/theta_i = sum C_n exp(-lam^2 Fo) cos(lam x/half).
    """
    bi = h * half / k
    lams = np.array(
        [
            brentq(
                lambda v: v * math.tan(v) - bi,
                m * math.pi + 1e-12,
                m * math.pi + math.pi / 2 - 1e-12,
                xtol=1e-15,
            )
            for m in range(terms)
        ]
    )
    c = 4.0 * np.sin(lams) / (2.0 * lams + np.sin(2.0 * lams))
    fo = alpha * t / half**2
    theta = (
        c[:, None]
        * np.exp(-(lams[:, None] ** 2) * fo)
        * np.cos(lams[:, None] * np.asarray(x)[None, :] / half)
    ).sum(axis=0)
    return t_inf + (t0 - t_inf) * theta
