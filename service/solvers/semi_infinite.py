"""Closed-form responses of a semi-infinite solid to a sudden change at its surface.

All three surface conditions start at t = 0 on a solid at a uniform initial temperature Ti:
a fixed surface temperature, a constant heat flux into the surface, or convection to a fluid at
T_inf through a film coefficient h. The forms are written with the scaled complementary error
function erfcx(z) = exp(z^2) erfc(z) (scipy.special.erfcx) so that no exponential can overflow
for any depth, time or film coefficient; they are vectorised over times (rows) and depths
(columns). At t = 0 every depth is reported at the initial state (the surface condition acts
from t = 0+).

References
----------
Carslaw, H. S. and Jaeger, J. C., *Conduction of Heat in Solids*, 2nd ed., Oxford, 1959,
sect. 2.4 (fixed surface temperature), 2.9 (constant flux), 2.7 (surface convection) (from
memory).
Incropera, F. P. et al., *Fundamentals of Heat and Mass Transfer*, 6th ed., Wiley, 2007,
eqs. 5.57, 5.59, 5.60 (from memory).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

_SQRT_PI = math.sqrt(math.pi)
_ETA_CAP = 30.0


def _similarity(depth: np.ndarray, time: np.ndarray, diffusivity: float
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return (eta, root, live): eta = x / (2 sqrt(alpha t)) on the (time, depth) grid,
    root = sqrt(alpha t) per time (column vector), and the mask of times t > 0."""
    t = np.asarray(time, dtype=float).reshape(-1, 1)
    x = np.asarray(depth, dtype=float).reshape(1, -1)
    root = np.sqrt(diffusivity * np.maximum(t, 0.0))
    live = root > 0.0  # t = 0 (or a time so short that alpha t underflows): initial state
    root = np.where(live, root, 1.0)
    # beyond eta = 27 every response below carries exp(-eta^2) = 0 in double precision; the cap
    # keeps eta finite (no inf * 0) for absurdly short times
    eta = np.minimum(x / (2.0 * root), _ETA_CAP)
    return eta, root, live


def fixed_temperature_response(depth: np.ndarray, time: np.ndarray,
                               diffusivity: float) -> np.ndarray:
    """Fraction of the surface step felt at each depth and time, fixed surface temperature.

    Parameters
    ----------
    depth : array_like, shape (n_depths,)
        Distance from the surface, m (>= 0).
    time : array_like, shape (n_times,)
        Time since the step, s (>= 0).
    diffusivity : float
        Thermal diffusivity alpha, m^2/s.

    Returns
    -------
    numpy.ndarray, shape (n_times, n_depths)
        phi = (T - Ti) / (Ts - Ti) = erfc(x / (2 sqrt(alpha t))); 0 at t = 0.

    Notes
    -----
    dT/dt = alpha d2T/dx2 for x > 0, T(x, 0) = Ti, T(0, t) = Ts for t > 0.
    """
    eta, _, live = _similarity(depth, time, diffusivity)
    return np.where(live, special.erfc(eta), 0.0)


def convection_response(depth: np.ndarray, time: np.ndarray, diffusivity: float,
                        conductivity: float, film_coefficient: float) -> np.ndarray:
    """Fraction of the ambient step felt at each depth and time, surface convection.

    Parameters
    ----------
    depth, time, diffusivity
        As in `fixed_temperature_response`.
    conductivity : float
        k, W/(m K).
    film_coefficient : float
        h, W/(m^2 K) (>= 0).

    Returns
    -------
    numpy.ndarray, shape (n_times, n_depths)
        phi = (T - Ti) / (T_inf - Ti); 0 at t = 0.

    Notes
    -----
    Same equation and initial state as `fixed_temperature_response`, with
    -k dT/dx = h (T_inf - T) at x = 0. The published form

        phi = erfc(eta) - exp(h x / k + beta^2) erfc(eta + beta),
        eta = x / (2 sqrt(alpha t)),  beta = h sqrt(alpha t) / k,

    overflows for large h x / k; since h x / k = 2 eta beta it equals
    exp(-eta^2) (erfcx(eta) - erfcx(eta + beta)), which cannot overflow.
    """
    eta, root, live = _similarity(depth, time, diffusivity)
    beta = film_coefficient * root / conductivity
    phi = np.exp(-eta * eta) * (special.erfcx(eta) - special.erfcx(eta + beta))
    return np.where(live, phi, 0.0)


