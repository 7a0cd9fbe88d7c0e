r"""
Constructions: read a home's building elements, and judge them for lumped RC models.

A construction file (TOML, format in ``docs/constructions.md``) lists the elements of a home
(external walls, roof, floor, windows, internal mass), each a stack of layers. From it this
module computes, per element:

- the thermal transmittance (U-value) by ISO 6946: layer resistances in series with the
  internal and external surface resistances for the direction of heat flow;
- the areal heat capacity :math:`\sum \rho c d`, the periodic penetration depth
  :math:`\delta = \sqrt{\alpha P / \pi}` for a daily period, and the part of the capacity that
  takes part in a daily cycle, by the ISO 13786 heat-transfer matrices (and, as a plain
  check, the thickness-limited simplification);
- the Biot number :math:`Bi = h L / k` of the element and of each layer, with the
  lumped-capacitance verdict :math:`Bi < 0.1`, and the error a lumped node makes, computed
  from the exact plane-wall solution (Fourier series) rather than assumed;

and for the whole home the construction heat-loss coefficient (transmission plus air
leakage) and a plain-words recommendation of the model structure (1R1C, 2R2C, 3R2C).

Functions hold the methods and take plain numbers; :func:`read_construction` is the only one
that touches a file.
"""

from __future__ import annotations

import csv
import difflib
import math
import os
import re
import tomllib
from dataclasses import dataclass, field
from importlib import resources

import numpy as np
from scipy.optimize import brentq

from thermorc.errors import InputError

__all__ = [
    "R_SI_M2K_PER_W",
    "R_SE_M2K_PER_W",
    "RHO_C_AIR_J_PER_M3K",
    "DAY_S",
    "LUMPED_BIOT_LIMIT",
    "ELEMENT_KINDS",
    "window_facade_weights",
    "facade_weights",
    "Material",
    "Layer",
    "Element",
    "Construction",
    "load_materials",
    "read_construction",
    "parse_construction",
    "u_value",
    "areal_heat_capacity",
    "penetration_depth",
    "heat_transfer_matrix",
    "effective_areal_capacity",
    "thickness_limited_capacity",
    "biot_number",
    "lumped_time_constant_s",
    "element_biot",
    "inner_leaf",
    "plane_wall_eigenvalues",
    "plane_wall_response",
    "lumping_error",
    "air_leakage_conductance",
    "construction_ua",
    "analyse_construction",
]

# ISO 6946 internal surface resistance by direction of heat flow, and the external one
# [m2 K W-1] (ISO 6946:2007 Table 1 / ISO 6946:2017 Table 7; clause numbers from memory,
# values read in secondary copies).
R_SI_M2K_PER_W = {"upward": 0.10, "horizontal": 0.13, "downward": 0.17}
R_SE_M2K_PER_W = 0.04

# Volumetric heat capacity of air used by ISO 13790:2008 for ventilation heat transfer,
# rho_a c_a = 1200 J m-3 K-1 (clause 9.3, from memory); 1.204 kg m-3 x 1005 J kg-1 K-1 at
# 20 degC gives 1210, so the rounded value is within 1 %.
RHO_C_AIR_J_PER_M3K = 1200.0

DAY_S = 86400.0

# Lumped-capacitance criterion, Incropera et al., Fundamentals of Heat and Mass Transfer,
# 6th ed., section 5.2 (edition and section from memory).
LUMPED_BIOT_LIMIT = 0.1

# A layer at or below this conductivity is treated as thermal insulation by the
# thickness-limited capacity rule (ISO 13786:2007 Annex A, value from memory).
INSULATION_K_W_PER_MK = 0.08
# Depth limit of the same rule [m] (ISO 13786:2007 Annex A, from memory).
SIMPLE_DEPTH_LIMIT_M = 0.10

# Element kind -> default direction of heat flow in the heating season, and whether it
# separates indoor from outdoor air.
ELEMENT_KINDS = {
    "external_wall": ("horizontal", True),
    "roof": ("upward", True),
    "floor": ("downward", True),
    "ground_floor": ("downward", True),
    "window": ("horizontal", True),
    "internal_mass": ("horizontal", False),
}
_ORIENTATIONS = ("N", "NE", "E", "SE", "S", "SW", "W", "NW", "horizontal")


# --------------------------------------------------------------------------------------------
# Data containers
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Material:
    """One row of the bundled materials table (SI units, source and confidence kept)."""

    name: str
    conductivity_w_per_mk: float
    density_kg_per_m3: float
    specific_heat_j_per_kgk: float
    source: str
    confidence: str
    note: str = ""


@dataclass(frozen=True)
class Layer:
    """
    One homogeneous layer of an element, indoor face first.

    A layer given only by ``resistance_m2k_per_w`` (an air cavity, say) is massless.
    """

    name: str
    thickness_m: float
    conductivity_w_per_mk: float | None
    density_kg_per_m3: float
    specific_heat_j_per_kgk: float
    material: str | None = None
    source: str = "given in the construction file"
    confidence: str = "user"
    resistance_m2k_per_w: float | None = None

    @property
    def thermal_resistance_m2k_per_w(self):
        """Conduction resistance d / k, or the given resistance. [m2 K W-1]"""
        if self.resistance_m2k_per_w is not None:
            return self.resistance_m2k_per_w
        return self.thickness_m / self.conductivity_w_per_mk

    @property
    def areal_capacity_j_m2k(self):
        """rho c d. [J m-2 K-1]"""
        return self.density_kg_per_m3 * self.specific_heat_j_per_kgk * self.thickness_m

    @property
    def diffusivity_m2_per_s(self):
        """k / (rho c), or None for a massless layer. [m2 s-1]"""
        rc = self.density_kg_per_m3 * self.specific_heat_j_per_kgk
        if rc <= 0 or self.conductivity_w_per_mk is None:
            return None
        return self.conductivity_w_per_mk / rc


@dataclass(frozen=True)
class Element:
    """
    One building element: a stack of layers (indoor face first) with an area.

    ``exposed_sides`` is 2 for external elements (indoor and outdoor air) and 1 or 2 for
    internal mass (one face to the room with the back adiabatic, or both faces in the room).
    """

    name: str
    kind: str
    area_m2: float
    layers: tuple
    exposed_sides: int
    heat_flow: str
    h_inside_w_m2k: float
    h_outside_w_m2k: float | None
    orientation: str | float | None = None
    u_value_given_w_m2k: float | None = None
    g_value: float | None = None

    @property
    def external(self):
        """True when the element separates indoor from outdoor air."""
        return ELEMENT_KINDS[self.kind][1]

    @property
    def thickness_m(self):
        """Total thickness of the layers. [m]"""
        return float(sum(layer.thickness_m for layer in self.layers))


@dataclass(frozen=True)
class Construction:
    """A home's elements, floor area and air leakage, as read from a construction file."""

    name: str
    floor_area_m2: float
    volume_m3: float
    air_changes_per_h: float
    elements: tuple
    path: str | None = None
    notes: str = ""

    def element(self, name):
        """The element called ``name``."""
        for item in self.elements:
            if item.name == name:
                return item
        raise KeyError(name)


# --------------------------------------------------------------------------------------------
# Materials table
# --------------------------------------------------------------------------------------------
_MATERIALS_CACHE = {}


