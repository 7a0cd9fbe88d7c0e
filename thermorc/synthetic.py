r"""
Synthetic homes much finer than the RC presets, for calibration tests and demo data.

A :class:`FineHome` describes an invented home: its geometry, the layers of its external
walls (one element per façade), roof and floor, its partitions and furniture, its windows,
air leakage, occupants and thermostat. :func:`build_fine_network` turns it into a
:class:`~thermorc.network.Network` of 30 to 60 capacitive nodes:

- every opaque element is cut into finite volumes across its thickness (a few cells per
  layer); a cell-centred node holds :math:`\rho c\,\Delta x\,A` and neighbouring centres are
  joined by their half-cell resistances in series [1]_;
- each element has a massless internal surface node joined to the room air by the ISO 6946
  internal surface coefficient :math:`h_{si} = 1/R_{si}` (10.0, 7.7 and 5.9 W m⁻² K⁻¹ for
  heat flowing up, horizontally and down, convective plus radiative) [2]_, and a massless
  external surface node joined to outdoor air by :math:`h_{se} = 1/R_{se} = 25` W m⁻² K⁻¹,
  where the opaque surface absorbs sun (sol-air) [2]_;
- a floor on the ground continues into a slab of soil down to a boundary at constant ground
  temperature (a one-dimensional stand-in for ISO 13370's ground model);
- partitions and intermediate floors are internal mass seen from both faces (half the
  thickness, adiabatic mid-plane, twice the face area); furniture is one lumped node;
- windows are massless :math:`U A` conductances with solar gains
  :math:`g (1 - F_F) A\,G_{facade}` on four façades, shared between floor, furniture and air;
- air leakage is the conductance :math:`\rho c \cdot ACH \cdot V / 3600` [3]_.

Radiant exchange between room surfaces is folded into the combined surface coefficients (a
star network around the air node); this keeps the steady-state heat-loss coefficient an
exact sum of series U-values, which the tests check against ISO 6946.

:func:`simulate_home` drives the network with an on/off thermostat (deadband, minimum run and
rest times, night setback) and a heater of finite capacity, plus occupants' gains that are not
logged, and writes a thermostat-style log: the sensor temperature at each stamp rounded to
0.1 °C and the heating power as the mean over the interval that starts at the stamp. It runs
the exact discrete-time solution (zero-order hold for heat, first-order hold for outdoor
temperature) in the modal coordinates of the network, one compiled loop over control steps.

:func:`synthetic_weather` makes invented weather: an annual cycle, weather fronts as a
random walk, a daily cycle, Ineichen clear-sky irradiance [4]_ dimmed by a random cloud
cover with the Kasten-Czeplak relation [5]_ and split into beam and diffuse by Erbs [6]_.
It is invented data, not a climate record.

References
----------
.. [1] S. V. Patankar, Numerical Heat Transfer and Fluid Flow. Hemisphere, 1980, ch. 4
   (finite volumes, interface conductance from half-cell resistances in series).
.. [2] ISO 6946:2017, Building components and building elements -- Thermal resistance and
   thermal transmittance -- Calculation methods, Table 7 (surface resistances; from memory,
   Table 1 in the 2007 edition).
.. [3] ISO 13790:2008, Energy performance of buildings -- Calculation of energy use for space
   heating and cooling, clause 9.3 (ventilation heat transfer; from memory).
.. [4] P. Ineichen and R. Perez, "A new airmass independent formulation for the Linke
   turbidity coefficient," Solar Energy, vol. 73, no. 3, pp. 151-157, 2002,
   doi:10.1016/S0038-092X(02)00045-2.
.. [5] F. Kasten and G. Czeplak, "Solar and terrestrial radiation dependent on the amount
   and type of cloud," Solar Energy, vol. 24, no. 2, pp. 177-189, 1980,
   doi:10.1016/0038-092X(80)90391-6.
.. [6] D. G. Erbs, S. A. Klein and J. A. Duffie, "Estimation of the diffuse radiation
   fraction for hourly, daily and monthly-average global radiation," Solar Energy, vol. 28,
   no. 4, pp. 293-302, 1982, doi:10.1016/0038-092X(82)90302-4.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd
import pvlib
import scipy.signal

from thermorc.construction import R_SE_M2K_PER_W, R_SI_M2K_PER_W, RHO_C_AIR_J_PER_M3K, load_materials
from thermorc.errors import InputError
from thermorc.network import Network, modes_of, step_participation
from thermorc.simulate import phi_functions

__all__ = [
    "FACADES",
    "LayerSpec",
    "ElementSpec",
    "Thermostat",
    "Occupancy",
    "FineHome",
    "PRESET_HOMES",
    "fine_home",
    "layer",
    "build_fine_network",
    "add_element",
    "relevant_time_constant",
    "RELEVANT_PARTICIPATION",
    "home_truth",
    "facade_irradiance",
    "synthetic_weather",
    "tmy3_weather",
    "simulate_home",
    "CLIMATES",
]

OUTDOOR = "outdoor_c"
GROUND = "ground_c"
HEATING = "heating_w"
INTERNAL = "internal_w"
HORIZONTAL = "ghi_w_m2"
#: Façade -> (surface tilt [deg], surface azimuth [deg east of north], channel name).
FACADES = {
    "n": (90.0, 0.0, "poa_n_w_m2"),
    "e": (90.0, 90.0, "poa_e_w_m2"),
    "s": (90.0, 180.0, "poa_s_w_m2"),
    "w": (90.0, 270.0, "poa_w_w_m2"),
}
CHANNELS = (HEATING, INTERNAL) + tuple(f[2] for f in FACADES.values()) + (HORIZONTAL,)

# Soil under a floor: ISO 13370:2007 Table 7, "clay or silt": k = 1.5 W m-1 K-1,
# rho c = 3.0e6 J m-3 K-1 (from memory).
SOIL = {"conductivity_w_per_mk": 1.5, "density_kg_per_m3": 1500.0, "specific_heat_j_per_kgk": 2000.0}


# ------------------------------------------------------------------------------------------
# Specification
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class LayerSpec:
    """
    One homogeneous layer, or a massless resistance (an air cavity).

    Attributes
    ----------
    name : str
        Label.
    thickness_m : float
        [m]
    conductivity_w_per_mk, density_kg_per_m3, specific_heat_j_per_kgk : float
        [W m⁻¹ K⁻¹, kg m⁻³, J kg⁻¹ K⁻¹]; ignored when ``resistance_m2k_per_w`` is set.
    cells : int
        Finite volumes across the layer (0 for a massless resistance layer).
    resistance_m2k_per_w : float or None
        A massless layer given by its thermal resistance. [m² K W⁻¹]
    """

    name: str
    thickness_m: float
    conductivity_w_per_mk: float = 0.0
    density_kg_per_m3: float = 0.0
    specific_heat_j_per_kgk: float = 0.0
    cells: int = 1
    resistance_m2k_per_w: float | None = None

    @property
    def resistance(self):
        """Thermal resistance of the layer. [m² K W⁻¹]"""
        if self.resistance_m2k_per_w is not None:
            return float(self.resistance_m2k_per_w)
        return self.thickness_m / self.conductivity_w_per_mk

    @property
    def areal_capacity(self):
        """:math:`\\rho c d`; 0 for a resistance layer. [J m⁻² K⁻¹]"""
        if self.resistance_m2k_per_w is not None:
            return 0.0
        return self.density_kg_per_m3 * self.specific_heat_j_per_kgk * self.thickness_m


def layer(material, thickness_m, cells=1, name=None):
    """
    A layer of a material from the bundled table ``thermorc/data/materials.csv``.

    Parameters
    ----------
    material : str
        Row name in the materials table (each row names its published source).
    thickness_m : float
        [m]
    cells : int
        Finite volumes across the layer.
    name : str, optional
        Label; default the material name.

    Returns
    -------
    LayerSpec
    """
    table = load_materials()
    if material not in table:
        raise InputError(f"unknown material {material!r} (expected a row of materials.csv)", column="material")
    m = table[material]
    return LayerSpec(name or material, float(thickness_m), m.conductivity_w_per_mk, m.density_kg_per_m3,
                     m.specific_heat_j_per_kgk, int(cells))


@dataclass(frozen=True)
class ElementSpec:
    """
    An opaque element of the fine model, layers from the indoor face outwards.

    Attributes
    ----------
    name : str
        Node-name prefix.
    kind : {'wall', 'roof', 'floor', 'internal'}
        Sets the ISO 6946 internal surface resistance (horizontal, upward, downward heat
        flow; internal mass uses the horizontal value).
    area_m2 : float
        Area of one face. [m²]
    layers : tuple of LayerSpec
        Indoor face first.
    boundary : {'outdoor_c', 'ground_c', None}
        What the outer face meets; None for internal mass (adiabatic mid-plane, both faces
        in the room: give half the thickness and twice the face area).
    solar_channel : str or None
        Irradiance channel absorbed at the outer surface (a façade or ``ghi_w_m2``).
    solar_absorptance : float
        Short-wave absorptance of the outer surface. [unitless]
    """

    name: str
    kind: str
    area_m2: float
    layers: tuple
    boundary: str | None = OUTDOOR
    solar_channel: str | None = None
    solar_absorptance: float = 0.6

    @property
    def r_si(self):
        """ISO 6946 internal surface resistance for this element's heat-flow direction."""
        direction = {"wall": "horizontal", "roof": "upward", "floor": "downward", "internal": "horizontal"}
        return R_SI_M2K_PER_W[direction[self.kind]]

    def u_value_w_m2k(self):
        """
        Steady-state transmittance, surface to surface through films (ISO 6946 series sum).

        Returns
        -------
        float
            :math:`1/(R_{si} + \\sum R_j + R_{se})`, with :math:`R_{se} = 0` towards the ground
            and no value (nan) for internal mass. [W m⁻² K⁻¹]
        """
        if self.boundary is None:
            return math.nan
        r_se = R_SE_M2K_PER_W if self.boundary == OUTDOOR else 0.0
        return 1.0 / (self.r_si + sum(lay.resistance for lay in self.layers) + r_se)


