r"""
Exact discrete-time simulation of RC networks.

Heat inputs are interval means (the value at a stamp holds until the next stamp), so a
zero-order hold (ZOH) is exact for them. Boundary temperatures are samples at instants, so by
default they are held with a first-order hold (FOH: linear between samples); a ZOH can be
chosen instead. Over one step of length :math:`\Delta t` with :math:`u` linear between
:math:`u_k` and :math:`u_{k+1}` on the FOH channels,

.. math::

    x_{k+1} = e^{A \Delta t} x_k + \Gamma u_k + \Lambda (u_{k+1} - u_k),\qquad
    \Gamma = \int_0^{\Delta t} e^{A s}\,ds\,B,\quad
    \Lambda = \frac{1}{\Delta t}\int_0^{\Delta t} e^{A(\Delta t - s)} s\,ds\,B,

which :func:`discretise` evaluates with one block-matrix exponential [1]_ [2]_. The
simulation itself runs in the modal coordinates of the network (see
:func:`thermorc.network.modes_of`): each mode is a first-order section
:math:`z_{k+1} = a z_k + w_k` with :math:`a = e^{-\lambda \Delta t}`, run at compiled speed by
:func:`scipy.signal.lfilter`. That recursion is the convolution of each mode's impulse
response with its input, so there is no per-step Python loop. The gains use the functions
:math:`\varphi_1(x) = (1-e^{-x})/x`, :math:`\varphi_2(x) = (x-1+e^{-x})/x^2`,
:math:`\varphi_3(x) = (x^2/2-x+1-e^{-x})/x^3` with :math:`x = \lambda\Delta t`, evaluated by
series for small :math:`x` to avoid cancellation. The same functions give the exact mean of
every node temperature over each interval, which energy accounting needs.

References
----------
.. [1] C. F. Van Loan, "Computing integrals involving the matrix exponential," IEEE Trans.
   Automat. Control, vol. 23, no. 3, pp. 395-404, 1978, doi:10.1109/TAC.1978.1101743.
.. [2] G. F. Franklin, J. D. Powell and M. L. Workman, Digital Control of Dynamic Systems,
   3rd ed. Addison-Wesley, 1998, ch. 4 and 6 (zero- and first-order hold equivalents).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import scipy.linalg
import scipy.signal

from thermorc.errors import InputError, NetworkError
from thermorc.network import Network, StateSpace, modes_of

__all__ = [
    "discretise",
    "phi_functions",
    "simulate",
    "hold_setpoint",
    "steady_state",
    "SimulationResult",
    "run_modes",
    "sensed_temperature",
    "sensor_coefficients",
]

_SERIES_BELOW = 1e-3  # x = rate*dt below which the phi functions use their Taylor series


def sensed_temperature(temperature_c, step_s, time_constant_s):
    r"""
    What a sensor with a first-order lag reads of a temperature sampled on a uniform grid.

    Parameters
    ----------
    temperature_c : array_like, shape (N,) or (N, k)
        The true temperature at the stamps (e.g. the indoor node), one column per series. [°C]
    step_s : float
        Grid step. [s]
    time_constant_s : float
        Sensor time constant :math:`\tau_s`; 0 for a sensor without lag. [s]

    Returns
    -------
    numpy.ndarray, shape of ``temperature_c``
        The sensor reading, which starts equal to the temperature. [°C]

    Notes
    -----
    The sensor obeys :math:`\tau_s\,ds/dt = T(t) - s`. With :math:`T` linear between samples
    the exact step is :math:`s_{k+1} = a s_k + (1 - a) T_k + (1 - \tau_s (1 - a)/\Delta t)
    (T_{k+1} - T_k)` with :math:`a = e^{-\Delta t/\tau_s}` (the first-order-hold solution of a
    first-order system [2]_), run by :func:`scipy.signal.lfilter`.
    """
    x = np.asarray(temperature_c, dtype=float)
    if time_constant_s <= 0 or x.shape[0] == 0:
        return x.copy()
    a, b0, b1 = sensor_coefficients(step_s, time_constant_s)
    b = np.array([b0, b1])
    den = np.array([1.0, -a])
    zi = scipy.signal.lfilter_zi(b, den).reshape((1,) + (1,) * (x.ndim - 1)) * x[:1]
    out, _ = scipy.signal.lfilter(b, den, x, axis=0, zi=zi)
    return out


def sensor_coefficients(step_s, time_constant_s):
    r"""
    One step of a sensor's first-order lag (:func:`sensed_temperature`).

    Parameters
    ----------
    step_s : float
        Grid step. [s]
    time_constant_s : float
        Sensor time constant; 0 for none. [s]

    Returns
    -------
    numpy.ndarray
        ``(a, b0, b1)`` of :math:`s_{k+1} = a s_k + b_0 T_{k+1} + b_1 T_k` (the temperature
        linear between samples); ``(0, 1, 0)`` without a lag.
    """
    step_s, time_constant_s = float(step_s), float(time_constant_s)
    if time_constant_s <= 0:
        return np.array([0.0, 1.0, 0.0])
    a = math.exp(-step_s / time_constant_s)
    b0 = 1.0 - time_constant_s * (1.0 - a) / step_s
    return np.array([a, b0, (1.0 - a) - b0])


def discretise(a, b, dt_s, method="zoh"):
    r"""
    Exact discretisation of ``dx/dt = a x + b u`` over one step.

    Parameters
    ----------
    a : array_like, shape (n, n)
        State matrix. [s⁻¹]
    b : array_like, shape (n, m)
        Input matrix.
    dt_s : float
        Step. [s]
    method : {'zoh', 'foh'}
        ``'zoh'``: ``u`` constant over the step. ``'foh'``: ``u`` linear between samples.

    Returns
    -------
    ad : numpy.ndarray, shape (n, n)
        :math:`e^{A\Delta t}`.
    b0 : numpy.ndarray, shape (n, m)
        Weight of :math:`u_k`.
    b1 : numpy.ndarray, shape (n, m)
        Weight of :math:`u_{k+1}` (zeros for ``'zoh'``), so that
        ``x[k+1] = ad x[k] + b0 u[k] + b1 u[k+1]``.

    Notes
    -----
    The block exponential
    :math:`\exp\left(\begin{bmatrix} A & B & 0\\ 0 & 0 & I\\ 0 & 0 & 0\end{bmatrix}\Delta t\right)`
    holds :math:`e^{A\Delta t}`, :math:`\Gamma` and :math:`\Lambda` in its first block row [1]_;
    then ``b0 = Γ - Λ`` and ``b1 = Λ``. For ``'zoh'`` this equals
    ``scipy.signal.cont2discrete(..., method='zoh')``.

    References
    ----------
    .. [1] C. F. Van Loan, "Computing integrals involving the matrix exponential," IEEE Trans.
       Automat. Control, vol. 23, no. 3, pp. 395-404, 1978.
    """
    a = np.atleast_2d(np.asarray(a, dtype=float))
    b = np.asarray(b, dtype=float).reshape(a.shape[0], -1)
    dt = float(dt_s)
    if not np.isfinite(dt) or dt <= 0:
        raise ValueError(f"dt_s is {dt_s!r} (expected a finite step > 0 s)")
    n, m = b.shape
    if method == "zoh":
        block = np.zeros((n + m, n + m))
        block[:n, :n] = a * dt
        block[:n, n:] = b * dt
        full = scipy.linalg.expm(block)
        return full[:n, :n], full[:n, n:], np.zeros((n, m))
    if method == "foh":
        block = np.zeros((n + 2 * m, n + 2 * m))
        block[:n, :n] = a * dt
        block[:n, n:n + m] = b * dt
        block[n:n + m, n + m:] = np.eye(m)
        full = scipy.linalg.expm(block)
        gamma = full[:n, n:n + m]
        lam = full[:n, n + m:]
        return full[:n, :n], gamma - lam, lam
    raise ValueError(f"method is {method!r} (expected 'zoh' or 'foh')")


def phi_functions(x):
    r"""
    The functions :math:`\varphi_1, \varphi_2, \varphi_3` of exponential integrators.

    Parameters
    ----------
    x : array_like
        :math:`\lambda \Delta t \ge 0`. [unitless]

    Returns
    -------
    phi1, phi2, phi3 : numpy.ndarray
        :math:`\varphi_1(x) = (1-e^{-x})/x`, :math:`\varphi_2(x) = (x-1+e^{-x})/x^2`,
        :math:`\varphi_3(x) = (x^2/2-x+1-e^{-x})/x^3`, with limits 1, 1/2, 1/6 at 0.

    References
    ----------
    .. [1] M. Hochbruck and A. Ostermann, "Exponential integrators," Acta Numerica, vol. 19,
       pp. 209-286, 2010, doi:10.1017/S0962492910000048.
    """
    x = np.asarray(x, dtype=float)
    if x.ndim == 1 and x.size and x.min() >= _SERIES_BELOW:
        # The common case (no mode slow enough to need the series) without the masked branches.
        em1 = np.expm1(-x)
        return -em1 / x, (x + em1) / x**2, (x * x / 2 - x - em1) / x**3
    small = x < _SERIES_BELOW
    xs = np.where(small, 1.0, x)  # keeps the exact branch finite where it is not used
    em1 = np.expm1(-xs)
    phi1 = np.where(small, 1 - x / 2 + x**2 / 6 - x**3 / 24, -em1 / xs)
    phi2 = np.where(small, 0.5 - x / 6 + x**2 / 24 - x**3 / 120, (xs + em1) / xs**2)
    phi3 = np.where(small, 1 / 6 - x / 24 + x**2 / 120 - x**3 / 720, (xs**2 / 2 - xs - em1) / xs**3)
    return phi1, phi2, phi3


@dataclass
class SimulationResult:
    """
    Node temperatures and heat flows of one simulation run.

    Attributes
    ----------
    temperatures_c : pandas.DataFrame
        Temperature of every node at each stamp. [°C]
    mean_temperatures_c : pandas.DataFrame
        Exact mean temperature of every node over the interval that starts at each stamp
        (the last interval assumes the previous step and held inputs). [°C]
    inputs : pandas.DataFrame
        The inputs used (boundaries [°C], then channels), with any computed heating.
    final_state_c : numpy.ndarray
        State after the last interval. [°C]
    states : tuple of str
        Names of the capacitive nodes.
    shortfall_w : pandas.Series or None
        Heat the heater could not deliver (capacity limit), mean over each interval. [W]
    success : bool
        False when something in the run is doubtful; see ``message``.
    message : str
        What happened.
    """

    temperatures_c: pd.DataFrame
    mean_temperatures_c: pd.DataFrame
    inputs: pd.DataFrame
    final_state_c: np.ndarray
    states: tuple
    shortfall_w: pd.Series | None = None
    success: bool = True
    message: str = "ok"
    notes: list = field(default_factory=list)

    def to_frame(self):
        """Inputs and node temperatures in one DataFrame with the run's index."""
        temps = self.temperatures_c.add_suffix("_c")
        parts = [temps, self.inputs]
        if self.shortfall_w is not None:
            parts.append(self.shortfall_w.rename("shortfall_w").to_frame())
        return pd.concat(parts, axis=1)

    def __repr__(self):
        return (
            f"SimulationResult(rows={len(self.temperatures_c)}, nodes={list(self.temperatures_c.columns)}, "
            f"success={self.success})"
        )