def load_materials(path=None):
    """
    Read a materials table (the bundled ``thermorc/data/materials.csv`` by default).

    Parameters
    ----------
    path : str or os.PathLike, optional
        A CSV with the bundled table's columns: ``name, conductivity_w_per_mk,
        density_kg_per_m3, specific_heat_j_per_kgk, source, confidence, note``.

    Returns
    -------
    dict of str to Material
        Keyed by name.

    Raises
    ------
    InputError
        A row with a missing or non-positive number, or a duplicate name.
    """
    key = None if path is None else os.fspath(path)
    if key in _MATERIALS_CACHE:
        return _MATERIALS_CACHE[key]
    if path is None:
        text = resources.files("thermorc").joinpath("data/materials.csv").read_text("utf-8")
        shown = "materials.csv"
    else:
        with open(path, encoding="utf-8", newline="") as handle:
            text = handle.read()
        shown = key
    out = {}
    reader = csv.DictReader(text.splitlines())
    for row_number, row in enumerate(reader, start=2):
        name = (row.get("name") or "").strip()
        if not name:
            raise InputError("empty material name", path=shown, row=row_number, column="name")
        if name in out:
            raise InputError(f"duplicate material {name!r}", path=shown, row=row_number, column="name")
        values = {}
        for col in ("conductivity_w_per_mk", "density_kg_per_m3", "specific_heat_j_per_kgk"):
            try:
                values[col] = float(row[col])
            except (TypeError, ValueError, KeyError):
                raise InputError(f"{row.get(col)!r} is not a number", path=shown, row=row_number, column=col) from None
            if not (math.isfinite(values[col]) and values[col] > 0):
                raise InputError(
                    f"{values[col]} is not positive (expected > 0)", path=shown, row=row_number, column=col
                )
        if not (row.get("source") or "").strip():
            raise InputError("every material names its source", path=shown, row=row_number, column="source")
        out[name] = Material(
            name=name,
            source=row["source"].strip(),
            confidence=(row.get("confidence") or "").strip(),
            note=(row.get("note") or "").strip(),
            **values,
        )
    _MATERIALS_CACHE[key] = out
    return out


# --------------------------------------------------------------------------------------------
# Reading the construction file
# --------------------------------------------------------------------------------------------
_TOP_KEYS = {"name", "floor_area_m2", "air_leakage", "elements", "notes"}
_LEAK_KEYS = {"ach", "volume_m3"}
_ELEMENT_KEYS = {
    "name", "kind", "area_m2", "orientation", "exposed_sides", "heat_flow", "h_inside_w_m2k",
    "h_outside_w_m2k", "layers", "u_value_w_m2k", "g_value", "notes",
}
_LAYER_KEYS = {
    "name", "thickness_m", "material", "conductivity_w_per_mk", "density_kg_per_m3",
    "specific_heat_j_per_kgk", "resistance_m2k_per_w",
}
_PROPERTY_KEYS = ("conductivity_w_per_mk", "density_kg_per_m3", "specific_heat_j_per_kgk")


class _Reader:
    """Checks values of one parsed TOML document and says where a bad one is."""

    def __init__(self, path):
        self.path = path

    def fail(self, key, message):
        raise InputError(message, path=self.path, column=key)

    def table(self, value, key):
        if not isinstance(value, dict):
            self.fail(key, f"expected a table, found {type(value).__name__}")
        return value

    def unknown(self, table, allowed, prefix):
        for name in table:
            if name not in allowed:
                near = difflib.get_close_matches(name, sorted(allowed), n=3, cutoff=0.5)
                hint = f" (did you mean {', '.join(repr(n) for n in near)}?)" if near else ""
                where = f"{prefix}.{name}" if prefix else name
                self.fail(where, f"unknown key{hint}; allowed: {', '.join(sorted(allowed))}")

    def number(self, table, name, key, required=True, minimum=None, positive=False, maximum=None, default=None):
        if name not in table:
            if required:
                self.fail(key, "missing (expected a number)")
            return default
        value = table[name]
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(key, f"{value!r} is not a number")
        try:
            value = float(value)
        except OverflowError:  # a TOML integer beyond the float range
            value = math.inf
        if not math.isfinite(value):
            self.fail(key, f"{value} is not finite")
        if positive and value <= 0:
            self.fail(key, f"{value:g} is not positive (expected > 0)")
        if minimum is not None and value < minimum:
            self.fail(key, f"{value:g} is below {minimum:g}")
        if maximum is not None and value > maximum:
            self.fail(key, f"{value:g} is above {maximum:g}")
        return value

    def text(self, table, name, key, required=True, default=None):
        if name not in table:
            if required:
                self.fail(key, "missing (expected text)")
            return default
        value = table[name]
        if not isinstance(value, str) or not value.strip():
            self.fail(key, f"{value!r} is not non-empty text")
        return value.strip()


def read_construction(path, materials=None):
    """
    Read a construction TOML file.

    Parameters
    ----------
    path : str or os.PathLike
        The construction file (format: ``docs/constructions.md``).
    materials : dict of str to Material, optional
        Materials table; the bundled one by default.

    Returns
    -------
    Construction

    Raises
    ------
    InputError
        Unreadable TOML, or a missing, unknown or out-of-range key, named by its key path
        (for example ``elements[2].layers[0].thickness_m``).
    """
    path = os.fspath(path)
    with open(path, "rb") as handle:
        raw = handle.read()
    try:
        document = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc.reason})", path=path) from None
    except tomllib.TOMLDecodeError as exc:
        message = str(exc)
        match = re.search(r"\(at line (\d+), column (\d+)\)", message)
        row = int(match.group(1)) if match else None
        message = re.sub(r"\s*\(at line \d+, column \d+\)", "", message)
        raise InputError(f"not valid TOML: {message}", path=path, row=row) from None
    return parse_construction(document, path=path, materials=materials)


def parse_construction(document, path=None, materials=None):
    """
    Check a parsed construction document and build the :class:`Construction`.

    Parameters
    ----------
    document : dict
        The TOML document as parsed by :mod:`tomllib`.
    path : str, optional
        File name for error messages.
    materials : dict of str to Material, optional
        Materials table; the bundled one by default.

    Returns
    -------
    Construction

    Raises
    ------
    InputError
        As :func:`read_construction`.
    """
    materials = load_materials() if materials is None else materials
    rd = _Reader(path)
    rd.unknown(document, _TOP_KEYS, "")
    name = rd.text(document, "name", "name", required=False, default="construction")
    # Upper bounds of one dwelling (common practice): they catch typing errors such as 1e308.
    floor_area = rd.number(document, "floor_area_m2", "floor_area_m2", positive=True, maximum=1e5)
    if "air_leakage" not in document:
        rd.fail("air_leakage", "missing (expected a table with ach and volume_m3)")
    leak = rd.table(document["air_leakage"], "air_leakage")
    rd.unknown(leak, _LEAK_KEYS, "air_leakage")
    ach = rd.number(leak, "ach", "air_leakage.ach", minimum=0.0, maximum=50.0)
    volume = rd.number(leak, "volume_m3", "air_leakage.volume_m3", positive=True, maximum=1e6)
    raw_elements = document.get("elements")
    if raw_elements is None:
        rd.fail("elements", "missing (expected one or more [[elements]] tables)")
    if not isinstance(raw_elements, list) or not raw_elements:
        rd.fail("elements", "expected one or more [[elements]] tables")
    elements = []
    seen = set()
    for i, raw in enumerate(raw_elements):
        element = _parse_element(rd, raw, f"elements[{i}]", materials)
        if element.name in seen:
            rd.fail(f"elements[{i}].name", f"duplicate element name {element.name!r}")
        seen.add(element.name)
        elements.append(element)
    if not any(e.external for e in elements):
        rd.fail("elements", "no external element (expected at least one wall, roof, floor or window)")
    notes = document.get("notes", "")
    return Construction(
        name=name,
        floor_area_m2=floor_area,
        volume_m3=volume,
        air_changes_per_h=ach,
        elements=tuple(elements),
        path=path,
        notes=str(notes),
    )


