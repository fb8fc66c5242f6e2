"""Run-quality flags: each check compares a measured value with a tolerance from campaign.toml.

A flag never deletes a run; it travels with it into the results and the report. Every check is a
small function that returns a :class:`Flag` when its tolerance is broken and None otherwise; a
measure that is NaN (not available for this run) raises nothing. :func:`check_run` applies every
per-run check whose measures are present, :func:`repeat_disagreement` compares repeated runs across
a campaign, and :func:`flag_columns` lays the flags out as the ``flags`` and ``flag_<name>``
result columns of docs/results.md.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from tunnelred.inputs.config import LOAD_NAMES, Tolerances

__all__ = [
    "Flag",
    "FLAG_NAMES",
    "STAGNATION_ALPHA",
    "spin_scatter",
    "spin_drift",
    "speed_drift",
    "temperature_drift",
    "zero_shift",
    "tare_extrapolated",
    "overload",
    "dead_tap",
    "stream_overlap",
    "few_revolutions",
    "cl_disagreement",
    "stagnation_cp",
    "repeat_disagreement",
    "check_run",
    "flag_columns",
    "parse_flag_reasons",
]

#: Every flag kind, in the order the report lists them (docs/results.md).
FLAG_NAMES = (
    "spin_scatter",
    "spin_drift",
    "speed_drift",
    "temperature_drift",
    "zero_shift",
    "tare_extrapolated",
    "overload",
    "dead_tap",
    "stream_overlap",
    "few_revolutions",
    "cl_disagreement",
    "repeat_disagreement",
    "stagnation_cp",
)

#: Largest |alpha| of a run treated as non-spinning by :func:`stagnation_cp` [-]. At |alpha| =
#: 0.01 the potential-flow front stagnation point has moved only 0.3 deg from theta = 0, well
#: inside a typical 5 deg bin, so the windward bin still holds the stagnation pressure.
STAGNATION_ALPHA = 0.01

_RPM = 60.0 / (2.0 * math.pi)  # rad/s → rpm, for reasons people read


@dataclass(frozen=True)
class Flag:
    """A raised flag: its kind, the measured value, the tolerance it broke, and why it matters."""

    name: str
    value: float
    tolerance: float
    reason: str

    def __str__(self) -> str:
        return f"{self.name}: {self.reason}"


def _exceeds(value: float, limit: float) -> bool:
    """value > limit, False for a NaN value (a measure this run does not have)."""
    return not math.isnan(value) and value > limit


def _relative_check(name: str, value: float, tolerance: float, what: str) -> Flag | None:
    value = abs(float(value))
    if not _exceeds(value, tolerance):
        return None
    return Flag(
        name, value, tolerance, f"{what} {100 * value:.1f} % exceeds {100 * tolerance:.1f} %"
    )


def spin_scatter(scatter: float, tolerance: float) -> Flag | None:
    """Flag an unsteady spin ratio.

    Parameters
    ----------
    scatter : float
        std(alpha(t)) / mean(alpha) over the run (its absolute value is judged). [-]
    tolerance : float
        Largest accepted scatter (``Tolerances.spin_scatter``). [-]

    Returns
    -------
    Flag or None

    Notes
    -----
    Raised when |scatter| > tolerance. A run whose spin ratio wanders cannot be placed on a
    coefficient-versus-alpha curve at one abscissa (common practice).

    References
    ----------
    .. [1] JCGM 100:2008, GUM, §4.2 (the experimental standard deviation of observations).

    Examples
    --------
    >>> print(spin_scatter(0.031, 0.02).reason)
    spin ratio scatter 3.1 % exceeds 2.0 % (std/mean of alpha(t))
    >>> spin_scatter(0.01, 0.02) is None
    True
    """
    flag = _relative_check("spin_scatter", scatter, tolerance, "spin ratio scatter")
    if flag is None:
        return None
    return Flag(flag.name, flag.value, flag.tolerance, flag.reason + " (std/mean of alpha(t))")


def spin_drift(drift: float, tolerance: float) -> Flag | None:
    """Flag a spin ratio that drifts over the run.

    Parameters
    ----------
    drift : float
        Change of alpha over the run relative to its mean (absolute value judged). [-]
    tolerance : float
        Largest accepted drift (``Tolerances.spin_drift``). [-]

    Returns
    -------
    Flag or None

    Notes
    -----
    Raised when |drift| > tolerance (common practice).

    References
    ----------
    .. [1] tunnelred docs/input-format.md, [reduction.tolerances] (definition of the measure).

    Examples
    --------
    >>> print(spin_drift(-0.035, 0.02).reason)
    spin ratio drift 3.5 % exceeds 2.0 % over the run
    """
    flag = _relative_check("spin_drift", drift, tolerance, "spin ratio drift")
    if flag is None:
        return None
    return Flag(flag.name, flag.value, flag.tolerance, flag.reason + " over the run")


def speed_drift(drift: float, tolerance: float) -> Flag | None:
    """Flag a tunnel speed that drifts over the run.

    Parameters
    ----------
    drift : float
        Change of U over the run relative to its mean (absolute value judged). [-]
    tolerance : float
        Largest accepted drift (``Tolerances.speed_drift``). [-]

    Returns
    -------
    Flag or None

    Notes
    -----
    Raised when |drift| > tolerance (common practice).

    References
    ----------
    .. [1] tunnelred docs/input-format.md, [reduction.tolerances] (definition of the measure).

    Examples
    --------
    >>> print(speed_drift(0.014, 0.01).reason)
    tunnel speed drift 1.4 % exceeds 1.0 % over the run
    """
    flag = _relative_check("speed_drift", drift, tolerance, "tunnel speed drift")
    if flag is None:
        return None
    return Flag(flag.name, flag.value, flag.tolerance, flag.reason + " over the run")


def temperature_drift(drift: float, tolerance: float) -> Flag | None:
    """Flag an air temperature that drifts over the run.

    Parameters
    ----------
    drift : float
        Change of T over the run (absolute value judged). [K]
    tolerance : float
        Largest accepted change (``Tolerances.temperature_drift``). [K]

    Returns
    -------
    Flag or None

    Notes
    -----
    Raised when |drift| > tolerance. A warming tunnel changes density and viscosity during the
    run and shifts strain-gauge zeros (common practice).

    References
    ----------
    .. [1] tunnelred docs/input-format.md, [reduction.tolerances] (definition of the measure).

    Examples
    --------
    >>> print(temperature_drift(0.8, 0.5).reason)
    air temperature drift 0.80 K exceeds 0.50 K over the run
    """
    drift = abs(float(drift))
    if not _exceeds(drift, tolerance):
        return None
    reason = f"air temperature drift {drift:.2f} K exceeds {tolerance:.2f} K over the run"
    return Flag("temperature_drift", drift, tolerance, reason)


def _worst(fractions: float | Sequence[float], names: Sequence[str] | None) -> tuple[float, str]:
    """Largest |fraction| and, for a vector, the name of its component (" (Fy)")."""
    arr = np.abs(np.atleast_1d(np.asarray(fractions, dtype=float)))
    if arr.size == 0 or np.all(np.isnan(arr)):
        return math.nan, ""
    k = int(np.nanargmax(arr))
    if arr.size == 1:
        return float(arr[k]), ""
    names = names if names is not None and len(names) == arr.size else None
    return float(arr[k]), f" ({names[k]})" if names else f" (component {k})"


def zero_shift(
    shift: float | Sequence[float], tolerance: float, *, names: Sequence[str] | None = LOAD_NAMES
) -> Flag | None:
    """Flag a balance whose wind-off zero moved between the pre- and post-run zero runs.

    Parameters
    ----------
    shift : float or sequence of float
        Zero difference as a fraction of full scale, one per load component (or their maximum);
        the largest absolute value is judged. [-]
    tolerance : float
        Largest accepted shift (``Tolerances.zero_shift``). [-]
    names : sequence of str, optional
        Component names, to say which one shifted most (default Fx, Fy, Mz).

    Returns
    -------
    Flag or None

    Notes
    -----
    Raised when max_i |Δzero_i / full_scale_i| > tolerance. The drift-interpolated zero assumes a
    linear drift between the two zero runs; a large shift makes that assumption doubtful
    (common practice).

    References
    ----------
    .. [1] tunnelred docs/input-format.md, [reduction.tolerances] (definition of the measure).

    Examples
    --------
    >>> print(zero_shift([0.0005, -0.0031, 0.001], 0.002).reason)
    zero shift 0.31 % of full scale (Fy) exceeds 0.20 % between the pre- and post-run zeros
    """
    worst, which = _worst(shift, names)
    if not _exceeds(worst, tolerance):
        return None
    reason = (
        f"zero shift {100 * worst:.2f} % of full scale{which} exceeds {100 * tolerance:.2f} % "
        "between the pre- and post-run zeros"
    )
    return Flag("zero_shift", worst, tolerance, reason)


def tare_extrapolated(
    extrapolated: bool, omega: float, tare_range: tuple[float, float]
) -> Flag | None:
    """Flag a run whose spin tare was extrapolated beyond the spin rates of its tare runs.

    Parameters
    ----------
    extrapolated : bool
        Whether the balance module had to extrapolate the tare.
    omega : float
        The run's mean spin rate (signed). [rad/s]
    tare_range : tuple of float
        Lowest and highest spin rate of the tare runs used. [rad/s]

    Returns
    -------
    Flag or None
        ``value`` is ``omega`` and ``tolerance`` the nearer end of ``tare_range`` [rad/s]; the
        reason quotes them in rpm.

    Notes
    -----
    Spin tares (aerodynamic and bearing loads of the spinning model, wind off) grow roughly with
    ω²; outside the tare runs' range the interpolation becomes an extrapolation whose error is
    not bounded by the tare data (common practice).

    References
    ----------
    .. [1] tunnelred docs/input-format.md, [reduction] tare_extrapolation.

    Examples
    --------
    >>> rpm = 2 * 3.141592653589793 / 60
    >>> print(tare_extrapolated(True, 1830 * rpm, (0.0, 1500 * rpm)).reason)
    spin rate 1830 rpm lies outside the tare runs' 0 to 1500 rpm: tare extrapolated
    """
    if not extrapolated:
        return None
    low, high = sorted(float(v) for v in tare_range)
    nearer = low if abs(omega - low) < abs(omega - high) else high
    if math.isnan(omega) or math.isnan(low) or math.isnan(high):
        return Flag("tare_extrapolated", omega, nearer, "tare extrapolated beyond its tare runs")
    reason = (
        f"spin rate {omega * _RPM:.0f} rpm lies outside the tare runs' {low * _RPM:.0f} to "
        f"{high * _RPM:.0f} rpm: tare extrapolated"
    )
    return Flag("tare_extrapolated", float(omega), nearer, reason)


def overload(
    fraction: float | Sequence[float], tolerance: float, *, names: Sequence[str] | None = LOAD_NAMES
) -> Flag | None:
    """Flag a balance load that came near or past its full scale.

    Parameters
    ----------
    fraction : float or sequence of float
        Peak |load| / full scale during the run, one per component (or their maximum). [-]
    tolerance : float
        Largest accepted fraction (``Tolerances.overload``). [-]
    names : sequence of str, optional
        Component names (default Fx, Fy, Mz).

    Returns
    -------
    Flag or None

    Notes
    -----
    Raised when max_i |peak_i / full_scale_i| ≥ tolerance: a calibration holds only within the
    loads it was made over (common practice).

    References
    ----------
    .. [1] tunnelred docs/input-format.md, [reduction.tolerances] (definition of the measure).

    Examples
    --------
    >>> print(overload([0.2, 0.94, 0.1], 0.9).reason)
    load reached 94 % of full scale (Fy), limit 90 %
    """
    worst, which = _worst(fraction, names)
    if math.isnan(worst) or worst < tolerance:
        return None
    reason = f"load reached {100 * worst:.0f} % of full scale{which}, limit {100 * tolerance:.0f} %"
    return Flag("overload", worst, tolerance, reason)


def dead_tap(dead_taps: Mapping[str, str], tolerance: float) -> Flag | None:
    """Flag a pressure run from which taps were excluded.

    Parameters
    ----------
    dead_taps : dict of str to str
        Tap name → why the pressure module excluded it.
    tolerance : float
        The |Cp_tap − Cp_neighbours| threshold the pressure module applied
        (``Tolerances.dead_tap``), recorded with the flag. [-]

    Returns
    -------
    Flag or None
        ``value`` is the number of dead taps.

    Notes
    -----
    Raised when any tap was excluded. The surface integral ∮Cp then bridges the gap by
    interpolation, which may bias CL_p and CD_p (common practice).

    References
    ----------
    .. [1] tunnelred docs/input-format.md, [reduction.tolerances] dead_tap.

    Examples
    --------
    >>> print(dead_tap({"tap07": "reads constant"}, 0.15).reason)
    1 tap excluded from the integration: tap07 (reads constant)
    """
    if not dead_taps:
        return None
    n = len(dead_taps)
    listed = "; ".join(f"{tap} ({why})" for tap, why in dead_taps.items())
    reason = f"{n} tap{'s' if n > 1 else ''} excluded from the integration: {listed}"
    return Flag("dead_tap", float(n), tolerance, reason)


def stream_overlap(fraction: float, tolerance: float) -> Flag | None:
    """Flag a run whose logs (balance, pressure, tunnel) cover too little common time.

    Parameters
    ----------
    fraction : float
        Fraction of the run covered by every stream. [-]
    tolerance : float
        Smallest accepted fraction (``Tolerances.stream_overlap``). [-]

    Returns
    -------
    Flag or None

    Notes
    -----
    Raised when fraction < tolerance (common practice).

    References
    ----------
    .. [1] tunnelred docs/input-format.md, [reduction.tolerances] stream_overlap.

    Examples
    --------
    >>> print(stream_overlap(0.91, 0.95).reason)
    the streams overlap over 91 % of the run, less than 95 %
    """
    fraction = float(fraction)
    if math.isnan(fraction) or fraction >= tolerance:
        return None
    reason = (
        f"the streams overlap over {100 * fraction:.0f} % of the run, less than "
        f"{100 * tolerance:.0f} %"
    )
    return Flag("stream_overlap", fraction, tolerance, reason)


def few_revolutions(revolutions: float, minimum: float) -> Flag | None:
    """Flag a spinning pressure run too short for phase binning.

    Parameters
    ----------
    revolutions : float
        Revolutions of the model during the pressure record. [-]
    minimum : float
        Fewest accepted (``Tolerances.min_revolutions``). [-]

    Returns
    -------
    Flag or None

    Notes
    -----
    Raised when revolutions < minimum: each azimuth bin averages one pass per revolution, so
    few revolutions leave few, correlated samples per bin (common practice).

    References
    ----------
    .. [1] tunnelred docs/input-format.md, [reduction.tolerances] min_revolutions.

    Examples
    --------
    >>> print(few_revolutions(12.4, 20).reason)
    12.4 revolutions in the pressure record, fewer than the 20 phase binning needs
    """
    revolutions = float(revolutions)
    if math.isnan(revolutions) or revolutions >= minimum:
        return None
    reason = (
        f"{revolutions:.1f} revolutions in the pressure record, fewer than the {minimum:g} "
        "phase binning needs"
    )
    return Flag("few_revolutions", revolutions, float(minimum), reason)


def cl_disagreement(
    CL: float,
    u_CL: float,
    CL_p: float,
    u_CL_p: float,
    correlation: float,
    k: float,
    *,
    allowance: float = 0.0,
) -> Flag | None:
    """Flag a balance lift coefficient that disagrees with the pressure-integrated one.

    Parameters
    ----------
    CL : float
        Lift coefficient from the balance. [-]
    u_CL : float
        Its standard uncertainty. [-]
    CL_p : float
        Lift coefficient from ∮Cp at mid-span. [-]
    u_CL_p : float
        Its standard uncertainty. [-]
    correlation : float
        Correlation coefficient r(CL, CL_p), from the shared q, geometry and corrections. [-]
    k : float
        Coverage factor of the test (``Tolerances.agreement_k``). [-]
    allowance : float, optional
        Relative difference |CL − CL_p| / |CL| that end effects are expected to make
        (``Tolerances.cl_agreement``, per configuration), allowed on top of k u. [-]

    Returns
    -------
    Flag or None
        ``value`` is the normalised difference |CL − CL_p| / u(CL − CL_p); ``tolerance`` is k.

    Notes
    -----
    u²(CL − CL_p) = u²(CL) + u²(CL_p) − 2 r u(CL) u(CL_p) (JCGM 100:2008 eq. (16) for a
    difference); raised when |CL − CL_p| > k u(CL − CL_p) + allowance·|CL|, the E_n criterion of
    proficiency testing with expanded uncertainties U = k u, widened by the stated allowance. The
    balance integrates over the span, the taps see mid-span only, so end effects alone can trip it
    on a model without end plates: state the expected difference there as the allowance.

    References
    ----------
    .. [1] JCGM 100:2008, GUM, §5.2.2, eq. (16).
    .. [2] ISO 13528:2022, Statistical methods for use in proficiency testing by interlaboratory
       comparison (E_n numbers).

    Examples
    --------
    >>> print(cl_disagreement(-1.92, 0.05, -1.71, 0.06, 0.0, 2.0).reason)
    balance CL -1.920 vs pressure CL_p -1.710: 0.210 apart, 2.7 × combined u 0.078 > k = 2
    """
    diff = float(CL) - float(CL_p)
    var = u_CL**2 + u_CL_p**2 - 2.0 * correlation * u_CL * u_CL_p
    u_diff = math.sqrt(max(var, 0.0))
    if math.isnan(diff) or math.isnan(u_diff):
        return None
    allowed = allowance * abs(float(CL))
    if abs(diff) <= k * u_diff + allowed:
        return None
    ratio = abs(diff) / u_diff if u_diff > 0 else math.inf
    reason = (
        f"balance CL {CL:.3f} vs pressure CL_p {CL_p:.3f}: {abs(diff):.3f} apart, "
        f"{ratio:.1f} × combined u {u_diff:.3f} > k = {k:g}"
    )
    if allowance:
        reason += f" plus the {allowance:.0%} end-effect allowance"
    return Flag("cl_disagreement", ratio, float(k), reason)


def stagnation_cp(
    alpha: float, Cp_max: float, tolerance: float, *, alpha_max: float = STAGNATION_ALPHA
) -> Flag | None:
    """Flag a non-spinning pressure run whose peak Cp is not the stagnation value 1.

    Parameters
    ----------
    alpha : float
        The run's spin ratio; runs with |alpha| ≥ ``alpha_max`` are not judged. [-]
    Cp_max : float
        Largest binned Cp of the run. [-]
    tolerance : float
        Largest accepted |Cp_max − 1| (``Tolerances.stagnation_cp``). [-]
    alpha_max : float
        Largest |alpha| treated as non-spinning. [-]

    Returns
    -------
    Flag or None

    Notes
    -----
    At the front stagnation point of a cylinder the pressure coefficient is 1 (Bernoulli on the
    stagnation streamline), whatever the Reynolds number. A peak far from 1 on a non-spinning run
    points at the reference pressures (q, static), a tap azimuth offset or a leak (common
    practice). Raised when |alpha| < alpha_max and |Cp_max − 1| > tolerance.

    References
    ----------
    .. [1] J. D. Anderson, Fundamentals of Aerodynamics, McGraw-Hill (stagnation pressure
       coefficient Cp = 1 of incompressible flow).

    Examples
    --------
    >>> print(stagnation_cp(0.0, 0.91, 0.05).reason)
    alpha = 0.000 run: Cp_max 0.910 differs from 1 by 0.090, more than 0.050
    >>> stagnation_cp(1.5, 0.5, 0.05) is None
    True
    """
    if not abs(float(alpha)) < alpha_max:
        return None
    miss = abs(float(Cp_max) - 1.0)
    if not _exceeds(miss, tolerance):
        return None
    reason = (
        f"alpha = {alpha:.3f} run: Cp_max {Cp_max:.3f} differs from 1 by {miss:.3f}, "
        f"more than {tolerance:.3f}"
    )
    return Flag("stagnation_cp", miss, tolerance, reason)


def check_run(measures: Mapping[str, object], tolerances: Tolerances) -> list[Flag]:
    """Apply every per-run check whose measures are present.

    Parameters
    ----------
    measures : dict
        Measured values of one run; a missing key skips its check. Keys (units as in
        docs/results.md):

        ``spin_scatter``, ``spin_drift``, ``speed_drift`` [-]; ``temperature_drift`` [K];
        ``zero_shift`` [-] (float or one per load component); ``tare_extrapolated`` (bool), with
        ``omega`` [rad/s] and ``tare_range`` (low, high) [rad/s] for its reason (NaN if absent);
        ``overload`` [-] (float or one per load component); ``dead_taps`` (dict tap → reason);
        ``stream_overlap`` [-]; ``revolutions`` [-]; ``CL``, ``u_CL``, ``CL_p``, ``u_CL_p`` [-]
        and ``corr_CL_CL_p`` [-] (taken as 0 when absent) for the balance/pressure agreement;
        ``alpha`` and ``Cp_max`` [-] for the stagnation check.
    tolerances : Tolerances
        From ``[reduction.tolerances]``.

    Returns
    -------
    list of Flag
        In the order of FLAG_NAMES.

    Examples
    --------
    >>> flags = check_run({"spin_scatter": 0.05, "revolutions": 40}, Tolerances())
    >>> [f.name for f in flags]
    ['spin_scatter']
    """
    m, t = measures, tolerances
    found: list[Flag | None] = []
    if "spin_scatter" in m:
        found.append(spin_scatter(m["spin_scatter"], t.spin_scatter))
    if "spin_drift" in m:
        found.append(spin_drift(m["spin_drift"], t.spin_drift))
    if "speed_drift" in m:
        found.append(speed_drift(m["speed_drift"], t.speed_drift))
    if "temperature_drift" in m:
        found.append(temperature_drift(m["temperature_drift"], t.temperature_drift))
    if "zero_shift" in m:
        found.append(zero_shift(m["zero_shift"], t.zero_shift))
    if "tare_extrapolated" in m:
        found.append(
            tare_extrapolated(
                bool(m["tare_extrapolated"]),
                float(m.get("omega", math.nan)),
                m.get("tare_range", (math.nan, math.nan)),
            )
        )
    if "overload" in m:
        found.append(overload(m["overload"], t.overload))
    if "dead_taps" in m:
        found.append(dead_tap(m["dead_taps"], t.dead_tap))
    if "stream_overlap" in m:
        found.append(stream_overlap(m["stream_overlap"], t.stream_overlap))
    if "revolutions" in m:
        found.append(few_revolutions(m["revolutions"], t.min_revolutions))
    if all(key in m for key in ("CL", "u_CL", "CL_p", "u_CL_p")):
        found.append(
            cl_disagreement(
                float(m["CL"]),
                float(m["u_CL"]),
                float(m["CL_p"]),
                float(m["u_CL_p"]),
                float(m.get("corr_CL_CL_p", 0.0)),
                t.agreement_k,
                allowance=t.cl_agreement,
            )
        )
    if "alpha" in m and "Cp_max" in m:
        found.append(stagnation_cp(float(m["alpha"]), float(m["Cp_max"]), t.stagnation_cp))
    return [f for f in found if f is not None]


def repeat_disagreement(
    results: pd.DataFrame,
    tolerances: Tolerances,
    *,
    speed_resolution: float = 0.5,
    spin_resolution: float = 10.0,
    coefficients: Sequence[str] = ("CL", "CD"),
) -> dict[str, Flag]:
    """Flag repeated runs (same configuration and set point) whose coefficients disagree.

    Parameters
    ----------
    results : pandas.DataFrame
        One row a run, with ``run`` (a column, else the index), ``config``, ``speed_set`` [m/s],
        ``spin_set`` [rpm] and, for each coefficient X compared, ``X`` and ``u_X`` [-].
    tolerances : Tolerances
        ``agreement_k`` is the coverage factor of the test.
    speed_resolution : float
        Set speeds are rounded to this step before matching. [m/s]
    spin_resolution : float
        Set spin rates are rounded to this step before matching. [rpm]
    coefficients : sequence of str
        Coefficients compared; one missing from ``results`` is skipped.

    Returns
    -------
    dict of str to Flag
        run id → flag, for every run that disagrees with more than half of its repeats (both runs
        of a disagreeing pair); the reason names the worst one.

    Notes
    -----
    Runs i, j of one group disagree on X when |X_i − X_j| > k √(u²(X_i) + u²(X_j)). Taking the
    runs as independent over-states u(X_i − X_j) where they share type-B components (the same
    balance calibration, the same geometry), which cancel in a difference: the test is
    conservative and flags only clear disagreement. Runs with a NaN set point are not matched;
    rounding may separate two set points either side of a rounding boundary.

    References
    ----------
    .. [1] JCGM 100:2008, GUM, §5.1.2, eq. (10) (combined uncertainty of a difference).
    .. [2] ISO 13528:2022, Statistical methods for use in proficiency testing by interlaboratory
       comparison (E_n numbers).

    Examples
    --------
    >>> df = pd.DataFrame({"run": ["a", "b"], "config": "bare", "speed_set": 20.0,
    ...                    "spin_set": 600.0, "CL": [-1.20, -1.35], "u_CL": [0.02, 0.02]})
    >>> sorted(repeat_disagreement(df, Tolerances()))
    ['a', 'b']
    """
    df = results if "run" in results.columns else results.rename_axis("run").reset_index()
    k = tolerances.agreement_k
    speed = np.round(df["speed_set"].to_numpy(dtype=float) / speed_resolution) * speed_resolution
    spin = np.round(df["spin_set"].to_numpy(dtype=float) / spin_resolution) * spin_resolution
    keyed = df.assign(_speed=speed, _spin=spin).dropna(subset=["_speed", "_spin"])
    worst: dict[str, tuple[float, str]] = {}
    for _, group in keyed.groupby(["config", "_speed", "_spin"], sort=False):
        if len(group) < 2:
            continue
        runs = group["run"].astype(str).to_numpy()
        for name in coefficients:
            if name not in group or f"u_{name}" not in group:
                continue
            x = group[name].to_numpy(dtype=float)
            u = group[f"u_{name}"].to_numpy(dtype=float)
            with np.errstate(divide="ignore", invalid="ignore"):
                z = np.abs(x[:, None] - x[None, :]) / np.sqrt(u[:, None] ** 2 + u[None, :] ** 2)
            z = np.where(np.isnan(z), 0.0, z)
            np.fill_diagonal(z, 0.0)
            # A run is flagged when it disagrees with most of its repeats: among three or more
            # the odd one out is named, not the repeats it spoils; a pair cannot tell which.
            disagreeing = (z > k).sum(axis=1)
            for i in np.flatnonzero(disagreeing > (len(group) - 1) / 2):
                j = int(np.argmax(z[i]))
                if z[i, j] <= worst.get(runs[i], (-1.0, ""))[0]:
                    continue
                reason = (
                    f"{name} {x[i]:.3f} ± {u[i]:.3f} disagrees with repeat run {runs[j]} "
                    f"({name} {x[j]:.3f} ± {u[j]:.3f}): difference {abs(x[i] - x[j]):.3f} is "
                    f"{z[i, j]:.1f} times the combined u (limit k = {k:g})"
                )
                worst[runs[i]] = (float(z[i, j]), reason)
    return {
        run: Flag("repeat_disagreement", value, k, reason) for run, (value, reason) in worst.items()
    }


def flag_columns(flags: Iterable[Flag]) -> dict[str, str | bool]:
    """The result columns of a run's flags: ``flags`` and one ``flag_<name>`` per kind.

    Parameters
    ----------
    flags : iterable of Flag

    Returns
    -------
    dict
        ``"flags"``: the raised kinds in FLAG_NAMES order, ``;``-separated ("" for none);
        ``"flag_reasons"``: ``name: reason`` of each, in the same order, separated by `` | ``;
        then ``"flag_<name>"``: bool, for every name in FLAG_NAMES (docs/results.md).

    Examples
    --------
    >>> cols = flag_columns([Flag("overload", 0.95, 0.9, "")])
    >>> cols["flags"], cols["flag_overload"], cols["flag_spin_scatter"]
    ('overload', True, False)
    """
    raised = {f.name for f in flags}
    unknown = raised - set(FLAG_NAMES)
    if unknown:
        raise ValueError(f"unknown flag kind(s) {sorted(unknown)}; known: {', '.join(FLAG_NAMES)}")
    ordered = sorted(flags, key=lambda f: FLAG_NAMES.index(f.name))
    columns: dict[str, str | bool] = {
        "flags": ";".join(n for n in FLAG_NAMES if n in raised),
        # A reason is one line; " | " cannot occur in one, so the text splits back unambiguously.
        "flag_reasons": " | ".join(f"{f.name}: {' '.join(f.reason.split())}" for f in ordered),
    }
    columns.update({f"flag_{n}": n in raised for n in FLAG_NAMES})
    return columns


def parse_flag_reasons(text: str) -> dict[str, str]:
    """The ``flag_reasons`` text of a run (:func:`flag_columns`) back as {flag name: reason}.

    Examples
    --------
    >>> parse_flag_reasons("spin_scatter: too much | overload: near full scale")
    {'spin_scatter': 'too much', 'overload': 'near full scale'}
    """
    reasons = {}
    for part in str(text or "").split(" | "):
        name, _, reason = part.partition(": ")
        if name:
            reasons[name] = reason
    return reasons