def _input_array(network: Network, inputs, where="inputs"):
    """Inputs as an (N, m) float array in network order, with a time vector in seconds."""
    names = list(network.inputs)
    if isinstance(inputs, pd.DataFrame):
        missing = [c for c in names if c not in inputs.columns]
        if missing:
            raise InputError(
                f"missing input column(s) {missing}; the network needs {names}", path=None, column=missing[0]
            )
        frame = inputs if list(inputs.columns) == names else inputs[names]
        u = frame.to_numpy(dtype=float)
        index = inputs.index
    else:
        u = np.asarray(inputs, dtype=float)
        if u.ndim == 1:
            u = u[:, None]
        if u.shape[1] != len(names):
            raise InputError(f"{where} has {u.shape[1]} columns; the network needs {len(names)}: {names}")
        index = pd.RangeIndex(len(u))
    bad = ~np.isfinite(u)
    if bad.any():
        row, col = np.argwhere(bad)[0]
        raise InputError(f"{where} has a missing or non-finite value at position {row}", column=names[col])
    return u, index


def _time_steps(index, dt_s, n):
    if isinstance(index, pd.DatetimeIndex):
        if n < 2:
            return np.array([float(dt_s)]) if dt_s else np.zeros(0)
        if index.freq is not None and isinstance(index.freq, pd.tseries.offsets.Tick):
            # A regular index with a fixed frequency needs no differencing.
            dts = np.full(n - 1, pd.Timedelta(index.freq).total_seconds())
        else:
            dts = np.diff(index.as_unit("ns").asi8).astype(float) / 1e9
    else:
        if dt_s is None:
            raise InputError("inputs without a DatetimeIndex need dt_s (the step in seconds)")
        dts = np.broadcast_to(np.asarray(dt_s, dtype=float), (max(n - 1, 0),)).copy()
    if np.any(~np.isfinite(dts)) or np.any(dts <= 0):
        raise InputError("time stamps must increase strictly (found a repeated or backward step)")
    return dts


