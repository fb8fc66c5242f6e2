"""Force balance: calibration, wind-off zeros, spin tares, balance → wind axes, coefficients.

The order of the corrections matters and is fixed:

1. **Zeros in signal space.** The wind-off, not-spinning zero is subtracted from each channel's
   signal *before* the calibration, because a second-order calibration is nonlinear in the signal:
   ``f(s - s0)`` is not ``f(s) - f(s0)``, so only the signal difference is meaningful.
2. **Calibration** (:func:`loads_from_signals`) turns the zero-corrected signals into loads on the
   balance axes.
3. **Spin tares in load space.** A spin tare run is reduced through steps 1–2 like any run, so its
   result is already a load; it is then subtracted directly (:func:`tare_loads`).
4. **Axes** (:func:`balance_to_wind`): balance-axis forces → drag and lift along and across the
   free stream; then :func:`force_coefficients`.

Loads are ordered as :data:`tunnelred.inputs.config.LOAD_NAMES`: Fx [N], Fy [N], Mz [N m].
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from tunnelred.common._arraylike import ArrayLike, Values, arraylike
from tunnelred.physics.interpolation import curvature_at_points

__all__ = [
    "TareRangeError",
    "loads_from_signals",
    "calibration_terms",
    "signals_from_loads",
    "interpolate_zero",
    "tare_loads",
    "tare_interpolation_error",
    "balance_to_wind",
    "force_coefficients",
    "overload_fraction",
]

_RPM_PER_RAD_S = 60.0 / (2.0 * np.pi)


class TareRangeError(ValueError):
    """A spin tare was asked for outside the spin rates its tare runs cover."""


def _calibration_arrays(
    matrix: npt.ArrayLike, second_order: npt.ArrayLike | None
) -> tuple[np.ndarray, np.ndarray | None, int]:
    """Check the calibration's shapes; return (matrix [..., 3, n], second_order or None, n)."""
    matrix = np.asarray(matrix, dtype=float)
    if matrix.ndim < 2 or matrix.shape[-2] != 3:
        raise ValueError(f"the calibration matrix must be 3 x n; found shape {matrix.shape}")
    n = matrix.shape[-1]
    if second_order is None:
        return matrix, None, n
    second_order = np.asarray(second_order, dtype=float)
    m = n * (n + 1) // 2
    if second_order.ndim < 2 or second_order.shape[-2:] != (3, m):
        raise ValueError(
            f"the second-order matrix of a {n}-channel balance must be 3 x {m}; "
            f"found shape {second_order.shape}"
        )
    return matrix, second_order, n


def _products(signals: np.ndarray, n: int) -> np.ndarray:
    """Second-order terms s_i s_j, i ≤ j, row-major: [..., n] → [..., n(n+1)/2]."""
    i, j = np.triu_indices(n)
    return signals[..., i] * signals[..., j]


def _apply(matrix: np.ndarray, vectors: np.ndarray) -> np.ndarray:
    """matrix [..., r, c] times vectors [..., c] → [..., r]; one BLAS call for a 2-D matrix."""
    if matrix.ndim == 2:
        return vectors @ matrix.T
    return (matrix @ vectors[..., None])[..., 0]


def _product_tensor(second_order: np.ndarray, n: int) -> np.ndarray:
    """C [..., 3, n, n] with ∂(K₂ q(s))/∂s = C s: each s_i s_j term feeds C[i, j] and C[j, i]."""
    i, j = np.triu_indices(n)
    tensor = np.zeros(second_order.shape[:-1] + (n, n))
    tensor[..., i, j] += second_order
    tensor[..., j, i] += second_order
    return tensor


def _jacobian(matrix: np.ndarray, tensor: np.ndarray, signals: np.ndarray) -> np.ndarray:
    """∂F/∂s = K + C s for samples [A, n] → [A, 3, n]."""
    a, n = signals.shape
    if tensor.ndim == 3:
        varying = (signals @ tensor.reshape(3 * n, n).T).reshape(a, 3, n)
    else:
        varying = np.einsum("arkj,aj->ark", tensor, signals)
    return matrix + varying