def _parse_element(rd, raw, key, materials):
    rd.table(raw, key)
    rd.unknown(raw, _ELEMENT_KEYS, key)
    name = rd.text(raw, "name", f"{key}.name")
    kind = rd.text(raw, "kind", f"{key}.kind")
    if kind not in ELEMENT_KINDS:
        near = difflib.get_close_matches(kind, list(ELEMENT_KINDS), n=2, cutoff=0.4)
        hint = f" (did you mean {', '.join(repr(n) for n in near)}?)" if near else ""
        rd.fail(f"{key}.kind", f"{kind!r} is not a known kind{hint}; expected one of {', '.join(ELEMENT_KINDS)}")
    default_flow, external = ELEMENT_KINDS[kind]
    area = rd.number(raw, "area_m2", f"{key}.area_m2", positive=True, maximum=1e5)
    orientation = raw.get("orientation")
    if orientation is not None:
        if isinstance(orientation, bool) or not isinstance(orientation, (str, int, float)):
            rd.fail(f"{key}.orientation", f"{orientation!r} is not a compass point or azimuth")
        if isinstance(orientation, str) and orientation not in _ORIENTATIONS:
            rd.fail(f"{key}.orientation", f"{orientation!r} is not one of {', '.join(_ORIENTATIONS)} or an azimuth in degrees")
        if isinstance(orientation, (int, float)) and not 0 <= orientation <= 360:
            rd.fail(f"{key}.orientation", f"azimuth {orientation} is outside 0..360 degrees")
    sides_default = 2 if external else 1
    sides = rd.number(raw, "exposed_sides", f"{key}.exposed_sides", required=False, default=sides_default)
    if sides not in (1, 2):
        rd.fail(f"{key}.exposed_sides", f"{sides:g} is not 1 or 2")
    sides = int(sides)
    if external and sides != 2:
        rd.fail(f"{key}.exposed_sides", "an external element faces indoor and outdoor air (expected 2)")
    flow = rd.text(raw, "heat_flow", f"{key}.heat_flow", required=False, default=default_flow)
    if flow not in R_SI_M2K_PER_W:
        rd.fail(f"{key}.heat_flow", f"{flow!r} is not one of {', '.join(R_SI_M2K_PER_W)}")
    h_in = rd.number(raw, "h_inside_w_m2k", f"{key}.h_inside_w_m2k", required=False, positive=True,
                     default=1.0 / R_SI_M2K_PER_W[flow])
    if external:
        h_out = rd.number(raw, "h_outside_w_m2k", f"{key}.h_outside_w_m2k", required=False, positive=True,
                          default=1.0 / R_SE_M2K_PER_W)
    else:
        if "h_outside_w_m2k" in raw:
            rd.fail(f"{key}.h_outside_w_m2k", "internal mass has no outdoor face (use h_inside_w_m2k)")
        h_out = None
    u_given = rd.number(raw, "u_value_w_m2k", f"{key}.u_value_w_m2k", required=False, positive=True, maximum=100.0)
    if u_given is not None and kind != "window":
        rd.fail(f"{key}.u_value_w_m2k", "only windows may give a U-value directly (give layers instead)")
    g_value = rd.number(raw, "g_value", f"{key}.g_value", required=False, minimum=0.0, maximum=1.0)
    if g_value is not None and kind != "window":
        rd.fail(f"{key}.g_value", "only windows take a g_value")
    raw_layers = raw.get("layers", [])
    if not isinstance(raw_layers, list):
        rd.fail(f"{key}.layers", "expected [[elements.layers]] tables")
    if not raw_layers and u_given is None:
        rd.fail(f"{key}.layers", "missing (expected layers, or u_value_w_m2k for a window)")
    if raw_layers and u_given is not None:
        rd.fail(f"{key}.u_value_w_m2k", "give either layers or u_value_w_m2k, not both")
    layers = tuple(_parse_layer(rd, lr, f"{key}.layers[{j}]", materials) for j, lr in enumerate(raw_layers))
    if layers and sum(lr.thermal_resistance_m2k_per_w for lr in layers) <= 0:
        rd.fail(f"{key}.layers", "the layers have no thermal resistance")
    return Element(
        name=name, kind=kind, area_m2=area, layers=layers, exposed_sides=sides, heat_flow=flow,
        h_inside_w_m2k=h_in, h_outside_w_m2k=h_out, orientation=orientation,
        u_value_given_w_m2k=u_given, g_value=g_value,
    )


def _parse_layer(rd, raw, key, materials):
    rd.table(raw, key)
    rd.unknown(raw, _LAYER_KEYS, key)
    resistance = rd.number(raw, "resistance_m2k_per_w", f"{key}.resistance_m2k_per_w", required=False, positive=True)
    material_name = rd.text(raw, "material", f"{key}.material", required=False)
    given = [p for p in _PROPERTY_KEYS if p in raw]
    if resistance is not None:
        if material_name is not None or given:
            rd.fail(f"{key}.resistance_m2k_per_w", "a resistance layer is massless: give no material or k/rho/c")
        thickness = rd.number(raw, "thickness_m", f"{key}.thickness_m", required=False, minimum=0.0, maximum=5.0, default=0.0)
        name = rd.text(raw, "name", f"{key}.name", required=False, default="resistance layer")
        return Layer(name=name, thickness_m=thickness, conductivity_w_per_mk=None, density_kg_per_m3=0.0,
                     specific_heat_j_per_kgk=0.0, resistance_m2k_per_w=resistance)
    thickness = rd.number(raw, "thickness_m", f"{key}.thickness_m", positive=True, maximum=5.0)
    if material_name is not None:
        if given:
            rd.fail(f"{key}.{given[0]}", f"give either material or {given[0]}, not both")
        if material_name not in materials:
            near = difflib.get_close_matches(material_name, list(materials), n=4, cutoff=0.4)
            if not near:
                stem = material_name.split("_")[0].lower()
                near = [m for m in materials if stem and stem in m][:4]
            hint = f"; near names: {', '.join(near)}" if near else ""
            rd.fail(f"{key}.material", f"unknown material {material_name!r}{hint} (see the bundled materials.csv)")
        mat = materials[material_name]
        return Layer(
            name=rd.text(raw, "name", f"{key}.name", required=False, default=material_name),
            thickness_m=thickness,
            conductivity_w_per_mk=mat.conductivity_w_per_mk,
            density_kg_per_m3=mat.density_kg_per_m3,
            specific_heat_j_per_kgk=mat.specific_heat_j_per_kgk,
            material=material_name,
            source=mat.source,
            confidence=mat.confidence,
        )
    if not given:
        rd.fail(f"{key}.material", "missing (expected material, or conductivity_w_per_mk, density_kg_per_m3 and "
                "specific_heat_j_per_kgk, or resistance_m2k_per_w)")
    k = rd.number(raw, "conductivity_w_per_mk", f"{key}.conductivity_w_per_mk", positive=True, maximum=500.0)
    rho = rd.number(raw, "density_kg_per_m3", f"{key}.density_kg_per_m3", positive=True, maximum=25000.0)
    c = rd.number(raw, "specific_heat_j_per_kgk", f"{key}.specific_heat_j_per_kgk", positive=True, maximum=10000.0)
    return Layer(
        name=rd.text(raw, "name", f"{key}.name", required=False, default="layer"),
        thickness_m=thickness, conductivity_w_per_mk=k, density_kg_per_m3=rho, specific_heat_j_per_kgk=c,
    )


