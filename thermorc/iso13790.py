r"""
The ISO 13790:2008 simple hourly method (5R1C) as a thermorc network, and plausibility checks.

The simple hourly method of ISO 13790:2008 (clause 7.2.2 and Annex C) models a zone with one
heat capacity :math:`C_m` and five conductances between the air node :math:`\theta_{air}`,
a central (surface) node :math:`\theta_s`, the mass node :math:`\theta_m` and outdoors:

======================  =================  ==========================================
conductance             between            from
======================  =================  ==========================================
:math:`H_{ve}`          air - outdoor      air leakage, :math:`\rho_a c_a q`
:math:`H_{tr,is}`       air - surface      :math:`h_{is} A_t`, :math:`A_t = 4.5 A_f`
:math:`H_{tr,w}`        surface - outdoor  windows, :math:`\sum U_w A_w` (massless)
:math:`H_{tr,ms}`       surface - mass     :math:`h_{ms} A_m`
:math:`H_{tr,em}`       mass - outdoor     :math:`1/(1/H_{tr,op} - 1/H_{tr,ms})`
======================  =================  ==========================================

with :math:`h_{is} = 3.45` and :math:`h_{ms} = 9.1` W m-2 K-1. Gains are split as in Annex C
(eqs. C.1-C.3): half the internal gains to the air node, the rest and the solar gains to the
mass and surface nodes in the ratios :math:`A_m/A_t` and
:math:`1 - A_m/A_t - H_{tr,w}/(h_{ms} A_t)`. That split does not add up to one: the share
:math:`H_{tr,w}/(h_{ms} A_t)` of the radiant gains is taken as lost through the windows, as
in the standard. Heating goes wholly to the air node (convective).

All constants here and the Table 12 classes are recalled from ISO 13790:2008 (from memory; the
very-heavy class is 370 kJ m-2 K-1 here, while Corrado, Mechri and Fabrizio (2007), working
from the FDIS, list 380).

The air node is massless, as in the standard; ``air_capacitance_j_per_k`` can add the air's own
capacity for comparison with a calibrated indoor node. The air node is named ``indoor`` so the
network plugs into thermorc's simulation and heat-loss functions like the presets do.

References
----------
.. [1] ISO 13790:2008, Energy performance of buildings -- Calculation of energy use for space
   heating and cooling, clause 7.2.2, clause 12.2 and Annex C (from memory).
.. [2] V. Corrado, H. E. Mechri and E. Fabrizio, "Building energy performance assessment
   through simplified models: application of the ISO 13790 quasi-steady state method," Proc.
   Building Simulation 2007, Beijing, 2007.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np

from thermorc.construction import construction_ua, effective_areal_capacity
from thermorc.errors import InputError
from thermorc.network import Network

#: Relative standard uncertainty given to a construction's UA (our assumption, not a
#: published figure; used for plausibility and as the calibration prior's width).
CONSTRUCTION_UA_REL_UNCERTAINTY = 0.2

__all__ = [
    "H_IS_W_PER_M2K",
    "H_MS_W_PER_M2K",
    "LAMBDA_AT",
    "TABLE_12",
    "Iso13790Parameters",
    "parameters_from_construction",
    "gain_split",
    "build_network",
    "network_from_construction",
    "capacity_class",
    "plausibility",
    "plausibility_details",
]

# ISO 13790:2008, 7.2.2.2 and 12.2.2 (from memory).
H_IS_W_PER_M2K = 3.45
H_MS_W_PER_M2K = 9.1
LAMBDA_AT = 4.5

# ISO 13790:2008 Table 12, default internal heat capacity per m2 of floor area (from memory):
# class -> (A_m / A_f, C_m / A_f [J m-2 K-1]). Very heavy: 370 000 here, 380 000 in
# Corrado et al. (2007) from the FDIS; the published 2008 text should settle it.
TABLE_12 = {
    "very light": (2.5, 80_000.0),
    "light": (2.5, 110_000.0),
    "medium": (2.5, 165_000.0),
    "heavy": (3.0, 260_000.0),
    "very heavy": (3.5, 370_000.0),
}

OUTDOOR = "outdoor_c"
CHANNELS = ("heating_w", "solar_w_m2", "internal_w")


@dataclass(frozen=True)
class Iso13790Parameters:
    """
    Inputs of the 5R1C network (SI units in the names).

    Attributes
    ----------
    floor_area_m2, a_t_m2, a_m_m2 : float
        Conditioned floor area A_f, total internal surface area A_t = 4.5 A_f, effective mass
        area A_m. [m2]
    c_m_j_per_k : float
        Internal heat capacity. [J K-1]
    h_ve_w_per_k, h_tr_is_w_per_k, h_tr_w_w_per_k, h_tr_ms_w_per_k, h_tr_em_w_per_k,
    h_tr_op_w_per_k : float
        Conductances of the network, and the opaque transmission they stand for. [W K-1]
    solar_aperture_m2 : float
        Solar gain per unit of the ``solar_w_m2`` channel. [m2]
    capacity_source : str
        ``"construction"`` (ISO 13786 areal capacities) or a Table 12 class name.
    """

    floor_area_m2: float
    a_t_m2: float
    a_m_m2: float
    c_m_j_per_k: float
    h_ve_w_per_k: float
    h_tr_is_w_per_k: float
    h_tr_w_w_per_k: float
    h_tr_ms_w_per_k: float
    h_tr_em_w_per_k: float
    h_tr_op_w_per_k: float
    solar_aperture_m2: float
    capacity_source: str

    @property
    def h_tr_1_w_per_k(self):
        """H_tr,1 = 1/(1/H_ve + 1/H_tr,is) (Annex C, C.6). [W K-1]"""
        return _series(self.h_ve_w_per_k, self.h_tr_is_w_per_k)

    @property
    def h_tr_2_w_per_k(self):
        """H_tr,2 = H_tr,1 + H_tr,w (Annex C, C.7). [W K-1]"""
        return self.h_tr_1_w_per_k + self.h_tr_w_w_per_k

    @property
    def h_tr_3_w_per_k(self):
        """H_tr,3 = 1/(1/H_tr,2 + 1/H_tr,ms) (Annex C, C.8). [W K-1]"""
        return _series(self.h_tr_2_w_per_k, self.h_tr_ms_w_per_k)

    @property
    def time_constant_s(self):
        """C_m / (H_tr,em + H_tr,3): the single time constant of the network. [s]"""
        return self.c_m_j_per_k / (self.h_tr_em_w_per_k + self.h_tr_3_w_per_k)

    def to_dict(self):
        """Plain dict, with the derived conductances and the time constant in hours."""
        out = asdict(self)
        out.update(h_tr_1_w_per_k=self.h_tr_1_w_per_k, h_tr_2_w_per_k=self.h_tr_2_w_per_k,
                   h_tr_3_w_per_k=self.h_tr_3_w_per_k, time_constant_h=self.time_constant_s / 3600.0)
        return out


def _series(a, b):
    return 0.0 if a <= 0 or b <= 0 else 1.0 / (1.0 / a + 1.0 / b)


def parameters_from_construction(construction, capacity_class=None, solar_aperture_m2=None):
    r"""
    Conductances and capacity of the ISO 13790 5R1C network of a construction.

    Parameters
    ----------
    construction : thermorc.construction.Construction
    capacity_class : str, optional
        A Table 12 class (``"very light"`` ... ``"very heavy"``) for A_m and C_m; by default
        they come from the elements (ISO 13790 12.3.1.1, detailed method):
        :math:`C_m = \sum \kappa_j A_j`, :math:`A_m = C_m^2 / \sum A_j \kappa_j^2`, with
        :math:`\kappa_j` the ISO 13786 room-side areal heat capacity of each face.
    solar_aperture_m2 : float, optional
        Solar gain per W m-2 of the ``solar_w_m2`` channel; by default the sum of g A over
        windows with a ``g_value`` (frame, shading and incidence angle not modelled). [m2]

    Returns
    -------
    Iso13790Parameters

    Raises
    ------
    InputError
        Unknown class, or a construction whose opaque transmission reaches H_tr,ms (then
        H_tr,em would be negative and the network is not physical).

    References
    ----------
    .. [1] ISO 13790:2008, clauses 7.2.2.2, 8.3, 9.3, 12.2.2, 12.3.1 (from memory).
    .. [2] ISO 13786:2017, areal heat capacity (from memory).
    """
    a_f = construction.floor_area_m2
    a_t = LAMBDA_AT * a_f
    if capacity_class is None:
        c_m = 0.0
        sum_a_k2 = 0.0
        for element in construction.elements:
            if not element.layers:
                continue
            kappa = effective_areal_capacity(element)
            faces = 2 if (not element.external and element.exposed_sides == 2) else 1
            kappa_face = kappa / faces
            c_m += kappa * element.area_m2
            sum_a_k2 += faces * element.area_m2 * kappa_face**2
        if c_m <= 0:
            raise InputError("the construction has no heat capacity (give layers, or choose a Table 12 class)",
                             path=construction.path, column="elements")
        a_m = c_m**2 / sum_a_k2
        source = "construction"
    else:
        key = str(capacity_class).strip().lower().replace("_", " ").replace("-", " ")
        if key not in TABLE_12:
            raise InputError(f"unknown capacity class {capacity_class!r} (expected one of {', '.join(TABLE_12)})",
                             column="capacity_class")
        ratio, per_m2 = TABLE_12[key]
        a_m, c_m, source = ratio * a_f, per_m2 * a_f, key
    ua = construction_ua(construction)
    h_tr_ms = H_MS_W_PER_M2K * a_m
    h_tr_op = ua["opaque_ua_w_per_k"]
    if h_tr_op >= h_tr_ms:
        raise InputError(
            f"opaque transmission {h_tr_op:.4g} W/K is not below H_tr,ms = {h_tr_ms:.4g} W/K, so the 5R1C "
            "network has no physical H_tr,em (expected a far smaller UA for this floor area)",
            path=construction.path, column="elements")
    h_tr_em = 1.0 / (1.0 / h_tr_op - 1.0 / h_tr_ms) if h_tr_op > 0 else 0.0
    if solar_aperture_m2 is None:
        solar_aperture_m2 = sum((e.g_value or 0.0) * e.area_m2 for e in construction.elements if e.kind == "window")
    return Iso13790Parameters(
        floor_area_m2=a_f,
        a_t_m2=a_t,
        a_m_m2=a_m,
        c_m_j_per_k=c_m,
        h_ve_w_per_k=ua["air_leakage_w_per_k"],
        h_tr_is_w_per_k=H_IS_W_PER_M2K * a_t,
        h_tr_w_w_per_k=ua["windows_ua_w_per_k"],
        h_tr_ms_w_per_k=h_tr_ms,
        h_tr_em_w_per_k=h_tr_em,
        h_tr_op_w_per_k=h_tr_op,
        solar_aperture_m2=float(solar_aperture_m2),
        capacity_source=source,
    )


def gain_split(params):
    """
    Shares of the Annex C gain split.

    Parameters
    ----------
    params : Iso13790Parameters

    Returns
    -------
    dict
        ``air``, ``mass``, ``surface``: the fraction of internal gains into each node; solar
        gains go to mass and surface only, in the ratio of ``mass_radiant`` and
        ``surface_radiant``.

    References
    ----------
    .. [1] ISO 13790:2008, Annex C, eqs. C.1-C.3 (from memory).
    """
    mass = params.a_m_m2 / params.a_t_m2
    surface = 1.0 - mass - params.h_tr_w_w_per_k / (H_MS_W_PER_M2K * params.a_t_m2)
    if surface < 0:
        raise InputError(f"the Annex C surface share is negative ({surface:.3g}): A_m and window UA are too "
                         "large for the floor area", column="floor_area_m2")
    return {"air": 0.5, "mass": 0.5 * mass, "surface": 0.5 * surface,
            "mass_radiant": mass, "surface_radiant": surface}


def build_network(params, air_capacitance_j_per_k=0.0):
    """
    The 5R1C network of ISO 13790:2008 as a :class:`thermorc.network.Network`.

    Parameters
    ----------
    params : Iso13790Parameters
    air_capacitance_j_per_k : float
        Heat capacity of the air node; 0 (the standard's massless air node) by default.
        [J K-1]

    Returns
    -------
    thermorc.network.Network
        Nodes ``indoor`` (ISO's air node), ``surface`` (massless), ``mass`` (C_m); boundary
        ``outdoor_c`` (supply air taken at outdoor temperature); channels ``heating_w`` (to
        the air node), ``solar_w_m2`` (times the aperture, split to mass and surface) and
        ``internal_w`` (Annex C split).

    References
    ----------
    .. [1] ISO 13790:2008, clause 7.2.2 and Annex C (from memory).
    """
    split = gain_split(params)
    net = Network(boundaries=(OUTDOOR,), inputs=CHANNELS, name="ISO 13790 5R1C")
    net.add_node("indoor", air_capacitance_j_per_k)
    net.add_node("surface", 0.0)
    net.add_node("mass", params.c_m_j_per_k)
    for a, b, g in (("indoor", OUTDOOR, params.h_ve_w_per_k), ("indoor", "surface", params.h_tr_is_w_per_k),
                    ("surface", OUTDOOR, params.h_tr_w_w_per_k), ("surface", "mass", params.h_tr_ms_w_per_k),
                    ("mass", OUTDOOR, params.h_tr_em_w_per_k)):
        if g > 0:  # a construction without windows or air leakage has no such path
            net.add_conductance(a, b, g)
    net.add_heat_input("heating_w", "indoor", 1.0)
    net.add_heat_input("internal_w", "indoor", split["air"])
    net.add_heat_input("internal_w", "mass", split["mass"])
    net.add_heat_input("internal_w", "surface", split["surface"])
    net.add_heat_input("solar_w_m2", "mass", params.solar_aperture_m2 * split["mass_radiant"])
    net.add_heat_input("solar_w_m2", "surface", params.solar_aperture_m2 * split["surface_radiant"])
    return net


def network_from_construction(construction, capacity_class=None, air_capacitance_j_per_k=0.0):
    """
    Shortcut: :func:`parameters_from_construction` then :func:`build_network`.

    Parameters
    ----------
    construction : thermorc.construction.Construction
    capacity_class : str, optional
        Table 12 class instead of the elements' capacities.
    air_capacitance_j_per_k : float
        Heat capacity of the air node (0 in the standard). [J K-1]

    Returns
    -------
    network : thermorc.network.Network
    params : Iso13790Parameters

    References
    ----------
    .. [1] ISO 13790:2008, clause 7.2.2 and Annex C (from memory).
    """
    params = parameters_from_construction(construction, capacity_class)
    return build_network(params, air_capacitance_j_per_k), params


def _class_edges():
    values = [v for _, v in TABLE_12.values()]
    inner = [(a + b) / 2 for a, b in zip(values, values[1:])]
    low = values[0] - (inner[0] - values[0])
    high = values[-1] + (values[-1] - inner[-1])
    return low, inner, high


def capacity_class(capacitance_j_per_k, floor_area_m2):
    """
    Which ISO 13790 Table 12 class a heat capacity per floor area falls in.

    Parameters
    ----------
    capacitance_j_per_k : float
        Heat capacity of the home. [J K-1]
    floor_area_m2 : float
        Conditioned floor area, > 0. [m2]

    Returns
    -------
    dict
        ``c_per_floor_area_j_per_m2k``, ``class`` (nearest class, class edges half-way between
        the Table 12 values), ``class_value_j_per_m2k``, ``ratio_to_class`` and
        ``within_table``: False below very light or above very heavy by more than half the
        neighbouring class gap (our choice of span), where the value is implausible for a
        home.

    References
    ----------
    .. [1] ISO 13790:2008, Table 12 (from memory; very heavy 370 vs 380 kJ m-2 K-1 conflict
       noted in the module docstring).
    """
    if not (floor_area_m2 > 0 and math.isfinite(floor_area_m2)):
        raise InputError(f"floor area {floor_area_m2!r} is not positive (expected m2 > 0)", column="floor_area_m2")
    if not (capacitance_j_per_k > 0 and math.isfinite(capacitance_j_per_k)):
        raise InputError(f"capacitance {capacitance_j_per_k!r} is not positive (expected J/K > 0)",
                         column="capacitance_j_per_k")
    per_m2 = capacitance_j_per_k / floor_area_m2
    low, inner, high = _class_edges()
    names = list(TABLE_12)
    index = int(np.searchsorted(inner, per_m2))
    name = names[index]
    value = TABLE_12[name][1]
    return {
        "c_per_floor_area_j_per_m2k": per_m2,
        "class": name,
        "class_value_j_per_m2k": value,
        "ratio_to_class": per_m2 / value,
        "within_table": bool(low <= per_m2 <= high),
    }


def plausibility_details(calibrated_ua_w_per_k, calibrated_capacitance_j_per_k, ua_std, construction,
                         construction_ua_rel_uncertainty=CONSTRUCTION_UA_REL_UNCERTAINTY):
    r"""
    Compare a calibrated UA and capacitance with what the construction says.

    Parameters
    ----------
    calibrated_ua_w_per_k : float
        Heat-loss coefficient of the calibrated model. [W K-1]
    calibrated_capacitance_j_per_k : float
        Its total heat capacity. [J K-1]
    ua_std : float
        Standard error of the calibrated UA. [W K-1]
    construction : thermorc.construction.Construction
    construction_ua_rel_uncertainty : float
        Relative standard uncertainty given to the construction UA; 0.2 by default, an
        assumption of ours, not a published figure (measured whole-home heat loss has been
        found 1.6 times the design value on average in UK new builds, Johnston et al. 2015).

    Returns
    -------
    dict
        ``construction_ua_w_per_k``, ``ua_difference_w_per_k``, ``ua_combined_std_w_per_k``,
        ``ua_z``, the capacity classes of the calibrated model and of the construction,
        and ``warnings`` (list of str; empty when nothing disagrees).

    Notes
    -----
    UA disagrees when :math:`|UA_{cal} - UA_{con}| > 2 \sigma` with
    :math:`\sigma = \sqrt{\sigma_{cal}^2 + (r\,UA_{con})^2}` (about 95 % for normal errors).
    The capacitance disagrees when it falls outside the Table 12 span, or more than one
    class away from the construction's own class.

    References
    ----------
    .. [1] ISO 13790:2008, Table 12 (from memory).
    .. [2] D. Johnston, D. Miles-Shenton and D. Farmer, "Quantifying the domestic building
       fabric 'performance gap'," Building Serv. Eng. Res. Technol., vol. 36, no. 5,
       pp. 614-627, 2015, doi:10.1177/0143624415570344.
    """
    for name, value in (("calibrated_ua_w_per_k", calibrated_ua_w_per_k), ("ua_std", ua_std),
                        ("calibrated_capacitance_j_per_k", calibrated_capacitance_j_per_k)):
        if not (isinstance(value, (int, float, np.floating)) and math.isfinite(value) and value >= 0):
            raise InputError(f"{value!r} is not a finite number >= 0", column=name)
    ua_con = construction_ua(construction)["ua_w_per_k"]
    sigma = math.hypot(ua_std, construction_ua_rel_uncertainty * ua_con)
    diff = calibrated_ua_w_per_k - ua_con
    z = diff / sigma if sigma > 0 else math.inf * np.sign(diff)
    warnings = []
    if abs(diff) > 2 * sigma:
        if diff > 0:
            why = ("air leakage above the stated ach, thermal bridges, ground or party-wall losses, or a "
                   "fabric performance gap")
        else:
            why = ("heat the log does not record (other heaters, a stove, occupants, solar gains taken up "
                   "by the fit), or a construction file with less insulation than built")
        warnings.append(
            f"calibrated UA {calibrated_ua_w_per_k:.0f} W/K differs from the construction UA {ua_con:.0f} W/K "
            f"(incl. air leakage) by {diff:+.0f} W/K, more than twice the combined uncertainty "
            f"{sigma:.0f} W/K; possible causes: {why}.")
    cal_class = construction_class = None
    if calibrated_capacitance_j_per_k > 0:
        cal_class = capacity_class(calibrated_capacitance_j_per_k, construction.floor_area_m2)
        try:
            con_params = parameters_from_construction(construction)
            construction_class = capacity_class(con_params.c_m_j_per_k, construction.floor_area_m2)
        except InputError:
            construction_class = None
        per = cal_class["c_per_floor_area_j_per_m2k"] / 1000.0
        low, _, high = _class_edges()
        if not cal_class["within_table"]:
            warnings.append(
                f"calibrated capacitance {calibrated_capacitance_j_per_k / 1e6:.3g} MJ/K is "
                f"{per:.0f} kJ/(m2 K) of floor area, beyond the ISO 13790 Table 12 classes "
                f"(80 to 370 kJ/(m2 K), span taken as {low / 1000:.0f} to {high / 1000:.0f}); the fitted C is "
                "likely not physical (too short a log, or heat input timing the model cannot follow).")
        if construction_class is not None:
            names = list(TABLE_12)
            gap = abs(names.index(cal_class["class"]) - names.index(construction_class["class"]))
            if gap > 1:
                warnings.append(
                    f"calibrated capacitance is in the '{cal_class['class']}' class ({per:.0f} kJ/(m2 K)), "
                    f"the construction in '{construction_class['class']}' "
                    f"({construction_class['c_per_floor_area_j_per_m2k'] / 1000:.0f} kJ/(m2 K)); a lumped C "
                    "is a fitted value, but more than one class apart suggests the fit or the construction "
                    "file is off.")
    else:
        warnings.append("calibrated capacitance is zero: no capacity class to compare.")
    return {
        "construction_ua_w_per_k": ua_con,
        "calibrated_ua_w_per_k": float(calibrated_ua_w_per_k),
        "ua_difference_w_per_k": diff,
        "ua_combined_std_w_per_k": sigma,
        "ua_z": z,
        "calibrated_capacity_class": cal_class,
        "construction_capacity_class": construction_class,
        "warnings": warnings,
    }


def plausibility(calibrated_ua_w_per_k, calibrated_capacitance_j_per_k, ua_std, construction,
                 construction_ua_rel_uncertainty=CONSTRUCTION_UA_REL_UNCERTAINTY):
    """
    Warnings where a calibration disagrees with the construction.

    Parameters
    ----------
    calibrated_ua_w_per_k : float
        Heat-loss coefficient of the calibrated model. [W K-1]
    calibrated_capacitance_j_per_k : float
        Its total heat capacity. [J K-1]
    ua_std : float
        Standard error of the calibrated UA. [W K-1]
    construction : thermorc.construction.Construction
    construction_ua_rel_uncertainty : float
        Relative standard uncertainty of the construction UA (default 0.2, our assumption).

    Returns
    -------
    list of str
        One sentence per disagreement; empty when the two agree.

    References
    ----------
    .. [1] ISO 13790:2008, Table 12 (from memory). See :func:`plausibility_details`.
    """
    return plausibility_details(calibrated_ua_w_per_k, calibrated_capacitance_j_per_k, ua_std, construction,
                                construction_ua_rel_uncertainty)["warnings"]
