"""Surface coefficients for a surface in still or moving air: published correlations plus radiation.

Used by the layers solver for surface conditions of type ``air``. Every correlation is a named,
separately testable function of dimensionless groups; `air_coefficient` picks them by shape and
orientation, evaluates air properties at the film temperature and adds grey-body radiation.

References
----------
.. [1] Incropera, DeWitt, Bergman, Lavine, *Fundamentals of Heat and Mass Transfer*, 6th ed.,
   Table A.4 (air at atmospheric pressure), Eqs. 7.30, 7.38, 7.54, 7.56, 9.26, 9.30-9.32, 9.34,
   9.35 (from memory).
.. [2] S. W. Churchill and H. H. S. Chu, "Correlating equations for laminar and turbulent free
   convection from a vertical plate", Int. J. Heat Mass Transfer 18 (1975) 1323-1329.
.. [3] S. W. Churchill and H. H. S. Chu, "Correlating equations for laminar and turbulent free
   convection from a horizontal cylinder", Int. J. Heat Mass Transfer 18 (1975) 1049-1053.
.. [4] S. W. Churchill and M. Bernstein, "A correlating equation for forced convection from gases
   and liquids to a circular cylinder in crossflow", J. Heat Transfer 99 (1977) 300-306.
.. [5] S. W. Churchill, "Free convection around immersed bodies", in Heat Exchanger Design
   Handbook, Hemisphere (1983), section 2.5.7 (sphere).
.. [6] S. Whitaker, "Forced convection heat transfer correlations for flow in pipes, past flat
   plates, single cylinders, single spheres, and for flow in packed beds and tube bundles",
   AIChE J. 18 (1972) 361-371.
.. [7] J. R. Lloyd and W. R. Moran, "Natural convection adjacent to horizontal surface of
   various planforms", J. Heat Transfer 96 (1974) 443-447; W. H. McAdams, *Heat Transmission*,
   3rd ed. (1954) (horizontal plates).
.. [8] S. W. Churchill, "A comprehensive correlating equation for laminar, assisting, forced and
   free convection", AIChE J. 23 (1977) 10-16 (combining forced and natural convection).
"""

from __future__ import annotations

import bisect
import math
from dataclasses import dataclass

#: Stefan-Boltzmann constant, W/(m^2 K^4) (CODATA 2018).
STEFAN_BOLTZMANN = 5.670374419e-8
#: Standard gravity, m/s^2.
GRAVITY = 9.80665
#: Offset between degC and K.
KELVIN = 273.15

# Air properties, Incropera et al. 6th ed. Table A.4 (from memory; its densities correspond to
# about 100 kPa). Columns: T (K), density (kg/m^3), specific heat (J/(kg K)), dynamic viscosity
# (Pa s), conductivity (W/(m K)), Prandtl number. Tests check the transcription against the
# table's own derived columns and against Sutherland's law. Immutable (tuples).
_TABLE_T = (100.0, 150.0, 200.0, 250.0, 300.0, 350.0, 400.0, 450.0, 500.0, 550.0, 600.0, 650.0,
            700.0, 750.0, 800.0, 850.0, 900.0, 950.0, 1000.0, 1100.0, 1200.0)
_TABLE_DENSITY = (3.5562, 2.3364, 1.7458, 1.3947, 1.1614, 0.9950, 0.8711, 0.7740, 0.6964,
                  0.6329, 0.5804, 0.5356, 0.4975, 0.4643, 0.4354, 0.4097, 0.3868, 0.3666,
                  0.3482, 0.3166, 0.2902)
_TABLE_SPECIFIC_HEAT = (1032.0, 1012.0, 1007.0, 1006.0, 1007.0, 1009.0, 1014.0, 1021.0, 1030.0,
                        1040.0, 1051.0, 1063.0, 1075.0, 1087.0, 1099.0, 1110.0, 1121.0, 1131.0,
                        1141.0, 1159.0, 1175.0)