def _runs(dts):
    """Start and length of each run of equal steps."""
    if dts.size == 0:
        return []
    if dts[0] == dts[-1] and dts.min() == dts.max():
        return [(0, int(dts.size))]
    change = np.flatnonzero(np.abs(np.diff(dts)) > 1e-9 * dts[1:]) + 1
    starts = np.concatenate([[0], change])
    ends = np.concatenate([change, [dts.size]])
    return [(int(s), int(e - s)) for s, e in zip(starts, ends)]


def steady_state(network: Network, u_row):
    """
    Node states at steady state for constant inputs.

    Parameters
    ----------
    network : Network
    u_row : array_like, shape (m,)
        Boundary temperatures [°C], then input channels, in ``network.inputs`` order.

    Returns
    -------
    numpy.ndarray
        Capacitive-node temperatures ``K_red⁻¹ e_red u``. [°C]
    """
    space = network.state_space()
    return np.linalg.solve(space.k_reduced_w_per_k, space.e_reduced @ np.asarray(u_row, dtype=float))


def _hold_mask(space: StateSpace, boundary_hold):
    if boundary_hold not in ("foh", "zoh"):
        raise ValueError(f"boundary_hold is {boundary_hold!r} (expected 'foh' or 'zoh')")
    mask = np.zeros(len(space.inputs), dtype=bool)
    if boundary_hold == "foh":
        mask[: space.n_boundaries] = True
    return mask


