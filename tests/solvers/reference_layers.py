"""Reference cases for the layers, air-coefficient and fin solvers.

Each case: an id, its source (book and example or equation; "from memory" where recalled rather
than read), the inputs, the expected values and the tolerances. Published answers are rounded
in their sources, so the tolerance is half a unit of the last digit printed unless the answer
is exact arithmetic on exact inputs. Scenario names are ours.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any


@dataclass(frozen=True)
class ReferenceCase:
    id: str
    source: str
    inputs: dict[str, Any]
    expected: dict[str, float]
    atol: dict[str, float] = field(default_factory=dict)
    rtol: dict[str, float] = field(default_factory=dict)

    def tolerances(self, key: str) -> dict[str, float]:
        return {"rtol": self.rtol.get(key, 0.0), "atol": self.atol.get(key, 0.0)}


LAYER_CASES = (
    ReferenceCase(
        id="boiler-house-wall",
        source="Cengel, Heat and Mass Transfer, worked example 'heat loss through a wall' "
               "(from memory): 3 m x 5 m wall, 0.3 m thick, k = 0.9 W/(m K), faces at 16 and "
               "2 degC -> 630 W",
        inputs=dict(geometry="plane", area=15.0,
                    layers=[dict(thickness=0.3, conductivity=0.9, name="brick")],
                    inside=dict(type="temperature", value=16.0),
                    outside=dict(type="temperature", value=2.0)),
        expected={"heat_flow": 630.0},
        rtol={"heat_flow": 1e-12},          # exact arithmetic
    ),
    ReferenceCase(
        id="control-room-single-pane",
        source="Cengel, Heat and Mass Transfer, worked example 'heat loss through a "
               "single-pane window' (from memory): 0.8 m x 1.5 m glass 8 mm, k = 0.78, room "
               "20 degC h = 10, outdoors -10 degC h = 40 -> 266 W, inner surface -2.2 degC",
        inputs=dict(geometry="plane", area=1.2,
                    layers=[dict(thickness=0.008, conductivity=0.78, name="glass")],
                    inside=dict(type="convection", film_coefficient=10.0, ambient=20.0),
                    outside=dict(type="convection", film_coefficient=40.0, ambient=-10.0)),
        expected={"heat_flow": 266.0, "inside_surface": -2.2},
        atol={"heat_flow": 0.5, "inside_surface": 0.05},
    ),
    ReferenceCase(
        id="control-room-double-pane",
        source="Cengel, Heat and Mass Transfer, worked example 'heat loss through "
               "double-pane windows' (from memory): two 4 mm glass panes (k = 0.78) around "
               "10 mm of still air (k = 0.026), same films -> 69.2 W, inner surface 14.2 degC",
        inputs=dict(geometry="plane", area=1.2,
                    layers=[dict(thickness=0.004, conductivity=0.78, name="pane 1"),
                            dict(thickness=0.010, conductivity=0.026, name="air gap"),
                            dict(thickness=0.004, conductivity=0.78, name="pane 2")],
                    inside=dict(type="convection", film_coefficient=10.0, ambient=20.0),
                    outside=dict(type="convection", film_coefficient=40.0, ambient=-10.0)),
        expected={"heat_flow": 69.2, "inside_surface": 14.2},
        atol={"heat_flow": 0.05, "inside_surface": 0.05},
    ),
    ReferenceCase(
        id="steam-main-glass-wool",
        source="Cengel, Heat and Mass Transfer, worked example 'heat loss through an "
               "insulated steam pipe' (from memory): cast iron pipe k = 80, D 5/5.5 cm, "
               "3 cm glass wool k = 0.05, steam 320 degC h = 60, air 5 degC h = 18 -> "
               "121 W/m; drops 0.02 K across the pipe and 284 K across the insulation",
        inputs=dict(geometry="cylinder", inner_radius=0.025,
                    layers=[dict(thickness=0.0025, conductivity=80.0, name="pipe"),
                            dict(thickness=0.03, conductivity=0.05, name="glass wool")],
                    inside=dict(type="convection", film_coefficient=60.0, ambient=320.0),
                    outside=dict(type="convection", film_coefficient=18.0, ambient=5.0)),
        expected={"heat_flow": 121.0, "pipe_drop": 0.02, "insulation_drop": 284.0},
        atol={"heat_flow": 0.5, "pipe_drop": 0.005, "insulation_drop": 0.5},
    ),
    ReferenceCase(
        id="reactor-plate-generation",
        source="Incropera et al. 6th ed., worked example on a composite wall with generation in "
               "one material (from memory): wall A with 1.5e6 W/m^3, "
               "k = 75, 50 mm, insulated inside; wall B k = 150, 20 mm; water 30 degC, "
               "h = 1000 -> T0 = 140, T1 = 115, T2 = 105 degC",
        inputs=dict(geometry="plane",
                    layers=[dict(thickness=0.05, conductivity=75.0, generation=1.5e6,
                                 name="A"),
                            dict(thickness=0.02, conductivity=150.0, name="B")],
                    inside=dict(type="flux", value=0.0),
                    outside=dict(type="convection", film_coefficient=1000.0, ambient=30.0)),
        expected={"inside_surface": 140.0, "interface": 115.0, "outside_surface": 105.0},
        atol={"inside_surface": 1e-9, "interface": 1e-9, "outside_surface": 1e-9},
    ),
    ReferenceCase(
        id="sensor-chip-epoxy-joint",
        source="Incropera et al. 6th ed., worked example on a chip bonded to a substrate by "
               "epoxy (from memory): chip flux 1e4 W/m^2 "
               "cooled on both faces by air 25 degC h = 100; below it an epoxy joint "
               "R''_c = 0.9e-4 m^2 K/W and 8 mm aluminium k = 239 -> chip at 75.3 degC",
        # The chip is a very thin generating layer: flux / thickness.
        inputs=dict(geometry="plane", area=1e-4,
                    layers=[dict(thickness=1e-7, conductivity=150.0, generation=1e4 / 1e-7,
                                 name="chip"),
                            dict(thickness=0.008, conductivity=239.0, name="substrate")],
                    contact_resistances=[0.9e-4],
                    inside=dict(type="convection", film_coefficient=100.0, ambient=25.0),
                    outside=dict(type="convection", film_coefficient=100.0, ambient=25.0)),
        expected={"chip_temperature": 75.3},
        atol={"chip_temperature": 0.05},
    ),
)

CRITICAL_RADIUS_CASE = ReferenceCase(
    id="refrigerant-line-critical-radius",
    source="Incropera et al. 6th ed., worked example on the critical insulation radius "
           "(from memory): insulation k = 0.055, "
           "h = 5 -> r_cr = k/h = 0.011 m",
    inputs=dict(conductivity=0.055, film_coefficient=5.0),
    expected={"critical_radius": 0.011},
    rtol={"critical_radius": 1e-9},
)

FIN_CASES = tuple(
    ReferenceCase(
        id=f"long-rod-{name}",
        source="Incropera et al. 6th ed., worked example on very long rods as infinite fins "
               "(from memory): very long 5 mm rods, "
               "base 100 degC, air 25 degC, h = 100 -> copper (k = 398) 8.3 W, aluminium 2024 "
               "(k = 180) 5.6 W, stainless 316 (k = 14) 1.6 W",
        inputs=dict(shape="pin", conductivity=k, film_coefficient=100.0,
                    base_temperature=100.0, ambient=25.0, diameter=0.005, tip="infinite"),
        expected={"heat_flow": q},
        atol={"heat_flow": 0.05},
    )
    for name, k, q in (("copper", 398.0, 8.3), ("aluminium", 180.0, 5.6),
                       ("stainless", 14.0, 1.6))
)

AIR_CASES = (
    ReferenceCase(
        id="stove-glass-screen",
        source="Incropera et al. 6th ed., worked example on a glass-door fire screen in free "
               "convection (from memory): vertical glass screen "
               "0.71 m high at 232 degC in a 23 degC room -> Ra = 1.813e9, Nu = 147, "
               "h = 7.0 W/(m^2 K) (Churchill-Chu)",
        inputs=dict(surface_temperature=232.0, ambient=23.0, height=0.71,
                    rayleigh=1.813e9, prandtl=0.690),
        expected={"nusselt": 147.0, "convective_coefficient": 7.0, "rayleigh": 1.813e9},
        # Properties interpolated here vs tabulated at 400 K there, g = 9.80665 vs 9.8.
        atol={"nusselt": 0.5, "convective_coefficient": 0.05},
        rtol={"rayleigh": 0.01},
    ),
    ReferenceCase(
        id="heated-rod-cross-flow",
        source="Incropera et al. 6th ed., worked example on a heated cylinder in a wind "
               "tunnel (from memory): 12.7 mm cylinder in "
               "10 m/s air, Re = 6071, Pr = 0.70 -> Churchill-Bernstein Nu = 40.6",
        inputs=dict(reynolds=6071.0, prandtl=0.70),
        expected={"nusselt": 40.6},
        atol={"nusselt": 0.05},
    ),
)
