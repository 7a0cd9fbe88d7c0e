r"""
Prediction-error (maximum-likelihood) machinery: process noise and the Kalman-filter likelihood.

The calibration stage treats the RC network as a linear stochastic differential equation,

.. math::

    dx = (A x + B u)\,dt + \sigma\,d\omega,\qquad Q_c = \sigma\sigma^T,

sampled every :math:`\Delta t` and observed through one noisy thermometer,
:math:`y_k = c\,x_k + d\,u_k + e_k` with :math:`e_k \sim N(0, r)`. Over one step the state moves
by :math:`x_{k+1} = A_d x_k + B_0 u_k + B_1 u_{k+1} + w_k` (:func:`thermorc.simulate.discretise`)
with :math:`w_k \sim N(0, Q_d)` and :math:`Q_d = \int_0^{\Delta t} e^{As} Q_c e^{A^T s}\,ds`, which
:func:`process_noise` computes by Van Loan's block exponential [1]_. :func:`kalman_loglike`
runs the Kalman filter and returns the exact Gaussian log-likelihood in prediction-error
(innovation) form [2]_ [3]_ [4]_,

.. math::

    \ln L = -\tfrac12 \sum_{k\ \mathrm{observed}}
    \left(\ln 2\pi F_k + \varepsilon_k^2 / F_k\right).

Missing samples are predicted but not updated, so the state covariance grows across a gap and
shrinks again afterwards (a time-varying filter). In a long run of observed samples of a
time-invariant model the covariance converges to the solution of the discrete algebraic
Riccati equation (DARE); from then on the gain and the innovation variance are constants and
the filter is a fixed linear recursion. The filter runs the time-varying form at the start and
after each gap until the covariance has converged to the DARE solution, then switches to the
steady-state gain. The DARE is solved by a compiled doubling iteration [5]_ (with
:func:`scipy.linalg.solve_discrete_are` as fallback), and the whole recursion is one compiled
loop (numba).

References
----------
.. [1] C. F. Van Loan, "Computing integrals involving the matrix exponential," IEEE Trans.
   Automat. Control, vol. 23, no. 3, pp. 395-404, 1978, doi:10.1109/TAC.1978.1101743.
.. [2] A. C. Harvey, Forecasting, Structural Time Series Models and the Kalman Filter.
   Cambridge University Press, 1989, ch. 3.
.. [3] N. R. Kristensen, H. Madsen and S. B. Jørgensen, "Parameter estimation in stochastic
   grey-box models," Automatica, vol. 40, no. 2, pp. 225-237, 2004.
.. [4] B. D. O. Anderson and J. B. Moore, Optimal Filtering. Prentice-Hall, 1979, ch. 4
   (steady-state filter and the Riccati equation).
.. [5] F. Poloni, "Iterative and doubling algorithms for Riccati-type matrix equations: a
   comparative introduction," arXiv:2005.08903, 2020.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from thermorc.errors import InputError

__all__ = [
    "KalmanOutput",
    "process_noise",
    "kalman_loglike",
    "innovations_loglike",
    "steady_state_filter",
]

_LOG_2PI = math.log(2.0 * math.pi)
#: Relative distance of the predicted covariance from the DARE solution below which the filter
#: switches to the steady-state gain (``steady_after=None``).
STEADY_TOL = 1e-9
_NEVER = -2  # kernel code: never switch to the steady-state gain
_AUTO = -1  # kernel code: switch once the covariance has converged


@dataclass
class KalmanOutput:
    """
    Result of one Kalman-filter pass.

    Attributes
    ----------
    loglike : float
        Gaussian log-likelihood of the observed samples; ``-inf`` when an innovation variance
        was not positive and finite (the parameters are then infeasible). [unitless]
    innovations : numpy.ndarray, shape (N,)
        One-step prediction errors :math:`\\varepsilon_k = y_k - \\hat y_{k|k-1}`; NaN at
        missing samples. [K]
    innovation_var : numpy.ndarray, shape (N,)
        Their variances :math:`F_k = c P_{k|k-1} c^T + r`; at missing samples the variance of
        the one-step prediction of the sample. [K²]
    filtered_states : numpy.ndarray, shape (N, n)
        :math:`\\hat x_{k|k}` (equal to the prediction at missing samples). [°C]
    predicted_states : numpy.ndarray, shape (N, n)
        :math:`\\hat x_{k|k-1}`; row 0 is the prior mean. [°C]
    n_used : int
        Number of observed samples in the likelihood.
    n_steady : int
        How many of them were filtered with the steady-state gain.
    message : str
        ``"ok"``, or why the likelihood is ``-inf``.
    """

    loglike: float
    innovations: np.ndarray
    innovation_var: np.ndarray
    filtered_states: np.ndarray
    predicted_states: np.ndarray
    n_used: int
    n_steady: int
    message: str = "ok"

    def __repr__(self):
        return (
            f"KalmanOutput(loglike={self.loglike:.6g}, n_used={self.n_used}, "
            f"n_steady={self.n_steady}, states{self.filtered_states.shape}, message={self.message!r})"
        )


def process_noise(a, q_c, dt_s):
    r"""
    Discrete state transition and process-noise covariance of a linear SDE over one step.

    Parameters
    ----------
    a : array_like, shape (n, n)
        Continuous state matrix :math:`A`. [s⁻¹]
    q_c : array_like, shape (n, n) or (n,)
        Continuous noise intensity :math:`Q_c = \sigma\sigma^T`; a vector is taken as its
        diagonal. [K² s⁻¹]
    dt_s : float
        Step. [s]

    Returns
    -------
    ad : numpy.ndarray, shape (n, n)
        :math:`A_d = e^{A\Delta t}`.
    q_d : numpy.ndarray, shape (n, n)
        :math:`Q_d = \int_0^{\Delta t} e^{As} Q_c e^{A^T s}\,ds`, symmetric. [K²]

    Notes
    -----
    With :math:`M = \begin{bmatrix} -A & Q_c\\ 0 & A^T\end{bmatrix}\Delta t` and
    :math:`e^{M} = \begin{bmatrix} F_{11} & F_{12}\\ 0 & F_{22}\end{bmatrix}`, Van Loan [1]_
    shows :math:`A_d = F_{22}^T` and :math:`Q_d = F_{22}^T F_{12}`. For a scalar
    :math:`A = a` this is :math:`\sigma^2 (e^{2a\Delta t} - 1) / (2a)`.

    References
    ----------
    .. [1] C. F. Van Loan, "Computing integrals involving the matrix exponential," IEEE Trans.
       Automat. Control, vol. 23, no. 3, pp. 395-404, 1978, doi:10.1109/TAC.1978.1101743.
    """
    a = np.atleast_2d(np.asarray(a, dtype=float))
    n = a.shape[0]
    if a.shape != (n, n):
        raise InputError(f"state matrix has shape {a.shape} (expected a square matrix)")
    q = np.asarray(q_c, dtype=float)
    if q.ndim <= 1:
        q = np.diag(np.broadcast_to(q, (n,)))
    if q.shape != (n, n):
        raise InputError(f"noise intensity has shape {q.shape} (expected ({n}, {n}) or ({n},))")
    dt = float(dt_s)
    if not (np.isfinite(dt) and dt > 0):
        raise InputError(f"dt_s is {dt_s!r} (expected a finite step > 0 s)")
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(q))):
        raise InputError("state matrix or noise intensity has a non-finite entry")
    block = np.zeros((2 * n, 2 * n))
    block[:n, :n] = -a * dt
    block[:n, n:] = q * dt
    block[n:, n:] = a.T * dt
    full = scipy.linalg.expm(block)
    ad = full[n:, n:].T
    q_d = ad @ full[:n, n:]
    return ad, 0.5 * (q_d + q_d.T)


def innovations_loglike(innov, var):
    r"""
    Gaussian log-likelihood from one-step prediction errors and their variances.

    Parameters
    ----------
    innov : array_like, shape (N,)
        Innovations :math:`\varepsilon_k`; NaN marks a missing sample, which is left out. [K]
    var : array_like, shape (N,)
        Innovation variances :math:`F_k > 0`. [K²]

    Returns
    -------
    float
        :math:`\ln L = -\tfrac12 \sum_k (\ln 2\pi F_k + \varepsilon_k^2 / F_k)`; ``-inf`` if a
        variance of a used sample is not positive.

    References
    ----------
    .. [1] A. C. Harvey, Forecasting, Structural Time Series Models and the Kalman Filter.
       Cambridge University Press, 1989, sec. 3.4 (prediction error decomposition).
    """
    e = np.asarray(innov, dtype=float)
    f = np.broadcast_to(np.asarray(var, dtype=float), e.shape)
    used = ~np.isnan(e)
    e, f = e[used], f[used]
    if not np.all(f > 0) or not np.all(np.isfinite(f)):
        return -math.inf
    return float(-0.5 * np.sum(_LOG_2PI + np.log(f) + e * e / f))


def _doubling(ad, c, q, r, max_iter, tol):
    """
    Structure-preserving doubling for ``X = ad X (I + G X)^{-1} ad^T + q``, ``G = c^T c / r``.

    Returns ``(X, converged)``; ``X`` after ``k`` doublings is the Riccati recursion after
    ``2^k`` steps, so convergence is quadratic.
    """
    n = ad.shape[0]
    eye = np.eye(n)
    a_k = ad.T.copy()
    g_k = np.outer(c, c) / r
    h_k = q.copy()
    for _ in range(max_iter):
        w = eye + g_k @ h_k
        wa = np.linalg.solve(w, a_k)
        wg = np.linalg.solve(w, g_k)
        h_new = h_k + a_k.T @ h_k @ wa
        g_k = g_k + a_k @ wg @ a_k.T
        a_k = a_k @ wa
        h_new = 0.5 * (h_new + h_new.T)
        g_k = 0.5 * (g_k + g_k.T)
        diff = np.max(np.abs(h_new - h_k))
        h_k = h_new
        if not np.all(np.isfinite(h_k)):
            return h_k, False
        if diff <= tol * np.max(np.abs(h_k)):
            return h_k, True
    return h_k, False


try:  # compiled, it costs microseconds instead of the general solver's fraction of a millisecond
    import numba

    _doubling = numba.njit(cache=True)(_doubling)
except ImportError:  # pragma: no cover - numba is a declared dependency
    pass


def steady_state_filter(ad, c_row, q_d, r_meas, method="doubling"):
    r"""
    Steady-state one-step predicted covariance, gain and innovation variance.

    Parameters
    ----------
    ad : array_like, shape (n, n)
        Discrete state transition.
    c_row : array_like, shape (n,)
        Measurement row.
    q_d : array_like, shape (n, n)
        Discrete process-noise covariance. [K²]
    r_meas : float
        Measurement-noise variance. [K²]
    method : {'doubling', 'scipy'}
        ``'doubling'``: compiled structure-preserving doubling [2]_, falling back to
        :func:`scipy.linalg.solve_discrete_are` if it does not converge. ``'scipy'``:
        :func:`scipy.linalg.solve_discrete_are` only.

    Returns
    -------
    p_pred : numpy.ndarray, shape (n, n)
        Stabilising solution of
        :math:`P = A_d P A_d^T - A_d P c^T (c P c^T + r)^{-1} c P A_d^T + Q_d`. [K²]
    gain : numpy.ndarray, shape (n,)
        Measurement-update gain :math:`K = P c^T / F`.
    f : float
        Innovation variance :math:`F = c P c^T + r`. [K²]

    Raises
    ------
    numpy.linalg.LinAlgError
        When the DARE has no stabilising solution.

    Notes
    -----
    The filter Riccati equation is the control DARE of the dual system
    (:math:`A_d^T`, :math:`c^T`) [1]_, which is what :func:`scipy.linalg.solve_discrete_are`
    solves. Written as :math:`P = A_d P (I + G P)^{-1} A_d^T + Q_d` with
    :math:`G = c^T c / r`, it is also the fixed point of the Riccati recursion, and the
    doubling algorithm [2]_ reaches step :math:`2^k` of that recursion in :math:`k`
    iterations. Two plain Riccati steps then polish either solution, which contracts rounding
    error [1]_.

    References
    ----------
    .. [1] B. D. O. Anderson and J. B. Moore, Optimal Filtering. Prentice-Hall, 1979, ch. 4.
    .. [2] F. Poloni, "Iterative and doubling algorithms for Riccati-type matrix equations: a
       comparative introduction," arXiv:2005.08903, 2020.
    """
    ad = np.ascontiguousarray(ad, dtype=float)
    c = np.ascontiguousarray(np.asarray(c_row, dtype=float).reshape(-1))
    q = np.ascontiguousarray(q_d, dtype=float)
    r = float(r_meas)
    ok = False
    if method == "doubling":
        p, ok = _doubling(ad, c, q, r, 64, 1e-15)
    elif method != "scipy":
        raise ValueError(f"method is {method!r} (expected 'doubling' or 'scipy')")
    if not ok:
        p = scipy.linalg.solve_discrete_are(ad.T, c[:, None], q, np.array([[r]]))
    for _ in range(2):
        pc = p @ c
        f = float(c @ pc) + r
        pf = p - np.outer(pc, pc) / f
        p = ad @ pf @ ad.T + q
        p = 0.5 * (p + p.T)
    if not np.all(np.isfinite(p)):
        raise np.linalg.LinAlgError("the Riccati equation has no finite solution")
    pc = p @ c
    f = float(c @ pc) + r
    return p, pc / f, f


def _filter_loop(ad, q, c, r, y, obs, drive, x0, p0, p_ss, k_ss, f_ss, steady_after, tol,
                 innov, fvar, xf, xp):
    """
    Kalman filter with a scalar measurement; fills the output arrays, returns
    ``(loglike, n_used, n_steady, status)`` with status 0 ok, 1 bad variance.

    ``steady_after``: -2 never switch, -1 switch when ``|P - p_ss| <= tol max|p_ss|``,
    ``>= 0`` switch after that many updates since the start or the last gap.
    """
    n = x0.shape[0]
    n_rows = y.shape[0]
    x = x0.copy()
    p = p0.copy()
    pc = np.empty(n)
    xn = np.empty(n)
    tmp = np.empty((n, n))
    ll = 0.0
    n_used = 0
    n_steady = 0
    steady = False
    run = 0
    scale = 0.0
    for i in range(n):
        for j in range(n):
            if abs(p_ss[i, j]) > scale:
                scale = abs(p_ss[i, j])
    for k in range(n_rows):
        for i in range(n):
            xp[k, i] = x[i]
        yhat = 0.0
        for i in range(n):
            yhat += c[i] * x[i]
        if steady:
            v = y[k] - yhat
            f = f_ss
            for i in range(n):
                x[i] += k_ss[i] * v
            ll -= 0.5 * (math.log(f) + v * v / f)
            n_used += 1
            n_steady += 1
        else:
            f = r
            for i in range(n):
                acc = 0.0
                for j in range(n):
                    acc += p[i, j] * c[j]
                pc[i] = acc
                f += c[i] * acc
            if not (f > 0.0 and f < math.inf):
                return -math.inf, n_used, n_steady, 1
            if obs[k]:
                v = y[k] - yhat
                for i in range(n):
                    x[i] += pc[i] * v / f
                for i in range(n):
                    for j in range(n):
                        p[i, j] -= pc[i] * pc[j] / f
                ll -= 0.5 * (math.log(f) + v * v / f)
                n_used += 1
                run += 1
            else:
                v = math.nan
                run = 0
        innov[k] = v
        fvar[k] = f
        for i in range(n):
            xf[k, i] = x[i]
        if k == n_rows - 1:
            break
        # Time update of the mean (both modes).
        for i in range(n):
            acc = drive[k, i]
            for j in range(n):
                acc += ad[i, j] * x[j]
            xn[i] = acc
        for i in range(n):
            x[i] = xn[i]
        if steady:
            if not obs[k + 1]:
                # P_{k+1|k} of the steady filter is the DARE solution itself.
                steady = False
                run = 0
                for i in range(n):
                    for j in range(n):
                        p[i, j] = p_ss[i, j]
            continue
        # Time update of the covariance: P <- ad P ad^T + q, kept symmetric.
        for i in range(n):
            for j in range(n):
                acc = 0.0
                for m in range(n):
                    acc += ad[i, m] * p[m, j]
                tmp[i, j] = acc
        for i in range(n):
            for j in range(i, n):
                acc = q[i, j]
                for m in range(n):
                    acc += tmp[i, m] * ad[j, m]
                p[i, j] = acc
                p[j, i] = acc
        if steady_after == _NEVER or not obs[k + 1]:
            continue
        if steady_after >= 0:
            steady = run >= steady_after
        else:
            worst = 0.0
            for i in range(n):
                for j in range(n):
                    d = abs(p[i, j] - p_ss[i, j])
                    if d > worst:
                        worst = d
            steady = worst <= tol * scale
    return ll - 0.5 * n_used * _LOG_2PI, n_used, n_steady, 0


try:  # numba compiles the recursion; without it the same code runs, slowly, as Python.
    import numba

    _filter_loop = numba.njit(cache=True)(_filter_loop)
except ImportError:  # pragma: no cover - numba is a declared dependency
    pass


def _matrix(value, shape, what):
    arr = np.asarray(value, dtype=float)
    if arr.shape != shape:
        raise InputError(f"{what} has shape {arr.shape} (expected {shape})")
    if not np.all(np.isfinite(arr)):
        raise InputError(f"{what} has a non-finite entry")
    return np.ascontiguousarray(arr)


def kalman_loglike(ad, b0, b1, c_row, q_d, r_meas, y, u, x0, p0, observed=None, steady_after=None,
                   d_row=None, steady_tol=STEADY_TOL):
    r"""
    Gaussian log-likelihood of a temperature series under a discrete linear state space.

    The model is :math:`x_{k+1} = A_d x_k + B_0 u_k + B_1 u_{k+1} + w_k`,
    :math:`w_k \sim N(0, Q_d)`, observed as :math:`y_k = c\,x_k + d\,u_k + e_k`,
    :math:`e_k \sim N(0, r)`, with the prior :math:`x_0 \sim N(\bar x_0, P_0)` for the state
    at the first sample.

    Parameters
    ----------
    ad : array_like, shape (n, n)
        State transition over one step (:func:`thermorc.simulate.discretise` or
        :func:`process_noise`).
    b0, b1 : array_like, shape (n, m)
        Weights of :math:`u_k` and :math:`u_{k+1}` (``b1`` zero for a zero-order hold).
    c_row : array_like, shape (n,)
        Measurement row (1 at the indoor node for a thermostat reading).
    q_d : array_like, shape (n, n)
        Process-noise covariance per step (:func:`process_noise`). [K²]
    r_meas : float
        Measurement-noise variance, > 0. [K²]
    y : array_like, shape (N,)
        Measured temperatures; NaN where not measured. [°C]
    u : array_like, shape (N, m)
        Inputs at the samples, in the column order of ``b0``; must be finite.
    x0 : array_like, shape (n,)
        Prior mean of the state at the first sample. [°C]
    p0 : array_like, shape (n, n)
        Prior covariance of the state at the first sample. [K²]
    observed : array_like of bool, shape (N,), optional
        False where a sample is missing (a gap): the filter predicts without updating, so the
        covariance grows. Default: where ``y`` is finite.
    steady_after : None, int or math.inf
        When to switch to the steady-state gain in a run of observed samples. ``None``
        (default): once the predicted covariance is within ``steady_tol`` (relative, largest
        entry) of the DARE solution. An int ``n``: after ``n`` updates since the start or the
        last gap, whatever the covariance. ``math.inf``: never (the exact time-varying filter).
    d_row : array_like, shape (m,), optional
        Direct input term of the measurement; default zero.
    steady_tol : float
        Convergence tolerance for ``steady_after=None``.

    Returns
    -------
    KalmanOutput
        Log-likelihood, innovations and their variances, filtered and predicted states.

    Raises
    ------
    InputError
        Shapes that do not match, non-finite inputs or matrices, a non-finite ``y`` at an
        observed sample, ``r_meas`` not positive.

    Notes
    -----
    Prediction :math:`\hat x_{k+1|k} = A_d \hat x_{k|k} + B_0 u_k + B_1 u_{k+1}`,
    :math:`P_{k+1|k} = A_d P_{k|k} A_d^T + Q_d`; innovation
    :math:`\varepsilon_k = y_k - c\hat x_{k|k-1} - d u_k`, :math:`F_k = c P_{k|k-1} c^T + r`;
    update :math:`K_k = P_{k|k-1} c^T / F_k`, :math:`\hat x_{k|k} = \hat x_{k|k-1} + K_k
    \varepsilon_k`, :math:`P_{k|k} = P_{k|k-1} - K_k F_k K_k^T` [1]_ [2]_. With the steady-state
    gain the covariance is no longer propagated; after the switch the loop is the linear filter
    :math:`\hat x_{k+1|k} = A_d (I - K c)\hat x_{k|k-1} + A_d K (y_k - d u_k) + B_0 u_k + B_1
    u_{k+1}` [3]_. If the DARE has no stabilising solution the time-varying filter runs
    throughout.

    References
    ----------
    .. [1] A. C. Harvey, Forecasting, Structural Time Series Models and the Kalman Filter.
       Cambridge University Press, 1989, ch. 3.
    .. [2] N. R. Kristensen, H. Madsen and S. B. Jørgensen, "Parameter estimation in stochastic
       grey-box models," Automatica, vol. 40, no. 2, pp. 225-237, 2004.
    .. [3] B. D. O. Anderson and J. B. Moore, Optimal Filtering. Prentice-Hall, 1979, ch. 4.
    """
    ad = np.atleast_2d(np.asarray(ad, dtype=float))
    n = ad.shape[0]
    ad = _matrix(ad, (n, n), "state transition")
    b0 = np.asarray(b0, dtype=float)
    b0 = b0.reshape(n, -1) if b0.size else b0.reshape(n, 0)
    m = b0.shape[1]
    b0 = _matrix(b0, (n, m), "input weights b0")
    b1 = _matrix(np.zeros((n, m)) if b1 is None else np.asarray(b1, dtype=float).reshape(n, m), (n, m),
                 "input weights b1")
    c = _matrix(np.asarray(c_row, dtype=float).reshape(-1), (n,), "measurement row")
    q = _matrix(q_d, (n, n), "process-noise covariance")
    r = float(r_meas)
    if not (np.isfinite(r) and r > 0):
        raise InputError(f"measurement-noise variance is {r_meas!r} (expected a finite value > 0 K²)")
    y = np.asarray(y, dtype=float).reshape(-1)
    n_rows = y.shape[0]
    if n_rows == 0:
        raise InputError("no samples to filter")
    u = np.asarray(u, dtype=float)
    if u.size == 0 and m == 0:
        u = np.zeros((n_rows, 0))
    elif u.ndim == 1 and m == 1:
        u = u[:, None]
    u = _matrix(u, (n_rows, m), "inputs")
    x0 = _matrix(x0, (n,), "prior state")
    p0 = _matrix(p0, (n, n), "prior covariance")
    if observed is None:
        obs = np.isfinite(y)
    else:
        obs = np.asarray(observed, dtype=bool).reshape(-1)
        if obs.shape != (n_rows,):
            raise InputError(f"observed mask has {obs.shape[0]} entries (expected {n_rows})")
        if not np.all(np.isfinite(y[obs])):
            row = int(np.flatnonzero(obs & ~np.isfinite(y))[0])
            raise InputError(f"measurement {row} is not finite but is marked observed")
    y_eff = np.where(obs, y, 0.0)
    if d_row is not None:
        y_eff = y_eff - u @ _matrix(np.asarray(d_row, dtype=float).reshape(-1), (m,), "direct input row")
    drive = u[:-1] @ b0.T + u[1:] @ b1.T if n_rows > 1 else np.zeros((0, n))

    if steady_after is None:
        code = _AUTO
    elif steady_after == math.inf:
        code = _NEVER
    else:
        code = int(steady_after)
        if code < 0:
            raise InputError(f"steady_after is {steady_after!r} (expected None, an int >= 0 or math.inf)")
    p_ss = np.zeros((n, n))
    k_ss = np.zeros(n)
    f_ss = 1.0
    if code != _NEVER:
        try:
            p_ss, k_ss, f_ss = steady_state_filter(ad, c, q, r)
        except (np.linalg.LinAlgError, ValueError):
            code = _NEVER  # no steady state to switch to: the time-varying filter is still exact

    # NaN-filled, so that a pass stopped by a bad variance leaves no stale numbers behind.
    innov = np.full(n_rows, np.nan)
    fvar = np.full(n_rows, np.nan)
    xf = np.full((n_rows, n), np.nan)
    xp = np.full((n_rows, n), np.nan)
    ll, n_used, n_steady, status = _filter_loop(
        ad, q, c, r, y_eff, obs, np.ascontiguousarray(drive), x0, p0, p_ss, k_ss, float(f_ss),
        code, float(steady_tol), innov, fvar, xf, xp,
    )
    message = "ok"
    if status:
        message = "an innovation variance was not positive and finite"
        ll = -math.inf
    return KalmanOutput(
        loglike=float(ll), innovations=innov, innovation_var=fvar, filtered_states=xf,
        predicted_states=xp, n_used=int(n_used), n_steady=int(n_steady), message=message,
    )