@dataclass(frozen=True)
class Thermostat:
    """
    An on/off thermostat with a deadband, minimum run and rest times and a night setback.

    Attributes
    ----------
    day_c, night_c : float
        Setpoints. [°C]
    night_start_h, night_end_h : float
        Local clock hours of the setback (may wrap midnight). [h]
    deadband_k : float
        Total width of the band around the setpoint: the heater starts below
        ``setpoint - deadband/2`` and stops above ``setpoint + deadband/2``. [K]
    min_on_s, min_off_s : float
        Shortest run and rest (anti short-cycling). [s]
    capacity_w : float
        Heater output when on. [W]
    control_step_s : float
        Step of the control loop; must divide the log step. [s]
    """

    day_c: float = 20.5
    night_c: float = 17.0
    night_start_h: float = 23.0
    night_end_h: float = 6.5
    deadband_k: float = 0.5
    min_on_s: float = 180.0
    min_off_s: float = 180.0
    capacity_w: float = 10000.0
    control_step_s: float = 60.0

    def setpoint(self, index):
        """
        Setpoint at each stamp of a tz-aware index (local clock of the index).

        Parameters
        ----------
        index : pandas.DatetimeIndex

        Returns
        -------
        numpy.ndarray
            [°C]
        """
        hour = index.hour + index.minute / 60.0 + index.second / 3600.0
        hour = np.asarray(hour, dtype=float)
        a, b = self.night_start_h, self.night_end_h
        night = (hour >= a) | (hour < b) if a > b else (hour >= a) & (hour < b)
        return np.where(night, self.night_c, self.day_c)


@dataclass(frozen=True)
class Occupancy:
    """
    Internal gains from occupants, appliances and cooking; never logged.

    Attributes
    ----------
    base_w : float
        Always-on appliances. [W]
    morning_w, evening_w : float
        Extra gains 06:30-08:30 and 17:00-22:30 on weekdays. [W]
    weekend_day_w : float
        Extra gains 09:00-22:30 on weekends. [W]
    cooking_w : float
        Size of a random cooking event (about 40 min, around 07:30 and 18:30). [W]
    day_spread : float
        Standard deviation of the log of a daily multiplier (some days busier). [unitless]
    noise : float
        Relative standard deviation of slowly varying noise (30 min correlation). [unitless]
    convective_share : float
        Share of the gains going to the room air; the rest heats the furniture.
    """

    base_w: float = 180.0
    morning_w: float = 250.0
    evening_w: float = 450.0
    weekend_day_w: float = 300.0
    cooking_w: float = 1200.0
    day_spread: float = 0.25
    noise: float = 0.3
    convective_share: float = 0.6

    def profile(self, index, seed=0):
        """
        Internal gains at each stamp of a regular tz-aware index (interval means).

        Parameters
        ----------
        index : pandas.DatetimeIndex
        seed : int
            Random seed.

        Returns
        -------
        numpy.ndarray
            [W], never negative.
        """
        rng = np.random.default_rng(seed)
        n = len(index)
        hour = np.asarray(index.hour + index.minute / 60.0, dtype=float)
        weekend = np.asarray(index.day_of_week >= 5)
        day = np.asarray((index.normalize() - index[0].normalize()).days)
        q = np.full(n, self.base_w)
        q += np.where(~weekend & (hour >= 6.5) & (hour < 8.5), self.morning_w, 0.0)
        q += np.where(~weekend & (hour >= 17.0) & (hour < 22.5), self.evening_w, 0.0)
        q += np.where(weekend & (hour >= 9.0) & (hour < 22.5), self.weekend_day_w, 0.0)
        n_days = int(day.max()) + 1
        factor = np.exp(rng.normal(0.0, self.day_spread, n_days) - 0.5 * self.day_spread**2)
        q = self.base_w + (q - self.base_w) * factor[day]
        for centre in (7.5, 18.5):
            start = centre + rng.normal(0.0, 0.5, n_days)
            happens = rng.random(n_days) < (0.5 if centre < 12 else 0.85)
            lasting = rng.uniform(0.4, 0.9, n_days)
            on = happens[day] & (hour >= start[day]) & (hour < start[day] + lasting[day])
            q += np.where(on, self.cooking_w, 0.0)
        step_s = (index[1] - index[0]).total_seconds() if n > 1 else 3600.0
        ar = _ar1(rng, n, step_s, 1800.0, self.noise)
        return np.maximum(q * (1.0 + ar), 0.0)


