"""Run-quality flags: each check compares a measured value with a tolerance from campaign.toml.

A flag never deletes a run; it travels with it into the results and the report. The checks are
one table, :data:`CHECKS`: each :class:`Check` names its flag, the :class:`RunMeasures` attribute
it judges, the :class:`~tunnelred.inputs.config.Tolerances` field it compares with, the direction
of the comparison and the template of its reason. :func:`check_run` loops over the table for one
run; :func:`repeat_disagreement` applies the one campaign-level entry across runs, and
:func:`flag_columns` lays the flags out as the ``flags`` and ``flag_<name>`` result columns of
docs/results.md. A measure that is NaN (not available for this run) raises nothing; a measure the
table names that :class:`RunMeasures` does not have is an error when this module is imported,
and a measure :class:`RunMeasures` is built with that it does not have is an error there.

Adding a flag: a field of ``Tolerances`` (config), a field of ``RunMeasures`` filled by the
reduction, and one entry of :data:`CHECKS` (DEVELOPERS.md, "Adding a quality flag").
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, fields
from typing import Literal

import numpy as np
import pandas as pd

from tunnelred.inputs.config import LOAD_NAMES, Tolerances

__all__ = [
    "Flag",
    "RunMeasures",
    "Check",
    "CHECKS",
    "FLAG_NAMES",
    "SPINNING_ALPHA",
    "is_spinning",
    "judge",
    "check_run",
    "repeat_disagreement",
    "spin_legs",
    "flag_columns",
    "parse_flag_reasons",
]

#: The one definition of a spinning run: |alpha| at or above 0.01. Below it the potential-flow
#: front stagnation point lies within 0.3 deg of theta = 0 (asin(alpha/2)), inside one azimuth
#: bin, so the run is a model at rest for every purpose: its taps are read at their fixed
#: azimuths rather than binned, its stagnation Cp is judged, and the steadiness of a spin ratio
#: too small to divide by (std/mean of alpha) is not.
SPINNING_ALPHA = 0.01

RPM_PER_RAD_S = 60.0 / (2.0 * math.pi)  # rad/s → rpm, for reasons people read


def is_spinning(alpha: float) -> bool:
    """True when a run's mean spin ratio makes it a spinning run (:data:`SPINNING_ALPHA`)."""
    return bool(abs(float(alpha)) >= SPINNING_ALPHA)


@dataclass(frozen=True)
class Flag:
    """A raised flag: its kind, the measured value, the tolerance it broke, and why it matters."""

    name: str
    value: float
    tolerance: float
    reason: str

    def __str__(self) -> str:
        return f"{self.name}: {self.reason}"


_NAN = math.nan