def _initial_state(network, space, u0, x0):
    if x0 is None:
        return steady_state(network, u0)
    if isinstance(x0, dict):
        missing = [s for s in space.states if s not in x0]
        if missing:
            raise InputError(f"initial temperatures missing for node(s) {missing}")
        return np.array([float(x0[s]) for s in space.states])
    x0 = np.asarray(x0, dtype=float).ravel()
    if x0.size != len(space.states):
        raise InputError(f"x0 has {x0.size} values; the network has {len(space.states)} states {list(space.states)}")
    return x0


def simulate(network: Network, inputs, x0=None, dt_s=None, boundary_hold="foh", interval_means=True):
    """
    Simulate the node temperatures of a network for given inputs.

    Parameters
    ----------
    network : Network
        The RC network.
    inputs : pandas.DataFrame or array_like, shape (N, m)
        One column per name in ``network.inputs``: boundary temperatures at the stamps [°C]
        and heat input channels as means over the interval that starts at each stamp.
        A DatetimeIndex may be irregular; steps of equal length share one discretisation.
    x0 : array_like or dict, optional
        Capacitive-node temperatures at the first stamp [°C]; default: steady state for the
        first row of inputs.
    dt_s : float, optional
        Step when ``inputs`` has no DatetimeIndex. [s]
    boundary_hold : {'foh', 'zoh'}
        Hold for boundary temperatures; heat inputs always use a zero-order hold.
    interval_means : bool
        Also compute the exact mean of each node temperature over each interval (needed
        for energy accounting); ``mean_temperatures_c`` is ``None`` otherwise.

    Returns
    -------
    SimulationResult
        Node temperatures at the stamps and their exact interval means.

    Raises
    ------
    InputError
        Missing columns, non-finite inputs, non-increasing stamps.
    """
    space = network.state_space()
    u, index = _input_array(network, inputs)
    n_rows = u.shape[0]
    if n_rows == 0:
        raise InputError("no input rows to simulate")
    dts = _time_steps(index, dt_s, n_rows)
    x_start = _initial_state(network, space, u[0], x0)
    foh_mask = _hold_mask(space, boundary_hold)
    states, means, x_end = run_modes(space, u, dts, x_start, foh_mask, means=interval_means)
    return _result(space, index, u, states, means, x_end, inputs, foh_mask=foh_mask)