# --------------------------------------------------------------------------------------------
# ISO 6946 U-value, capacities, penetration depth
# --------------------------------------------------------------------------------------------
def u_value(layer_resistances_m2k_per_w, r_si_m2k_per_w, r_se_m2k_per_w):
    r"""
    Thermal transmittance of a plane element of homogeneous layers.

    Parameters
    ----------
    layer_resistances_m2k_per_w : sequence of float
        d / k of each layer, or its tabulated resistance. [m2 K W-1]
    r_si_m2k_per_w : float
        Internal surface resistance (0.10 upward, 0.13 horizontal, 0.17 downward). [m2 K W-1]
    r_se_m2k_per_w : float
        External surface resistance (0.04). [m2 K W-1]

    Returns
    -------
    float
        :math:`U = 1 / (R_{si} + \sum R_j + R_{se})`. [W m-2 K-1]

    References
    ----------
    .. [1] ISO 6946:2017, Building components and building elements -- Thermal resistance and
       thermal transmittance -- Calculation methods (clause 6, from memory).
    """
    total = float(r_si_m2k_per_w) + float(np.sum(layer_resistances_m2k_per_w)) + float(r_se_m2k_per_w)
    return 1.0 / total


def areal_heat_capacity(thickness_m, density_kg_per_m3, specific_heat_j_per_kgk):
    """
    Heat capacity per unit area of layers.

    Parameters
    ----------
    thickness_m, density_kg_per_m3, specific_heat_j_per_kgk : array_like
        Per layer. [m], [kg m-3], [J kg-1 K-1]

    Returns
    -------
    float
        sum of rho c d. [J m-2 K-1]
    """
    return float(np.sum(np.asarray(thickness_m, float) * np.asarray(density_kg_per_m3, float)
                        * np.asarray(specific_heat_j_per_kgk, float)))


def penetration_depth(diffusivity_m2_per_s, period_s=DAY_S):
    r"""
    Periodic penetration depth of a temperature wave.

    Parameters
    ----------
    diffusivity_m2_per_s : numeric
        k / (rho c). [m2 s-1]
    period_s : float
        Period of the variation; one day by default. [s]

    Returns
    -------
    numeric
        :math:`\delta = \sqrt{\alpha P / \pi}`: the depth at which the amplitude has fallen
        to 1/e. [m]

    References
    ----------
    .. [1] ISO 13786:2017, Thermal performance of building components -- Dynamic thermal
       characteristics -- Calculation methods (definition of the periodic penetration depth,
       clause number from memory).
    .. [2] H. S. Carslaw and J. C. Jaeger, Conduction of Heat in Solids, 2nd ed. Oxford,
       1959, section 2.6 (from memory).
    """
    return np.sqrt(np.asarray(diffusivity_m2_per_s, float) * period_s / np.pi)


def _layer_matrix(layer, period_s):
    # Derived from the periodic heat equation theta'' = (i w / alpha) theta, with
    # gamma = (1 + i)/delta; maps [theta, q] at the layer's indoor face to its other face,
    # q positive away from indoors. Written out it is the ISO 13786 layer matrix.
    if layer.diffusivity_m2_per_s is None or layer.thickness_m == 0:
        return np.array([[1.0, -layer.thermal_resistance_m2k_per_w], [0.0, 1.0]], complex)
    delta = float(penetration_depth(layer.diffusivity_m2_per_s, period_s))
    gamma = (1 + 1j) / delta
    gd = gamma * layer.thickness_m
    k = layer.conductivity_w_per_mk
    return np.array([[np.cosh(gd), -np.sinh(gd) / (k * gamma)], [-k * gamma * np.sinh(gd), np.cosh(gd)]])


def _film_matrix(resistance):
    return np.array([[1.0, -resistance], [0.0, 1.0]], complex)


def heat_transfer_matrix(layers, period_s=DAY_S, r_inside_m2k_per_w=0.0, r_outside_m2k_per_w=0.0):
    r"""
    Heat-transfer matrix of a layered element for a sinusoidal variation.

    Parameters
    ----------
    layers : sequence of Layer
        Indoor face first.
    period_s : float
        Period. [s]
    r_inside_m2k_per_w, r_outside_m2k_per_w : float
        Surface resistances added on either side (0 for a surface-to-surface matrix).
        [m2 K W-1]

    Returns
    -------
    numpy.ndarray, shape (2, 2), complex
        :math:`Z` with :math:`[\hat\theta_2, \hat q_2]^T = Z [\hat\theta_1, \hat q_1]^T`,
        side 1 indoors, heat flow positive from side 1 to side 2; :math:`\det Z = 1`.

    Notes
    -----
    Per layer, with :math:`\xi = d/\delta`, :math:`Z_{11} = Z_{22} = \cosh((1+i)\xi)`,
    :math:`Z_{12} = -\sinh((1+i)\xi)\,\delta / ((1+i) k)`,
    :math:`Z_{21} = -(1+i) (k/\delta) \sinh((1+i)\xi)`; a surface or massless layer of
    resistance R is :math:`[[1, -R], [0, 1]]`. The element matrix is the product, outdoor
    side on the left.

    References
    ----------
    .. [1] ISO 13786:2017, Thermal performance of building components -- Dynamic thermal
       characteristics -- Calculation methods, clause 6 and Annex (from memory).
    """
    z = _film_matrix(r_inside_m2k_per_w)
    for layer in layers:
        z = _layer_matrix(layer, period_s) @ z
    return _film_matrix(r_outside_m2k_per_w) @ z


def effective_areal_capacity(element, period_s=DAY_S):
    r"""
    Areal heat capacity of an element seen from the room over a periodic cycle.

    Parameters
    ----------
    element : Element
        An element with layers.
    period_s : float
        Period of the cycle; one day by default. [s]

    Returns
    -------
    float
        Heat stored per m2 of element per kelvin of room-air swing, ISO 13786's internal
        areal heat capacity :math:`\kappa_1 = (P/2\pi)\,|(Z_{11} - 1)/Z_{12}|` for an external
        element (outdoor side held steady); for internal mass with an adiabatic back
        :math:`(P/2\pi)|Z_{21}/Z_{22}|`; for internal mass in the room on both faces the sum
        over both faces. Surface resistances are included. [J m-2 K-1]

    References
    ----------
    .. [1] ISO 13786:2017, Thermal performance of building components -- Dynamic thermal
       characteristics -- Calculation methods (areal heat capacity, from memory).
    """
    if not element.layers:
        return 0.0
    omega = 2 * np.pi / period_s
    r_in = 1.0 / element.h_inside_w_m2k
    if element.external:
        z = heat_transfer_matrix(element.layers, period_s, r_in, 1.0 / element.h_outside_w_m2k)
        return float(abs((z[0, 0] - 1) / z[0, 1]) / omega)
    if element.exposed_sides == 1:
        z = heat_transfer_matrix(element.layers, period_s, r_in, 0.0)
        return float(abs(z[1, 0] / z[1, 1]) / omega)
    # Both faces in the same room air: theta_2 = theta_1, stored heat is q1 - q2.
    z = heat_transfer_matrix(element.layers, period_s, r_in, r_in)
    q1 = (1 - z[0, 0]) / z[0, 1]
    q2 = z[1, 0] + z[1, 1] * q1
    return float(abs(q1 - q2) / omega)