_TABLE_VISCOSITY = tuple(v * 1e-7 for v in (
    71.1, 103.4, 132.5, 159.6, 184.6, 208.2, 230.1, 250.7, 270.1, 288.4, 305.8, 322.5, 338.8,
    354.6, 369.8, 384.3, 398.1, 411.3, 424.4, 449.0, 473.0))
_TABLE_CONDUCTIVITY = tuple(v * 1e-3 for v in (
    9.34, 13.8, 18.1, 22.3, 26.3, 30.0, 33.8, 37.3, 40.7, 43.9, 46.9, 49.7, 52.4, 54.9, 57.3,
    59.6, 62.0, 64.3, 66.7, 71.5, 76.3))
_TABLE_PRANDTL = (0.786, 0.758, 0.737, 0.720, 0.707, 0.700, 0.690, 0.686, 0.684, 0.683, 0.685,
                  0.690, 0.695, 0.702, 0.709, 0.716, 0.720, 0.723, 0.726, 0.728, 0.728)

#: Temperature range of the property table, degC.
TABLE_RANGE = (_TABLE_T[0] - KELVIN, _TABLE_T[-1] - KELVIN)

PLANE_ORIENTATIONS = ("vertical", "facing_up", "facing_down")
CYLINDER_ORIENTATIONS = ("horizontal", "vertical")


@dataclass(frozen=True)
class AirProperties:
    """Air at about atmospheric pressure.

    Attributes
    ----------
    temperature : float
        Temperature asked, degC.
    density : float
        kg/m^3.
    specific_heat : float
        J/(kg K).
    viscosity : float
        Dynamic viscosity, Pa s.
    kinematic_viscosity : float
        m^2/s.
    conductivity : float
        W/(m K).
    diffusivity : float
        Thermal diffusivity, m^2/s.
    prandtl : float
        Prandtl number (viscosity * specific_heat / conductivity).
    extrapolated : bool
        True when `temperature` lies outside the table (the nearest row's values are used).
    """

    temperature: float
    density: float
    specific_heat: float
    viscosity: float
    kinematic_viscosity: float
    conductivity: float
    diffusivity: float
    prandtl: float
    extrapolated: bool


def air_properties(temperature: float) -> AirProperties:
    """Air properties at `temperature` (degC) by linear interpolation in the property table.

    Parameters
    ----------
    temperature : float
        degC.

    Returns
    -------
    AirProperties
        Outside the table range (-173.15 to 926.85 degC) the end row is used and
        ``extrapolated`` is True.

    References
    ----------
    Incropera et al., 6th ed., Table A.4 (from memory).
    """
    t_k = temperature + KELVIN
    extrapolated = not (_TABLE_T[0] <= t_k <= _TABLE_T[-1])
    t_k = min(max(t_k, _TABLE_T[0]), _TABLE_T[-1])
    j = min(max(bisect.bisect_right(_TABLE_T, t_k) - 1, 0), len(_TABLE_T) - 2)
    w = (t_k - _TABLE_T[j]) / (_TABLE_T[j + 1] - _TABLE_T[j])

    def lerp(col: tuple[float, ...]) -> float:
        return col[j] + w * (col[j + 1] - col[j])

    rho = lerp(_TABLE_DENSITY)
    cp = lerp(_TABLE_SPECIFIC_HEAT)
    mu = lerp(_TABLE_VISCOSITY)
    k = lerp(_TABLE_CONDUCTIVITY)
    return AirProperties(temperature=temperature, density=rho, specific_heat=cp, viscosity=mu,
                         kinematic_viscosity=mu / rho, conductivity=k,
                         diffusivity=k / (rho * cp), prandtl=mu * cp / k,
                         extrapolated=extrapolated)


# --- natural convection ------------------------------------------------------------------------