def _sections_lfilter(a, drive, z0, out):
    for j in range(a.size):
        out[j] = scipy.signal.lfilter([1.0], [1.0, -a[j]], drive[j], zi=[a[j] * z0[j]])[0]


def _sections_loop(a, drive, z0, out):
    for j in range(a.size):
        zj = z0[j]
        aj = a[j]
        row = drive[j]
        dest = out[j]
        for k in range(row.shape[0]):
            zj = aj * zj + row[k]
            dest[k] = zj


def first_order_sections(a, drive, z0, out):
    r"""
    Run parallel first-order sections :math:`z_{k+1} = a_j z_k + w_k` (one per mode).

    This is :func:`scipy.signal.lfilter` with ``b = [1]``, ``a = [1, -a_j]`` and initial
    condition ``a_j z_0``: the convolution of each mode's impulse response :math:`a_j^k` with
    its input. With numba installed the same recursion runs as one compiled loop over all
    modes, which avoids one library call per mode; the tests check it against ``lfilter``.

    Parameters
    ----------
    a : numpy.ndarray, shape (n,)
        Pole of each section, ``exp(-rate dt)``. [unitless]
    drive : numpy.ndarray, shape (n, L)
        Input of each section per step.
    z0 : numpy.ndarray, shape (n,)
        Section states before the first step.
    out : numpy.ndarray, shape (n, L)
        Filled in place with the states after each step.
    """
    _sections(np.ascontiguousarray(a), np.ascontiguousarray(drive), np.ascontiguousarray(z0), out)


try:  # numba compiles the recursion; without it, lfilter does the same work per mode.
    import numba

    _sections = numba.njit(cache=True)(_sections_loop)
except ImportError:  # pragma: no cover - numba is a declared dependency
    _sections = _sections_lfilter


def run_modes(space: StateSpace, u, dts, x_start, foh_mask, means=True, modes=None):
    """
    Array core of :func:`simulate`: the modal recursion through ``lfilter``.

    Parameters
    ----------
    space : StateSpace
        Continuous state space.
    u : numpy.ndarray, shape (N, m)
        Inputs in ``space.inputs`` order.
    dts : numpy.ndarray, shape (N - 1,)
        Steps between rows. [s]
    x_start : numpy.ndarray, shape (n,)
        State at the first row. [°C]
    foh_mask : numpy.ndarray of bool, shape (m,)
        Inputs held linearly between samples; the others are held constant.
    means : bool
        Also return the exact interval means of the states.
    modes : Modes, optional
        Precomputed :func:`~thermorc.network.modes_of` of ``space``.

    Returns
    -------
    states : numpy.ndarray, shape (N, n)
        States at the rows. [°C]
    state_means : numpy.ndarray, shape (N, n) or None
        Means over the interval that starts at each row; the last interval repeats the
        last step with held inputs. [°C]
    x_end : numpy.ndarray, shape (n,)
        State at the end of the last interval. [°C]
    """
    modes = modes_of(space) if modes is None else modes
    beta = modes.w_inv @ space.b  # modal input matrix (n, m)
    has_foh = bool(np.any(foh_mask))
    beta_foh = beta * foh_mask[None, :]
    n_rows = u.shape[0]
    n = beta.shape[0]
    # Mode-major arrays keep each mode's sequence contiguous for lfilter.
    z = np.empty((n, n_rows))
    z[:, 0] = modes.w_inv @ x_start
    zmean = np.empty((n, n_rows)) if means else None
    du = np.diff(u, axis=0) if has_foh else None
    rates = modes.rates_per_s
    for start, length in _runs(dts):
        dt = dts[start]
        x = rates * dt
        a = np.exp(-x)
        phi1, phi2, phi3 = phi_functions(x)
        seg = slice(start, start + length)
        drive = ((dt * phi1)[:, None] * beta) @ u[seg].T
        if has_foh:
            drive += ((dt * phi2)[:, None] * beta_foh) @ du[seg].T
        first_order_sections(a, drive, z[:, start], z[:, start + 1:start + length + 1])
        if means:
            zmean[:, seg] = phi1[:, None] * z[:, seg] + ((dt * phi2)[:, None] * beta) @ u[seg].T
            if has_foh:
                zmean[:, seg] += ((dt * phi3)[:, None] * beta_foh) @ du[seg].T
    # The last interval has no next sample: repeat the last step with inputs held.
    dt = dts[-1] if dts.size else 3600.0
    x = rates * dt
    phi1, phi2, _ = phi_functions(x)
    z_last = z[:, -1]
    z_end = np.exp(-x) * z_last + dt * phi1 * (beta @ u[-1])
    if means:
        zmean[:, -1] = phi1 * z_last + dt * phi2 * (beta @ u[-1])
    states = (modes.w @ z).T
    state_means = (modes.w @ zmean).T if means else None
    return states, state_means, modes.w @ z_end