@dataclass(frozen=True)
class RunMeasures:
    """What the quality checks of one run judge (units as in docs/results.md).

    NaN (or empty) where the run has no such measure: a run without a balance log has no
    ``overload``, a run at rest no ``spin_scatter``.
    """

    spin_scatter: float = _NAN  # std(alpha(t))/mean(alpha) [-], spinning runs only
    spin_drift: float = _NAN  # change of alpha over the run / mean [-], spinning runs only
    speed_drift: float = _NAN  # change of U over the run / mean [-]
    u_speed_drift: float = 0.0  # its standard uncertainty from the record's own noise [-]
    temperature_drift: float = _NAN  # change of T over the run [K]
    zero_shift: tuple[float, ...] = ()  # |pre − post zero| / full scale, per load [-]
    overload: tuple[float, ...] = ()  # peak |load| / full scale, per load [-]
    tare_extrapolated: bool = False
    omega: float = _NAN  # mean spin rate [rad/s]
    tare_range: tuple[float, float] = (_NAN, _NAN)  # spin rates of the tare runs used [rad/s]
    dead_taps: Mapping[str, str] = field(default_factory=dict)  # tap → why it was excluded
    stream_overlap: float = _NAN  # fraction of the run every stream covers [-]
    revolutions: float = _NAN  # revolutions in the pressure record of a spinning run [-]
    CL: float = _NAN  # balance lift coefficient and its u [-]
    u_CL: float = _NAN
    CL_p: float = _NAN  # pressure-integrated lift coefficient and its u [-]
    u_CL_p: float = _NAN
    corr_CL_CL_p: float = 0.0  # their correlation coefficient [-]
    alpha: float = _NAN  # spin ratio (corrected) [-]
    Cp_max: float = _NAN  # largest binned Cp [-]
    u_Cp_max: float = 0.0  # its standard uncertainty [-]
    pressure_gap: str = ""  # why the pressure forces were left out, if they were
    speed_set: float = _NAN  # set tunnel speed from runs.csv [m/s]
    U_measured: float = _NAN  # measured (uncorrected) mean U [m/s]
    spin_set: float = _NAN  # set spin rate from runs.csv [rpm]
    spin_rpm: float = _NAN  # measured mean |spin rate| [rpm]

    # -- measures derived from the fields above, judged by the table like the fields

    @property
    def dead_tap_count(self) -> float:
        return float(len(self.dead_taps))

    @property
    def dead_tap_list(self) -> str:
        n = len(self.dead_taps)
        listed = "; ".join(f"{tap} ({why})" for tap, why in self.dead_taps.items())
        return f"{n} tap{'s' if n > 1 else ''} excluded from the integration: {listed}"

    @property
    def cl_difference(self) -> float:
        return abs(self.CL - self.CL_p)

    @property
    def u_cl_difference(self) -> float:
        """u(CL − CL_p) = √(u²(CL) + u²(CL_p) − 2 r u(CL) u(CL_p)) (JCGM 100:2008 eq. (16))."""
        var = self.u_CL**2 + self.u_CL_p**2 - 2.0 * self.corr_CL_CL_p * self.u_CL * self.u_CL_p
        return math.sqrt(max(var, 0.0)) if not math.isnan(var) else _NAN

    @property
    def cl_difference_ratio(self) -> float:
        """|CL − CL_p| / u(CL − CL_p): the E_n number of the pair with k = 1."""
        diff, u = self.cl_difference, self.u_cl_difference
        if math.isnan(diff) or math.isnan(u):
            return _NAN
        return diff / u if u > 0 else (math.inf if diff > 0 else 0.0)

    @property
    def stagnation_miss(self) -> float:
        """|Cp_max − 1| of a run at rest; NaN for a spinning run (:func:`is_spinning`)."""
        if math.isnan(self.alpha) or is_spinning(self.alpha):
            return _NAN
        return abs(self.Cp_max - 1.0)

    @property
    def speed_set_miss(self) -> float:
        """|U − speed_set| / speed_set; NaN without a positive set speed."""
        if not self.speed_set > 0:
            return _NAN
        return abs(self.U_measured - self.speed_set) / self.speed_set

    @property
    def spin_set_miss(self) -> float:
        """||rpm| − |spin_set|| / |spin_set|; a run set to 0 rpm misses it when it spins.

        At a set point of 0 rpm there is no fraction to judge: such a run misses (inf) when it
        is spinning (:func:`is_spinning`) and not otherwise.
        """
        set_rpm = abs(self.spin_set)
        if math.isnan(set_rpm) or math.isnan(self.spin_rpm):
            return _NAN
        if set_rpm == 0.0:
            return math.inf if not math.isnan(self.alpha) and is_spinning(self.alpha) else 0.0
        return abs(self.spin_rpm - set_rpm) / set_rpm

    @property
    def omega_rpm(self) -> float:
        return self.omega * RPM_PER_RAD_S

    @property
    def tare_low_rpm(self) -> float:
        return min(self.tare_range) * RPM_PER_RAD_S

    @property
    def tare_high_rpm(self) -> float:
        return max(self.tare_range) * RPM_PER_RAD_S


Direction = Literal["above", "at_least", "below", "raised"]


@dataclass(frozen=True)
class Check:
    """One quality flag: what it judges, against which tolerance, and how it says why.

    Attributes
    ----------
    name : str
        The flag's name (``flag_<name>`` in the results).
    measure : str
        The :class:`RunMeasures` attribute judged (a field or a derived property); for the
        campaign-level entry, the quantity :func:`repeat_disagreement` works out across runs.
    tolerance : str or None
        The ``Tolerances`` field it is compared with (per configuration); None: no tolerance.
    direction : {"above", "at_least", "below", "raised"}
        Raised when ``|measure| > tolerance``, ``|measure| >= tolerance``, ``measure <
        tolerance``, or when the measure is true (non-zero) whatever the tolerance.
    reason : str
        :meth:`str.format` template of the reason: ``{value}`` and ``{tolerance}`` (``{pct}``
        and ``{tol_pct}`` the same in per cent), ``{which}`` the load component of a per-load
        measure (" (Fy)"), ``{m}`` the RunMeasures and ``{t}`` the Tolerances.
    scope : {"run", "campaign"}
        "run": judged by :func:`check_run`; "campaign": by :func:`repeat_disagreement`.
    limit : callable, optional
        ``limit(measures, tolerances) -> float`` when the limit is not the tolerance alone
        (``cl_disagreement`` widens k by the end-effect allowance).
    """

    name: str
    measure: str
    tolerance: str | None
    direction: Direction
    reason: str
    scope: Literal["run", "campaign"] = "run"
    limit: Callable[[RunMeasures, Tolerances], float] | None = None