def thickness_limited_capacity(element):
    r"""
    Simplified effective areal heat capacity: rho c d over the inner layers only.

    Parameters
    ----------
    element : Element

    Returns
    -------
    float
        :math:`\sum \rho c d` from each room-facing face down to the smallest of 0.10 m, the
        first thermal-insulation layer (k <= 0.08 W m-1 K-1), and half the element thickness
        (the whole thickness for internal mass with an adiabatic back); both faces counted for
        internal mass in the room on both sides. [J m-2 K-1]

    Notes
    -----
    This is the thickness-limited rule recalled from ISO 13786:2007 Annex A (from memory); it
    ignores the damping within the counted depth, so it is an upper-side estimate of the
    matrix result from :func:`effective_areal_capacity`.
    """
    if not element.layers:
        return 0.0
    total = element.thickness_m
    one_face_limit = total if (not element.external and element.exposed_sides == 1) else total / 2

    def from_face(layers):
        depth_left = min(SIMPLE_DEPTH_LIMIT_M, one_face_limit)
        out = 0.0
        for layer in layers:
            if layer.conductivity_w_per_mk is not None and layer.conductivity_w_per_mk <= INSULATION_K_W_PER_MK:
                break
            used = min(layer.thickness_m, depth_left)
            out += layer.density_kg_per_m3 * layer.specific_heat_j_per_kgk * used
            depth_left -= used
            if depth_left <= 0:
                break
        return out

    value = from_face(element.layers)
    if not element.external and element.exposed_sides == 2:
        value += from_face(tuple(reversed(element.layers)))
    return value


# --------------------------------------------------------------------------------------------
# Biot number and the lumping error from the exact plane-wall solution
# --------------------------------------------------------------------------------------------
def biot_number(h_w_per_m2k, characteristic_length_m, conductivity_w_per_mk):
    r"""
    Biot number of a solid exchanging heat with a fluid at its surface.

    Parameters
    ----------
    h_w_per_m2k : numeric
        Surface heat-transfer coefficient. [W m-2 K-1]
    characteristic_length_m : numeric
        Volume over exposed area: the thickness for a slab with one face exposed (the other
        adiabatic), half of it with both faces exposed. [m]
    conductivity_w_per_mk : numeric
        Thermal conductivity. [W m-1 K-1]

    Returns
    -------
    numeric
        :math:`Bi = h L_c / k`; the lumped-capacitance model holds for :math:`Bi < 0.1`.

    References
    ----------
    .. [1] F. P. Incropera, D. P. DeWitt, T. L. Bergman and A. S. Lavine, Fundamentals of Heat
       and Mass Transfer, 6th ed. Wiley, 2007, ch. 5, eq. 5.10 (edition and equation number
       from memory).
    """
    return np.asarray(h_w_per_m2k, float) * np.asarray(characteristic_length_m, float) / np.asarray(
        conductivity_w_per_mk, float)


def lumped_time_constant_s(density_kg_per_m3, specific_heat_j_per_kgk, characteristic_length_m, h_w_per_m2k):
    r"""
    Time constant of a lumped solid exchanging heat at its surface.

    Parameters
    ----------
    density_kg_per_m3 : numeric
        [kg m-3]
    specific_heat_j_per_kgk : numeric
        [J kg-1 K-1]
    characteristic_length_m : numeric
        Volume over exposed surface area. [m]
    h_w_per_m2k : numeric
        Surface heat-transfer coefficient. [W m-2 K-1]

    Returns
    -------
    numeric
        :math:`\tau = \rho c L_c / h`; the lumped temperature follows
        :math:`(T - T_\infty)/(T_i - T_\infty) = e^{-t/\tau}`. [s]

    References
    ----------
    .. [1] F. P. Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., section
       5.1, eq. 5.7 (from memory).
    """
    return (np.asarray(density_kg_per_m3, float) * np.asarray(specific_heat_j_per_kgk, float)
            * np.asarray(characteristic_length_m, float) / np.asarray(h_w_per_m2k, float))


def element_biot(element):
    r"""
    Biot number of a whole element and of each of its layers.

    Parameters
    ----------
    element : Element

    Returns
    -------
    dict
        ``biot`` (element; None for a window given by U-value only), ``h_w_per_m2k`` and
        ``characteristic_length_m`` used, and ``layers``: one Biot number per layer.

    Notes
    -----
    For several layers the element uses the equivalent conductivity
    :math:`k_{eq} = d / \sum R_j`, so :math:`Bi = h\,(L_c/d) \sum R_j`: the conduction
    resistance across the characteristic length over the surface resistance. With both faces
    exposed, :math:`L_c = d/2` and :math:`h` is the mean of the two surface coefficients
    (the lumped model's time constant :math:`\rho c V / \sum h_j A_j` uses that mean).
    A layer's own number takes its thickness as :math:`L_c` and the coefficient of the nearer
    face: it tells which layer spoils the lump. A single layer on both faces gets the
    element's number.

    References
    ----------
    .. [1] F. P. Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., ch. 5
       (from memory).
    """
    if not element.layers:
        return {"biot": None, "h_w_per_m2k": None, "characteristic_length_m": None, "layers": []}
    r_total = sum(layer.thermal_resistance_m2k_per_w for layer in element.layers)
    if element.exposed_sides == 2:
        h_other = element.h_outside_w_m2k if element.external else element.h_inside_w_m2k
        h = 0.5 * (element.h_inside_w_m2k + h_other)
        fraction = 0.5
    else:
        h_other = None
        h = element.h_inside_w_m2k
        fraction = 1.0
    bi = h * fraction * r_total
    layers = []
    depth = 0.0
    total = element.thickness_m
    for layer in element.layers:
        if len(element.layers) == 1:
            layers.append(bi)
            break
        centre = depth + layer.thickness_m / 2
        near_inside = element.exposed_sides == 1 or centre <= total / 2
        h_near = element.h_inside_w_m2k if near_inside else h_other
        layers.append(h_near * layer.thermal_resistance_m2k_per_w)
        depth += layer.thickness_m
    return {"biot": bi, "h_w_per_m2k": h, "characteristic_length_m": fraction * total, "layers": layers}


def inner_leaf(element):
    r"""
    The layers between the room and the first insulating layer, and their Biot number.

    Parameters
    ----------
    element : Element

    Returns
    -------
    dict or None
        ``layers`` (names), ``thickness_m``, ``resistance_m2k_per_w``, ``biot``
        (:math:`h_i \sum R_j`, one face exposed, the insulation taken as adiabatic) and
        ``lumped_ok``; None when the element has no insulating layer with mass inside it
        (then the whole element is what a node would lump).

    Notes
    -----
    An insulating layer is a massless resistance layer or one with
    k <= 0.08 W m-1 K-1 (the ISO 13786 Annex A threshold, from memory). The inner leaf is
    what a room-side mass node of a 2R2C or 3R2C model stands for.
    """
    names, thickness, resistance = [], 0.0, 0.0
    for layer in element.layers:
        insulating = layer.conductivity_w_per_mk is None or layer.conductivity_w_per_mk <= INSULATION_K_W_PER_MK
        if insulating:
            break
        names.append(layer.name)
        thickness += layer.thickness_m
        resistance += layer.thermal_resistance_m2k_per_w
    if not names or len(names) == len(element.layers):
        return None
    bi = element.h_inside_w_m2k * resistance
    return {"layers": names, "thickness_m": thickness, "resistance_m2k_per_w": resistance,
            "biot": bi, "lumped_ok": bool(bi < LUMPED_BIOT_LIMIT)}


def plane_wall_eigenvalues(biot, n_terms=100):
    r"""
    Roots of :math:`\zeta \tan\zeta = Bi` for the plane wall with convection.

    Parameters
    ----------
    biot : float
        Biot number on the half-thickness, > 0.
    n_terms : int
        Number of roots.

    Returns
    -------
    numpy.ndarray
        :math:`\zeta_n`, one in each interval :math:`((n-1)\pi, (n-1)\pi + \pi/2)`.

    References
    ----------
    .. [1] F. P. Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., section
       5.5.1, eq. 5.39c (from memory).
    """
    if not biot > 0:
        raise ValueError(f"biot must be > 0, got {biot}")
    roots = np.empty(n_terms)
    eps = 1e-12
    for n in range(n_terms):
        lo = n * np.pi + eps
        hi = n * np.pi + np.pi / 2 - eps
        roots[n] = brentq(lambda z: z * np.sin(z) - biot * np.cos(z), lo, hi, xtol=1e-14, rtol=1e-14)
    return roots