@dataclass(frozen=True)
class FineHome:
    """
    An invented home for the fine model.

    Geometry is a rectangular box: ``storeys`` storeys of ``storey_height_m`` over a footprint
    ``floor_area_m2 / storeys`` whose east-west side is ``aspect`` times its north-south side,
    so the north and south façades are the long ones.

    Attributes
    ----------
    name : str
    floor_area_m2 : float
        Heated floor area. [m²]
    storeys : int
    storey_height_m : float
        [m]
    aspect : float
        East-west length over north-south depth. [unitless]
    wall_layers, roof_layers, floor_layers : tuple of LayerSpec
        Indoor face first. The roof is flat (horizontal sun on it).
    floor_on_ground : bool
        True: the floor continues into ``soil_depth_m`` of soil to a boundary at
        ``ground_c``; False: the floor is exposed to outdoor air (a ventilated crawlspace).
    ground_c : float
        Ground temperature at the soil depth. [°C]
    soil_depth_m, soil_cells : float, int
        Soil slab modelled under the floor.
    partition_layers : tuple of LayerSpec
        Half of a partition (both faces in the room).
    partition_area_per_floor_area : float
        Partition face area (one face) per floor area. [unitless]
    intermediate_floor_layers : tuple of LayerSpec
        Half of an intermediate floor; used when ``storeys > 1``.
    furniture_j_per_m2k : float
        Furniture heat capacity per floor area. [J m⁻² K⁻¹]
    window_fraction : dict
        Façade ('n', 'e', 's', 'w') -> glazed share of the gross façade area. [unitless]
    window_u_w_m2k, window_g, window_frame_fraction : float
        Whole-window U-value, glazing solar transmittance, frame share of the window area.
    shading_factor : float
        Reduction of solar gains by reveals, curtains and surroundings. [unitless]
    solar_to_floor, solar_to_furniture : float
        Shares of transmitted sun landing on the floor and the furniture; the rest heats
        the air.
    air_changes_per_h : float
        Infiltration plus ventilation. [h⁻¹]
    wall_absorptance, roof_absorptance : float
        Short-wave absorptance of outer surfaces. [unitless]
    heater_convective_share : float
        Share of heater output into the room air (1 for warm air); the rest goes to the
        partitions (radiators).
    sensor_air_weight : float
        The thermostat senses ``w T_air + (1 - w) T_surfaces`` (area-weighted internal
        surfaces).
    sensor_time_constant_s : float
        Lag of the thermostat's own sensor, 10 min by default (common practice for wall
        thermostats; 0: none). With a lag the sensor follows the room air only, and
        ``sensor_air_weight`` is not used. [s]
    air_capacity_factor : float
        Heat capacity of the air node over that of the air alone, for light contents
        (curtains, books, the furnace's own metal) that follow the air within minutes; 3
        by default (common practice). [unitless]
    thermostat : Thermostat
    occupancy : Occupancy
    """

    name: str = "home"
    floor_area_m2: float = 120.0
    storeys: int = 2
    storey_height_m: float = 2.6
    aspect: float = 1.5
    wall_layers: tuple = ()
    roof_layers: tuple = ()
    floor_layers: tuple = ()
    floor_on_ground: bool = True
    ground_c: float = 9.0
    soil_depth_m: float = 1.0
    soil_cells: int = 3
    partition_layers: tuple = ()
    partition_area_per_floor_area: float = 0.8
    intermediate_floor_layers: tuple = ()
    furniture_j_per_m2k: float = 12000.0
    window_fraction: dict = field(default_factory=lambda: {"n": 0.10, "e": 0.12, "s": 0.22, "w": 0.12})
    window_u_w_m2k: float = 1.4
    window_g: float = 0.6
    window_frame_fraction: float = 0.25
    shading_factor: float = 0.7
    solar_to_floor: float = 0.5
    solar_to_furniture: float = 0.3
    air_changes_per_h: float = 0.5
    wall_absorptance: float = 0.6
    roof_absorptance: float = 0.7
    heater_convective_share: float = 1.0
    sensor_air_weight: float = 1.0
    sensor_time_constant_s: float = 600.0
    air_capacity_factor: float = 3.0
    thermostat: Thermostat = field(default_factory=Thermostat)
    occupancy: Occupancy = field(default_factory=Occupancy)

    # -- geometry ----------------------------------------------------------------------
    @property
    def footprint_m2(self):
        """Ground-floor (and roof) area. [m²]"""
        return self.floor_area_m2 / self.storeys

    @property
    def volume_m3(self):
        """Heated air volume. [m³]"""
        return self.floor_area_m2 * self.storey_height_m

    def facade_area_m2(self, facade):
        """Gross area of one façade (walls plus windows). [m²]"""
        depth = math.sqrt(self.footprint_m2 / self.aspect)
        length = self.aspect * depth
        width = length if facade in ("n", "s") else depth
        return width * self.storey_height_m * self.storeys

    def window_area_m2(self, facade):
        """Window area of one façade. [m²]"""
        return self.facade_area_m2(facade) * float(self.window_fraction.get(facade, 0.0))

    def solar_aperture_per_facade_m2(self):
        """Transmitting aperture :math:`g (1 - F_F) F_{sh} A_w` per façade. [m²]"""
        return {
            f: self.window_g * (1.0 - self.window_frame_fraction) * self.shading_factor * self.window_area_m2(f)
            for f in FACADES
        }

    def elements(self):
        """
        The opaque elements of the home.

        Returns
        -------
        list of ElementSpec
        """
        out = []
        for f, (_, _, channel) in FACADES.items():
            area = self.facade_area_m2(f) - self.window_area_m2(f)
            if area > 0:
                out.append(ElementSpec(f"wall_{f}", "wall", area, tuple(self.wall_layers), OUTDOOR, channel,
                                       self.wall_absorptance))
        out.append(ElementSpec("roof", "roof", self.footprint_m2, tuple(self.roof_layers), OUTDOOR, HORIZONTAL,
                               self.roof_absorptance))
        if self.floor_on_ground:
            soil = LayerSpec("soil", self.soil_depth_m, cells=self.soil_cells, **SOIL)
            out.append(ElementSpec("floor", "floor", self.footprint_m2, tuple(self.floor_layers) + (soil,), GROUND))
        else:
            out.append(ElementSpec("floor", "floor", self.footprint_m2, tuple(self.floor_layers), OUTDOOR))
        if self.partition_layers:
            out.append(ElementSpec("partition", "internal",
                                   2.0 * self.partition_area_per_floor_area * self.floor_area_m2,
                                   tuple(self.partition_layers), None))
        if self.storeys > 1 and self.intermediate_floor_layers:
            out.append(ElementSpec("midfloor", "internal", 2.0 * self.footprint_m2 * (self.storeys - 1),
                                   tuple(self.intermediate_floor_layers), None))
        return out

    def leakage_w_per_k(self):
        """Air-leakage conductance :math:`\\rho c \\cdot ACH \\cdot V / 3600`. [W K⁻¹]"""
        return RHO_C_AIR_J_PER_M3K * self.air_changes_per_h * self.volume_m3 / 3600.0

    def series_ua_w_per_k(self):
        """
        Heat-loss coefficient by the ISO 6946 series sum, element by element.

        Returns
        -------
        dict
            Element name -> :math:`U A`, plus ``windows`` and ``air_leakage``. [W K⁻¹]
        """
        out = {e.name: e.u_value_w_m2k() * e.area_m2 for e in self.elements() if e.boundary is not None}
        out["windows"] = self.window_u_w_m2k * sum(self.window_area_m2(f) for f in FACADES)
        out["air_leakage"] = self.leakage_w_per_k()
        return out


# ------------------------------------------------------------------------------------------
# The fine network
# ------------------------------------------------------------------------------------------
def _cells(layers):
    """(thickness, conductivity, volumetric capacity) of every cell, and massless resistances."""
    cells = []
    for lay in layers:
        if lay.resistance_m2k_per_w is not None or lay.cells == 0:
            cells.append((0.0, lay.resistance, 0.0))  # a massless resistance between cells
            continue
        dx = lay.thickness_m / lay.cells
        rc = lay.density_kg_per_m3 * lay.specific_heat_j_per_kgk
        cells.extend([(dx, lay.conductivity_w_per_mk, rc)] * lay.cells)
    return cells