def _outputs(space, states, u):
    """All node temperatures from states and inputs (massless nodes are algebraic)."""
    if len(space.outputs) == len(space.states):
        order = [space.outputs.index(s) for s in space.states]
        if order == list(range(len(order))):
            return states
    return states @ space.c.T + u @ space.d.T


def _result(space, index, u, states, means, x_end, inputs, shortfall=None, message="ok", foh_mask=None):
    y = _outputs(space, states, u)
    mean_temps = None
    if means is not None:
        # Interval means of the massless nodes are linear in the state and input means; only
        # inputs held linearly have the mid-point mean, held ones keep their value.
        u_mean = u.copy()
        if foh_mask is None:
            foh_mask = np.zeros(u.shape[1], dtype=bool)
            foh_mask[: space.n_boundaries] = True
        u_mean[:-1, foh_mask] = 0.5 * (u[:-1, foh_mask] + u[1:, foh_mask])
        mean_temps = pd.DataFrame(_outputs(space, means, u_mean), index=index, columns=list(space.outputs))
    frame_inputs = inputs if isinstance(inputs, pd.DataFrame) else pd.DataFrame(u, index=index, columns=space.inputs)
    short = None if shortfall is None else pd.Series(shortfall, index=index, name="shortfall_w")
    return SimulationResult(
        temperatures_c=pd.DataFrame(y, index=index, columns=list(space.outputs)),
        mean_temperatures_c=mean_temps,
        inputs=frame_inputs,
        final_state_c=x_end,
        states=space.states,
        shortfall_w=short,
        message=message,
    )


