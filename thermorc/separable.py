r"""
Separable least squares for the presets: the fit's linear parameters solved exactly.

The indoor temperature a preset predicts is linear in the solar apertures, the unlogged gains
and the unmeasured initial node temperatures; only the resistances and capacitances enter
non-linearly. For given R and C, :class:`ResponseBasis` computes the response of the indoor
node to each linear parameter (one column each) and to the measured inputs (the fixed part),
all in one modal pass; the linear parameters then follow from a small bounded linear least
squares. The optimiser searches the R and C alone on the projected residual [1]_, which
needs far fewer model runs than searching all parameters at once and cannot stall in a poor
gains or initial-state value.

References
----------
.. [1] G. H. Golub and V. Pereyra, "The differentiation of pseudo-inverses and nonlinear
   least squares problems whose variables separate," SIAM J. Numer. Anal., vol. 10, no. 2,
   pp. 413-432, 1973, doi:10.1137/0710036.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.optimize

from thermorc.errors import NetworkError
from thermorc.network import PRESETS
from thermorc.simulate import sensor_coefficients

__all__ = ["ResponseBasis", "preset_matrices", "symmetric_modes"]


def preset_matrices(model, rc):
    """
    Conductance matrix, outdoor coupling and heat capacities of a preset.

    Parameters
    ----------
    model : {'1R1C', '2R2C', '3R2C', '4R3C'}
        Preset name.
    rc : sequence of float
        Its resistances [K W⁻¹] and capacitances [J K⁻¹] in the order of
        ``thermorc.network.PRESETS[model].parameters``.

    Returns
    -------
    k_w_per_k : numpy.ndarray, shape (n, n)
        Symmetric conductance matrix of the capacitive nodes (indoor first). [W K⁻¹]
    g_outdoor_w_per_k : numpy.ndarray, shape (n,)
        Conductance of each node to outdoor. [W K⁻¹]
    c_j_per_k : numpy.ndarray, shape (n,)
        Heat capacities. [J K⁻¹]

    Notes
    -----
    The same matrices as :meth:`thermorc.network.Network.state_space` builds for the preset
    (tests/test_separable.py checks it), written out because the fit needs them thousands of
    times.
    """
    if model == "1R1C":
        r, c = rc
        g = 1.0 / r
        return np.array([[g]]), np.array([g]), np.array([c])
    if model == "2R2C":
        r_ie, r_eo, c_i, c_e = rc
        g_io = 0.0
    elif model == "3R2C":
        r_ie, r_eo, r_io, c_i, c_e = rc
        g_io = 1.0 / r_io
    elif model == "4R3C":
        r_ie, r_eo, r_io, r_im, c_i, c_e, c_m = rc
        g_ie, g_eo, g_io, g_im = 1.0 / r_ie, 1.0 / r_eo, 1.0 / r_io, 1.0 / r_im
        k = np.array([[g_ie + g_io + g_im, -g_ie, -g_im], [-g_ie, g_ie + g_eo, 0.0], [-g_im, 0.0, g_im]])
        return k, np.array([g_io, g_eo, 0.0]), np.array([c_i, c_e, c_m])
    else:
        raise NetworkError(f"no separable form for model '{model}'")
    g_ie, g_eo = 1.0 / r_ie, 1.0 / r_eo
    k = np.array([[g_ie + g_io, -g_ie], [-g_ie, g_ie + g_eo]])
    return k, np.array([g_io, g_eo]), np.array([c_i, c_e])


class ResponseBasis:
    """
    Indoor-node responses of a preset to its measured inputs and to each linear parameter.

    Parameters
    ----------
    model : {'1R1C', '2R2C', '3R2C', '4R3C'}
        Preset name.
    data : thermorc.estimate.CalibrationData
        Inputs ``u`` (outdoor, heating, irradiance, logged gains), measured ``y`` and segments.
    periods : tuple or None
        Gains periods: the period of each row (int array) and the number of periods
        (:func:`thermorc.result.gains_period_labels`); ``None`` for one constant level.
    block_id : numpy.ndarray of int
        Residual block of each row, ``-1`` for rows not compared.
    n_blocks : int
        Number of blocks.
    state_bounds_c : tuple
        Lowest and highest initial temperature of the hidden nodes, each a number or one value
        per hidden start (segment by segment, in node order). [°C] Without bounds a node
        that holds almost no heat, tightly coupled to the room, can take a start of thousands
        of degrees whose tiny, slow trace the fit then uses as a free drift.

    Notes
    -----
    Linear parameters, in order: aperture onto the indoor node, then onto each node the preset
    has a solar share for [m²] (when irradiance is given), the gains level(s) [W], then the hidden nodes' initial temperatures,
    segment by segment and within a segment in node order [°C]. The measured
    indoor temperature starts the indoor node; the outdoor temperature is held linearly
    between samples, the powers as interval means, as in :func:`thermorc.simulate.run_modes`.
    With :attr:`sensor_s` above zero every response is read through the sensor's lag
    (:func:`thermorc.simulate.sensed_temperature`), row by row, before the block means
    (the lag runs inside each modal recursion: both are linear, so the order does not matter).
    """

    def __init__(self, model, data, periods, block_id, n_blocks, state_bounds_c=(-math.inf, math.inf)):
        self.model = model
        nodes = PRESETS[model].nodes
        self.n_states = len(nodes)
        # Nodes the sun heats: indoor, then one per solar share of the preset, in its order.
        self._solar_nodes = np.array([0] + [nodes.index(name[len("solar_to_"):-len("_share")])
                                            for name in PRESETS[model].solar_shares], dtype=np.int64)
        self.data = data
        self.step_s = float(data.step_s)
        self.has_solar = bool(data.has_solar)
        self.n_channels = 1 if self.has_solar else 0  # irradiance sequences (one column of u)
        self.n_solar = self.n_channels * len(self._solar_nodes)
        # Gains periods: (row labels, number of periods), or None for one constant level.
        self.periods = periods
        self.n_gains = 1 if periods is None else int(periods[1])
        self.segments = list(data.segments)
        self.n_hidden = (self.n_states - 1) * len(self.segments)
        self.n_linear = self.n_solar + self.n_gains + self.n_hidden
        self.n_bounded = self.n_solar + self.n_gains  # apertures and gains are >= 0
        lo, hi = (np.broadcast_to(np.asarray(b, dtype=float), (self.n_hidden,)) for b in state_bounds_c)
        self.lower = np.concatenate([np.zeros(self.n_bounded), lo])
        self.upper = np.concatenate([np.full(self.n_bounded, math.inf), hi])
        used = block_id >= 0
        counts = np.bincount(block_id[used], minlength=n_blocks).astype(float)
        self.n_blocks = int(n_blocks)
        self.block_id = np.asarray(block_id, dtype=np.int64)
        self.row_weight = np.where(used, 1.0 / counts[np.where(used, block_id, 0)], 0.0) if n_blocks else np.zeros(len(data.y))
        y = np.where(np.isfinite(data.y) & used, data.y, 0.0)
        self.y_blocks = np.bincount(block_id[used], weights=(y * self.row_weight)[used], minlength=n_blocks)
        self._n_unit = self.n_channels + self.n_gains  # irradiance channels, then gains levels
        self._owner = self._segment_of(self.block_id, self.n_blocks)
        self._held = None  # the bounds held at the last solve: usually the answer next time too
        self._held_at = np.zeros(self.n_linear)  # the value each held coefficient is held at
        u = data.u
        # Inputs over the whole log: one row per stamp; the step from row k uses row k's values.
        self._outdoor = np.ascontiguousarray(u[:, 0])
        self._d_outdoor = np.append(np.diff(u[:, 0]), 0.0)
        seqs = [u[:, 1] + u[:, 3]]  # heating and logged gains both enter the indoor air
        if self.has_solar:
            seqs.append(u[:, 2])
        if self.periods is None:
            seqs.append(np.ones(len(data.y)))
        else:
            seqs += [(self.periods[0] == j).astype(float) for j in range(self.n_gains)]
        self._seqs = np.ascontiguousarray(seqs)
        self._seg_start = np.array([seg.start for seg in self.segments], dtype=np.int64)
        self._seg_stop = np.array([seg.stop for seg in self.segments], dtype=np.int64)
        self._y0 = np.array([data.y[seg][np.isfinite(data.y[seg])][0] for seg in self.segments])
        #: Time constant of the sensor's first-order lag [s]; 0 for none. Settable between runs.
        self.sensor_s = 0.0

    def columns(self, rc):
        """
        Block means of the fixed response and of each linear parameter's response.

        Parameters
        ----------
        rc : sequence of float
            Resistances [K W⁻¹] and capacitances [J K⁻¹] (preset order).

        Returns
        -------
        fixed : numpy.ndarray, shape (n_blocks,)
            Indoor temperature with every linear parameter zero. [°C]
        linear : numpy.ndarray, shape (n_blocks, n_linear)
            Change of the indoor temperature per unit of each linear parameter.
        """
        both = self._run(rc, self.block_id, self.row_weight, self.n_blocks)
        return both[:, 0], both[:, 1:]

    def rows(self, rc):
        """The responses of :meth:`columns` at every row (zero outside the segments)."""
        n = len(self.data.y)
        return self._run(rc, np.arange(n, dtype=np.int64), np.ones(n), n, self._segment_of(np.arange(n), n))

    def _segment_of(self, block_id, n_blocks):
        owner = np.full(n_blocks, -1, dtype=np.int64)
        for k, seg in enumerate(self.segments):
            ids = block_id[seg]
            owner[ids[ids >= 0]] = k
        return owner

    def _run(self, rc, block_id, row_weight, n_blocks, owner=None):
        k, g_out, caps = preset_matrices(self.model, rc)
        out = np.zeros((n_blocks, 1 + self.n_linear))
        m = self.n_states
        acc = np.zeros((n_blocks, m, self._n_unit + 1 + max(m - 1, 1)))
        rates, v = (np.zeros(m), np.eye(m)) if m <= 2 else symmetric_modes(_scaled(k, caps))
        lag = sensor_coefficients(self.step_s, self.sensor_s)
        status = _columns_kernel(
            k, g_out, caps, rates, v, self.step_s, self._seg_start, self._seg_stop, self._y0, self._outdoor, self._d_outdoor,
            self._seqs, block_id, row_weight, self._owner if owner is None else owner, self.n_channels,
            self._solar_nodes, self.n_gains, lag, acc, out,
        )
        if status:
            raise NetworkError("the network has a mode that does not decay")
        return out

    def solve_linear(self, fixed, linear, extra=None):
        """
        Linear parameters by least squares, apertures and gains kept non-negative and the
        hidden nodes' starts within ``state_bounds_c``.

        Parameters
        ----------
        fixed, linear : numpy.ndarray
            From :meth:`columns`.
        extra : numpy.ndarray, optional
            Residuals that do not depend on the linear parameters (a prior), appended.

        Returns
        -------
        coef : numpy.ndarray, shape (n_linear,)
        residuals : numpy.ndarray
            Block residuals ``y - fixed - linear @ coef`` (then ``extra``).

        Notes
        -----
        The bounds held at the previous call are tried first and kept when the
        Karush-Kuhn-Tucker conditions hold (they usually do between neighbouring R and C),
        then the bounds the unbounded solution breaks; otherwise the bounded-variable least
        squares of Stark and Parker [1]_ (:func:`scipy.optimize.lsq_linear`) finds the face.
        Either way the answer is the exact bounded optimum.

        References
        ----------
        .. [1] P. B. Stark and R. L. Parker, "Bounded-variable least-squares: an algorithm and
           applications," Computational Statistics, vol. 10, pp. 129-141, 1995.
        """
        target = self.y_blocks - fixed
        coef = None
        if self._held is not None:
            coef = self._checked(linear, target, self._held, self._held_at)
        if coef is None:
            coef = _lstsq(linear, target)
            low, high = coef < self.lower, coef > self.upper
            if low.any() or high.any():
                # Usually holding the violated bounds is the answer; otherwise search the faces.
                at = np.where(low, self.lower, np.where(high, self.upper, 0.0))
                coef = self._checked(linear, target, low | high, at)
                if coef is None:
                    coef = scipy.optimize.lsq_linear(linear, target, bounds=(self.lower, self.upper),
                                                     method="bvls").x
                    coef = np.clip(coef, self.lower, self.upper)
            self._held = (coef <= self.lower) | (coef >= self.upper)
            self._held_at = np.where(self._held, coef, 0.0)
        resid = target - linear @ coef
        if extra is not None:
            resid = np.append(resid, extra)
        return coef, resid

    def projected_jacobian(self, theta_rc, fixed, linear, coef, step=1e-6):
        r"""
        Jacobian of the projected residual with respect to log R and log C.

        Parameters
        ----------
        theta_rc : numpy.ndarray
            Natural logarithms of the resistances and capacitances.
        fixed, linear : numpy.ndarray
            :meth:`columns` at ``theta_rc``.
        coef : numpy.ndarray
            :meth:`solve_linear`'s solution there; coefficients held at a bound stay held.
        step : float
            Relative forward-difference step for the columns.

        Returns
        -------
        numpy.ndarray, shape (n_blocks, len(theta_rc))

        Notes
        -----
        With :math:`r = P^\perp(y - f)`, :math:`c = A^+(y - f)` on the free columns,
        :math:`\partial r = -P^\perp(\partial f + \partial A\, c) - (A^+)^T \partial A^T r`
        (Golub and Pereyra 1973, the full form). Only the columns are differenced, one model
        run per parameter, and no further linear solves are needed.
        """
        held = self._held  # the face of the bounds that solve_linear found at theta_rc
        free = ~held
        a = linear[:, free]
        c = coef[free]
        resid = self.y_blocks - fixed - linear @ coef
        # Coefficients held at a non-zero bound move the fixed part with the columns.
        fixed = fixed + linear[:, held] @ coef[held]
        pinv = np.linalg.pinv(a)
        jac = np.empty((fixed.size, theta_rc.size))
        for k in range(theta_rc.size):
            h = step * max(1.0, abs(theta_rc[k]))
            moved = theta_rc.copy()
            moved[k] += h
            f2, lin2 = self.columns(np.exp(moved))
            d_fixed = (f2 + lin2[:, held] @ coef[held] - fixed) / h
            d_a = (lin2[:, free] - a) / h
            v = d_fixed + d_a @ c
            jac[:, k] = -(v - a @ (pinv @ v)) - pinv.T @ (d_a.T @ resid)
        return jac

    def _checked(self, linear, target, held, at):
        """The solution with ``held`` at ``at`` if it is the bounded optimum (KKT), else None."""
        trial = self._held_solution(linear, target, held, at)
        if np.any(trial < self.lower) or np.any(trial > self.upper):
            return None
        # No held coefficient may lower the residual by leaving its bound.
        gradient = linear[:, held].T @ (target - linear @ trial)
        scale = np.linalg.norm(linear[:, held], axis=0) * max(np.linalg.norm(target), 1e-300)
        inward = np.where(at[held] >= self.upper[held], -gradient, gradient)
        return trial if np.all(inward <= 1e-10 * scale) else None

    def _held_solution(self, linear, target, held, at):
        trial = np.zeros(self.n_linear)
        if held.any():
            trial[held] = at[held]
            target = target - linear[:, held] @ trial[held]
        trial[~held] = _lstsq(linear[:, ~held], target)
        return trial


def _phi12(x):
    """phi_1 and phi_2 of :func:`thermorc.simulate.phi_functions` for one rate."""
    if x < 1e-3:
        return 1 - x / 2 + x * x / 6 - x**3 / 24, 0.5 - x / 6 + x * x / 24 - x**3 / 120
    em1 = math.expm1(-x)
    return -em1 / x, (x + em1) / (x * x)


def _recur(z, aj, c0, x0, c1, x1, c2, x2, lag, block_id, row_weight, start, stop, acc, j, col):
    """One mode's recursion ``z <- aj z + c0 x0 + c1 x1 + c2 x2`` from ``z``, read through the
    sensor's lag (:func:`thermorc.simulate.sensor_coefficients`) and summed into blocks."""
    cur = -1
    total = 0.0
    sa, sb0, sb1 = lag[0], lag[1], lag[2]
    sensed = z  # the sensor starts equal to the temperature
    for row in range(start, stop):
        b = block_id[row]
        if b != cur:
            if cur >= 0:
                acc[cur, j, col] += total
            cur = b
            total = 0.0
        if b >= 0:
            total += row_weight[row] * sensed
        # The inputs are summed apart from z so that the chain from row to row is one multiply-add.
        new = aj * z + (c0 * x0[row] + c1 * x1[row] + c2 * x2[row])
        sensed = sa * sensed + (sb0 * new + sb1 * z)
        z = new
    if cur >= 0:
        acc[cur, j, col] += total