def _beyond_u(tolerance: str, u_measure: str) -> Callable[[RunMeasures, Tolerances], float]:
    """The limit tolerance + k u(measure): a departure the measure's own u explains is no fault.

    k is ``agreement_k``; a u that is not positive (not estimated) adds nothing.
    """

    def limit(m: RunMeasures, t: Tolerances) -> float:
        u = getattr(m, u_measure)
        return float(getattr(t, tolerance)) + t.agreement_k * (u if u > 0 else 0.0)

    return limit


def _cl_limit(m: RunMeasures, t: Tolerances) -> float:
    """k, widened by the end-effect allowance |CL| cl_agreement expressed in units of u."""
    u = m.u_cl_difference
    allowed = t.cl_agreement * abs(m.CL)
    if u > 0:
        return t.agreement_k + allowed / u
    return math.inf if m.cl_difference <= allowed else t.agreement_k


#: Every quality flag, in the order the results and the report list them (docs/methods.md,
#: "Quality flags", gives each one's rationale and source).
CHECKS: tuple[Check, ...] = (
    Check(
        "spin_scatter",
        "spin_scatter",
        "spin_scatter",
        "above",
        "spin ratio scatter {pct:.1f} % exceeds {tol_pct:.1f} % (std/mean of alpha(t))",
    ),
    Check(
        "spin_drift",
        "spin_drift",
        "spin_drift",
        "above",
        "spin ratio drift {pct:.1f} % exceeds {tol_pct:.1f} % over the run",
    ),
    Check(
        "speed_drift",
        "speed_drift",
        "speed_drift",
        "above",
        "tunnel speed drift {pct:.1f} % over the run exceeds {tol_pct:.1f} % plus "
        "k = {t.agreement_k:g} × its u {m.u_speed_drift:.4f}",
        limit=_beyond_u("speed_drift", "u_speed_drift"),
    ),
    Check(
        "temperature_drift",
        "temperature_drift",
        "temperature_drift",
        "above",
        "air temperature drift {value:.2f} K exceeds {tolerance:.2f} K over the run",
    ),
    Check(
        "zero_shift",
        "zero_shift",
        "zero_shift",
        "above",
        "zero shift {pct:.2f} % of full scale{which} exceeds {tol_pct:.2f} % "
        "between the pre- and post-run zeros",
    ),
    Check(
        "tare_extrapolated",
        "tare_extrapolated",
        None,
        "raised",
        "spin rate {m.omega_rpm:.0f} rpm lies outside the tare runs' {m.tare_low_rpm:.0f} to "
        "{m.tare_high_rpm:.0f} rpm: tare extrapolated",
    ),
    Check(
        "overload",
        "overload",
        "overload",
        "at_least",
        "load reached {pct:.0f} % of full scale{which}, limit {tol_pct:.0f} %",
    ),
    Check("dead_tap", "dead_tap_count", "dead_tap", "raised", "{m.dead_tap_list}"),
    Check(
        "stream_overlap",
        "stream_overlap",
        "stream_overlap",
        "below",
        "the streams overlap over {pct:.0f} % of the run, less than {tol_pct:.0f} %",
    ),
    Check(
        "few_revolutions",
        "revolutions",
        "min_revolutions",
        "below",
        "{value:.1f} revolutions in the pressure record, fewer than the {tolerance:g} "
        "phase binning needs",
    ),
    Check(
        "cl_disagreement",
        "cl_difference_ratio",
        "agreement_k",
        "above",
        "balance CL {m.CL:.3f} vs pressure CL_p {m.CL_p:.3f}: {m.cl_difference:.3f} apart, "
        "{value:.1f} × combined u {m.u_cl_difference:.3f} > k = {tolerance:g} plus the "
        "{t.cl_agreement:.0%} end-effect allowance",
        limit=_cl_limit,
    ),
    Check(
        "repeat_disagreement",
        "repeat_ratio",
        "agreement_k",
        "above",
        "{coefficient} {x:.3f} ± {u:.3f} disagrees with repeat run {other} ({coefficient} "
        "{x_other:.3f} ± {u_other:.3f}): difference {difference:.3f} is {value:.1f} times the "
        "combined u (limit k = {tolerance:g})",
        scope="campaign",
    ),
    Check(
        "stagnation_cp",
        "stagnation_miss",
        "stagnation_cp",
        "above",
        "alpha = {m.alpha:.3f} run: Cp_max {m.Cp_max:.3f} differs from 1 by {value:.3f}, "
        "more than {tolerance:.3f} plus k = {t.agreement_k:g} × its u {m.u_Cp_max:.3f}",
        limit=_beyond_u("stagnation_cp", "u_Cp_max"),
    ),
    Check(
        "speed_setpoint",
        "speed_set_miss",
        "speed_setpoint",
        "above",
        "measured U {m.U_measured:.2f} m/s is {pct:.1f} % from the set {m.speed_set:g} m/s, "
        "more than {tol_pct:.0f} % (check the set point and the units of the tunnel log)",
    ),
    Check(
        "spin_setpoint",
        "spin_set_miss",
        "spin_setpoint",
        "above",
        "measured spin rate {m.spin_rpm:.0f} rpm is {pct:.1f} % from the set {m.spin_set:g} "
        "rpm, more than {tol_pct:.0f} % (check the set point and the unit of the spin column)",
    ),
)