def plane_wall_response(biot, fourier, position=None, n_terms=200, eigenvalues=None):
    r"""
    Exact step response of a plane wall cooled by convection (Fourier series).

    Parameters
    ----------
    biot : float
        :math:`h L / k` with L the half-thickness (or the thickness, back adiabatic).
    fourier : array_like
        Dimensionless time :math:`Fo = \alpha t / L^2`, > 0.
    position : float, optional
        :math:`x/L` in [0, 1] (0 the mid-plane or adiabatic face, 1 the exposed surface);
        None for the mean over the thickness.
    n_terms : int
        Terms of the series.
    eigenvalues : numpy.ndarray, optional
        Roots from :func:`plane_wall_eigenvalues` for this ``biot``, to reuse them.

    Returns
    -------
    numpy.ndarray
        :math:`\theta^* = (T - T_\infty)/(T_i - T_\infty)`.

    Notes
    -----
    :math:`\theta^* = \sum C_n e^{-\zeta_n^2 Fo} \cos(\zeta_n x^*)`,
    :math:`C_n = 4\sin\zeta_n / (2\zeta_n + \sin 2\zeta_n)`; the mean replaces
    :math:`\cos(\zeta_n x^*)` by :math:`\sin\zeta_n / \zeta_n`.

    References
    ----------
    .. [1] F. P. Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., section
       5.5.1, eqs. 5.39a-b (from memory).
    """
    zeta = plane_wall_eigenvalues(biot, n_terms) if eigenvalues is None else np.asarray(eigenvalues, float)
    coef = 4 * np.sin(zeta) / (2 * zeta + np.sin(2 * zeta))
    shape = np.sin(zeta) / zeta if position is None else np.cos(zeta * float(position))
    fo = np.atleast_1d(np.asarray(fourier, float))
    return np.exp(-np.outer(fo, zeta**2)) @ (coef * shape)


def lumping_error(biot, n_fourier=400):
    r"""
    Error of a lumped (single-node) slab against the exact plane-wall step response.

    Parameters
    ----------
    biot : float
        Biot number on the characteristic length, > 0.
    n_fourier : int
        Points in time at which the two responses are compared.

    Returns
    -------
    dict
        ``max_error_mean_pct``: largest difference between the lumped temperature
        :math:`e^{-Bi\,Fo}` and the exact mean temperature (heat stored), in % of the step;
        ``max_error_surface_pct``: the same against the exact surface temperature (which
        sets the heat exchanged with the room); ``time_constant_ratio``: lumped time constant
        over that of the slowest exact mode, :math:`\zeta_1^2 / Bi`.

    Notes
    -----
    Times run from :math:`Fo = 10^{-4}` to five lumped time constants. Computed, not
    tabulated: the exact side is :func:`plane_wall_response`.

    References
    ----------
    .. [1] F. P. Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., sections
       5.2 and 5.5 (from memory).
    """
    biot = float(biot)
    fo = np.unique(np.concatenate([np.geomspace(1e-4, 5.0 / biot, n_fourier),
                                   np.linspace(0.0, 5.0 / biot, n_fourier)[1:]]))
    lumped = np.exp(-biot * fo)
    zeta = plane_wall_eigenvalues(biot, 200)
    mean = plane_wall_response(biot, fo, eigenvalues=zeta)
    surface = plane_wall_response(biot, fo, position=1.0, eigenvalues=zeta)
    zeta1 = zeta[0]
    return {
        "biot": biot,
        "max_error_mean_pct": float(100 * np.max(np.abs(lumped - mean))),
        "max_error_surface_pct": float(100 * np.max(np.abs(lumped - surface))),
        "time_constant_ratio": float(zeta1**2 / biot),
    }


# --------------------------------------------------------------------------------------------
# Whole home
# --------------------------------------------------------------------------------------------
def air_leakage_conductance(air_changes_per_h, volume_m3, rho_c_j_per_m3k=RHO_C_AIR_J_PER_M3K):
    r"""
    Heat-loss coefficient of air leakage.

    Parameters
    ----------
    air_changes_per_h : numeric
        Air changes per hour. [h-1]
    volume_m3 : numeric
        Heated air volume. [m3]
    rho_c_j_per_m3k : float
        Volumetric heat capacity of air, 1200 by default. [J m-3 K-1]

    Returns
    -------
    numeric
        :math:`H_{ve} = \rho c \cdot ACH \cdot V / 3600`. [W K-1]

    References
    ----------
    .. [1] ISO 13790:2008, Energy performance of buildings -- Calculation of energy use for
       space heating and cooling, clause 9.3 (rho_a c_a = 1200 J m-3 K-1, from memory).
    """
    return rho_c_j_per_m3k * np.asarray(air_changes_per_h, float) * np.asarray(volume_m3, float) / 3600.0


def _element_u(element):
    if element.u_value_given_w_m2k is not None:
        return element.u_value_given_w_m2k
    r_layers = [layer.thermal_resistance_m2k_per_w for layer in element.layers]
    if element.external:
        return u_value(r_layers, 1.0 / element.h_inside_w_m2k, 1.0 / element.h_outside_w_m2k)
    # Internal partitions: R_si on both faces (ISO 6946), one face when the back is adiabatic.
    r_back = 1.0 / element.h_inside_w_m2k if element.exposed_sides == 2 else 0.0
    return u_value(r_layers, 1.0 / element.h_inside_w_m2k, r_back)


def construction_ua(construction):
    """
    Construction heat-loss coefficient of a home: transmission plus air leakage.

    Parameters
    ----------
    construction : Construction

    Returns
    -------
    dict
        ``transmission_ua_w_per_k`` (sum of U A over external elements),
        ``windows_ua_w_per_k``, ``opaque_ua_w_per_k``, ``air_leakage_w_per_k`` and
        ``ua_w_per_k`` (their total), and ``ground_ua_w_per_k`` (the part of the opaque UA
        through floors on the ground, kind ``ground_floor``). [W K-1]

    References
    ----------
    .. [1] ISO 6946:2017 (U-values); ISO 13790:2008 clauses 8 and 9 (transmission and
       ventilation heat transfer coefficients, from memory).
    """
    windows = sum(_element_u(e) * e.area_m2 for e in construction.elements if e.kind == "window")
    opaque = sum(_element_u(e) * e.area_m2 for e in construction.elements if e.external and e.kind != "window")
    ground = sum(_element_u(e) * e.area_m2 for e in construction.elements if e.kind == "ground_floor")
    leak = float(air_leakage_conductance(construction.air_changes_per_h, construction.volume_m3))
    return {
        "ground_ua_w_per_k": float(ground),
        "opaque_ua_w_per_k": float(opaque),
        "windows_ua_w_per_k": float(windows),
        "transmission_ua_w_per_k": float(opaque + windows),
        "air_leakage_w_per_k": leak,
        "ua_w_per_k": float(opaque + windows + leak),
    }


_COMPASS_DEG = {"N": 0.0, "NE": 45.0, "E": 90.0, "SE": 135.0, "S": 180.0, "SW": 225.0, "W": 270.0, "NW": 315.0}


