"""Results in, sweeps out: runs grouped by configuration and speed (or Re band), cut into legs.

A *sweep* is the runs of one configuration at one nominal speed (or in one Reynolds-number band),
taken as one leg of set spin rates: a leg is a maximal monotonic stretch of set spin rate in run
(``start``) order, so a campaign that steps the spin up and back down gives an ``"up"`` and a
``"down"`` sweep, whose difference is the hysteresis.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
import xarray as xr

from tunnelred.engine.quality import spin_legs
from tunnelred.products.store import run_table

__all__ = [
    "BY",
    "COMPARISON_FLAGS_IGNORED",
    "GAP_FACTOR",
    "Sweep",
    "flagged_rows",
    "gap_limit",
    "point_alpha",
    "split_at_gaps",
    "find_sweeps",
    "has_coefficient",
    "numeric_column",
    "results_table",
    "set_points",
]

#: The ways sweeps are grouped.
BY = ("config", "speed", "re")
#: A curve may bridge a step in α between two measured points up to this many times the median
#: step of the finest sweep compared or drawn (:func:`gap_limit`): no grid value is interpolated,
#: and no sweep line drawn, across a wider one. A sparse leg (a down sweep at every other set
#: point) or a jump to a pair of repeats is then not joined by a straight line it never measured.
GAP_FACTOR = 1.5
_RPM_PER_RAD_S = 60.0 / (2.0 * math.pi)


@dataclass(frozen=True, eq=False)
class Sweep:
    """One leg of a spin sweep: runs of one configuration at one nominal speed or Re band.

    Equality is identity: two Sweep objects are the same sweep only if they are one object
    (runs shared between different sweeps are recognised by their run ids instead).

    Attributes
    ----------
    key : str
        Unique label, e.g. ``"bare | 20 m/s | up"`` (a second up leg is ``"up 2"``).
    config : str
        Configuration label.
    speed : float
        Nominal speed: the set speed rounded, else the measured one (median over the band when
        grouped by Re). [m/s]
    Re : float
        Nominal Reynolds number: the band's median when grouped by Re, else the sweep's median. [-]
    runs : tuple of str
        Run ids, ordered by set spin rate (repeats in run order).
    leg : str
        ``"up"`` or ``"down"`` (direction of the set spin rate in time), ``"single"`` when the
        group never reverses.
    leg_index : int
        1 for the first leg of its direction in the group, 2 for the second, …
    arrays : dict of str to numpy.ndarray
        Every numeric result column for these runs, in the order of ``runs``, plus ``spin_point``
        [rpm] (the rounded set spin rate that identifies repeats), ``order`` (position in run
        order across the whole results) and ``flagged`` (the run raised a quality flag other
        than :data:`COMPARISON_FLAGS_IGNORED`).
    """

    key: str
    config: str
    speed: float
    Re: float
    runs: tuple[str, ...]
    leg: str
    leg_index: int
    arrays: dict[str, np.ndarray]


# ---------------------------------------------------------------------------------------------
# Results in, sweeps out


def results_table(results) -> pd.DataFrame:
    """Results as a DataFrame with a ``run`` column of str, one row a run."""
    if isinstance(results, xr.Dataset):
        table = run_table(results)
    elif isinstance(results, pd.DataFrame):
        table = results if "run" in results.columns else results.rename_axis("run").reset_index()
        table = table.copy()
    else:
        raise TypeError(f"results must be an xarray.Dataset or a pandas.DataFrame, not {results!r}")
    table["run"] = table["run"].astype(str)
    if "config" not in table:
        table["config"] = ""
    table["config"] = table["config"].fillna("").astype(str)
    return table


def numeric_column(table: pd.DataFrame, name: str) -> np.ndarray:
    if name not in table:
        return np.full(len(table), np.nan)
    return pd.to_numeric(table[name], errors="coerce").to_numpy(dtype=float)


#: Flags that do not keep a run out of a comparison: the repeat check names both runs of a
#: disagreeing pair (it cannot tell which is wrong), so leaving them out would drop the set
#: point rather than a faulty run.
COMPARISON_FLAGS_IGNORED = ("repeat_disagreement",)


def flagged_rows(table: pd.DataFrame) -> np.ndarray:
    """Which rows raised a quality flag other than :data:`COMPARISON_FLAGS_IGNORED`.

    Read from the ``flag_<name>`` columns, else from the ``;``-separated ``flags`` text.
    """
    ignored = {f"flag_{name}" for name in COMPARISON_FLAGS_IGNORED}
    columns = [
        c
        for c in table.columns
        if c.startswith("flag_") and c != "flag_reasons" and c not in ignored
    ]
    flagged = np.zeros(len(table), dtype=bool)
    if columns:
        for column in columns:
            values = table[column]
            if values.dtype == object:
                values = values.astype(str).str.lower().isin(["true", "1"])
            flagged |= values.fillna(False).astype(bool).to_numpy()
    elif "flags" in table:
        for k, text in enumerate(table["flags"].fillna("").astype(str)):
            names = {n.strip() for n in text.split(";") if n.strip()}
            flagged[k] = bool(names - set(COMPARISON_FLAGS_IGNORED))
    return flagged


def point_alpha(sweep: Sweep) -> np.ndarray:
    """The sweep's measured α, one a set point (repeats averaged), sorted; NaN left out."""
    alpha = np.asarray(sweep.arrays.get("alpha", np.full(len(sweep.runs), np.nan)), dtype=float)
    spin = np.asarray(sweep.arrays["spin_point"], dtype=float)
    finite = np.isfinite(alpha)
    levels, inverse = np.unique(spin[finite], return_inverse=True)
    means = np.bincount(inverse, weights=alpha[finite], minlength=levels.size)
    return np.sort(means / np.maximum(np.bincount(inverse, minlength=levels.size), 1))