def _validate(checks: Sequence[Check]) -> dict[str, Check]:
    """The table by name; a measure or tolerance it names that does not exist is an error."""
    measures = {f.name for f in fields(RunMeasures)}
    measures |= {k for k, v in vars(RunMeasures).items() if isinstance(v, property)}
    tolerances = {f.name for f in fields(Tolerances)}
    by_name: dict[str, Check] = {}
    for c in checks:
        if c.name in by_name:
            raise ValueError(f"quality check {c.name!r} is in the table twice")
        if c.scope == "run" and c.measure not in measures:
            raise ValueError(f"quality check {c.name!r} judges {c.measure!r}, not a RunMeasures")
        if c.tolerance is not None and c.tolerance not in tolerances:
            raise ValueError(f"quality check {c.name!r}: {c.tolerance!r} is not a Tolerances field")
        if c.direction not in ("above", "at_least", "below", "raised"):
            raise ValueError(f"quality check {c.name!r}: unknown direction {c.direction!r}")
        by_name[c.name] = c
    return by_name


_BY_NAME = _validate(CHECKS)

#: Every flag kind, in the order the report lists them (docs/results.md).
FLAG_NAMES: tuple[str, ...] = tuple(c.name for c in CHECKS)


def _worst(value: object) -> tuple[float, str]:
    """The judged value of a measure: itself, or the largest |component| and its load name."""
    if isinstance(value, (tuple, list, np.ndarray)):
        arr = np.abs(np.asarray(value, dtype=float).reshape(-1))
        if arr.size == 0 or np.all(np.isnan(arr)):
            return _NAN, ""
        k = int(np.nanargmax(arr))
        if arr.size == 1:
            return float(arr[k]), ""
        names = LOAD_NAMES if len(LOAD_NAMES) == arr.size else None
        return float(arr[k]), f" ({names[k]})" if names else f" (component {k})"
    return float(value), ""


def _raised(direction: Direction, value: float, limit: float) -> bool:
    if math.isnan(value):
        return False
    if direction == "above":
        return abs(value) > limit
    if direction == "at_least":
        return abs(value) >= limit
    if direction == "below":
        return value < limit
    return value != 0