def vertical_plate_natural(rayleigh: float, prandtl: float) -> float:
    """Mean Nusselt number (on height) of a vertical plate in free convection, any Ra.

    Churchill-Chu (1975) [2], Incropera Eq. 9.26 (from memory):
    Nu = {0.825 + 0.387 Ra^(1/6) / [1 + (0.492/Pr)^(9/16)]^(8/27)}^2.
    """
    psi = (1.0 + (0.492 / prandtl) ** (9.0 / 16.0)) ** (8.0 / 27.0)
    return (0.825 + 0.387 * rayleigh ** (1.0 / 6.0) / psi) ** 2


def horizontal_plate_natural(rayleigh: float, buoyant_side: bool) -> float:
    """Mean Nusselt number (on area/perimeter) of a horizontal plate in free convection.

    Parameters
    ----------
    rayleigh : float
        Rayleigh number on L = area / perimeter.
    buoyant_side : bool
        True for the upper face of a hot plate or the lower face of a cold plate (the plume
        leaves the surface freely): Lloyd-Moran / McAdams, Nu = 0.54 Ra^(1/4) (1e4-1e7) and
        Nu = 0.15 Ra^(1/3) (1e7-1e11), Incropera Eqs. 9.30-9.31 (from memory). The larger of the
        two is taken, which is continuous (the branches cross at Ra = 3.6^12 = 4.7e6, close to the
        published switch at 1e7). False for the lower face of a hot plate or the upper face of a
        cold plate: McAdams Nu = 0.27 Ra^(1/4) (1e5-1e10), Incropera 5th ed. Eq. 9.32 (from
        memory).
    """
    if buoyant_side:
        return max(0.54 * rayleigh ** 0.25, 0.15 * rayleigh ** (1.0 / 3.0))
    return 0.27 * rayleigh ** 0.25


def horizontal_cylinder_natural(rayleigh: float, prandtl: float) -> float:
    """Mean Nusselt number (on diameter) of a long horizontal cylinder in free convection.

    Churchill-Chu (1975) [3], Incropera Eq. 9.34 (from memory), Ra_D <= 1e12:
    Nu = {0.60 + 0.387 Ra^(1/6) / [1 + (0.559/Pr)^(9/16)]^(8/27)}^2.
    """
    psi = (1.0 + (0.559 / prandtl) ** (9.0 / 16.0)) ** (8.0 / 27.0)
    return (0.60 + 0.387 * rayleigh ** (1.0 / 6.0) / psi) ** 2


def sphere_natural(rayleigh: float, prandtl: float) -> float:
    """Mean Nusselt number (on diameter) of a sphere in free convection.

    Churchill (1983) [5], Incropera Eq. 9.35 (from memory), Ra_D <= 1e11, Pr >= 0.7:
    Nu = 2 + 0.589 Ra^(1/4) / [1 + (0.469/Pr)^(9/16)]^(4/9).
    """
    psi = (1.0 + (0.469 / prandtl) ** (9.0 / 16.0)) ** (4.0 / 9.0)
    return 2.0 + 0.589 * rayleigh ** 0.25 / psi


# --- forced convection -------------------------------------------------------------------------

def plate_forced(reynolds: float, prandtl: float) -> float:
    """Mean Nusselt number (on flow length) of a flat plate in parallel flow.

    Laminar: Nu = 0.664 Re^(1/2) Pr^(1/3) (Incropera Eq. 7.30, from memory). Mixed laminar and
    turbulent with transition at Re = 5e5: Nu = (0.037 Re^(4/5) - 871) Pr^(1/3) (Incropera Eq.
    7.38, from memory). The larger of the two is taken, which is continuous (they cross just
    below 5e5).
    """
    laminar = 0.664 * math.sqrt(reynolds)
    mixed = 0.037 * reynolds ** 0.8 - 871.0
    return max(laminar, mixed) * prandtl ** (1.0 / 3.0)