def add_element(net, el, room="indoor"):
    r"""
    Add one opaque element to a network: surface node, finite-volume cells, outer surface.

    Parameters
    ----------
    net : Network
        Must have ``el.boundary`` among its boundaries (and the element's solar channel
        among its inputs, if any).
    el : ElementSpec
        The element; each layer is cut into ``cells`` equal finite volumes.
    room : str
        Node or boundary that the internal surface faces.

    Returns
    -------
    str
        Name of the internal surface node (massless).

    Notes
    -----
    A cell of thickness :math:`\Delta x` holds :math:`\rho c \Delta x A`; two neighbouring
    cell centres are joined by :math:`A / (\Delta x_1/2k_1 + \Delta x_2/2k_2)` (with any
    massless resistance layer between them added in series), so the steady-state conductance
    through the element is exactly the ISO 6946 series sum [1]_ [2]_.

    References
    ----------
    .. [1] S. V. Patankar, Numerical Heat Transfer and Fluid Flow. Hemisphere, 1980, ch. 4.
    .. [2] ISO 6946:2017, clause 6 and Table 7 (from memory).
    """
    surface = f"{el.name}_si"
    net.add_node(surface, 0.0)
    net.add_conductance(room, surface, el.area_m2 / el.r_si)
    prev, r_pending = surface, 0.0  # resistance from `prev` to the next cell centre
    index = 0
    for dx, k, rc in _cells(el.layers):
        if rc == 0.0:
            r_pending += k  # here `k` carries the massless layer's resistance
            continue
        node = f"{el.name}_{index}"
        index += 1
        net.add_node(node, rc * dx * el.area_m2)
        net.add_conductance(prev, node, el.area_m2 / (r_pending + dx / (2.0 * k)))
        prev, r_pending = node, dx / (2.0 * k)
    if el.boundary is None:
        return surface  # adiabatic mid-plane: nothing beyond the last half cell
    if el.boundary == OUTDOOR:
        outer = f"{el.name}_se"
        net.add_node(outer, 0.0)
        net.add_conductance(prev, outer, el.area_m2 / r_pending)
        net.add_conductance(outer, OUTDOOR, el.area_m2 / R_SE_M2K_PER_W)
        if el.solar_channel is not None and el.solar_absorptance > 0:
            net.add_heat_input(el.solar_channel, outer, el.solar_absorptance * el.area_m2)
    else:
        net.add_conductance(prev, el.boundary, el.area_m2 / r_pending)
    return surface


def build_fine_network(spec: FineHome) -> Network:
    """
    Build the fine RC network of a home.

    Parameters
    ----------
    spec : FineHome

    Returns
    -------
    Network
        Boundaries ``outdoor_c`` (and ``ground_c`` for a floor on the ground); input
        channels ``heating_w``, ``internal_w`` [W], ``poa_n_w_m2``, ``poa_e_w_m2``,
        ``poa_s_w_m2``, ``poa_w_w_m2`` (vertical façades) and ``ghi_w_m2`` [W m⁻²]. The room
        air node is ``indoor``; the thermostat's sensed temperature is node ``sensor`` when
        the sensor has a lag.

    References
    ----------
    .. [1] S. V. Patankar, Numerical Heat Transfer and Fluid Flow. Hemisphere, 1980, ch. 4.
    .. [2] ISO 6946:2017, Table 7 (surface resistances; from memory).
    """
    boundaries = (OUTDOOR, GROUND) if spec.floor_on_ground else (OUTDOOR,)
    net = Network(boundaries=boundaries, inputs=CHANNELS, name=spec.name)
    net.add_node("indoor", spec.air_capacity_factor * RHO_C_AIR_J_PER_M3K * spec.volume_m3)
    net.add_conductance("indoor", OUTDOOR, spec.leakage_w_per_k()
                        + spec.window_u_w_m2k * sum(spec.window_area_m2(f) for f in FACADES))
    surfaces = {el.name: add_element(net, el) for el in spec.elements()}
    # Furniture: one node with surface 1 m2 per m2 of floor at the horizontal coefficient.
    furniture_g = spec.floor_area_m2 / R_SI_M2K_PER_W["horizontal"]
    net.add_node("furniture", spec.furniture_j_per_m2k * spec.floor_area_m2)
    net.add_conductance("indoor", "furniture", furniture_g)
    aperture = spec.solar_aperture_per_facade_m2()
    to_air = 1.0 - spec.solar_to_floor - spec.solar_to_furniture
    if to_air < -1e-12:
        raise InputError("solar_to_floor + solar_to_furniture exceeds 1", column="solar_to_floor")
    for f, (_, _, channel) in FACADES.items():
        net.add_heat_input(channel, surfaces["floor"], aperture[f] * spec.solar_to_floor)
        net.add_heat_input(channel, "furniture", aperture[f] * spec.solar_to_furniture)
        net.add_heat_input(channel, "indoor", aperture[f] * max(to_air, 0.0))
    share = spec.heater_convective_share
    net.add_heat_input(HEATING, "indoor", share)
    if share < 1.0:
        target = surfaces.get("partition", surfaces["floor"])
        net.add_heat_input(HEATING, target, 1.0 - share)
    occ = spec.occupancy
    net.add_heat_input(INTERNAL, "indoor", occ.convective_share)
    net.add_heat_input(INTERNAL, "furniture", 1.0 - occ.convective_share)
    if spec.sensor_time_constant_s > 0:
        # A token capacity: the sensor stores no energy worth counting.
        c_sensor = 10.0
        net.add_node("sensor", c_sensor)
        net.add_conductance("indoor", "sensor", c_sensor / spec.sensor_time_constant_s)
    return net


def _sensor_weights(spec, net):
    """Weights of the sensed temperature over all nodes (sum 1)."""
    w = np.zeros(len(net.nodes))
    if "sensor" in net.nodes:
        # The lagged sensor node sees the room air; surfaces act through the air weight.
        w[net.nodes.index("sensor")] = 1.0
        return w
    w[net.nodes.index("indoor")] = spec.sensor_air_weight
    rest = 1.0 - spec.sensor_air_weight
    if rest > 0:
        areas = {f"{el.name}_si": el.area_m2 for el in spec.elements()}
        total = sum(areas.values())
        for node, area in areas.items():
            w[net.nodes.index(node)] += rest * area / total
    return w


#: Share of the steady-state sensed rise a mode must carry to count as relevant.
RELEVANT_PARTICIPATION = 0.10


def relevant_time_constant(network, weights, input_channel=HEATING, min_participation=RELEVANT_PARTICIPATION):
    r"""
    Time constants of a network as seen by one output after a step of one heat input.

    Parameters
    ----------
    network, weights, input_channel
        As :func:`thermorc.network.step_participation`: the network, the output as a weighted
        sum of node temperatures, and the heat input that steps.
    min_participation : float
        Share of the steady-state rise below which a mode is not relevant; 10 % by default
        (our choice: it drops the ground and deep-layer modes that a month of data cannot
        show, and keeps every mode that shapes the sensed response). [unitless]

    Returns
    -------
    dict
        ``relevant_s``: the slowest mode whose participation is at least
        ``min_participation``; ``dominant_s``: the mode with the largest participation;
        ``mean_response_s``: the participation-weighted mean
        :math:`\sum_j p_j \tau_j` (the area above the normalised step response);
        ``time_constants_s`` and ``participation`` of all modes, slowest first.

    Notes
    -----
    The participation :math:`p_j` of each mode is its share of the output's steady rise, from
    the residues of the modal decomposition [1]_ (:func:`thermorc.network.step_participation`).
    Modes that the output hardly sees (deep in the ground, say) have a tiny :math:`p_j` however
    slow they are, and a model fitted to that output cannot see them either.

    References
    ----------
    .. [1] T. Kailath, Linear Systems. Prentice-Hall, 1980, ch. 2 (modal decomposition and
       residues of a transfer function).
    """
    tau, p = step_participation(network, weights, input_channel)
    ok = np.flatnonzero(p >= min_participation)
    relevant = float(tau[ok[0]]) if ok.size else float(tau[np.argmax(p)])
    return {
        "relevant_s": relevant,
        "dominant_s": float(tau[np.argmax(p)]),
        "mean_response_s": float(np.sum(p * tau)),
        "time_constants_s": tau.tolist(),
        "participation": p.tolist(),
    }