def judge(check: Check | str, measures: RunMeasures, tolerances: Tolerances) -> Flag | None:
    """One per-run check of :data:`CHECKS` on one run's measures: its Flag, or None.

    Examples
    --------
    >>> print(judge("spin_scatter", RunMeasures(spin_scatter=0.031), Tolerances()).reason)
    spin ratio scatter 3.1 % exceeds 2.0 % (std/mean of alpha(t))
    >>> judge("spin_scatter", RunMeasures(spin_scatter=0.01), Tolerances()) is None
    True
    """
    c = _BY_NAME[check] if isinstance(check, str) else check
    if c.scope != "run":
        raise ValueError(f"{c.name!r} is judged across runs (repeat_disagreement)")
    value, which = _worst(getattr(measures, c.measure))
    tolerance = float(getattr(tolerances, c.tolerance)) if c.tolerance else 0.0
    limit = c.limit(measures, tolerances) if c.limit is not None else tolerance
    if not _raised(c.direction, value, limit):
        return None
    shown = value if c.direction == "below" else abs(value)
    reason = c.reason.format(
        value=shown,
        tolerance=tolerance,
        pct=100.0 * shown,
        tol_pct=100.0 * tolerance,
        which=which,
        m=measures,
        t=tolerances,
    )
    return Flag(c.name, shown, tolerance, reason)


def check_run(measures: RunMeasures | Mapping[str, object], tolerances: Tolerances) -> list[Flag]:
    """Apply every per-run check of :data:`CHECKS` to one run.

    Parameters
    ----------
    measures : RunMeasures or dict
        Measured values of one run; a dict is turned into RunMeasures, so a key that is not a
        measure is an error (TypeError), never a silently skipped check.
    tolerances : Tolerances
        Those of the run's configuration (``CampaignConfig.tolerances_for``).

    Returns
    -------
    list of Flag
        In the order of FLAG_NAMES.

    Examples
    --------
    >>> flags = check_run(RunMeasures(spin_scatter=0.05, revolutions=40), Tolerances())
    >>> [f.name for f in flags]
    ['spin_scatter']
    """
    if not isinstance(measures, RunMeasures):
        measures = RunMeasures(**measures)
    found = (judge(c, measures, tolerances) for c in CHECKS if c.scope == "run")
    return [f for f in found if f is not None]


def spin_legs(spin: np.ndarray) -> list[tuple[str, np.ndarray]]:
    """Legs of a time-ordered sequence of set spin rates: (direction, positions) each.

    Runs at one set point in a row form a plateau; the plateaus change monotonically within a
    leg, and the plateau where the direction reverses belongs to both legs. A sequence that
    never reverses is one ``"single"`` leg; otherwise each leg is ``"up"`` or ``"down"``. The
    one rule for the sweeps of the comparisons and figures (tunnelred.products.compare) and for
    which runs :func:`repeat_disagreement` takes as repeats.

    Examples
    --------
    >>> [(d, p.tolist()) for d, p in spin_legs(np.array([0, 500, 500, 1000, 500, 0]))]
    [('up', [0, 1, 2, 3]), ('down', [3, 4, 5])]
    """
    spin = np.asarray(spin)
    changes = np.flatnonzero(np.diff(spin) != 0)
    plateau = np.concatenate([[0], np.cumsum(np.diff(spin) != 0)])
    levels = spin[np.concatenate([[0], changes + 1])]
    if levels.size == 1:
        return [("single", np.arange(spin.size))]
    step = np.sign(np.diff(levels))
    leg_of_step = np.concatenate([[0], np.cumsum(step[1:] != step[:-1])])
    n_legs = int(leg_of_step[-1]) + 1
    legs = []
    for k in range(n_legs):
        steps = np.flatnonzero(leg_of_step == k)
        members = np.flatnonzero((plateau >= steps[0]) & (plateau <= steps[-1] + 1))
        direction = "single" if n_legs == 1 else ("up" if step[steps[0]] > 0 else "down")
        legs.append((direction, members))
    return legs


def _run_order(df: pd.DataFrame) -> np.ndarray:
    """Positions of ``df``'s rows in ``start`` order (the table's order without it)."""
    if "start" not in df:
        return np.arange(len(df))
    start = pd.to_datetime(df["start"], utc=True, errors="coerce", format="ISO8601")
    seconds = (start - pd.Timestamp(0, tz="UTC")).dt.total_seconds().to_numpy(dtype=float)
    return np.argsort(seconds, kind="stable")