def gap_limit(alpha_sets, max_gap: float | None = None) -> float:
    """The widest step a curve may bridge: ``max_gap`` when given, else :data:`GAP_FACTOR` ×
    the smallest median step among the sets of sorted measured α (inf when none has a step).

    Examples
    --------
    >>> gap_limit([np.array([0.0, 0.5, 1.0, 1.5]), np.array([0.0, 1.0, 2.0])])
    0.75
    >>> gap_limit([np.array([0.0, 1.0])], max_gap=0.6)
    0.6
    """
    if max_gap is not None:
        return float(max_gap)
    steps = [float(np.median(np.diff(a))) for a in alpha_sets if np.asarray(a).size >= 2]
    steps = [step for step in steps if step > 0]
    return GAP_FACTOR * min(steps) if steps else math.inf


def split_at_gaps(alpha: np.ndarray, max_gap: float) -> list[np.ndarray]:
    """Positions of ``alpha`` (sorted) in stretches whose steps are no wider than ``max_gap``.

    Examples
    --------
    >>> [p.tolist() for p in split_at_gaps(np.array([0.0, 0.5, 1.0, 2.0, 2.5]), 0.6)]
    [[0, 1, 2], [3, 4]]
    """
    alpha = np.asarray(alpha, dtype=float)
    if alpha.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(alpha) > max_gap) + 1
    return np.split(np.arange(alpha.size), breaks)


def _in_run_order(table: pd.DataFrame) -> pd.DataFrame:
    """Rows sorted by ``start`` (runs without a start time keep their place after the others)."""
    if "start" in table:
        start = pd.to_datetime(table["start"], utc=True, errors="coerce", format="ISO8601")
        seconds = (start - pd.Timestamp(0, tz="UTC")).dt.total_seconds().to_numpy(dtype=float)
        table = table.iloc[np.argsort(seconds, kind="stable")]
    table = table.reset_index(drop=True)
    table["order"] = np.arange(len(table))
    return table


def set_points(
    table: pd.DataFrame, speed_resolution: float, spin_resolution: float
) -> tuple[np.ndarray, np.ndarray]:
    """Nominal speed [m/s] and set spin rate [rpm]: set points rounded, else measured values."""
    speed = numeric_column(table, "speed_set")
    speed = np.where(np.isfinite(speed), speed, numeric_column(table, "U"))
    spin = numeric_column(table, "spin_set")
    spin = np.where(np.isfinite(spin), spin, numeric_column(table, "omega") * _RPM_PER_RAD_S)
    return (
        np.round(speed / speed_resolution) * speed_resolution,
        np.round(spin / spin_resolution) * spin_resolution,
    )


def _re_bands(reynolds: np.ndarray, tolerance: float) -> tuple[np.ndarray, np.ndarray]:
    """Band number of every run (−1 without Re) and each band's median Re.

    A band holds the runs within ``tolerance`` of its lowest Re, taken in increasing Re, the same
    rule as tunnelred.products.plotting.group_runs.
    """
    band = np.full(reynolds.size, -1)
    finite = np.flatnonzero(np.isfinite(reynolds))
    lowest = np.nan
    current = -1
    for i in finite[np.argsort(reynolds[finite], kind="stable")]:
        if current < 0 or reynolds[i] > lowest * (1.0 + tolerance):
            current += 1
            lowest = reynolds[i]
        band[i] = current
    medians = np.array([np.median(reynolds[band == b]) for b in range(current + 1)])
    return band, medians