def _steady_rise(network, weights, channel):
    """Steady rise of a weighted output per unit of one channel, boundaries at zero."""
    k, e, _ = network.matrices()
    j = list(network.inputs).index(channel)
    return float(np.asarray(weights) @ np.linalg.solve(k, e[:, j]))


def home_truth(spec: FineHome, network=None):
    """
    The exact figures of a fine home that a calibration should recover.

    Parameters
    ----------
    spec : FineHome
    network : Network, optional
        ``build_fine_network(spec)`` if already built.

    Returns
    -------
    dict
        ``heat_loss_coefficient_w_per_k`` (total, at the room air), ``heat_loss_outdoor_w_per_k``,
        ``heat_loss_ground_w_per_k``, ``heat_loss_sensor_w_per_k`` (heater watts per kelvin
        of sensed rise), ``series_ua_w_per_k`` (element breakdown), ``time_constant_relevant_h``
        (slowest mode carrying at least 10 % of the sensed rise after a heating step, see
        :func:`relevant_time_constant`), ``time_constant_dominant_h``,
        ``time_constant_mean_response_h``, ``time_constants_h`` and ``participation``
        (first ten modes), ``capacitance_total_j_per_k``, ``n_states``,
        ``solar_equivalent_m2`` (heater-equivalent aperture per channel), ``floor_area_m2``.
    """
    net = build_fine_network(spec) if network is None else network
    hlc = net.heat_loss_coefficient_w_per_k("indoor")
    w = _sensor_weights(spec, net)
    per_watt = _steady_rise(net, w, HEATING)
    tc = relevant_time_constant(net, w, HEATING)
    # Watts of heater that raise the sensed temperature as much as one unit of each channel.
    equivalent = {ch: _steady_rise(net, w, ch) / per_watt for ch in CHANNELS if ch != HEATING}
    n_show = 10
    return {
        "name": spec.name,
        "heat_loss_coefficient_w_per_k": float(hlc["total"]),
        "heat_loss_outdoor_w_per_k": float(hlc[OUTDOOR]),
        "heat_loss_ground_w_per_k": float(hlc.get(GROUND, 0.0)),
        "heat_loss_sensor_w_per_k": float(1.0 / per_watt),
        "series_ua_w_per_k": {k: float(v) for k, v in spec.series_ua_w_per_k().items()},
        "time_constant_relevant_h": tc["relevant_s"] / 3600.0,
        "time_constant_dominant_h": tc["dominant_s"] / 3600.0,
        "time_constant_mean_response_h": tc["mean_response_s"] / 3600.0,
        "relevant_participation": RELEVANT_PARTICIPATION,
        "time_constants_h": [t / 3600.0 for t in tc["time_constants_s"][:n_show]],
        "participation": tc["participation"][:n_show],
        "capacitance_total_j_per_k": net.total_capacitance_j_per_k(),
        "n_states": len(net.state_space().states),
        "solar_equivalent_m2": {k: float(v) for k, v in equivalent.items() if k != INTERNAL},
        "internal_gains_equivalent_share": float(equivalent[INTERNAL]),
        "floor_area_m2": spec.floor_area_m2,
    }


# ------------------------------------------------------------------------------------------
# Presets
# ------------------------------------------------------------------------------------------
def _preset_light():
    return FineHome(
        name="light",
        wall_layers=(layer("gypsum_plasterboard_900", 0.0125), layer("mineral_wool", 0.14, 2),
                     layer("softwood_500", 0.015), LayerSpec("ventilated cavity", 0.025, resistance_m2k_per_w=0.09),
                     layer("softwood_500", 0.02)),
        roof_layers=(layer("gypsum_plasterboard_900", 0.0125), layer("mineral_wool", 0.25, 2),
                     layer("softwood_500", 0.022)),
        floor_layers=(layer("softwood_500", 0.022), layer("eps", 0.12, 2), layer("concrete_medium_2000", 0.10, 2)),
        partition_layers=(layer("gypsum_plasterboard_900", 0.0125), LayerSpec("stud cavity", 0.035,
                                                                              resistance_m2k_per_w=0.17)),
        intermediate_floor_layers=(layer("softwood_500", 0.022), layer("softwood_500", 0.05)),
        furniture_j_per_m2k=10000.0,
        window_u_w_m2k=1.3,
        air_changes_per_h=0.45,
    )


def _preset_heavy():
    return FineHome(
        name="heavy",
        wall_layers=(layer("gypsum_1200", 0.015), layer("brick_face_ashrae_a2", 0.24, 4), layer("eps", 0.08, 2),
                     layer("gypsum_1200", 0.01)),
        roof_layers=(layer("gypsum_1200", 0.01), layer("concrete_medium_2200", 0.18, 3), layer("eps", 0.16, 2)),
        floor_layers=(layer("concrete_medium_2000", 0.06), layer("eps", 0.08), layer("concrete_medium_2200", 0.15, 2)),
        partition_layers=(layer("gypsum_1200", 0.01), layer("brick_face_ashrae_a2", 0.05, 2)),
        intermediate_floor_layers=(layer("concrete_medium_2000", 0.03), layer("concrete_medium_2200", 0.09, 2)),
        furniture_j_per_m2k=15000.0,
        window_u_w_m2k=1.4,
        air_changes_per_h=0.5,
    )


def _preset_leaky():
    return FineHome(
        name="leaky",
        storeys=1,
        floor_area_m2=100.0,
        wall_layers=(layer("gypsum_1200", 0.015), layer("brick_face_ashrae_a2", 0.22, 4)),
        roof_layers=(layer("gypsum_plasterboard_900", 0.0125), layer("mineral_wool", 0.05),
                     layer("softwood_500", 0.02)),
        floor_layers=(layer("softwood_500", 0.022), LayerSpec("floor void", 0.2, resistance_m2k_per_w=0.2),
                      layer("softwood_500", 0.02)),
        floor_on_ground=False,
        partition_layers=(layer("gypsum_1200", 0.01), layer("brick_face_ashrae_a2", 0.05, 2)),
        window_u_w_m2k=2.8,
        window_g=0.75,
        air_changes_per_h=1.2,
        thermostat=Thermostat(capacity_w=24000.0),
    )


def _preset_well_insulated():
    return FineHome(
        name="well_insulated",
        wall_layers=(layer("gypsum_plasterboard_900", 0.0125), layer("concrete_medium_1800", 0.10, 2),
                     layer("mineral_wool", 0.24, 2), layer("gypsum_1200", 0.01)),
        roof_layers=(layer("gypsum_plasterboard_900", 0.0125), layer("mineral_wool", 0.36, 2),
                     layer("softwood_500", 0.022)),
        floor_layers=(layer("concrete_medium_2000", 0.06), layer("eps", 0.20, 2),
                      layer("concrete_medium_2200", 0.15, 2)),
        partition_layers=(layer("gypsum_plasterboard_900", 0.0125), LayerSpec("stud cavity", 0.035,
                                                                              resistance_m2k_per_w=0.17)),
        intermediate_floor_layers=(layer("softwood_500", 0.022), layer("softwood_500", 0.05)),
        window_fraction={"n": 0.08, "e": 0.10, "s": 0.30, "w": 0.10},
        window_u_w_m2k=0.8,
        window_g=0.5,
        air_changes_per_h=0.2,
        thermostat=Thermostat(capacity_w=6000.0),
    )