def window_facade_weights(construction):
    """
    Weights of the four façades in the solar input, from the construction's windows.

    Parameters
    ----------
    construction : Construction

    Returns
    -------
    dict or None
        ``{"n", "e", "s", "w"}`` -> weight, with mean 1: each façade's share of the windows'
        :math:`g A` times four (a window without ``g_value`` takes the mean of those given, so
        area alone decides when none gives one). ``None`` when no
        vertical window has an orientation.

    Notes
    -----
    Solar gains through windows are computed per orientation (ISO 13790:2008, clause 11.3;
    from memory): the gain of a façade is its windows' :math:`g A` times the irradiance on it.
    A window between two compass points (NE, or an azimuth) is shared between its two
    neighbouring façades in proportion to the angle; horizontal windows (roof lights) are left
    out, since the input is the irradiance on vertical walls.
    """
    windows = [e for e in construction.elements if e.kind == "window" and e.orientation not in (None, "horizontal")]
    if not windows:
        return None
    given = [e.g_value for e in windows if e.g_value is not None]
    # A window without a g-value counts with the mean of those given (all alike when none is).
    g_default = float(np.mean(given)) if given else 1.0
    return facade_weights(
        (_COMPASS_DEG[e.orientation] if isinstance(e.orientation, str) else float(e.orientation),
         e.area_m2 * (e.g_value if e.g_value is not None else g_default))
        for e in windows
    )