def _solve(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve a x = b for 3 x n systems (b [..., 3]); the minimum-norm x when n > 3."""
    square = a.shape[-1] == a.shape[-2]
    if a.ndim == 2:
        columns = b.reshape(-1, 3).T
        # x = aᵀ (a aᵀ)⁻¹ b: the minimum-norm solution through a 3 x 3 solve, cheaper than an SVD.
        x = np.linalg.solve(a, columns) if square else a.T @ np.linalg.solve(a @ a.T, columns)
        return x.T.reshape(b.shape[:-1] + (a.shape[-1],))
    if square:
        return np.linalg.solve(a, b[..., None])[..., 0]
    a_t = np.swapaxes(a, -1, -2)
    return (a_t @ np.linalg.solve(a @ a_t, b[..., None]))[..., 0]


def _flat(array: np.ndarray, shape: tuple[int, ...], tail: tuple[int, ...]) -> np.ndarray:
    """Broadcast a batched array to ``shape + tail`` and flatten the batch; a 2-D one stays."""
    if array.ndim == len(tail):
        return array
    return np.broadcast_to(array, shape + tail).reshape((-1,) + tail)


def loads_from_signals(
    signals: npt.ArrayLike, matrix: npt.ArrayLike, second_order: npt.ArrayLike | None = None
) -> np.ndarray:
    """Balance loads from zero-corrected channel signals through the calibration.

    Parameters
    ----------
    signals : array_like, shape (..., n)
        Channel signals minus their wind-off zeros, in each channel's SI unit. [V, N, …]
    matrix : array_like, shape (..., 3, n)
        Linear calibration: rows Fx, Fy, Mz; entries per SI unit of each channel. [N/V, …]
    second_order : array_like, shape (..., 3, n(n+1)/2), optional
        Coefficients of the products s_i s_j, i ≤ j, row-major (s11, s12, …, s1n, s22, …).
        [N/V², …]

    Returns
    -------
    numpy.ndarray, shape (..., 3)
        Fx [N], Fy [N], Mz [N m] on the balance axes.

    Notes
    -----
    .. math:: F_r = \\sum_i K_{ri} s_i + \\sum_{i \\le j} K_{r,ij} s_i s_j

    the polynomial calibration form of strain-gauge balances [1]_, truncated after the second
    order. It is valid inside the calibrated load range only; outside it the polynomial is an
    extrapolation. Leading dimensions of ``signals`` and of the matrices broadcast, so a batch of
    perturbed calibrations can be evaluated in one call.

    References
    ----------
    .. [1] AIAA, "Calibration and Use of Internal Strain-Gage Balances with Application to Wind
       Tunnel Testing", AIAA Recommended Practice R-091-2003, 2003.

    Examples
    --------
    >>> loads_from_signals([0.1, 0.2, 0.0], [[100.0, 0, 0], [0, 50.0, 0], [0, 0, 2.0]])
    array([10., 10.,  0.])
    """
    matrix, second_order, n = _calibration_arrays(matrix, second_order)
    signals = np.asarray(signals, dtype=float)
    if signals.shape[-1:] != (n,):
        raise ValueError(f"signals must end in the {n} channels; found shape {signals.shape}")
    loads = _apply(matrix, signals)
    if second_order is not None:
        loads = loads + _apply(second_order, _products(signals, n))
    return loads


def calibration_terms(signals: npt.ArrayLike, *, second_order: bool) -> np.ndarray:
    """The terms each load's calibration coefficients multiply: s_i, then s_i s_j (i ≤ j).

    ``loads_from_signals(s, M, S) == calibration_terms(s, second_order=True) @ hstack([M, S]).T``
    (without S: the signals alone), so the loads are linear in the coefficients and
    ∂F_r/∂K_rt = term t: what propagates the coefficients' covariance.

    Parameters
    ----------
    signals : array_like, shape (..., n)
        Zero-corrected channel signals.
    second_order : bool
        Append the products s_i s_j, i ≤ j, row-major.

    Returns
    -------
    numpy.ndarray, shape (..., n) or (..., n + n(n+1)/2)

    Examples
    --------
    >>> calibration_terms([2.0, 3.0], second_order=True)
    array([2., 3., 4., 6., 9.])
    """
    signals = np.asarray(signals, dtype=float)
    if not second_order:
        return signals
    return np.concatenate([signals, _products(signals, signals.shape[-1])], axis=-1)


def signals_from_loads(
    loads: npt.ArrayLike,
    matrix: npt.ArrayLike,
    second_order: npt.ArrayLike | None = None,
    *,
    tol: float = 1e-12,
    max_iter: int = 50,
) -> np.ndarray:
    """Channel signals that give the loads through the calibration (its inverse).

    Parameters
    ----------
    loads : array_like, shape (..., 3)
        Fx [N], Fy [N], Mz [N m] on the balance axes.
    matrix : array_like, shape (..., 3, n)
        Linear calibration, as in :func:`loads_from_signals`. [N/V, …]
    second_order : array_like, shape (..., 3, n(n+1)/2), optional
        Second-order coefficients, as in :func:`loads_from_signals`. [N/V², …]
    tol : float
        Newton stops when every sample's largest step is below ``tol`` times its largest
        signal. [-]
    max_iter : int
        Newton iterations allowed before giving up. [-]

    Returns
    -------
    numpy.ndarray, shape (..., n)
        Zero-corrected channel signals, in each channel's SI unit.

    Raises
    ------
    ValueError
        If the matrix does not have rank 3 (some load would not show in any channel), or if
        Newton's method does not converge (loads beyond where the second-order form can be
        inverted).

    Notes
    -----
    Linear calibration: ``s = K⁻¹ F`` for a 3-channel balance; for n > 3 channels the system is
    underdetermined and the minimum-norm solution ``s = K⁺ F`` (Moore–Penrose pseudo-inverse) is
    returned — one of many signal sets that give the loads, which is all a synthetic log needs.

    Second-order calibration: Newton's method [1]_ on ``f(s) − F = 0`` from the linear solution,
    with Jacobian ``K + K₂ ∂q/∂s`` (minimum-norm step for n > 3), all samples at once. It
    converges quadratically while the second-order terms are a modest fraction of the linear
    ones, as in any calibration valid over its range.

    References
    ----------
    .. [1] J. Nocedal and S. J. Wright, *Numerical Optimization*, 2nd ed., Springer, 2006,
       ch. 11 (Newton's method for nonlinear equations).

    Examples
    --------
    >>> signals_from_loads([10.0, 10.0, 0.0], [[100.0, 0, 0], [0, 50.0, 0], [0, 0, 2.0]])
    array([0.1, 0.2, 0. ])
    """
    matrix, second_order, n = _calibration_arrays(matrix, second_order)
    if n < 3 or np.any(np.linalg.matrix_rank(matrix) < 3):
        raise ValueError(
            "the calibration matrix must have rank 3 (every load must show in the channels)"
        )
    loads = np.asarray(loads, dtype=float)
    if loads.shape[-1:] != (3,):
        raise ValueError(f"loads must end in Fx, Fy, Mz; found shape {loads.shape}")
    if second_order is None:
        return _solve(matrix, loads)

    # Newton works on a flat batch of samples and keeps iterating only those not yet converged.
    shape = np.broadcast_shapes(loads.shape[:-1], matrix.shape[:-2], second_order.shape[:-2])
    m = second_order.shape[-1]
    loads = np.broadcast_to(loads, shape + (3,)).reshape(-1, 3)
    matrix, second_order = _flat(matrix, shape, (3, n)), _flat(second_order, shape, (3, m))
    tensor = _product_tensor(second_order, n)
    signals = _solve(matrix, loads)
    signals = np.array(np.broadcast_to(signals, (loads.shape[0], n)))
    # A missing load (NaN) gives missing signals, as in the linear case, rather than a failure.
    active = np.flatnonzero(np.all(np.isfinite(loads), axis=-1))
    for _ in range(max_iter):
        if active.size == 0:
            return signals.reshape(shape + (n,))
        s = signals[active]
        k = matrix if matrix.ndim == 2 else matrix[active]
        k2 = second_order if second_order.ndim == 2 else second_order[active]
        c = tensor if tensor.ndim == 3 else tensor[active]
        residual = _apply(k, s) + _apply(k2, _products(s, n)) - loads[active]
        step = _solve(_jacobian(k, c, s), residual)
        s = s - step
        signals[active] = s
        largest_step = np.max(np.abs(step), axis=-1)
        largest_signal = np.max(np.abs(s), axis=-1)
        done = largest_step <= tol * largest_signal
        active = active[~done]
    if active.size == 0:
        return signals.reshape(shape + (n,))
    raise ValueError(
        f"the second-order calibration could not be inverted in {max_iter} Newton iterations for "
        f"{active.size} of {signals.shape[0]} load sets (largest relative step "
        f"{np.max(largest_step / np.maximum(largest_signal, np.finfo(float).tiny)):.3g}); "
        "the loads may lie beyond the calibrated range"
    )


def interpolate_zero(
    time: npt.ArrayLike, zero_times: npt.ArrayLike, zero_signals: npt.ArrayLike
) -> tuple[np.ndarray, np.ndarray, np.bool_ | np.ndarray]:
    """The wind-off zero at a data run's time, drift-interpolated between its zero runs.

    Parameters
    ----------
    time : float or array_like
        Mid-time of the data run, on the same clock as ``zero_times``. [s]
    zero_times : array_like, shape (k,)
        Mid-times of the zero runs, in any order, all different. [s]
    zero_signals : array_like, shape (k, n)
        Mean channel signals of each zero run. [V, N, …]

    Returns
    -------
    zero : numpy.ndarray, shape (..., n)
        The zero to subtract from the data run's signals. [V, N, …]
    shift : numpy.ndarray, shape (n,)
        Last zero minus first zero in time: the drift the zeros saw (0 with one zero). [V, N, …]
    bracketed : bool or numpy.ndarray of bool
        True where ``time`` lies between the first and last zero (inclusive). False means the
        zero was not interpolated but taken from the nearest zero run; with a single zero run it
        is False unless the times coincide, since no drift was observed.

    Notes
    -----
    With zeros at t₀ ≤ t ≤ t₁ (the bracketing pair):

    .. math:: s_0(t) = s_0(t_0) + \\frac{t - t_0}{t_1 - t_0}\\,[s_0(t_1) - s_0(t_0)]

    i.e. the balance drift is taken as linear in time between two zeros (common practice; wind-off
    zeros in general: [1]_); outside the zeros' span the nearest zero is used unchanged rather
    than extrapolating a drift.

    References
    ----------
    .. [1] J. B. Barlow, W. H. Rae and A. Pope, *Low-Speed Wind Tunnel Testing*, 3rd ed., Wiley,
       1999 (wind-off zeros and balance measurements; chapter not cited, from memory).

    Examples
    --------
    >>> zero, shift, bracketed = interpolate_zero(25.0, [0.0, 100.0], [[1.0, 2.0], [1.2, 1.9]])
    >>> zero, shift, bool(bracketed)
    (array([1.05 , 1.975]), array([ 0.2, -0.1]), True)
    """
    zero_times = np.asarray(zero_times, dtype=float)
    zero_signals = np.asarray(zero_signals, dtype=float)
    if zero_times.ndim != 1 or zero_times.size == 0:
        raise ValueError("at least one zero run is needed")
    if zero_signals.ndim != 2 or zero_signals.shape[0] != zero_times.size:
        raise ValueError(
            f"zero_signals must be k x n with k = {zero_times.size} zero runs; "
            f"found shape {zero_signals.shape}"
        )
    order = np.argsort(zero_times, kind="stable")
    t_zero, s_zero = zero_times[order], zero_signals[order]
    if np.any(np.diff(t_zero) == 0):
        raise ValueError("two zero runs have the same time; their drift cannot be interpolated")
    time = np.asarray(time, dtype=float)
    bracketed = (time >= t_zero[0]) & (time <= t_zero[-1])
    shift = s_zero[-1] - s_zero[0]
    if t_zero.size == 1:
        return np.broadcast_to(s_zero[0], time.shape + s_zero.shape[1:]).copy(), shift, bracketed
    lower = np.clip(np.searchsorted(t_zero, time, side="right") - 1, 0, t_zero.size - 2)
    weight = np.clip((time - t_zero[lower]) / (t_zero[lower + 1] - t_zero[lower]), 0.0, 1.0)
    zero = s_zero[lower] + weight[..., None] * (s_zero[lower + 1] - s_zero[lower])
    return zero, shift, bracketed


def tare_loads(
    spin_rate: npt.ArrayLike,
    tare_spin_rates: npt.ArrayLike,
    tare_loads: npt.ArrayLike,
    *,
    extrapolation: str = "flag",
) -> tuple[np.ndarray, np.bool_ | np.ndarray]:
    """Spin-tare loads at a data run's spin rate, interpolated between the tare runs.

    Parameters
    ----------
    spin_rate : float or array_like
        Signed spin rate of the data run. [rad/s]
    tare_spin_rates : array_like, shape (k,)
        Signed mean spin rates of the tare runs, in any order; repeats at one rate are averaged.
        [rad/s]
    tare_loads : array_like, shape (k, 3)
        Zero-corrected loads the tare runs measured: Fx [N], Fy [N], Mz [N m].
    extrapolation : {"flag", "refuse"}
        Outside the tare rates: "flag" extrapolates the nearest segment linearly (a single tare
        run: its loads) and reports it; "refuse" raises :class:`TareRangeError`.

    Returns
    -------
    loads : numpy.ndarray, shape (..., 3)
        Tare to subtract from the data run's loads. [N, N, N m]
    extrapolated : bool or numpy.ndarray of bool
        True where ``spin_rate`` lies outside [min, max] of the tare rates.

    Raises
    ------
    TareRangeError
        With ``extrapolation="refuse"``, when a spin rate lies outside the tare rates; the message
        gives the rate and the range.

    Notes
    -----
    Piecewise linear in the signed spin rate ω between the tare rates. No point (ω = 0, load = 0)
    is added: the tare runs carry what they measured, and a wind-off zero already defines the
    not-spinning state.

    A spin tare (wind off, model spinning) removes what spinning does to the balance without
    wind: bearing and seal friction torque, and mean loads from rotor imbalance and from the
    wind-off aerodynamics of the spinning model and its drive (pumping, windage); it is the
    rotating-model case of the wind-off tares of [1]_. It does
    **not** remove the interaction of spin with the wind-on flow — the aerodynamic torque and the
    Magnus forces, which are the measurement — and it cannot follow tare changes with temperature
    or bearing preload between the tare runs and the data run.

    References
    ----------
    .. [1] J. B. Barlow, W. H. Rae and A. Pope, *Low-Speed Wind Tunnel Testing*, 3rd ed., Wiley,
       1999 (tares; chapter not cited, from memory).

    Examples
    --------
    >>> loads, extrapolated = tare_loads(
    ...     75.0, [50.0, 100.0], [[0.1, 0.0, -0.02], [0.3, 0.0, -0.04]])
    >>> loads, bool(extrapolated)
    (array([ 0.2 ,  0.  , -0.03]), False)
    """
    if extrapolation not in ("flag", "refuse"):
        raise ValueError(f'extrapolation must be "flag" or "refuse"; found {extrapolation!r}')
    rates = np.asarray(tare_spin_rates, dtype=float)
    loads = np.asarray(tare_loads, dtype=float)
    if rates.ndim != 1 or rates.size == 0:
        raise ValueError("at least one tare run is needed")
    if loads.shape != (rates.size, 3):
        raise ValueError(
            f"tare_loads must be {rates.size} x 3 (one row a tare run); found shape {loads.shape}"
        )
    rates, means = _tare_curve(rates, loads)

    spin_rate = np.asarray(spin_rate, dtype=float)
    extrapolated = (spin_rate < rates[0]) | (spin_rate > rates[-1])
    if extrapolation == "refuse" and np.any(extrapolated):
        outside = spin_rate[extrapolated] if spin_rate.ndim else spin_rate
        rate = float(np.ravel(outside)[0])
        raise TareRangeError(
            f"spin rate {rate:.6g} rad/s ({rate * _RPM_PER_RAD_S:.6g} rpm) lies outside the tare "
            f"runs' range [{rates[0]:.6g}, {rates[-1]:.6g}] rad/s "
            f"([{rates[0] * _RPM_PER_RAD_S:.6g}, {rates[-1] * _RPM_PER_RAD_S:.6g}] rpm); "
            'add a tare run at this rate or set tare_extrapolation = "flag"'
        )
    if rates.size == 1:
        return np.broadcast_to(means[0], spin_rate.shape + (3,)).copy(), extrapolated
    lower = np.clip(np.searchsorted(rates, spin_rate, side="right") - 1, 0, rates.size - 2)
    weight = (spin_rate - rates[lower]) / (rates[lower + 1] - rates[lower])
    tare = means[lower] + weight[..., None] * (means[lower + 1] - means[lower])
    return tare, extrapolated


def _tare_curve(rates: np.ndarray, loads: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The tare runs' distinct rates, ascending, and their mean loads (repeats averaged)."""
    rates, inverse, counts = np.unique(rates, return_inverse=True, return_counts=True)
    means = np.zeros((rates.size, 3))
    np.add.at(means, inverse, loads)
    return rates, means / counts[:, None]


def tare_interpolation_error(
    spin_rate: float, tare_spin_rates: npt.ArrayLike, tare_loads: npt.ArrayLike
) -> np.ndarray:
    """Standard uncertainty of the spin tare from its linear interpolation in ω, per load.

    Parameters
    ----------
    spin_rate : float
        Signed spin rate of the data run. [rad/s]
    tare_spin_rates, tare_loads : array_like, shapes (k,) and (k, 3)
        As :func:`tare_loads`.

    Returns
    -------
    numpy.ndarray, shape (3,)
        u of the interpolated Fx [N], Fy [N], Mz [N m]; 0 on a tare rate and where fewer than
        three distinct tare rates leave the curvature unknown.

    Notes
    -----
    A straight line between two tare rates misses the curve by ½ T''(ξ) (ω − ω₁)(ω₂ − ω), the
    remainder of linear interpolation (:mod:`tunnelred.physics.interpolation`). |T''| is taken as
    the larger of the second divided differences 2 T[ω₀, ω₁, ω₂] at the segment's two ends (the one
    end that has a neighbour on each side at the first and last segments), and the remainder as a
    standard uncertainty: exact for a tare quadratic in ω (windage, spin-induced forces), and, from
    the tare runs' own scatter, more than the curvature where the tares lie closer than their noise
    resolves. Beyond the tare range the nearest segment's line is extended and |(ω − ω₁)(ω₂ − ω)|
    grows with the distance.

    References
    ----------
    .. [1] R. L. Burden and J. D. Faires, *Numerical Analysis*, §3.1 Theorem 3.3
       (error of polynomial interpolation) and §3.3 (divided differences), from memory.

    Examples
    --------
    >>> w = np.array([100.0, 200.0, 300.0])
    >>> tare = np.stack([np.zeros(3), np.zeros(3), 1e-6 * w**2], axis=-1)
    >>> round(float(tare_interpolation_error(150.0, w, tare)[2]), 12)  # ½ · 2e-6 · 50 · 50
    0.0025
    """
    rates, means = _tare_curve(
        np.asarray(tare_spin_rates, dtype=float), np.asarray(tare_loads, dtype=float)
    )
    if rates.size < 3:
        return np.zeros(3)
    curvature = curvature_at_points(rates, means)
    lower = int(np.clip(np.searchsorted(rates, spin_rate, side="right") - 1, 0, rates.size - 2))
    kappa = np.fmax(curvature[lower], curvature[lower + 1])
    spread = abs((spin_rate - rates[lower]) * (rates[lower + 1] - spin_rate))
    return 0.5 * kappa * spread


@arraylike
def balance_to_wind(fx: ArrayLike, fy: ArrayLike, angle: ArrayLike) -> tuple[ArrayLike, ArrayLike]:
    """Drag and lift from balance-axis forces.

    Parameters
    ----------
    fx, fy : array_like
        Forces along the balance x and y axes. [N]
    angle : array_like
        Balance alignment angle minus flow angle, a − β. [deg]

    Returns
    -------
    drag, lift : float, numpy.ndarray, pandas.Series or xarray.DataArray
        Force along the free stream, and across it toward +y, in the kind of the richest input.
        [N]

    Notes
    -----
    The balance x axis lies at the alignment angle a from the tunnel x axis, positive toward +y;
    the free stream at the flow angle β from tunnel x, positive toward +y. Drag acts along the
    free stream, lift perpendicular to it, positive in the +y sense (the free stream direction
    turned +90° about z). With φ = a − β, a rotation about z [1]_:

    .. math::
        D = F_x \\cos φ - F_y \\sin φ, \\qquad L = F_x \\sin φ + F_y \\cos φ

    so a misalignment φ leaks D sin φ of drag into lift. Mz is the same on both axes (the
    rotation is about z). Exact for any angle.

    References
    ----------
    .. [1] J. B. Barlow, W. H. Rae and A. Pope, *Low-Speed Wind Tunnel Testing*, 3rd ed., Wiley,
       1999 (balance and wind axes; chapter not cited, from memory).

    Examples
    --------
    >>> drag, lift = balance_to_wind(1.0, 0.0, 90.0)
    >>> round(drag, 12), round(lift, 12)
    (0.0, 1.0)
    """
    phi = np.deg2rad(angle)
    cos, sin = np.cos(phi), np.sin(phi)
    return fx * cos - fy * sin, fx * sin + fy * cos


def force_coefficients(
    lift: npt.ArrayLike,
    drag: npt.ArrayLike,
    torque: npt.ArrayLike,
    q: npt.ArrayLike,
    velocity: npt.ArrayLike,
    omega: npt.ArrayLike,
    diameter: npt.ArrayLike,
    span: npt.ArrayLike,
) -> dict[str, Values]:
    """Lift, drag, torque and power coefficients of the spinning cylinder.

    Parameters
    ----------
    lift, drag : array_like
        Lift (toward +y) and drag (along the free stream) on the loaded span. [N]
    torque : array_like
        Torque about +z, Mz after zeros and tares. [N m]
    q : array_like
        Dynamic pressure. [Pa]
    velocity : array_like
        Free-stream speed U. [m/s]
    omega : array_like
        Signed spin rate, positive counter-clockwise seen from +z. [rad/s]
    diameter : array_like
        Cylinder diameter d. [m]
    span : array_like
        Loaded span b. [m]

    Returns
    -------
    dict of numpy.ndarray
        ``CL``, ``CD``, ``CM``, ``C_power``, ``L_D`` [-]; ``L_D`` is NaN where D = 0.

    Notes
    -----
    With reference area d·b and R = d/2:

    .. math::
        C_L = \\frac{L}{q d b}, \\quad C_D = \\frac{D}{q d b}, \\quad
        C_M = \\frac{T}{q d b R}, \\quad C_{power} = \\frac{T ω}{q U d b} = C_M α

    with α = ωR/U. For the ideal (potential) flow L' = −ρUΓ, Γ = 2πωR², these give
    CL = −2πα [1]_.

    References
    ----------
    .. [1] J. D. Anderson, *Fundamentals of Aerodynamics*, 6th ed., McGraw-Hill, 2017, §3.16
       (lifting flow over a cylinder; Kutta–Joukowski theorem).

    Examples
    --------
    >>> c = force_coefficients(50.0, 12.5, -0.25, 500.0, 20.0, 200.0, 0.1, 0.5)
    >>> {k: round(float(v), 12) for k, v in c.items()}
    {'CL': 2.0, 'CD': 0.5, 'CM': -0.2, 'C_power': -0.1, 'L_D': 4.0}
    """
    lift, drag, torque, q, velocity, omega, diameter, span = (
        np.asarray(x, dtype=float) for x in (lift, drag, torque, q, velocity, omega, diameter, span)
    )
    qs = q * diameter * span
    lift_drag = np.divide(
        lift, drag, out=np.full(np.broadcast(lift, drag).shape, np.nan), where=drag != 0
    )
    return {
        "CL": lift / qs,
        "CD": drag / qs,
        "CM": torque / (qs * diameter / 2.0),
        "C_power": torque * omega / (qs * velocity),
        "L_D": lift_drag,
    }


def overload_fraction(loads: npt.ArrayLike, full_scale: npt.ArrayLike) -> np.ndarray:
    """Largest load of a run as a fraction of the balance's full scale, per component.

    Parameters
    ----------
    loads : array_like, shape (..., 3)
        Fx [N], Fy [N], Mz [N m], one row a sample.
    full_scale : array_like, shape (3,)
        Full-scale Fx [N], Fy [N], Mz [N m], all positive.

    Returns
    -------
    numpy.ndarray, shape (3,)
        max |load| / full scale over the samples. [-]

    Notes
    -----
    ``max_t |F_r(t)| / F_r,FS``; the balance's calibration is valid inside its full scale, and
    a run near or beyond it is flagged (common practice).

    Examples
    --------
    >>> overload_fraction([[10.0, -50.0, 1.0], [-30.0, 20.0, 0.5]], [100.0, 100.0, 2.0])
    array([0.3, 0.5, 0.5])
    """
    loads = np.asarray(loads, dtype=float)
    full_scale = np.asarray(full_scale, dtype=float)
    if full_scale.shape != (3,) or np.any(full_scale <= 0):
        raise ValueError(f"full_scale must be three positive loads; found {full_scale}")
    if loads.shape[-1:] != (3,):
        raise ValueError(f"loads must end in Fx, Fy, Mz; found shape {loads.shape}")
    return np.max(np.abs(loads.reshape(-1, 3)), axis=0) / full_scale