def _columns_loop(k, g_out, caps, rates_given, v_given, dt, seg_start, seg_stop, y0, outdoor, d_outdoor, seqs, block_id, row_weight,
                  owner, n_channels, solar_nodes, n_gains, lag, acc, out):
    """Modes of the preset, every modal recursion summed into blocks, then the columns.

    One and two nodes find their modes here in closed form; more nodes take theirs from
    ``rates_given`` and ``v_given`` (:func:`symmetric_modes`). Returns 0, or 1 when a mode does
    not decay.
    """
    m = caps.size
    root = np.sqrt(caps)
    v = np.eye(m)
    rates = np.empty(m)
    if m > 2:
        rates[:] = rates_given
        v[:, :] = v_given
    elif m == 1:
        rates[0] = k[0, 0] / caps[0]
    else:
        # Closed form of the symmetric 2x2 eigenproblem of C^-1/2 K C^-1/2 (symmetric_modes).
        p = k[0, 0] / caps[0]
        q = k[0, 1] / (root[0] * root[1])
        r = k[1, 1] / caps[1]
        half_gap = math.hypot(0.5 * (p - r), q)
        fast = 0.5 * (p + r) + half_gap
        rates[0] = (p * r - q * q) / fast
        rates[1] = fast
        if q != 0.0:
            angle = 0.5 * math.atan2(2 * q, p - r)
            c, sn = math.cos(angle), math.sin(angle)
            v[0, 0], v[1, 0], v[0, 1], v[1, 1] = -sn, c, c, sn
        elif p > r:
            v[0, 0], v[1, 0], v[0, 1], v[1, 1] = 0.0, 1.0, 1.0, 0.0
    for j in range(m):
        if not (rates[j] > 0 and math.isfinite(rates[j])):
            return 1
    w0 = np.empty(m)
    w_inv = np.empty((m, m))
    beta_out = np.zeros(m)
    beta_node = np.empty((m, m))
    a = np.empty(m)
    c_out0 = np.empty(m)
    c_out1 = np.empty(m)
    c_power = np.empty(m)
    c_unit = np.empty(m)
    for j in range(m):
        w0[j] = v[0, j] / root[0]
        for i in range(m):
            w_inv[j, i] = v[i, j] * root[i]
            beta_node[j, i] = w_inv[j, i] / caps[i]
            beta_out[j] += w_inv[j, i] * g_out[i] / caps[i]
        x = rates[j] * dt
        a[j] = math.exp(-x)
        phi1, phi2 = _phi12(x)
        c_out0[j] = dt * phi1 * beta_out[j]
        c_out1[j] = dt * phi2 * beta_out[j]
        c_power[j] = dt * phi1 * beta_node[j, 0]
        c_unit[j] = dt * phi1
    n_unit = seqs.shape[0] - 1
    first_hidden = n_unit + 1
    # One scalar recurrence per mode and column, row by row: the state stays in a register and
    # each block's sum is kept until the block changes, instead of stepping every mode and
    # column together through memory.
    for seg in range(seg_start.size):
        start = seg_start[seg]
        stop = seg_stop[seg]
        for j in range(m):
            aj = a[j]
            _recur(w_inv[j, 0] * y0[seg], aj, c_out0[j], outdoor, c_out1[j], d_outdoor, c_power[j], seqs[0], lag,
                   block_id, row_weight, start, stop, acc, j, 0)
            for s in range(n_unit):
                _recur(0.0, aj, c_unit[j], seqs[1 + s], 0.0, outdoor, 0.0, outdoor, lag,
                       block_id, row_weight, start, stop, acc, j, 1 + s)
            if m > 1:
                # The hidden nodes' starts all decay as the mode does: one decay from 1, scaled below.
                _recur(1.0, aj, 0.0, outdoor, 0.0, outdoor, 0.0, outdoor, lag,
                       block_id, row_weight, start, stop, acc, j, first_hidden)
    for j in range(m):
        for node in range(m - 1, 0, -1):
            scale = w_inv[j, node]
            for b in range(acc.shape[0]):
                acc[b, j, first_hidden + node - 1] = scale * acc[b, j, first_hidden]
    n_sun = solar_nodes.size
    n_solar = n_channels * n_sun
    for b in range(acc.shape[0]):
        total = 0.0
        for j in range(m):
            total += w0[j] * acc[b, j, 0]
        out[b, 0] = total
        for ch in range(n_channels):
            for i in range(n_sun):
                node = solar_nodes[i]
                total = 0.0
                for j in range(m):
                    total += w0[j] * beta_node[j, node] * acc[b, j, 1 + ch]
                out[b, 1 + ch * n_sun + i] = total
        for g in range(n_gains):
            total = 0.0
            for j in range(m):
                total += w0[j] * beta_node[j, 0] * acc[b, j, 1 + n_channels + g]
            out[b, 1 + n_solar + g] = total
        if m > 1 and owner[b] >= 0:
            for node in range(1, m):
                total = 0.0
                for j in range(m):
                    total += w0[j] * acc[b, j, first_hidden + node - 1]
                out[b, 1 + n_solar + n_gains + owner[b] * (m - 1) + node - 1] = total
    return 0