PRESET_HOMES = {
    "light": _preset_light,
    "heavy": _preset_heavy,
    "leaky": _preset_leaky,
    "well_insulated": _preset_well_insulated,
}


def fine_home(name, **changes):
    """
    A preset fine home, with fields changed.

    Parameters
    ----------
    name : {'light', 'heavy', 'leaky', 'well_insulated'}
        ``light``: timber frame; ``heavy``: masonry with external insulation; ``leaky``:
        solid brick, little insulation, single-storey, high air change; ``well_insulated``:
        concrete with thick insulation, triple glazing, low air change.
    **changes
        Field values to replace (``dataclasses.replace``).

    Returns
    -------
    FineHome
    """
    if name not in PRESET_HOMES:
        raise InputError(f"unknown home preset {name!r} (expected one of {', '.join(PRESET_HOMES)})")
    return replace(PRESET_HOMES[name](), **changes)


# ------------------------------------------------------------------------------------------
# Weather
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Climate:
    annual_mean_c: float
    annual_amplitude_k: float
    coldest_day: float
    daily_amplitude_k: float
    front_sd_k: float
    front_days: float
    cloud_bias: float
    wind_mean_m_s: float


#: Invented climates for :func:`synthetic_weather` (parameters, not records of a place).
CLIMATES = {
    "cold_winter": _Climate(7.0, 13.0, 20.0, 4.5, 4.0, 3.0, 0.2, 4.0),
    "mild": _Climate(12.0, 8.0, 25.0, 4.0, 2.5, 3.0, 0.3, 3.5),
}


def _ar1(rng, n, step_s, corr_s, sd):
    """Stationary AR(1) samples with correlation time ``corr_s`` and standard deviation ``sd``."""
    phi = math.exp(-step_s / corr_s)
    eps = rng.normal(0.0, sd * math.sqrt(1.0 - phi**2), n)
    eps[0] = rng.normal(0.0, sd)
    return scipy.signal.lfilter([1.0], [1.0, -phi], eps)


def synthetic_weather(start, days, step_s=3600.0, latitude=45.0, longitude=-90.0, altitude_m=300.0,
                      tz="UTC", seed=0, climate="cold_winter"):
    r"""
    Invented weather: temperature and irradiance with fronts, daily cycles and clouds.

    Parameters
    ----------
    start : str or pandas.Timestamp
        First stamp (local time of ``tz`` when naive).
    days : float
        Length. [d]
    step_s : float
        Step; irradiance is the mean over the interval starting at each stamp (evaluated at
        the interval midpoint), temperature and wind are instants. [s]
    latitude, longitude : float
        Site. [deg]
    altitude_m : float
        [m]
    tz : str
        IANA time zone of the index.
    seed : int
        Random seed.
    climate : {'cold_winter', 'mild'}
        Parameter set (see :data:`CLIMATES`).

    Returns
    -------
    pandas.DataFrame
        ``outdoor_c`` [°C], ``ghi_w_m2``, ``dni_w_m2``, ``dhi_w_m2`` [W m⁻²], ``wind_m_s``
        [m s⁻¹], ``cloud_cover`` [0..1], indexed by a tz-aware ``time``.

    Notes
    -----
    Temperature is an annual cosine plus an Ornstein-Uhlenbeck front process plus a daily
    cosine peaking at 15:00 solar time whose amplitude shrinks under cloud. Cloud cover
    :math:`N` is a squashed sum of a slow (1.5 d) and a fast (3 h) random process;
    GHI is the Ineichen clear sky [1]_ times :math:`1 - 0.75 N^{3.4}` [2]_, split by Erbs [3]_.

    References
    ----------
    .. [1] P. Ineichen and R. Perez, Solar Energy 73(3), 151-157, 2002.
    .. [2] F. Kasten and G. Czeplak, Solar Energy 24(2), 177-189, 1980.
    .. [3] D. G. Erbs, S. A. Klein and J. A. Duffie, Solar Energy 28(4), 293-302, 1982.
    """
    if climate not in CLIMATES:
        raise InputError(f"unknown climate {climate!r} (expected one of {', '.join(CLIMATES)})")
    cl = CLIMATES[climate]
    t0 = pd.Timestamp(start)
    t0 = t0.tz_localize(tz) if t0.tzinfo is None else t0.tz_convert(tz)
    n = int(round(days * 86400.0 / step_s))
    index = pd.date_range(t0, periods=n, freq=pd.Timedelta(seconds=step_s), name="time")
    rng = np.random.default_rng(seed)
    mid = index + pd.Timedelta(seconds=step_s / 2.0)
    location = pvlib.location.Location(latitude, longitude, altitude=altitude_m)
    sun = location.get_solarposition(mid)
    clear = location.get_clearsky(mid, solar_position=sun)
    slow = _ar1(rng, n, step_s, 1.5 * 86400.0, 1.0)
    fast = _ar1(rng, n, step_s, 3.0 * 3600.0, 0.6)
    cover = 1.0 / (1.0 + np.exp(-2.2 * (slow + fast + cl.cloud_bias)))
    ghi = clear["ghi"].to_numpy() * (1.0 - 0.75 * cover**3.4)
    zenith = sun["zenith"].to_numpy()
    parts = pvlib.irradiance.erbs(ghi, zenith, mid.day_of_year)
    cosz = np.cos(np.radians(zenith))
    dhi = np.clip(np.asarray(parts["dhi"], dtype=float), 0.0, ghi)
    dni = np.where(cosz > 0.065, (ghi - dhi) / np.maximum(cosz, 0.065), 0.0)
    dni = np.clip(dni, 0.0, clear["dni"].to_numpy())
    dhi = np.where(cosz > 0.065, ghi - dni * cosz, ghi)
    utc = index.tz_convert("UTC")
    doy = np.asarray(utc.day_of_year + utc.hour / 24.0 + utc.minute / 1440.0, dtype=float)
    solar_hour = (np.asarray(utc.hour + utc.minute / 60.0, dtype=float) + longitude / 15.0) % 24.0
    # The coldest time of year lags the solstice; a southern site has it half a year later.
    phase = cl.coldest_day + (182.6 if latitude < 0 else 0.0)
    annual = cl.annual_mean_c - cl.annual_amplitude_k * np.cos(2 * np.pi * (doy - phase) / 365.25)
    fronts = _ar1(rng, n, step_s, cl.front_days * 86400.0, cl.front_sd_k)
    day_cover = pd.Series(cover, index=index).rolling(max(int(86400 / step_s), 1), min_periods=1,
                                                      center=True).mean().to_numpy()
    daily = cl.daily_amplitude_k * (1.0 - 0.6 * day_cover) * np.cos(2 * np.pi * (solar_hour - 15.0) / 24.0)
    wind = cl.wind_mean_m_s * np.exp(_ar1(rng, n, step_s, 12 * 3600.0, 0.45) - 0.1)
    return pd.DataFrame(
        {
            "outdoor_c": annual + fronts + daily,
            "ghi_w_m2": ghi,
            "dni_w_m2": dni,
            "dhi_w_m2": np.maximum(dhi, 0.0),
            "wind_m_s": wind,
            "cloud_cover": cover,
        },
        index=index,
    )


