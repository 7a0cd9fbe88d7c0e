r"""
Thermal RC networks: nodes with heat capacity joined by conductances, and their state space.

A zone is lumped into thermal nodes. Node :math:`i` has a heat capacity :math:`C_i` [J K⁻¹]
(zero for a massless node such as a surface), and is joined to other nodes and to boundary
temperatures (outdoor, ground, an adjacent zone) by conductances :math:`g` [W K⁻¹]. Heat
inputs (heating, solar, internal gains) enter nodes through gains: a gain of 1 for a power
channel in W, an aperture in m² for an irradiance channel in W m⁻². The energy balance of the
nodes is

.. math::

    C \dot T = -K T + G_b T_b + H q,

with :math:`K` the symmetric, positive-definite conductance matrix (the graph Laplacian of the
node-node conductances plus the node-boundary conductances on its diagonal), :math:`G_b` the
node-boundary conductances and :math:`H` the input gains. Massless nodes have no dynamics; they
are eliminated exactly by the Schur complement of their block of :math:`K` (Kron reduction
[1]_), which keeps :math:`K` symmetric. The state matrix :math:`A = -C_s^{-1} K_{red}` is
therefore similar to the symmetric matrix :math:`-C_s^{-1/2} K_{red} C_s^{-1/2}`: its
eigenvalues are real and negative, and its modes are computed with a symmetric eigensolver,
which is stable even when time constants span minutes to weeks [2]_.

References
----------
.. [1] F. Dörfler and F. Bullo, "Kron reduction of graphs with applications to electrical
   networks," IEEE Trans. Circuits Syst. I, vol. 60, no. 1, pp. 150-163, 2013,
   doi:10.1109/TCSI.2012.2215780.
.. [2] G. H. Golub and C. F. Van Loan, Matrix Computations, 4th ed. Johns Hopkins University
   Press, 2013, ch. 8 (the symmetric eigenvalue problem).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from thermorc.errors import NetworkError, PrecisionWarning

__all__ = [
    "Network",
    "step_participation",
    "StateSpace",
    "Modes",
    "Preset",
    "PRESETS",
    "preset_parameters",
    "with_ground",
]

#: Ratio of fastest to slowest relaxation rate above which precision loss is reported.
STIFFNESS_WARN = 1e12

#: Default boundary and input channel names of the presets; they match the log columns.
OUTDOOR = "outdoor_c"
HEATING = "heating_w"
SOLAR = "solar_w_m2"
INTERNAL = "internal_w"
GROUND = "ground_c"


@dataclass(frozen=True)
class StateSpace:
    """
    Continuous-time state space of a network, massless nodes eliminated.

    ``dx/dt = a x + b u`` and ``y = c x + d u``, where ``x`` are the temperatures of the
    capacitive nodes [°C], ``u`` the boundary temperatures [°C] followed by the heat input
    channels (in their own units), and ``y`` the temperatures of all nodes [°C].

    Attributes
    ----------
    a, b, c, d : numpy.ndarray
        State matrices [s⁻¹, s⁻¹ or K W⁻¹ s⁻¹ ..., -, -].
    states : tuple of str
        Names of the capacitive nodes (order of ``x``).
    inputs : tuple of str
        Boundary names, then input channel names (order of ``u``).
    outputs : tuple of str
        All node names in the order they were added (order of ``y``).
    capacitances_j_per_k : numpy.ndarray
        Heat capacities of the states. [J K⁻¹]
    k_reduced_w_per_k : numpy.ndarray
        Symmetric conductance matrix after elimination of massless nodes. [W K⁻¹]
    e_reduced : numpy.ndarray
        Right-hand side of the reduced balance: ``C_s dx/dt = -K_red x + e_reduced u``.
    n_boundaries : int
        How many leading entries of ``u`` are boundary temperatures.
    """

    a: np.ndarray
    b: np.ndarray
    c: np.ndarray
    d: np.ndarray
    states: tuple
    inputs: tuple
    outputs: tuple
    capacitances_j_per_k: np.ndarray
    k_reduced_w_per_k: np.ndarray
    e_reduced: np.ndarray
    n_boundaries: int

    def __repr__(self):
        return (
            f"StateSpace(states={list(self.states)}, inputs={list(self.inputs)}, "
            f"a{self.a.shape}, b{self.b.shape}, c{self.c.shape}, d{self.d.shape})"
        )


@dataclass(frozen=True)
class Modes:
    r"""
    Modal form of a state space: ``a = w diag(-rates) w⁻¹`` with real positive rates.

    Attributes
    ----------
    rates_per_s : numpy.ndarray
        Relaxation rates :math:`\lambda_j > 0`, ascending (slowest mode first). [s⁻¹]
    w : numpy.ndarray
        Mode shapes: ``x = w z``. Columns are the modes.
    w_inv : numpy.ndarray
        ``z = w_inv x``.
    """

    rates_per_s: np.ndarray
    w: np.ndarray
    w_inv: np.ndarray

    @property
    def time_constants_s(self):
        """Relaxation times ``1 / rate``, descending. [s]"""
        return 1.0 / self.rates_per_s


def modes_of(space: StateSpace) -> Modes:
    r"""
    Modal decomposition of an RC state space through its symmetric form.

    Parameters
    ----------
    space : StateSpace
        From :meth:`Network.state_space`.

    Returns
    -------
    Modes
        Rates ascending, with ``x = w z`` and ``z = w_inv x``.

    Notes
    -----
    With :math:`S = C^{-1/2} K C^{-1/2} = V \Lambda V^T` (``numpy.linalg.eigh``),
    :math:`A = -C^{-1} K = -W \Lambda W^{-1}` with :math:`W = C^{-1/2} V` and
    :math:`W^{-1} = V^T C^{1/2}` (exact, no matrix inversion).
    """
    c = space.capacitances_j_per_k
    root = np.sqrt(c)
    s = space.k_reduced_w_per_k / np.outer(root, root)
    s = 0.5 * (s + s.T)  # remove rounding asymmetry before the symmetric solver
    rates, v = np.linalg.eigh(s)
    if np.any(rates <= 0) or not np.all(np.isfinite(rates)):
        raise NetworkError(
            "the network has a mode that does not decay (a node group with no path to a "
            "boundary, or conductances too small to resolve)"
        )
    stiffness = rates[-1] / rates[0]
    if stiffness > STIFFNESS_WARN:
        # A symmetric eigensolver resolves eigenvalues to about eps * largest; the slowest
        # modes then keep only log10(1/(eps * stiffness)) digits (Golub & Van Loan, ch. 8).
        digits = max(0.0, -math.log10(np.finfo(float).eps * stiffness))
        warnings.warn(
            f"the network's time constants span {math.log10(stiffness):.0f} orders of magnitude; its slowest "
            f"modes keep only about {digits:.0f} significant digits (merge very fast nodes or make them massless)",
            PrecisionWarning,
            stacklevel=3,
        )
    w = v / root[:, None]
    w_inv = v.T * root[None, :]
    return Modes(rates_per_s=rates, w=w, w_inv=w_inv)


def step_participation(network, weights, input_channel=HEATING):
    r"""
    Share of each mode in an output's steady rise after a unit step of one heat input.

    Parameters
    ----------
    network : Network
    weights : array_like, shape (n_nodes,)
        The output as a weighted sum of node temperatures (one 1 for a single node).
    input_channel : str
        The heat input that steps.

    Returns
    -------
    time_constants_s : numpy.ndarray
        Time constants of the modes, slowest first. [s]
    participation : numpy.ndarray
        Each mode's share of the steady rise, same order (they sum to 1 less any direct
        feed-through of a massless output). [unitless]

    Notes
    -----
    In modal coordinates the step response of the output is
    :math:`y(t) = \sum_j (r_j/\lambda_j)(1 - e^{-\lambda_j t})` with residues
    :math:`r_j = (c W)_j (W^{-1} b)_j` [1]_; mode :math:`j`'s participation is
    :math:`p_j = (r_j/\lambda_j) / y(\infty)`. A mode the output hardly sees has a tiny
    :math:`p_j` however slow it is, and a log of that output cannot determine it.

    References
    ----------
    .. [1] T. Kailath, Linear Systems. Prentice-Hall, 1980, ch. 2 (modal decomposition and
       residues of a transfer function).
    """
    space = network.state_space()
    modes = modes_of(space)
    ci = list(space.inputs).index(input_channel)
    w = np.asarray(weights, dtype=float)
    c_out = w @ space.c
    residues = (c_out @ modes.w) * (modes.w_inv @ space.b[:, ci])
    gains = residues / modes.rates_per_s
    p = gains / (gains.sum() + float(w @ space.d[:, ci]))
    return modes.time_constants_s, p


class Network:
    """
    A thermal network of nodes, conductances, boundaries and heat inputs.

    Build it with :meth:`add_node`, :meth:`add_conductance` (or :meth:`add_resistance`) and
    :meth:`add_heat_input`, or take a preset with :meth:`from_preset`. The methods return the
    network, so calls can be chained.

    Parameters
    ----------
    boundaries : sequence of str
        Names of the boundary temperatures, e.g. ``("outdoor_c", "ground_c")``. [°C]
    inputs : sequence of str
        Names of the heat input channels, e.g. ``("heating_w", "solar_w_m2")``.
    name : str, optional
        A label for messages and reports.

    Examples
    --------
    >>> net = (Network(boundaries=("outdoor_c",), inputs=("heating_w",))
    ...        .add_node("indoor", capacitance_j_per_k=1e7)
    ...        .add_conductance("indoor", "outdoor_c", 200.0)
    ...        .add_heat_input("heating_w", "indoor", 1.0))
    >>> round(net.time_constants_s()[0] / 3600, 3)
    13.889
    """

    def __init__(self, boundaries=(OUTDOOR,), inputs=(HEATING,), name=None):
        self.name = name
        self.boundaries = tuple(str(b) for b in boundaries)
        self.input_channels = tuple(str(i) for i in inputs)
        if len(set(self.boundaries)) != len(self.boundaries):
            raise NetworkError(f"boundary names repeat: {list(self.boundaries)}")
        if len(set(self.input_channels)) != len(self.input_channels):
            raise NetworkError(f"input channel names repeat: {list(self.input_channels)}")
        if set(self.boundaries) & set(self.input_channels):
            raise NetworkError("a name is used both for a boundary and for an input channel")
        self.nodes: list[str] = []
        self.capacitances: dict[str, float] = {}
        self.conductances: list[tuple[str, str, float]] = []
        self.heat_inputs: list[tuple[str, str, float]] = []
        self._cache = None

    # -- building -------------------------------------------------------------------------
    def add_node(self, name, capacitance_j_per_k=0.0):
        """
        Add a thermal node.

        Parameters
        ----------
        name : str
            Unique node name (not a boundary or channel name).
        capacitance_j_per_k : float
            Heat capacity; 0 makes a massless node, eliminated exactly. [J K⁻¹]

        Returns
        -------
        Network
            ``self``.
        """
        name = str(name)
        if name in self.capacitances or name in self.boundaries or name in self.input_channels:
            raise NetworkError(f"node name '{name}' is already used")
        c = _finite(capacitance_j_per_k, f"capacitance of node '{name}'")
        if c < 0:
            raise NetworkError(f"capacitance of node '{name}' is {c:g} J/K (expected >= 0)")
        self.nodes.append(name)
        self.capacitances[name] = c
        self._cache = None
        return self

    def add_conductance(self, a, b, conductance_w_per_k):
        """
        Join two nodes, or a node and a boundary, by a conductance.

        Parameters
        ----------
        a, b : str
            Node or boundary names.
        conductance_w_per_k : float
            Conductance, > 0; several between one pair act in parallel. [W K⁻¹]

        Returns
        -------
        Network
            ``self``.
        """
        a, b = str(a), str(b)
        for end in (a, b):
            if end not in self.capacitances and end not in self.boundaries:
                raise NetworkError(
                    f"'{end}' is neither a node nor a boundary (nodes: {self.nodes}, "
                    f"boundaries: {list(self.boundaries)})"
                )
        if a == b:
            raise NetworkError(f"a conductance joins '{a}' to itself")
        if a in self.boundaries and b in self.boundaries:
            raise NetworkError(f"a conductance joins two boundaries ('{a}', '{b}'); it carries no heat of the zone")
        g = _finite(conductance_w_per_k, f"conductance {a}-{b}")
        if g <= 0:
            raise NetworkError(f"conductance {a}-{b} is {g:g} W/K (expected > 0)")
        self.conductances.append((a, b, g))
        self._cache = None
        return self

    def add_resistance(self, a, b, resistance_k_per_w):
        """
        Join two nodes, or a node and a boundary, by a thermal resistance.

        Parameters
        ----------
        a, b : str
            Node or boundary names.
        resistance_k_per_w : float
            Resistance, > 0 and finite. [K W⁻¹]

        Returns
        -------
        Network
            ``self``.
        """
        r = _finite(resistance_k_per_w, f"resistance {a}-{b}")
        if r <= 0:
            raise NetworkError(f"resistance {a}-{b} is {r:g} K/W (expected > 0)")
        return self.add_conductance(a, b, 1.0 / r)

    def add_heat_input(self, channel, node, gain=1.0):
        """
        Route a heat input channel into a node.

        Parameters
        ----------
        channel : str
            Input channel name (one of ``inputs``).
        node : str
            Node that receives the heat.
        gain : float
            Watts into the node per unit of the channel: 1 for a power in W, an aperture in
            m² for an irradiance in W m⁻², a share for a split gain. May be 0. [W per unit]

        Returns
        -------
        Network
            ``self``.
        """
        channel, node = str(channel), str(node)
        if channel not in self.input_channels:
            raise NetworkError(f"'{channel}' is not an input channel (channels: {list(self.input_channels)})")
        if node not in self.capacitances:
            raise NetworkError(f"'{node}' is not a node (nodes: {self.nodes})")
        self.heat_inputs.append((channel, node, _finite(gain, f"gain of {channel} into {node}")))
        self._cache = None
        return self

    # -- matrices -------------------------------------------------------------------------
    @property
    def inputs(self):
        """Names of ``u``: boundaries first, then heat input channels."""
        return self.boundaries + self.input_channels

    def matrices(self):
        """
        Full conductance, boundary and input matrices of the network (massless nodes kept).

        Returns
        -------
        k : numpy.ndarray, shape (n, n)
            Symmetric conductance matrix. [W K⁻¹]
        e : numpy.ndarray, shape (n, n_boundaries + n_channels)
            Input matrix: boundary conductances, then input gains.
        capacitances : numpy.ndarray, shape (n,)
            Node heat capacities. [J K⁻¹]
        """
        self.validate()
        index = {name: i for i, name in enumerate(self.nodes)}
        nb = len(self.boundaries)
        bindex = {name: j for j, name in enumerate(self.boundaries)}
        cindex = {name: nb + j for j, name in enumerate(self.input_channels)}
        n = len(self.nodes)
        k = np.zeros((n, n))
        e = np.zeros((n, len(self.inputs)))
        for a, b, g in self.conductances:
            if a in bindex or b in bindex:
                node, boundary = (b, a) if a in bindex else (a, b)
                i = index[node]
                k[i, i] += g
                e[i, bindex[boundary]] += g
            else:
                i, j = index[a], index[b]
                k[i, i] += g
                k[j, j] += g
                k[i, j] -= g
                k[j, i] -= g
        for channel, node, gain in self.heat_inputs:
            e[index[node], cindex[channel]] += gain
        caps = np.array([self.capacitances[name] for name in self.nodes])
        return k, e, caps

    def validate(self):
        """
        Check that the network is physical.

        Raises
        ------
        NetworkError
            No nodes, no capacitive node, or a node with no conductive path to a boundary.
        """
        if not self.nodes:
            raise NetworkError("the network has no nodes")
        if not any(c > 0 for c in self.capacitances.values()):
            raise NetworkError("the network has no node with a heat capacity, so it has no dynamics")
        # Every node must reach a boundary; otherwise K is singular and that node's
        # temperature is undetermined at steady state.
        neighbours = {name: set() for name in self.nodes + list(self.boundaries)}
        for a, b, _ in self.conductances:
            neighbours[a].add(b)
            neighbours[b].add(a)
        reached = set(self.boundaries)
        frontier = list(self.boundaries)
        while frontier:
            here = frontier.pop()
            for there in neighbours[here]:
                if there not in reached:
                    reached.add(there)
                    frontier.append(there)
        cut_off = [name for name in self.nodes if name not in reached]
        if cut_off:
            lonely = [name for name in cut_off if not neighbours[name]]
            what = "is not connected to anything" if lonely else "has no path to any boundary"
            raise NetworkError(f"node(s) {cut_off} {what}; every node needs a conductive path to a boundary")

    def state_space(self) -> StateSpace:
        """
        Continuous state space with massless nodes eliminated exactly.

        Returns
        -------
        StateSpace
            ``a, b, c, d`` and the reduced symmetric conductance matrix.

        Notes
        -----
        With ``s`` the capacitive and ``m`` the massless nodes, the massless balance
        ``0 = -K_ms x - K_mm T_m + E_m u`` gives ``T_m = K_mm⁻¹ (E_m u - K_ms x)``, and the
        Schur complement ``K_red = K_ss - K_sm K_mm⁻¹ K_ms`` stays symmetric [1]_.
        """
        if self._cache is not None:
            return self._cache
        k, e, caps = self.matrices()
        s = np.flatnonzero(caps > 0)
        m = np.flatnonzero(caps == 0)
        n = len(self.nodes)
        if m.size:
            kmm = k[np.ix_(m, m)]
            ksm = k[np.ix_(s, m)]
            # Solve rather than invert: kmm is symmetric positive definite here.
            solve_ms = np.linalg.solve(kmm, k[np.ix_(m, s)])
            solve_me = np.linalg.solve(kmm, e[m])
            k_red = k[np.ix_(s, s)] - ksm @ solve_ms
            e_red = e[s] - ksm @ solve_me
        else:
            k_red = k.copy()
            e_red = e.copy()
        k_red = 0.5 * (k_red + k_red.T)
        cs = caps[s]
        a = -k_red / cs[:, None]
        b = e_red / cs[:, None]
        c = np.zeros((n, s.size))
        d = np.zeros((n, e.shape[1]))
        c[s, np.arange(s.size)] = 1.0
        if m.size:
            c[m] = -solve_ms
            d[m] = solve_me
        space = StateSpace(
            a=a, b=b, c=c, d=d,
            states=tuple(self.nodes[i] for i in s),
            inputs=self.inputs,
            outputs=tuple(self.nodes),
            capacitances_j_per_k=cs,
            k_reduced_w_per_k=k_red,
            e_reduced=e_red,
            n_boundaries=len(self.boundaries),
        )
        self._cache = space
        return space

    def modes(self) -> Modes:
        """Modal decomposition of the state space (see :func:`modes_of`)."""
        return modes_of(self.state_space())

    def time_constants_s(self):
        """
        Relaxation times of the network, ``-1 / eigenvalue`` of ``a``, descending.

        Returns
        -------
        numpy.ndarray
            Time constants. [s]
        """
        return self.modes().time_constants_s

    def heat_loss_coefficient_w_per_k(self, node="indoor"):
        """
        Steady-state heat loss coefficient seen from one node, total and per boundary.

        Parameters
        ----------
        node : str
            The heated node (usually ``"indoor"``).

        Returns
        -------
        dict
            ``{"total": H, boundary: H_b, ...}`` where ``H = Q / (T_node - T_b)`` for heat
            ``Q`` injected at ``node`` with every boundary at the same temperature, and
            ``H_b`` is the part of ``H`` that flows to boundary ``b``. [W K⁻¹]
        """
        if node not in self.capacitances:
            raise NetworkError(f"'{node}' is not a node (nodes: {self.nodes})")
        k, e, _ = self.matrices()
        q = np.zeros(len(self.nodes))
        q[self.nodes.index(node)] = 1.0
        t = np.linalg.solve(k, q)
        rise = t[self.nodes.index(node)]
        out = {"total": 1.0 / rise}
        for j, boundary in enumerate(self.boundaries):
            out[boundary] = float(e[:, j] @ t) / rise
        return out

    def total_capacitance_j_per_k(self):
        """Sum of node heat capacities. [J K⁻¹]"""
        return float(sum(self.capacitances.values()))

    # -- presets --------------------------------------------------------------------------
    @classmethod
    def from_preset(cls, name, params=None, **kwargs):
        """
        Build a preset network from named parameters.

        Parameters
        ----------
        name : {'1R1C', '2R2C', '3R2C', '4R3C'}
            Preset (see :data:`PRESETS` and docs/models.md).
        params : dict, optional
            Parameter name -> SI value; keyword arguments are merged in.

        Returns
        -------
        Network
        """
        key = str(name).upper()
        if key not in PRESETS:
            raise NetworkError(f"unknown model '{name}' (expected one of {', '.join(PRESETS)})")
        values = dict(params or {})
        values.update(kwargs)
        return PRESETS[key].build(values)

    def __repr__(self):
        label = f" {self.name!r}" if self.name else ""
        return (
            f"Network{label}(nodes={self.nodes}, boundaries={list(self.boundaries)}, "
            f"inputs={list(self.input_channels)}, {len(self.conductances)} conductances)"
        )


def _finite(value, what):
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise NetworkError(f"{what} is {value!r} (expected a number)") from None
    if not math.isfinite(x):
        raise NetworkError(f"{what} is {x} (expected a finite number)")
    return x


# -- presets ------------------------------------------------------------------------------
@dataclass(frozen=True)
class Preset:
    """
    A named network definition.

    Attributes
    ----------
    name : str
        Preset name, e.g. ``"2R2C"``.
    parameters : tuple of str
        Parameter names, each with its SI unit in the name.
    build_network : callable
        ``dict -> Network``.
    description : str
        One sentence for help texts.
    optional : dict
        Optional parameters and their defaults.
    """

    name: str
    parameters: tuple
    build_network: Callable[[dict], Network]
    description: str
    optional: dict = field(default_factory=dict)

    @property
    def nodes(self):
        """Capacitive nodes, indoor first, from the capacitance names (``c_<node>_j_per_k``)."""
        return tuple(n[len("c_"):-len("_j_per_k")] for n in self.parameters if n.startswith("c_"))

    @property
    def solar_shares(self):
        """Names of the shares of the sun on nodes other than indoor (``solar_to_<node>_share``)."""
        return tuple(n for n in self.optional if n.startswith("solar_to_"))

    def build(self, values):
        """Check ``values`` against the parameter list and build the network."""
        missing = [p for p in self.parameters if p not in values]
        unknown = [p for p in values if p not in self.parameters and p not in self.optional]
        if missing:
            raise NetworkError(f"model {self.name} needs parameter(s) {missing}")
        if unknown:
            raise NetworkError(
                f"model {self.name} has no parameter(s) {unknown} (expected {list(self.parameters) + list(self.optional)})"
            )
        merged = {**self.optional, **values}
        return self.build_network(merged)


def _zone(name):
    return Network(boundaries=(OUTDOOR,), inputs=(HEATING, SOLAR, INTERNAL), name=name)


def _build_1r1c(p):
    net = _zone("1R1C").add_node("indoor", p["c_indoor_j_per_k"])
    net.add_resistance("indoor", OUTDOOR, p["r_indoor_outdoor_k_per_w"])
    net.add_heat_input(HEATING, "indoor", 1.0)
    net.add_heat_input(SOLAR, "indoor", p["solar_aperture_m2"])
    net.add_heat_input(INTERNAL, "indoor", 1.0)
    return net


def _build_2r2c(p, parallel=False):
    net = _zone("3R2C" if parallel else "2R2C")
    net.add_node("indoor", p["c_indoor_j_per_k"]).add_node("envelope", p["c_envelope_j_per_k"])
    net.add_resistance("indoor", "envelope", p["r_indoor_envelope_k_per_w"])
    net.add_resistance("envelope", OUTDOOR, p["r_envelope_outdoor_k_per_w"])
    if parallel:
        net.add_resistance("indoor", OUTDOOR, p["r_indoor_outdoor_k_per_w"])
    return _room_inputs(net, p, "envelope")


def _room_inputs(net, p, sunlit):
    """Heating and internal gains on the indoor node; the sun split between it and ``sunlit``."""
    share = p[f"solar_to_{sunlit}_share"]
    if not 0.0 <= share <= 1.0:
        raise NetworkError(f"solar_to_{sunlit}_share is {share:g} (expected 0..1)")
    net.add_heat_input(HEATING, "indoor", 1.0)
    net.add_heat_input(SOLAR, "indoor", p["solar_aperture_m2"] * (1.0 - share))
    net.add_heat_input(SOLAR, sunlit, p["solar_aperture_m2"] * share)
    net.add_heat_input(INTERNAL, "indoor", 1.0)
    return net


def _build_4r3c(p):
    net = _zone("4R3C")
    net.add_node("indoor", p["c_indoor_j_per_k"]).add_node("envelope", p["c_envelope_j_per_k"])
    net.add_node("interior", p["c_interior_j_per_k"])
    net.add_resistance("indoor", "envelope", p["r_indoor_envelope_k_per_w"])
    net.add_resistance("envelope", OUTDOOR, p["r_envelope_outdoor_k_per_w"])
    net.add_resistance("indoor", OUTDOOR, p["r_indoor_outdoor_k_per_w"])
    net.add_resistance("indoor", "interior", p["r_indoor_interior_k_per_w"])
    # Sun through the windows lands on the room: its air and contents, and the floors and
    # furniture of the interior node; none goes straight into the envelope's mass.
    return _room_inputs(net, p, "interior")


PRESETS = {
    "1R1C": Preset(
        "1R1C",
        ("r_indoor_outdoor_k_per_w", "c_indoor_j_per_k"),
        _build_1r1c,
        "one indoor node with a heat capacity, one resistance to outdoor",
        optional={"solar_aperture_m2": 0.0},
    ),
    "2R2C": Preset(
        "2R2C",
        ("r_indoor_envelope_k_per_w", "r_envelope_outdoor_k_per_w", "c_indoor_j_per_k", "c_envelope_j_per_k"),
        _build_2r2c,
        "indoor node and an envelope (mass) node in series to outdoor",
        optional={"solar_aperture_m2": 0.0, "solar_to_envelope_share": 0.0},
    ),
    "3R2C": Preset(
        "3R2C",
        (
            "r_indoor_envelope_k_per_w",
            "r_envelope_outdoor_k_per_w",
            "r_indoor_outdoor_k_per_w",
            "c_indoor_j_per_k",
            "c_envelope_j_per_k",
        ),
        lambda p: _build_2r2c(p, parallel=True),
        "2R2C plus a direct indoor-outdoor path (windows, air leakage) in parallel",
        optional={"solar_aperture_m2": 0.0, "solar_to_envelope_share": 0.0},
    ),
    "4R3C": Preset(
        "4R3C",
        (
            "r_indoor_envelope_k_per_w",
            "r_envelope_outdoor_k_per_w",
            "r_indoor_outdoor_k_per_w",
            "r_indoor_interior_k_per_w",
            "c_indoor_j_per_k",
            "c_envelope_j_per_k",
            "c_interior_j_per_k",
        ),
        _build_4r3c,
        "3R2C plus an interior-mass node (floors, partitions, furniture) hung on the indoor node",
        optional={"solar_aperture_m2": 0.0, "solar_to_interior_share": 0.0},
    ),
}


def preset_parameters(name):
    """
    Parameter names of a preset, required first, then optional.

    Parameters
    ----------
    name : str
        Preset name.

    Returns
    -------
    tuple of str
    """
    preset = PRESETS[str(name).upper()]
    return preset.parameters + tuple(preset.optional)


def with_ground(network, share, outdoor=OUTDOOR, ground=GROUND):
    r"""
    The network with a share of every conductance to outdoor led to a ground boundary instead.

    Parameters
    ----------
    network : Network
        A network with an ``outdoor`` boundary.
    share : float
        Share of each outdoor conductance that goes to the ground, ``0 <= share < 1``.
    outdoor, ground : str
        Boundary names.

    Returns
    -------
    Network
        A new network with boundaries ``(outdoor, ground)`` (plus any others it had), the
        same nodes and heat inputs; a conductance :math:`g` to outdoor becomes
        :math:`(1 - f) g` to outdoor and :math:`f g` to the ground.

    Notes
    -----
    A node then receives :math:`g\,(1 - f)(T_o - T) + g f (T_g - T) = g\,(T_{eq} - T)` with
    :math:`T_{eq} = (1 - f) T_o + f T_g`: the same network driven by that one equivalent
    boundary temperature, which is how the calibration fits it. The total heat loss
    coefficient is unchanged; the share :math:`f` of it goes to the ground.
    """
    share = float(share)
    if not 0.0 <= share < 1.0:
        raise NetworkError(f"ground share is {share:g} (expected 0 <= share < 1)")
    if outdoor not in network.boundaries:
        raise NetworkError(f"the network has no boundary '{outdoor}'")
    if ground in network.boundaries:
        raise NetworkError(f"the network already has a boundary '{ground}'")
    out = Network(boundaries=network.boundaries + (ground,), inputs=network.input_channels, name=network.name)
    for node in network.nodes:
        out.add_node(node, network.capacitances[node])
    for a, b, g in network.conductances:
        if outdoor in (a, b):
            node = b if a == outdoor else a
            out.add_conductance(node, outdoor, (1.0 - share) * g)
            if share > 0:
                out.add_conductance(node, ground, share * g)
        else:
            out.add_conductance(a, b, g)
    for channel, node, gain in network.heat_inputs:
        out.add_heat_input(channel, node, gain)
    return out