def _directions(keyed: pd.DataFrame) -> dict[object, frozenset[str]]:
    """Each row's sweep directions (index label → {"up"}, {"down"}, both at a turning point,
    or {"single"}): the legs of :func:`spin_legs` within its configuration and set speed."""
    found: dict[object, set[str]] = {}
    for _, group in keyed.groupby(["config", "_speed"], sort=False):
        group = group.iloc[_run_order(group)]
        labels = group.index.to_numpy()
        for direction, members in spin_legs(group["_spin"].to_numpy()):
            for label in labels[members]:
                found.setdefault(label, set()).add(direction)
    return {label: frozenset(d) for label, d in found.items()}


def repeat_disagreement(
    results: pd.DataFrame,
    tolerances: Tolerances | Callable[[str], Tolerances],
    *,
    speed_resolution: float = 0.5,
    spin_resolution: float = 10.0,
    coefficients: Sequence[str] = ("CL", "CD"),
) -> dict[str, Flag]:
    """Flag repeated runs (same configuration, set point and sweep direction) that disagree.

    Parameters
    ----------
    results : pandas.DataFrame
        One row a run, with ``run`` (a column, else the index), ``config``, ``speed_set`` [m/s],
        ``spin_set`` [rpm], optionally ``start`` (the run order; else the rows' order) and, for
        each coefficient X compared, ``X`` and ``u_X`` [-].
    tolerances : Tolerances or callable
        ``agreement_k`` is the coverage factor of the test. A callable gives the tolerances of
        a configuration label (``CampaignConfig.tolerances_for``), so that each configuration's
        repeats are judged with its own ``[configurations.LABEL.tolerances]``.
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
    Repeats are runs of one configuration at one set speed and set spin rate (rounded) taken in
    the same direction of the spin sweep: in run order within the configuration and speed, the
    legs of :func:`spin_legs`. A run on the way up and one on the way down at the same set point
    are not repeats, since a real hysteresis of the flow may part them; the runs at the turning
    point belong to both legs, and a second leg in one direction repeats the first.

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
    check = _BY_NAME["repeat_disagreement"]
    tolerances_for = tolerances if callable(tolerances) else (lambda label: tolerances)
    speed = np.round(df["speed_set"].to_numpy(dtype=float) / speed_resolution) * speed_resolution
    spin = np.round(df["spin_set"].to_numpy(dtype=float) / spin_resolution) * spin_resolution
    keyed = df.assign(_speed=speed, _spin=spin).dropna(subset=["_speed", "_spin"])
    keyed = keyed.reset_index(drop=True)
    directions = _directions(keyed)
    worst: dict[str, tuple[float, float, str]] = {}
    for (label, _, _), group in keyed.groupby(["config", "_speed", "_spin"], sort=False):
        if len(group) < 2:
            continue
        k = float(getattr(tolerances_for(str(label)), str(check.tolerance)))
        runs = group["run"].astype(str).to_numpy()
        legs = [directions[i] for i in group.index]
        repeats = np.array([[i != j and bool(a & b) for j, b in enumerate(legs)]
                            for i, a in enumerate(legs)])  # fmt: skip
        for name in coefficients:
            if name not in group or f"u_{name}" not in group:
                continue
            x = group[name].to_numpy(dtype=float)
            u = group[f"u_{name}"].to_numpy(dtype=float)
            with np.errstate(divide="ignore", invalid="ignore"):
                z = np.abs(x[:, None] - x[None, :]) / np.sqrt(u[:, None] ** 2 + u[None, :] ** 2)
            z = np.where(np.isnan(z) | ~repeats, 0.0, z)
            # A run is flagged when it disagrees with most of its repeats: among three or more
            # the odd one out is named, not the repeats it spoils; a pair cannot tell which.
            disagreeing = (z > k).sum(axis=1)
            for i in np.flatnonzero(disagreeing > repeats.sum(axis=1) / 2):
                j = int(np.argmax(z[i]))
                if z[i, j] <= worst.get(runs[i], (-1.0, ""))[0]:
                    continue
                reason = check.reason.format(
                    coefficient=name,
                    x=x[i],
                    u=u[i],
                    other=runs[j],
                    x_other=x[j],
                    u_other=u[j],
                    difference=abs(x[i] - x[j]),
                    value=z[i, j],
                    tolerance=k,
                )
                worst[runs[i]] = (float(z[i, j]), k, reason)
    return {run: Flag(check.name, value, k, reason) for run, (value, k, reason) in worst.items()}


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