def tmy3_weather(name, start, days_before, days_after, step="5min"):
    """
    One of the TMY3 files pvlib ships (real open data) on a fine grid, as weather for a fine home.

    Temperature is linear between the hourly readings and irradiance is held over each hour
    (TMY3 values are means over the hour); the typical year is put in 2022 and in 2023, so that
    a log can run over New Year.

    Parameters
    ----------
    name : str
        File name in pvlib's data folder, e.g. ``"723170TYA.CSV"`` (Greensboro NC) or
        ``"703165TY.csv"`` (Sand Point AK).
    start : str
        A local date of 2022 or 2023: the grid runs from ``days_before`` before it to
        ``days_after`` after it.
    days_before, days_after : float
        [d]
    step : str
        Grid step (pandas frequency).

    Returns
    -------
    weather : pandas.DataFrame
        ``outdoor_c`` [°C], ``ghi_w_m2``, ``dni_w_m2``, ``dhi_w_m2`` [W m⁻²] on the grid.
    site : tuple
        (latitude [deg], longitude [deg], altitude [m]) for :func:`simulate_home`.
    tz : str
        The file's time zone.
    """
    import os

    from thermorc.read import read_weather

    path = os.path.join(os.path.dirname(pvlib.__file__), "data", name)
    parts = [read_weather(path, coerce_year=year) for year in (2022, 2023)]
    meta = parts[0][1]
    hourly = pd.concat([p[0] for p in parts]).sort_index()
    hourly = hourly[~hourly.index.duplicated()]
    t0 = pd.Timestamp(start, tz=hourly.index.tz)
    grid = pd.date_range(t0 - pd.Timedelta(days=days_before), t0 + pd.Timedelta(days=days_after), freq=step)
    weather = pd.DataFrame(
        {"outdoor_c": hourly["outdoor_c"].reindex(grid.union(hourly.index)).interpolate().reindex(grid)}, index=grid)
    for column in ("ghi_w_m2", "dni_w_m2", "dhi_w_m2"):
        weather[column] = hourly[column].reindex(grid, method="ffill")
    return weather, (meta["latitude"], meta["longitude"], meta.get("altitude_m") or 0.0), str(hourly.index.tz)


def facade_irradiance(weather, latitude, longitude, altitude_m=0.0, albedo=0.2):
    """
    Irradiance on the four vertical façades, isotropic sky, sun at interval midpoints.

    Parameters
    ----------
    weather : pandas.DataFrame
        ``ghi_w_m2``, ``dni_w_m2``, ``dhi_w_m2`` [W m⁻²] as means over the interval starting at
        each stamp (tz-aware, regular index).
    latitude, longitude : float
        [deg]
    altitude_m : float
        [m]
    albedo : float
        Ground reflectance. [unitless]

    Returns
    -------
    pandas.DataFrame
        ``poa_n_w_m2``, ``poa_e_w_m2``, ``poa_s_w_m2``, ``poa_w_w_m2``. [W m⁻²]

    References
    ----------
    .. [1] pvlib.irradiance.get_total_irradiance, model 'isotropic' (Liu and Jordan sky).
    """
    index = weather.index
    step = (index[1] - index[0]) if len(index) > 1 else pd.Timedelta(hours=1)
    mid = index + step / 2
    sun = pvlib.solarposition.get_solarposition(mid, latitude, longitude, altitude=altitude_m)
    out = {}
    for tilt, azimuth, channel in FACADES.values():
        poa = pvlib.irradiance.get_total_irradiance(
            tilt, azimuth, sun["apparent_zenith"].to_numpy(), sun["azimuth"].to_numpy(),
            weather["dni_w_m2"].to_numpy(), weather["ghi_w_m2"].to_numpy(), weather["dhi_w_m2"].to_numpy(),
            albedo=albedo, model="isotropic",
        )
        out[channel] = np.nan_to_num(np.asarray(poa["poa_global"], dtype=float), nan=0.0).clip(min=0.0)
    return pd.DataFrame(out, index=index)


# ------------------------------------------------------------------------------------------
# Simulation
# ------------------------------------------------------------------------------------------
def _thermostat_loop(a, drive, yu, cz, g, z, setpoint, half_band, cap, min_on, min_off, q_out, y_out):
    """On/off control in modal coordinates; fills ``q_out`` and ``y_out`` in place."""
    n = z.shape[0]
    y = yu[0]
    for i in range(n):
        y += cz[i] * z[i]
    on = False
    held = min_off
    for k in range(drive.shape[0]):
        y_out[k] = y
        if on:
            if y > setpoint[k] + half_band and held >= min_on:
                on = False
                held = 0
        elif y < setpoint[k] - half_band and held >= min_off:
            on = True
            held = 0
        held += 1
        q = cap if on else 0.0
        q_out[k] = q
        acc = yu[k + 1]
        for i in range(n):
            z[i] = a[i] * z[i] + drive[k, i] + g[i] * q
            acc += cz[i] * z[i]
        y = acc
    y_out[drive.shape[0]] = y


try:  # numba compiles the loop; without it the same code runs, slowly, as Python.
    import numba

    _thermostat_loop = numba.njit(cache=True)(_thermostat_loop)
except ImportError:  # pragma: no cover - numba is a declared dependency
    pass


def _on_grid(weather, grid):
    """Weather columns on the control grid: temperature linear, irradiance held per interval."""
    t_w = weather.index.as_unit("ns").asi8.astype(float) / 1e9
    t_g = grid.as_unit("ns").asi8.astype(float) / 1e9
    if t_g[0] < t_w[0] - 1e-6 or t_g[-1] > t_w[-1] + (t_w[-1] - t_w[-2] if len(t_w) > 1 else 0) + 1e-6:
        raise InputError("the weather does not cover the simulated period", column="time")
    out = {OUTDOOR: np.interp(t_g, t_w, weather[OUTDOOR].to_numpy(dtype=float))}
    held = np.clip(np.searchsorted(t_w, t_g + 1e-6, side="right") - 1, 0, len(t_w) - 1)
    for col in [c for c in weather.columns if c.startswith("poa_")] + [HORIZONTAL]:
        out[col] = weather[col].to_numpy(dtype=float)[held]
    return pd.DataFrame(out, index=grid)