def find_sweeps(
    results,
    *,
    by: str = "config",
    speed_resolution: float = 0.5,
    spin_resolution: float = 10.0,
    re_tolerance: float = 0.05,
) -> list[Sweep]:
    """Group the results into sweeps: one configuration, one nominal speed (or Re band), one leg.

    Parameters
    ----------
    results : xarray.Dataset or pandas.DataFrame
        Campaign results: ``run``, ``config``, ``start``, ``speed_set`` [m/s], ``spin_set`` [rpm],
        ``U`` [m/s], ``omega`` [rad/s], ``Re``, and the coefficients with their ``u_``.
    by : {"config", "speed", "re"}
        ``"config"`` and ``"speed"`` group by configuration and nominal speed; ``"re"`` by
        configuration and Reynolds-number band (bands shared by all configurations, so sweeps of
        different configurations at one Re can be matched).
    speed_resolution : float
        Set speeds are rounded to this step. [m/s]
    spin_resolution : float
        Set spin rates are rounded to this step to recognise repeats. [rpm]
    re_tolerance : float
        A Re band holds the runs within this fraction of its lowest Re (``by="re"``). [-]

    Returns
    -------
    list of Sweep
        In order of each group's first run, then leg by leg in time.

    Notes
    -----
    Run order is ``start`` order. A leg is a maximal monotonic stretch of the set spin rate in
    run order: consecutive runs at one set point (repeats) stay in their leg, and the runs at the
    turning point, where the direction reverses, belong to both legs (they are the same runs,
    which :func:`difference` recognises). A group that never reverses is one ``"single"`` leg. A
    campaign that visits spin rates in random order gives many short legs: sort such runs by
    spin rate yourself, one group at a time, before comparing.

    A run without a set speed uses its measured speed U, one without a set spin rate its
    measured ω (in rpm), both rounded as the set points; runs with neither are left out. The
    rounding steps are those of :func:`tunnelred.engine.quality.repeat_disagreement`.

    Examples
    --------
    >>> df = pd.DataFrame({"run": list("abcde"), "config": "bare", "speed_set": 20.0,
    ...                    "spin_set": [0, 300, 600, 300, 0],
    ...                    "start": pd.date_range("2031-05-01", periods=5, freq="h")})
    >>> [(s.leg, s.runs) for s in find_sweeps(df)]
    [('up', ('a', 'b', 'c')), ('down', ('e', 'd', 'c'))]
    """
    if by not in BY:
        raise ValueError(f"by must be one of {BY}, not {by!r}")
    table = _in_run_order(results_table(results))
    speed, spin = set_points(table, speed_resolution, spin_resolution)
    reynolds = numeric_column(table, "Re")
    if by == "re":
        band, band_re = _re_bands(reynolds, re_tolerance)
        level = np.where(band >= 0, band, np.nan)
    else:
        level = speed
    usable = np.isfinite(level) & np.isfinite(spin)
    numeric = [
        c
        for c in table.columns
        if pd.api.types.is_numeric_dtype(table[c]) or pd.api.types.is_bool_dtype(table[c])
    ]
    frame = table.assign(_level=level, spin_point=spin, flagged=flagged_rows(table))[usable]
    sweeps: list[Sweep] = []
    for (config, lev), group in frame.groupby(["config", "_level"], sort=False):
        rows = group.index.to_numpy()
        if by == "re":
            nominal_re = float(band_re[int(lev)])
            nominal_speed = float(np.median(speed[rows]))
            where = f"Re {nominal_re:.3g}"
        else:
            nominal_re = (
                float(np.nanmedian(reynolds[rows])) if np.isfinite(reynolds[rows]).any() else np.nan
            )
            nominal_speed = float(lev)
            where = f"{nominal_speed:g} m/s"
        seen: dict[str, int] = {}
        for direction, members in spin_legs(spin[rows]):
            seen[direction] = seen.get(direction, 0) + 1
            label = direction if seen[direction] == 1 else f"{direction} {seen[direction]}"
            picked = rows[members]
            picked = picked[np.lexsort((picked, spin[picked]))]
            # One selection for the leg, then its columns (a .loc per column costs seconds).
            block = frame.loc[picked, list(dict.fromkeys([*numeric, "spin_point", "flagged"]))]
            arrays = {c: block[c].to_numpy() for c in block.columns}
            sweeps.append(
                Sweep(
                    key=f"{config} | {where} | {label}",
                    config=str(config),
                    speed=nominal_speed,
                    Re=nominal_re,
                    runs=tuple(table.loc[picked, "run"]),
                    leg=direction,
                    leg_index=seen[direction],
                    arrays=arrays,
                )
            )
    return sweeps


def has_coefficient(sweep: Sweep, name: str) -> bool:
    return (
        name in sweep.arrays
        and f"u_{name}" in sweep.arrays
        and bool(np.isfinite(np.asarray(sweep.arrays[name], dtype=float)).any())
    )