def cylinder_crossflow(reynolds: float, prandtl: float) -> float:
    """Mean Nusselt number (on diameter) of a cylinder in cross flow, Re Pr > 0.2.

    Churchill-Bernstein (1977) [4], Incropera Eq. 7.54 (from memory):
    Nu = 0.3 + 0.62 Re^(1/2) Pr^(1/3) / [1 + (0.4/Pr)^(2/3)]^(1/4) [1 + (Re/282000)^(5/8)]^(4/5).
    """
    lead = 0.62 * math.sqrt(reynolds) * prandtl ** (1.0 / 3.0)
    lead /= (1.0 + (0.4 / prandtl) ** (2.0 / 3.0)) ** 0.25
    return 0.3 + lead * (1.0 + (reynolds / 282000.0) ** 0.625) ** 0.8


def sphere_forced(reynolds: float, prandtl: float, viscosity_ratio: float) -> float:
    """Mean Nusselt number (on diameter) of a sphere in a free stream.

    Whitaker (1972) [6], Incropera Eq. 7.56 (from memory), 3.5 <= Re <= 7.6e4:
    Nu = 2 + (0.4 Re^(1/2) + 0.06 Re^(2/3)) Pr^0.4 (mu/mu_s)^(1/4), properties at the free
    stream temperature except mu_s at the surface temperature.
    """
    return 2.0 + (0.4 * math.sqrt(reynolds) + 0.06 * reynolds ** (2.0 / 3.0)) * (
        prandtl ** 0.4 * viscosity_ratio ** 0.25)


def combined_nusselt(forced: float, natural: float) -> float:
    """Forced and natural convection together: Nu^3 = Nu_F^3 + Nu_N^3.

    Churchill (1977) [8] with exponent 3, as recommended for transverse and assisting flows
    (Incropera Eq. 9.64, from memory).
    """
    return (forced ** 3 + natural ** 3) ** (1.0 / 3.0)


# --- the surface coefficient -------------------------------------------------------------------

@dataclass(frozen=True)
class AirCoefficient:
    """Heat transfer from a surface to air and surroundings at one surface temperature.

    Attributes
    ----------
    convective_coefficient : float
        W/(m^2 K), on (surface - ambient).
    radiative_coefficient : float
        W/(m^2 K), on (surface - surroundings): emissivity sigma (Ts + Tsur)(Ts^2 + Tsur^2).
    heat_flux : float
        W/m^2 leaving the surface (convection plus radiation).
    nusselt, rayleigh, reynolds, prandtl : float
        Dimensionless groups on the characteristic length used (`reynolds` 0 in still air).
    characteristic_length : float
        m: diameter (cylinder in cross flow or horizontal, sphere), height (vertical surfaces),
        the given length (horizontal planes, plane in parallel flow).
    film_temperature : float
        degC, (surface + ambient) / 2, where properties are taken.
    correlation : str
        The correlations used, by author and year.
    warnings : tuple of str
        Correlations used outside their published range, property table extrapolated.
    """

    convective_coefficient: float
    radiative_coefficient: float
    heat_flux: float
    nusselt: float
    rayleigh: float
    reynolds: float
    prandtl: float
    characteristic_length: float
    film_temperature: float
    correlation: str
    warnings: tuple[str, ...]


def radiative_coefficient(surface_temperature: float, surroundings: float,
                          emissivity: float) -> float:
    """Grey-body linearised radiation coefficient, W/(m^2 K).

    h_r = emissivity sigma (Ts + Tsur)(Ts^2 + Tsur^2) with absolute temperatures, so that
    h_r (Ts - Tsur) = emissivity sigma (Ts^4 - Tsur^4) exactly (small grey body in large
    surroundings, Incropera Eq. 1.9, from memory).
    """
    ts = surface_temperature + KELVIN
    tsur = surroundings + KELVIN
    return emissivity * STEFAN_BOLTZMANN * (ts + tsur) * (ts * ts + tsur * tsur)