def hold_setpoint(
    network: Network,
    inputs,
    setpoint_c,
    node="indoor",
    channel="heating_w",
    capacity_w=None,
    x0=None,
    dt_s=None,
    boundary_hold="foh",
    allow_cooling=False,
):
    """
    Heat an ideal heater must deliver to hold a node at a setpoint (heating only).

    In each interval the heater delivers the constant power that brings ``node`` to the
    setpoint at the end of the interval, clipped to ``[0, capacity_w]``. When the node is
    above the setpoint the heater is off and the zone floats; when the capacity binds, the
    difference is counted as shortfall.

    Parameters
    ----------
    network : Network
        The RC network; ``node`` must have a heat capacity.
    inputs : pandas.DataFrame or array_like
        As for :func:`simulate`; the ``channel`` column, if present, is ignored.
    setpoint_c : float or array_like, shape (N,)
        Setpoint at each stamp. [°C]
    node : str
        Controlled node.
    channel : str
        Heat input channel the heater drives.
    capacity_w : float, optional
        Heater output limit; ``None`` means unlimited. [W]
    x0 : array_like or dict, optional
        Initial capacitive-node temperatures [°C]; default: steady state at the first
        setpoint with the heater holding it.
    dt_s : float, optional
        Step when ``inputs`` has no DatetimeIndex; steps must be uniform. [s]
    boundary_hold : {'foh', 'zoh'}
        Hold for boundary temperatures.
    allow_cooling : bool
        Let the "heater" also remove heat (negative power), so the node follows the
        setpoint exactly; used to compare a model's heat demand with measured heating.

    Returns
    -------
    SimulationResult
        With the computed heating in ``inputs[channel]`` [W] and ``shortfall_w`` [W].

    Notes
    -----
    Clipping makes the recursion nonlinear, so it cannot run through a linear filter; the
    loop is compiled with numba when available. The node temperatures are then recomputed
    with :func:`simulate` from the heating found, so both share one exact discretisation.
    """
    space = network.state_space()
    if node not in space.states:
        raise NetworkError(f"the controlled node '{node}' must have a heat capacity (states: {list(space.states)})")
    if channel not in space.inputs:
        raise NetworkError(f"'{channel}' is not an input channel of the network ({list(space.inputs)})")
    if isinstance(inputs, pd.DataFrame) and channel not in inputs.columns:
        inputs = inputs.assign(**{channel: 0.0})
    u, index = _input_array(network, inputs)
    n_rows = u.shape[0]
    dts = _time_steps(index, dt_s, n_rows)
    if dts.size and np.ptp(dts) > 1e-9 * dts[0]:
        raise InputError("the ideal heater needs a uniform step; resample the inputs first")
    dt = float(dts[0]) if dts.size else float(dt_s or 3600.0)
    setpoint = np.broadcast_to(np.asarray(setpoint_c, dtype=float), (n_rows,)).copy()
    if not np.all(np.isfinite(setpoint)):
        raise InputError("setpoint has a missing or non-finite value")
    cap = np.inf if capacity_w is None else float(capacity_w)
    if not cap >= 0:
        raise InputError(f"heater capacity is {capacity_w!r} W (expected >= 0)")
    ci = list(space.inputs).index(channel)
    si = list(space.states).index(node)
    u_free = u.copy()
    u_free[:, ci] = 0.0
    if x0 is None:
        x_start = _setpoint_steady_state(network, space, u_free[0], setpoint[0], si, ci, cap)
    else:
        x_start = _initial_state(network, space, u[0], x0)
    heat, short = heater_power(space, u_free, setpoint, dt, x_start, si, ci, cap, allow_cooling, boundary_hold)
    u_used = u.copy()
    u_used[:, ci] = heat
    frame = inputs.copy() if isinstance(inputs, pd.DataFrame) else pd.DataFrame(u_used, index=index, columns=space.inputs)
    frame[channel] = heat
    states, means, x_end = run_modes(space, u_used, dts, x_start, _hold_mask(space, boundary_hold))
    msg = "ok" if not np.any(short > 0) else "heater capacity was not enough in some intervals"
    return _result(space, index, u_used, states, means, x_end, frame, shortfall=short, message=msg)


def heater_power(space, u_free, setpoint, dt_s, x_start, state_index, channel_index, capacity_w=np.inf,
                 allow_cooling=False, boundary_hold="foh"):
    """
    Array core of :func:`hold_setpoint`: the heater's power and shortfall, nothing else.

    Parameters
    ----------
    space : StateSpace
        Continuous state space.
    u_free : numpy.ndarray, shape (N, m)
        Inputs with the heater's channel at zero.
    setpoint : numpy.ndarray, shape (N,)
        Setpoint of the controlled state. [°C]
    dt_s : float
        Uniform step. [s]
    x_start : numpy.ndarray
        State at the first row. [°C]
    state_index, channel_index : int
        Controlled state and the heater's input channel.
    capacity_w : float
        Output limit. [W]
    allow_cooling : bool
        Let the power go negative so the state follows the setpoint exactly.
    boundary_hold : {'foh', 'zoh'}
        Hold for boundary temperatures (heat inputs are always interval means).

    Returns
    -------
    heat_w, shortfall_w : numpy.ndarray, shape (N,)
    """
    method = "foh" if boundary_hold == "foh" else "zoh"
    ad, b0, b1 = discretise(space.a, space.b, dt_s, method)
    if method == "foh":
        # Heat inputs are interval means: zero-order hold, whatever the boundary hold.
        _, b0z, _ = discretise(space.a, space.b, dt_s, "zoh")
        nb = space.n_boundaries
        b0 = np.concatenate([b0[:, :nb], b0z[:, nb:]], axis=1)
        b1 = np.concatenate([b1[:, :nb], np.zeros_like(b1[:, nb:])], axis=1)
    u_ext = np.vstack([u_free, u_free[-1:]])
    sp_ext = np.concatenate([setpoint, setpoint[-1:]])
    return _heater_loop(
        ad, b0, b1, u_ext, sp_ext, x_start, state_index, channel_index, capacity_w,
        -np.inf if allow_cooling else 0.0, a_row=space.a[state_index], b_row=space.b[state_index],
    )