def simulate_home(spec: FineHome, weather=None, days=28.0, step_s=300.0, seed=0, *, start="2024-01-08",
                  site=(45.0, -90.0, 300.0), tz="America/Chicago", warmup_days=5.0, return_run=False):
    r"""
    Simulate a fine home under an on/off thermostat and write a thermostat-style log.

    Parameters
    ----------
    spec : FineHome
        The home (see :func:`fine_home` for presets).
    weather : pandas.DataFrame, optional
        tz-aware regular index; ``outdoor_c`` [°C] at instants and ``ghi_w_m2`` plus either
        ``dni_w_m2`` and ``dhi_w_m2`` or the four ``poa_*_w_m2`` façade columns [W m⁻²] as
        interval means. It must cover ``warmup_days + days`` from its first stamp. Default:
        :func:`synthetic_weather` at the log step from ``start`` (invented weather).
    days : float
        Length of the log. [d]
    step_s : float
        Log step. [s]
    seed : int
        Seed for the occupants (and the synthetic weather when ``weather`` is None).
    start : str
        First stamp of the synthetic weather (local time of ``tz``).
    site : tuple
        (latitude [deg], longitude [deg], altitude [m]) for the sun.
    tz : str
        Time zone of the synthetic weather and of the log's clock (setback schedule).
    warmup_days : float
        Simulated before the log starts, so that the log opens on a settled home. [d]
    return_run : bool
        Also return the inputs on the control grid and the initial state (for checks).

    Returns
    -------
    log : pandas.DataFrame
        Index ``time`` (tz-aware, step ``step_s``); ``indoor_c`` (sensed, rounded to 0.1 °C),
        ``heating_w`` (mean over the interval starting at the stamp), ``outdoor_c``,
        ``ghi_w_m2``, ``setpoint_c``.
    truth : dict
        :func:`home_truth` plus ``internal_gains_mean_w`` (unlogged, over the log),
        ``solar_aperture_m2`` (heater-equivalent solar aperture relative to GHI over the log:
        :math:`\sum_c a_c \bar G_c / \overline{GHI}`), ``heating_energy_kwh``,
        ``hours_below_band_by_1k`` (hours with the sensor more than 1 K below the lower edge
        of the band: slow recovery after a setback, or too small a heater), ``seed``, ``days``, ``step_s``, and ``weather`` ('synthetic' or 'given').
    run : dict
        Only with ``return_run``: ``network``, ``inputs`` (DataFrame on the control grid with
        the heating used), ``x0`` (state at the first control stamp), ``sensor_c`` (unrounded
        sensed temperature on the control grid), ``log_start`` (first stamp of the log).

    Notes
    -----
    Over one control step :math:`\Delta t` the modal states obey exactly
    :math:`z_{k+1} = e^{-\lambda\Delta t} z_k + \Delta t\,\varphi_1 \beta u_k
    + \Delta t\,\varphi_2 \beta_b (u_{k+1}-u_k)`, with heat inputs held (ZOH) and the
    boundary temperatures linear in between (FOH); see :mod:`thermorc.simulate`.
    """
    thermo = spec.thermostat
    ctrl = float(thermo.control_step_s)
    ratio = step_s / ctrl
    if abs(ratio - round(ratio)) > 1e-9 or ratio < 1:
        raise InputError(f"control step {ctrl:g} s does not divide the log step {step_s:g} s",
                         column="control_step_s")
    ratio = int(round(ratio))
    lat, lon, alt = site
    total_days = warmup_days + days
    if weather is None:
        weather = synthetic_weather(start, total_days + step_s / 86400.0, step_s, lat, lon, alt, tz, seed + 1)
        source = "synthetic"
    else:
        if not isinstance(weather.index, pd.DatetimeIndex) or weather.index.tz is None:
            raise InputError("weather needs a tz-aware DatetimeIndex", column="time")
        source = "given"
        tz = str(weather.index.tz)
    weather = weather.copy()
    for col in (OUTDOOR, HORIZONTAL):
        if col not in weather.columns:
            raise InputError(f"weather has no column {col!r}", column=col)
    if not all(f[2] in weather.columns for f in FACADES.values()):
        if "dni_w_m2" not in weather.columns or "dhi_w_m2" not in weather.columns:
            raise InputError("weather needs dni_w_m2 and dhi_w_m2, or the four poa_*_w_m2 columns",
                             column="dni_w_m2")
        weather = weather.join(facade_irradiance(weather, lat, lon, alt))
    n_ctrl = int(round(total_days * 86400.0 / ctrl))
    grid = pd.date_range(weather.index[0], periods=n_ctrl + 1, freq=pd.Timedelta(seconds=ctrl), name="time")
    on_grid = _on_grid(weather, grid)

    net = build_fine_network(spec)
    space = net.state_space()
    modes = modes_of(space)
    names = list(space.inputs)
    u = np.zeros((n_ctrl + 1, len(names)))
    for j, name in enumerate(names):
        if name == GROUND:
            u[:, j] = spec.ground_c
        elif name == INTERNAL:
            # Gains are drawn on the log grid, then held over the control steps inside it.
            coarse = grid[::ratio]
            u[:, j] = np.repeat(spec.occupancy.profile(coarse, seed), ratio)[: n_ctrl + 1]
        elif name in on_grid.columns:
            u[:, j] = on_grid[name].to_numpy()
    hi = names.index(HEATING)
    nb = space.n_boundaries

    rates = modes.rates_per_s
    x = rates * ctrl
    phi1, phi2, _ = phi_functions(x)
    beta = modes.w_inv @ space.b
    drive = (u[:-1] @ beta.T) * (ctrl * phi1)[None, :]
    du = np.diff(u[:, :nb], axis=0)
    drive += (du @ beta[:, :nb].T) * (ctrl * phi2)[None, :]
    g_heat = ctrl * phi1 * beta[:, hi]

    weights = _sensor_weights(spec, net)
    cz = (weights @ space.c) @ modes.w
    yu = u @ (weights @ space.d)  # massless surfaces respond at once to sun on them

    setpoint = thermo.setpoint(grid)
    x0 = _initial_state(spec, net, space, u[: int(86400 / ctrl)].mean(axis=0), setpoint[0], weights, hi)
    z = modes.w_inv @ x0
    q = np.zeros(n_ctrl)
    y = np.zeros(n_ctrl + 1)
    _thermostat_loop(np.exp(-x), np.ascontiguousarray(drive), np.ascontiguousarray(yu), np.ascontiguousarray(cz),
                     np.ascontiguousarray(g_heat), z, setpoint, 0.5 * thermo.deadband_k, float(thermo.capacity_w),
                     int(math.ceil(thermo.min_on_s / ctrl - 1e-9)), int(math.ceil(thermo.min_off_s / ctrl - 1e-9)),
                     q, y)

    first = int(round(warmup_days * 86400.0 / ctrl))
    n_log = int(round(days * 86400.0 / step_s))
    stamps = first + ratio * np.arange(n_log)
    heat_log = q[first:first + ratio * n_log].reshape(n_log, ratio).mean(axis=1)
    index = grid[stamps]
    log = pd.DataFrame(
        {
            "indoor_c": np.round(y[stamps], 1),
            "heating_w": heat_log,
            "outdoor_c": u[stamps, names.index(OUTDOOR)],
            "ghi_w_m2": u[stamps, names.index(HORIZONTAL)],
            "setpoint_c": setpoint[stamps],
        },
        index=index,
    )
    log.index.name = "time"

    truth = home_truth(spec, net)
    sl = slice(first, first + ratio * n_log)
    ghi_mean = float(u[sl, names.index(HORIZONTAL)].mean())
    aperture = sum(truth["solar_equivalent_m2"][ch] * float(u[sl, names.index(ch)].mean())
                   for ch in truth["solar_equivalent_m2"])
    below = y[sl] < setpoint[sl] - 0.5 * thermo.deadband_k - 1.0
    truth.update({
        "internal_gains_mean_w": float(u[sl, names.index(INTERNAL)].mean()),
        "solar_aperture_m2": aperture / ghi_mean if ghi_mean > 0 else math.nan,
        "heating_energy_kwh": float(q[sl].sum() * ctrl / 3.6e6),
        "hours_below_band_by_1k": float(below.sum() * ctrl / 3600.0),
        "seed": int(seed),
        "days": float(days),
        "step_s": float(step_s),
        "weather": source,
    })
    if not return_run:
        return log, truth
    inputs = pd.DataFrame(u, index=grid, columns=names)
    inputs.iloc[:-1, hi] = q
    inputs.iloc[-1, hi] = q[-1]
    run = {"network": net, "inputs": inputs, "x0": x0, "sensor_c": pd.Series(y, index=grid),
           "log_start": index[0], "sensor_weights": weights}
    return log, truth, run


def _initial_state(spec, net, space, u_mean, setpoint, weights, hi):
    """Steady state for mean inputs with the heater holding the setpoint (within capacity)."""
    u_free = u_mean.copy()
    u_free[hi] = 0.0
    free = np.linalg.solve(space.k_reduced_w_per_k, space.e_reduced @ u_free)
    unit = np.zeros_like(u_mean)
    unit[hi] = 1.0
    per_w = np.linalg.solve(space.k_reduced_w_per_k, space.e_reduced @ unit)
    y_free = weights @ (space.c @ free + space.d @ u_free)
    y_unit = weights @ (space.c @ per_w + space.d @ unit)
    need = float(np.clip((setpoint - y_free) / y_unit, 0.0, spec.thermostat.capacity_w))
    return free + need * per_w