def facade_weights(windows):
    """
    Weights of the four façades in the solar input, from windows given by azimuth and size.

    Parameters
    ----------
    windows : iterable of (float, float)
        ``(azimuth_deg, weight)`` per window: azimuth clockwise from north [deg], weight its
        :math:`g A` or area [m²].

    Returns
    -------
    dict or None
        ``{"n", "e", "s", "w"}`` -> weight with mean 1; a window between two compass points is
        shared between its two neighbouring façades in proportion to the angle. ``None`` when
        the weights add up to nothing.
    """
    share = dict.fromkeys("nesw", 0.0)
    for azimuth, weight in windows:
        azimuth = float(azimuth) % 360.0
        low = int(azimuth // 90.0) % 4
        frac = (azimuth - 90.0 * (azimuth // 90.0)) / 90.0
        share["nesw"[low]] += weight * (1.0 - frac)
        share["nesw"[(low + 1) % 4]] += weight * frac
    total = sum(share.values())
    if total <= 0:
        return None
    return {f: 4.0 * v / total for f, v in share.items()}


# Choices of this module, stated where they are used in the text of the recommendations.
# An element holding less than this share of the home's effective capacity does not need its
# own node even when it cannot be lumped (our choice).
_SIGNIFICANT_CAPACITY_SHARE = 0.05
# Time-scale separation needed for a faster node to be merged into a slower one (our choice,
# the same one-decade margin as the Biot criterion).
_TIME_SCALE_SEPARATION = 0.1
# Share of UA through windows and air leakage above which the direct indoor-outdoor path is
# kept as its own resistance (our choice).
_DIRECT_PATH_SHARE = 0.2


@dataclass
class ElementReport:
    """What :func:`analyse_construction` found for one element (SI units in the names)."""

    name: str
    kind: str
    area_m2: float
    exposed_sides: int
    heat_flow: str
    h_inside_w_m2k: float
    h_outside_w_m2k: float | None
    u_value_w_m2k: float | None
    ua_w_per_k: float
    areal_capacity_j_m2k: float
    effective_areal_capacity_j_m2k: float
    effective_areal_capacity_simple_j_m2k: float
    effective_capacity_j_per_k: float
    penetration_depth_m: float | None
    thickness_over_penetration: float | None
    biot: float | None
    lumped_ok: bool | None
    lumped_time_constant_h: float | None
    lumping_error: dict | None
    inner_leaf: dict | None = None
    coupling_resistance_m2k_per_w: float | None = None
    layers: list = field(default_factory=list)
    recommendation: str = ""

    def to_dict(self):
        """Plain dict for BIOT.json."""
        return dict(self.__dict__)


def _element_report(element):
    u = _element_u(element)
    ua = u * element.area_m2 if element.external else 0.0
    kappa = effective_areal_capacity(element)
    kappa_simple = thickness_limited_capacity(element)
    bi = element_biot(element)
    layers = []
    xi_total = 0.0
    for layer, layer_bi in zip(element.layers, bi["layers"]):
        alpha = layer.diffusivity_m2_per_s
        delta = None if alpha is None else float(penetration_depth(alpha))
        xi = None if delta is None else layer.thickness_m / delta
        xi_total += xi or 0.0
        layers.append({
            "name": layer.name,
            "material": layer.material,
            "thickness_m": layer.thickness_m,
            "conductivity_w_per_mk": layer.conductivity_w_per_mk,
            "density_kg_per_m3": layer.density_kg_per_m3,
            "specific_heat_j_per_kgk": layer.specific_heat_j_per_kgk,
            "thermal_resistance_m2k_per_w": layer.thermal_resistance_m2k_per_w,
            "areal_capacity_j_m2k": layer.areal_capacity_j_m2k,
            "diffusivity_m2_per_s": alpha,
            "penetration_depth_m": delta,
            "thickness_over_penetration": xi,
            "biot": layer_bi,
            "lumped_ok": bool(layer_bi < LUMPED_BIOT_LIMIT),
            "source": layer.source,
            "confidence": layer.confidence,
        })
    inner = next((lr for lr in layers if lr["penetration_depth_m"] is not None), None)
    leaf = inner_leaf(element) if element.layers else None
    if leaf is not None:
        leaf["lumping_error"] = lumping_error(leaf["biot"])
    # Air-to-mass resistance of a room-side node: the surface film plus half the conduction
    # resistance of what the node lumps (the inner leaf, or the element to its mid-plane).
    coupling = None
    if element.layers:
        if leaf is not None:
            r_mass = leaf["resistance_m2k_per_w"]
        else:
            r_mass = sum(lr.thermal_resistance_m2k_per_w for lr in element.layers) * (
                0.5 if element.exposed_sides == 2 else 1.0)
        coupling = 1.0 / element.h_inside_w_m2k + 0.5 * r_mass
    return ElementReport(
        name=element.name,
        kind=element.kind,
        area_m2=element.area_m2,
        exposed_sides=element.exposed_sides,
        heat_flow=element.heat_flow,
        h_inside_w_m2k=element.h_inside_w_m2k,
        h_outside_w_m2k=element.h_outside_w_m2k,
        u_value_w_m2k=u,
        ua_w_per_k=ua,
        areal_capacity_j_m2k=sum(lr.areal_capacity_j_m2k for lr in element.layers),
        effective_areal_capacity_j_m2k=kappa,
        effective_areal_capacity_simple_j_m2k=kappa_simple,
        effective_capacity_j_per_k=kappa * element.area_m2,
        penetration_depth_m=None if inner is None else inner["penetration_depth_m"],
        thickness_over_penetration=xi_total if layers else None,
        biot=bi["biot"],
        lumped_time_constant_h=None if bi["biot"] is None else float(
            sum(lr.areal_capacity_j_m2k for lr in element.layers) * bi["characteristic_length_m"]
            / max(element.thickness_m, 1e-300) / bi["h_w_per_m2k"] / 3600.0),
        lumped_ok=None if bi["biot"] is None else bool(bi["biot"] < LUMPED_BIOT_LIMIT),
        lumping_error=None if bi["biot"] is None else lumping_error(bi["biot"]),
        inner_leaf=leaf,
        coupling_resistance_m2k_per_w=coupling,
        layers=layers,
    )


def _pct(x):
    return f"{x:.1f} %" if x >= 0.1 else f"{x:.2g} %"


def analyse_construction(construction, timestep_s=3600.0):
    """
    Everything the Biot check reports for a construction.

    Parameters
    ----------
    construction : Construction
    timestep_s : float
        Interval of the logs the model will be calibrated on; one hour by default. A mass
        that follows the room air within one interval (and within a tenth of the home's
        time constant) can share the air's node. [s]

    Returns
    -------
    dict
        ``elements`` (one dict per element: U-value, capacities, penetration depth, Biot
        number and verdict, lumping error, per-layer detail, recommendation), ``whole_home``
        (construction UA with air leakage apart, effective capacity, time constant),
        ``recommendation`` (preset, elements needing their own node, plain-words text),
        ``cautions``. Ready for :func:`thermorc.write.write_json`.

    References
    ----------
    .. [1] ISO 6946:2017; ISO 13786:2017; ISO 13790:2008 (from memory).
    .. [2] F. P. Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., ch. 5
       (from memory).
    """
    reports = [_element_report(e) for e in construction.elements]
    ua = construction_ua(construction)
    c_air = RHO_C_AIR_J_PER_M3K * construction.volume_m3
    c_eff = sum(r.effective_capacity_j_per_k for r in reports)
    c_total = c_eff + c_air
    tau_s = c_total / ua["ua_w_per_k"] if ua["ua_w_per_k"] > 0 else float("inf")

    own_node = []
    for r in reports:
        share = r.effective_capacity_j_per_k / c_total if c_total > 0 else 0.0
        if r.biot is None:
            r.recommendation = "massless (given by U-value): joins the transmission conductance, no node needed."
            continue
        err = r.lumping_error
        err_text = (f"a single node for it misstates its step response by up to {_pct(err['max_error_mean_pct'])} "
                    f"of the step (stored heat) and {_pct(err['max_error_surface_pct'])} (surface temperature); "
                    f"its lumped time constant is {err['time_constant_ratio']:.2f} x the slowest exact one")
        leaf = r.inner_leaf
        leaf_text = ""
        if leaf is not None:
            verdict = "can" if leaf["lumped_ok"] else "cannot"
            leaf_text = (f" Its inner leaf ({', '.join(leaf['layers'])}, room side of the first insulating layer) has "
                         f"Bi = {leaf['biot']:.3g} and {verdict} be lumped into a room-side mass node "
                         f"(lumping error up to {_pct(leaf['lumping_error']['max_error_mean_pct'])}).")
        if r.lumped_ok:
            r.recommendation = f"Bi = {r.biot:.3g} < 0.1: can be lumped into one node; {err_text}."
        elif share >= _SIGNIFICANT_CAPACITY_SHARE:
            own_node.append(r.name)
            bad = [lr["name"] for lr in r.layers if not lr["lumped_ok"]]
            if len(r.layers) > 1 and len(bad) < len(r.layers):
                split = f"or split it into layers, with more than one node for {', '.join(bad)}"
            elif len(r.layers) > 1:
                split = "or split it into layers; each layer fails Bi < 0.1 on its own too, so some need more than one node"
            else:
                split = "or split it into two or more nodes through its thickness"
            r.recommendation = (f"Bi = {r.biot:.3g} >= 0.1 and it holds {100 * share:.0f} % of the home's daily "
                                f"effective capacity: give it its own node, {split}; {err_text}.{leaf_text}")
        else:
            r.recommendation = (f"Bi = {r.biot:.3g} >= 0.1, but it holds only {100 * share:.1f} % of the home's "
                                f"daily effective capacity: its resistance matters, its lumping error little; "
                                f"{err_text}.{leaf_text}")

    # Model structure from time scales: can the mass follow the room air (1R1C), is there a
    # direct path past the mass worth its own resistance (3R2C), else 2R2C.
    massive = [r for r in reports if r.effective_capacity_j_per_k > 0]
    g_surface = sum(r.area_m2 * (2 if (r.exposed_sides == 2 and r.kind == "internal_mass") else 1)
                    / r.coupling_resistance_m2k_per_w for r in massive)
    c_mass = sum(r.effective_capacity_j_per_k for r in massive)
    tau_coupling_s = c_mass / g_surface if g_surface > 0 else 0.0
    direct_share = (ua["windows_ua_w_per_k"] + ua["air_leakage_w_per_k"]) / ua["ua_w_per_k"]
    text = []
    if tau_coupling_s <= min(_TIME_SCALE_SEPARATION * tau_s, timestep_s):
        preset = "1R1C"
        text.append(f"The mass follows the room air in about {tau_coupling_s / 3600:.2g} h, within one "
                    f"{timestep_s / 3600:.3g} h log interval and under a tenth of the home's time constant "
                    f"({tau_s / 3600:.3g} h): one node (1R1C) can represent air and structure together.")
    elif direct_share >= _DIRECT_PATH_SHARE:
        preset = "3R2C"
        text.append(f"The mass needs {tau_coupling_s / 3600:.2g} h to follow the room air against a home time "
                    f"constant of {tau_s / 3600:.3g} h, so air and structure need separate nodes; windows and "
                    f"air leakage carry {100 * direct_share:.0f} % of UA straight from the air to outdoors, "
                    "a path 3R2C keeps and 2R2C does not.")
    else:
        preset = "2R2C"
        text.append(f"The mass needs {tau_coupling_s / 3600:.2g} h to follow the room air against a home time "
                    f"constant of {tau_s / 3600:.3g} h, so air and structure need separate nodes (2R2C); windows "
                    f"and air leakage carry only {100 * direct_share:.0f} % of UA.")
    if own_node:
        text.append("Elements that cannot be lumped and hold much of the capacity: " + ", ".join(own_node)
                    + ". A lumped mass node stands in for them only as a fitted (grey-box) value, not a "
                    "conduction-exact one; expect its capacitance to differ from the construction figure.")
    else:
        text.append("Every element that stores much heat passes the Biot criterion.")
    text.append("The lumping error is the largest difference between a single-node slab and the exact "
                "plane-wall solution after a step change of the surrounding air, in % of the step.")

    return {
        "construction": construction.name,
        "source_file": None if construction.path is None else os.path.basename(construction.path),
        "floor_area_m2": construction.floor_area_m2,
        "volume_m3": construction.volume_m3,
        "elements": [r.to_dict() for r in reports],
        "whole_home": {
            **ua,
            "air_changes_per_h": construction.air_changes_per_h,
            "rho_c_air_j_per_m3k": RHO_C_AIR_J_PER_M3K,
            "air_capacity_j_per_k": c_air,
            "effective_capacity_j_per_k": c_total,
            "time_constant_h": tau_s / 3600.0,
            "mass_air_coupling_time_h": tau_coupling_s / 3600.0,
            "direct_path_share": direct_share,
            "timestep_h": timestep_s / 3600.0,
        },
        "recommendation": {"preset": preset, "own_node": own_node, "text": text},
        "method": {
            "u_value": "ISO 6946: R_si (0.10 up, 0.13 horizontal, 0.17 down) + sum d/k + R_se (0.04)",
            "effective_capacity": "ISO 13786 heat-transfer matrices, period 24 h, surface resistances included",
            "effective_capacity_simple": "thickness-limited rule (ISO 13786:2007 Annex A, from memory)",
            "biot": "Bi = h L / k, L = thickness (one face exposed) or half of it (both), lumped_ok when Bi < 0.1",
            "lumping_error": "exact plane-wall Fourier series against the lumped exponential",
            "air_leakage": "H_ve = 1200 J m-3 K-1 x ACH x V / 3600",
        },
        "cautions": [
            "Construction UA is a design estimate: measured whole-home heat loss is often higher "
            "(Johnston et al. 2015 found 1.6 x for UK new builds). Do not size heating from it alone; "
            "follow local codes and a licensed professional for sizing and for freeze protection.",
            "Ground floors use ISO 6946 with the external surface resistance; the ground itself "
            "(ISO 13370) and thermal bridges are not modelled.",
        ],
    }