try:  # numba compiles the loops; the plain Python loops are the same arithmetic, only slower.
    import numba

    _phi12 = numba.njit(cache=True)(_phi12)
    _recur = numba.njit(cache=True, fastmath={"contract"})(_recur)
    _columns_kernel = numba.njit(cache=True)(_columns_loop)
except ImportError:  # pragma: no cover - numba is a declared dependency
    _columns_kernel = _columns_loop


def _scaled(k, caps):
    """:math:`C^{-1/2} K C^{-1/2}`, the symmetric form of :math:`C^{-1} K`. [s⁻¹]"""
    root = np.sqrt(caps)
    return k / np.outer(root, root)


def symmetric_modes(s):
    """
    Eigenvalues (ascending) and orthonormal eigenvectors of a symmetric matrix.

    Parameters
    ----------
    s : numpy.ndarray, shape (n, n)
        :math:`C^{-1/2} K C^{-1/2}` of a preset. [s⁻¹] One and two nodes are solved in closed
        form, more by :func:`numpy.linalg.eigh`.

    Returns
    -------
    rates : numpy.ndarray
        Relaxation rates, ascending. [s⁻¹]
    v : numpy.ndarray
        Eigenvectors as columns.

    Raises
    ------
    NetworkError
        A rate that is not finite and positive.
    """
    if s.shape[0] == 1:
        rates, v = s[0], np.ones((1, 1))
    elif s.shape[0] > 2:
        rates, v = np.linalg.eigh(s)
    else:
        # Closed form of the symmetric 2x2 eigenproblem (numpy.linalg.eigh in the tests).
        p, q, r = s[0, 0], s[0, 1], s[1, 1]
        mean = 0.5 * (p + r)
        half_gap = math.hypot(0.5 * (p - r), q)
        fast = mean + half_gap
        # The slow rate from the determinant: mean - half_gap cancels when the modes are far apart.
        rates = np.array([(p * r - q * q) / fast, fast])
        if q == 0.0:
            v = np.eye(2) if p <= r else np.array([[0.0, 1.0], [1.0, 0.0]])
        else:
            angle = 0.5 * math.atan2(2 * q, p - r)
            c, sn = math.cos(angle), math.sin(angle)
            # (c, sn) belongs to the larger eigenvalue; the slow mode comes first.
            v = np.array([[-sn, c], [c, sn]])
    if not (np.all(np.isfinite(rates)) and rates[0] > 0):
        raise NetworkError("the network has a mode that does not decay")
    return rates, v


def _lstsq(matrix, target):
    """Least-squares solution, minimum norm where the columns are dependent."""
    if matrix.shape[1] == 0:
        return np.zeros(0)
    return np.linalg.lstsq(matrix, target, rcond=None)[0]