def flux_rise(depth: np.ndarray, time: np.ndarray, diffusivity: float, conductivity: float,
              flux: float) -> np.ndarray:
    """Temperature rise T - Ti under a constant surface heat flux, K.

    Parameters
    ----------
    depth, time, diffusivity
        As in `fixed_temperature_response`.
    conductivity : float
        k, W/(m K).
    flux : float
        q, W/m^2, positive into the solid.

    Returns
    -------
    numpy.ndarray, shape (n_times, n_depths)
        T - Ti in K; 0 at t = 0.

    Notes
    -----
    -k dT/dx = q at x = 0. The published form

        T - Ti = (2 q sqrt(alpha t / pi) / k) exp(-eta^2) - (q x / k) erfc(eta)

    is rewritten with erfc(eta) = exp(-eta^2) erfcx(eta) as
    (2 q sqrt(alpha t) / k) exp(-eta^2) (1/sqrt(pi) - eta erfcx(eta)), so both terms share the
    decaying factor and nothing overflows.
    """
    eta, root, live = _similarity(depth, time, diffusivity)
    rise = (2.0 * flux * root / conductivity) * np.exp(-eta * eta) \
        * (1.0 / _SQRT_PI - eta * special.erfcx(eta))
    return np.where(live, rise, 0.0)


def _erfcx_excess(beta: np.ndarray) -> np.ndarray:
    """erfcx(beta) - 1 + 2 beta / sqrt(pi), without cancellation for small beta.

    Power series erfcx(z) = sum_n (-z)^n / Gamma(n/2 + 1) (from memory of the Taylor series of
    exp(z^2) erfc(z)); the n = 0 and n = 1 terms cancel the added 1 - 2 z / sqrt(pi).
    """
    beta = np.asarray(beta, dtype=float)
    small = beta < 0.5
    b = np.where(small, beta, 0.0)
    series = np.zeros_like(b)
    for n in range(2, 40):  # 0.5^40 / Gamma(21) is far below double precision
        series += (-b) ** n / math.gamma(0.5 * n + 1.0)
    direct = special.erfcx(beta) - 1.0 + 2.0 * beta / _SQRT_PI
    return np.where(small, series, direct)


def energy_per_area(time: np.ndarray, surface: str, *, conductivity: float,
                    diffusivity: float, temperature_step: float = 0.0,
                    film_coefficient: float = 0.0, flux: float = 0.0) -> np.ndarray:
    """Heat taken up through each square metre of surface since t = 0, J/m^2.

    Parameters
    ----------
    time : array_like, shape (n_times,)
        s.
    surface : {"temperature", "convection", "flux"}
    conductivity, diffusivity : float
        k in W/(m K), alpha in m^2/s (the volumetric heat capacity is k / alpha).
    temperature_step : float
        Ts - Ti (fixed temperature) or T_inf - Ti (convection), K.
    film_coefficient : float
        h, W/(m^2 K) (convection).
    flux : float
        q, W/m^2, positive into the solid (flux).

    Returns
    -------
    numpy.ndarray, shape (n_times,)
        Q/A, positive when heat enters the solid.

    Notes
    -----
    Fixed temperature: Q/A = 2 k dT sqrt(t / (pi alpha)).
    Flux: Q/A = q t.
    Convection: the surface flux h dT erfcx(beta), beta = h sqrt(alpha t) / k, integrates
    (with d erfcx/dz = 2 z erfcx(z) - 2 / sqrt(pi)) to
    Q/A = dT k^2 / (h alpha) (erfcx(beta) - 1 + 2 beta / sqrt(pi)).
    """
    t = np.asarray(time, dtype=float)
    if surface == "flux":
        return flux * t
    if surface == "temperature":
        return 2.0 * conductivity * temperature_step * np.sqrt(t / (math.pi * diffusivity))
    if surface == "convection":
        if film_coefficient == 0.0:
            return np.zeros_like(t)
        beta = film_coefficient * np.sqrt(diffusivity * t) / conductivity
        scale = temperature_step * conductivity**2 / (film_coefficient * diffusivity)
        return scale * _erfcx_excess(beta)
    raise ValueError(f"surface must be 'temperature', 'convection' or 'flux', got {surface!r}")