def air_coefficient(
    surface_temperature: float,
    ambient: float,
    *,
    shape: str,
    orientation: str | None = None,
    diameter: float | None = None,
    characteristic_length: float = 1.0,
    wind_speed: float = 0.0,
    emissivity: float = 0.0,
    surroundings: float | None = None,
) -> AirCoefficient:
    """Convective and radiative coefficients of a surface exposed to air.

    Parameters
    ----------
    surface_temperature, ambient : float
        degC.
    shape : {"plane", "cylinder", "sphere"}
    orientation : str or None
        plane: ``vertical`` (default), ``facing_up``, ``facing_down`` (the way the exposed face
        looks); cylinder: ``horizontal`` (default), ``vertical``; sphere: ignored.
    diameter : float or None
        Outside diameter, m (cylinder, sphere).
    characteristic_length : float
        m. Vertical surfaces: height; horizontal plane: area/perimeter; plane in wind: length
        along the wind. Not used for horizontal cylinders and spheres (the diameter is).
    wind_speed : float
        m/s; 0 for still air. Wind is taken along a plane and across a cylinder.
    emissivity : float
        Grey-body emissivity of the surface, 0..1.
    surroundings : float or None
        Radiating surroundings temperature, degC (default: `ambient`).

    Returns
    -------
    AirCoefficient

    Notes
    -----
    Properties at the film temperature (Whitaker's sphere correlation: at ambient, with the
    viscosity ratio). Buoyancy coefficient of an ideal gas, beta = 1 / T_film (K). Natural:
    Churchill-Chu (vertical plate, horizontal cylinder; vertical cylinders as vertical plates),
    Lloyd-Moran/McAdams (horizontal plates), Churchill (sphere). Forced: laminar/mixed flat plate,
    Churchill-Bernstein (cylinder), Whitaker (sphere). With wind, Nu = (Nu_F^3 + Nu_N^3)^(1/3)
    (Churchill 1977).
    """
    if surroundings is None:
        surroundings = ambient
    film = 0.5 * (surface_temperature + ambient)
    props = air_properties(film)
    warnings: list[str] = []
    if props.extrapolated:
        warnings.append(f"air properties at a film temperature of {film:.4g} degC lie outside the "
                        f"property table ({TABLE_RANGE[0]:.4g} to {TABLE_RANGE[1]:.4g} degC); "
                        "the nearest tabulated values were used")
    delta = abs(surface_temperature - ambient)
    beta = 1.0 / (film + KELVIN)

    def rayleigh_on(length: float) -> float:
        return GRAVITY * beta * delta * length ** 3 / (
            props.kinematic_viscosity * props.diffusivity)

    pr = props.prandtl
    names: list[str] = []
    if shape == "plane":
        orient = orientation or "vertical"
        length = characteristic_length
        ra = rayleigh_on(length)
        if orient == "vertical":
            nu_n = vertical_plate_natural(ra, pr)
            names.append("Churchill-Chu (1975) vertical plate")
        elif orient in ("facing_up", "facing_down"):
            hot = surface_temperature >= ambient
            buoyant = hot == (orient == "facing_up")
            nu_n = horizontal_plate_natural(ra, buoyant)
            if buoyant:
                names.append("Lloyd-Moran (1974) / McAdams horizontal plate, buoyant face")
                if not 1e4 <= ra <= 1e11 and delta > 0:
                    warnings.append(f"horizontal-plate correlation used at Ra = {ra:.3g}, "
                                    "outside its range 1e4..1e11")
            else:
                names.append("McAdams (1954) horizontal plate, stable face")
                if not 1e5 <= ra <= 1e10 and delta > 0:
                    warnings.append(f"horizontal-plate correlation used at Ra = {ra:.3g}, "
                                    "outside its range 1e5..1e10")
        else:
            raise ValueError(f"orientation must be one of {PLANE_ORIENTATIONS} for a plane")
        re = wind_speed * length / props.kinematic_viscosity
        nu_f = plate_forced(re, pr) if wind_speed > 0 else 0.0
        if wind_speed > 0:
            names.append("flat plate in parallel flow (laminar 0.664, mixed 0.037/871)")
            if re > 1e8:
                warnings.append(f"flat-plate correlation used at Re = {re:.3g}, above 1e8")
    elif shape == "cylinder":
        if diameter is None:
            raise ValueError("diameter is required for a cylinder")
        orient = orientation or "horizontal"
        re = wind_speed * diameter / props.kinematic_viscosity
        if orient == "horizontal":
            length = diameter
            ra = rayleigh_on(diameter)
            nu_n = horizontal_cylinder_natural(ra, pr)
            names.append("Churchill-Chu (1975) horizontal cylinder")
            if ra > 1e12:
                warnings.append(f"horizontal-cylinder correlation used at Ra = {ra:.3g}, "
                                "above 1e12")
        elif orient == "vertical":
            length = characteristic_length
            ra = rayleigh_on(length)
            nu_n = vertical_plate_natural(ra, pr)
            names.append("Churchill-Chu (1975) vertical plate (vertical cylinder)")
            # A vertical cylinder behaves as a plate when D >= 35 L / Gr^(1/4) (Incropera
            # Eq. 9.33, from memory).
            gr = ra / pr
            if delta > 0 and diameter < 35.0 * length / gr ** 0.25:
                warnings.append("vertical cylinder too slender for the plate correlation "
                                "(D < 35 L / Gr^(1/4)); natural convection underestimated")
        else:
            raise ValueError(f"orientation must be one of {CYLINDER_ORIENTATIONS} for a cylinder")
        if wind_speed > 0:
            nu_f_d = cylinder_crossflow(re, pr)
            names.append("Churchill-Bernstein (1977) cylinder in cross flow")
            if re * pr < 0.2:
                warnings.append(f"cross-flow correlation used at Re Pr = {re * pr:.3g}, below 0.2")
            # Put the forced Nusselt number on the natural-convection length before combining.
            nu_f = nu_f_d * length / diameter
        else:
            nu_f = 0.0
    elif shape == "sphere":
        if diameter is None:
            raise ValueError("diameter is required for a sphere")
        length = diameter
        ra = rayleigh_on(diameter)
        nu_n = sphere_natural(ra, pr)
        names.append("Churchill (1983) sphere")
        if ra > 1e11:
            warnings.append(f"sphere natural-convection correlation used at Ra = {ra:.3g}, "
                            "above 1e11")
        if wind_speed > 0:
            free = air_properties(ambient)
            surf = air_properties(surface_temperature)
            re = wind_speed * diameter / free.kinematic_viscosity
            nu_f_inf = sphere_forced(re, free.prandtl, free.viscosity / surf.viscosity)
            names.append("Whitaker (1972) sphere")
            if not 3.5 <= re <= 7.6e4:
                warnings.append(f"sphere forced-convection correlation used at Re = {re:.3g}, "
                                "outside 3.5..7.6e4")
            # Whitaker's Nu is on free-stream conductivity: convert to the film conductivity.
            nu_f = nu_f_inf * free.conductivity / props.conductivity
        else:
            re = 0.0
            nu_f = 0.0
    else:
        raise ValueError(f"shape must be plane, cylinder or sphere, got {shape!r}")

    if wind_speed > 0:
        nu = combined_nusselt(nu_f, nu_n)
        names.append("combined as Nu^3 = Nu_F^3 + Nu_N^3 (Churchill 1977)")
    else:
        nu = nu_n
        re = 0.0
    h_c = nu * props.conductivity / length
    h_r = radiative_coefficient(surface_temperature, surroundings, emissivity)
    flux = h_c * (surface_temperature - ambient) + h_r * (surface_temperature - surroundings)
    return AirCoefficient(convective_coefficient=h_c, radiative_coefficient=h_r, heat_flux=flux,
                          nusselt=nu, rayleigh=ra, reynolds=re, prandtl=pr,
                          characteristic_length=length, film_temperature=film,
                          correlation="; ".join(names), warnings=tuple(warnings))