def _setpoint_steady_state(network, space, u_row, setpoint, si, ci, cap):
    """Steady state with the node held at the setpoint (or floating when no heat is needed)."""
    free = steady_state(network, u_row)
    if free[si] >= setpoint:
        return free
    unit = np.zeros_like(u_row)
    unit[ci] = 1.0
    per_watt = steady_state(network, unit)
    if per_watt[si] <= 0:
        return free
    need = min((setpoint - free[si]) / per_watt[si], cap)
    return free + need * per_watt


def _heater_kernel(ad, drive, bq, sp_next, x, si, gain, cap, floor, a_row, hold_base, b_heat, heat, short):
    """Clipped deadbeat heater, step by step; fills ``heat`` and ``short`` in place."""
    n = x.shape[0]
    xn = np.empty(n)
    for k in range(drive.shape[0]):
        for i in range(n):
            acc = drive[k, i]
            for j in range(n):
                acc += ad[i, j] * x[j]
            xn[i] = acc
        need = (sp_next[k] - xn[si]) / gain
        if need <= floor:
            q = floor
        elif need > cap:
            q = cap
            # Shortfall is what the heater lacks to *hold* the setpoint from the present
            # state, not the one-step boost a deadbeat recovery would ask for.
            hold = hold_base[k] + a_row[si] * sp_next[k]
            for j in range(n):
                if j != si:
                    hold += a_row[j] * x[j]
            hold = -hold / b_heat
            short[k] = max(0.0, min(need, hold) - cap)
        else:
            q = need
        heat[k] = q
        for i in range(n):
            x[i] = xn[i] + bq[i] * q


try:  # numba compiles the loop; without it the same code runs, slowly, as Python.
    import numba

    _heater_kernel = numba.njit(cache=True)(_heater_kernel)
except ImportError:  # pragma: no cover - numba is a declared dependency
    pass


def _tall_product(u, b):
    """``u @ b.T`` for tall ``u`` and a small ``b`` without BLAS, whose threads only slow
    such thin products down on a busy machine."""
    out = np.zeros((u.shape[0], b.shape[0]))
    for j in range(b.shape[1]):
        if np.any(b[:, j]):
            out += u[:, j, None] * b[None, :, j]
    return out


def _heater_loop(ad, b0, b1, u_ext, sp_ext, x, si, ci, cap, floor, a_row, b_row):
    n_rows = u_ext.shape[0] - 1
    heat = np.zeros(n_rows)
    short = np.zeros(n_rows)
    drive = np.ascontiguousarray(_tall_product(u_ext[:-1], b0) + _tall_product(u_ext[1:], b1))
    b_other = np.array(b_row, dtype=float)
    b_other[ci] = 0.0
    hold_base = np.ascontiguousarray(_tall_product(u_ext[:-1], b_other[None, :])[:, 0])
    _heater_kernel(
        np.ascontiguousarray(ad), drive, np.ascontiguousarray(b0[:, ci]), np.ascontiguousarray(sp_ext[1:]),
        np.array(x, dtype=float), int(si), float(b0[si, ci]), float(cap), float(floor),
        np.ascontiguousarray(a_row, dtype=float), hold_base, float(b_row[ci]), heat, short,
    )
    return heat, short
