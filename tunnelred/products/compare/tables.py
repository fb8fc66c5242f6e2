"""Campaign-level comparison tables: curve and figure differences of every compared pair."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from tunnelred.products.compare.characteristics import COMPARED, FIGURES, characteristics
from tunnelred.products.compare.grid import Difference
from tunnelred.products.compare.paired import METHODS, PAIR_TOLERANCE, difference_by_method
from tunnelred.products.compare.sweeps import Sweep, find_sweeps, has_coefficient
from tunnelred.products.plotting import COVERAGE_FACTOR

__all__ = ["comparison_section_data", "comparison_table"]


_COMPARISON_COLUMNS = (
    "kind",
    "method",
    "a",
    "b",
    "config_a",
    "config_b",
    "speed_a",
    "speed_b",
    "Re_a",
    "Re_b",
    "leg_a",
    "leg_b",
    "quantity",
    "alpha",
    "alpha_a",
    "alpha_b",
    "delta",
    "u_delta",
    "u_interp",
    "U_delta",
    "significant",
)

# ---------------------------------------------------------------------------------------------
# Campaign-level comparison


def _pairs(sweeps: list[Sweep], by: str, reference) -> list[tuple[Sweep, Sweep]]:
    """(sweep, reference sweep) pairs: configurations at one speed or Re band, or speeds of one
    configuration; legs of the same direction and number, or any leg against a single one."""
    if by == "speed":
        match, compared = (lambda s: s.config), (lambda s: s.speed)
    elif by == "re":
        match, compared = (lambda s: s.Re), (lambda s: s.config)
    else:
        match, compared = (lambda s: s.speed), (lambda s: s.config)
    groups: dict = {}
    for sweep in sweeps:
        groups.setdefault(match(sweep), []).append(sweep)
    pairs = []
    for members in groups.values():
        values = list(dict.fromkeys(compared(s) for s in members))
        base = reference if reference in values else values[0]
        for s in members:
            if compared(s) == base:
                continue
            for ref in members:
                if compared(ref) != base:
                    continue
                if (s.leg, s.leg_index) == (ref.leg, ref.leg_index) or "single" in (s.leg, ref.leg):
                    pairs.append((s, ref))
    return pairs


def _hysteresis_pairs(sweeps: list[Sweep]) -> list[tuple[Sweep, Sweep]]:
    groups: dict = {}
    for sweep in sweeps:
        groups.setdefault((sweep.config, sweep.speed, sweep.Re), []).append(sweep)
    pairs = []
    for members in groups.values():
        ups = {s.leg_index: s for s in members if s.leg == "up"}
        downs = {s.leg_index: s for s in members if s.leg == "down"}
        pairs += [(ups[i], downs[i]) for i in ups if i in downs]
    return pairs


def _pair_columns(a: Sweep, b: Sweep) -> dict:
    """The columns naming the two sweeps of a comparison row, a's beside b's."""
    return {
        "a": a.key,
        "b": b.key,
        "config_a": a.config,
        "config_b": b.config,
        "speed_a": a.speed,
        "speed_b": b.speed,
        "Re_a": a.Re,
        "Re_b": b.Re,
        "leg_a": a.leg,
        "leg_b": b.leg,
    }


def _difference_rows(kind: str, a: Sweep, b: Sweep, d: Difference) -> pd.DataFrame:
    keep = d.covered
    return pd.DataFrame(
        {
            "kind": kind,
            "method": d.method,
            **_pair_columns(a, b),
            "quantity": d.name,
            "alpha": d.alpha[keep],
            "alpha_a": d.alpha_a[keep],
            "alpha_b": d.alpha_b[keep],
            "delta": d.delta[keep],
            "u_delta": d.u[keep],
            "u_interp": d.u_interp[keep],
            "U_delta": d.k * d.u[keep],
            "significant": d.significant[keep],
        }
    )


def _figure_rows(kind: str, a: Sweep, b: Sweep, fa: dict, fb: dict) -> pd.DataFrame:
    names = [f for f in FIGURES if f in fa and f in fb]
    delta = np.array([fa[f] - fb[f] for f in names], dtype=float)
    u = np.hypot([fa[f"u_{f}"] for f in names], [fb[f"u_{f}"] for f in names])
    return pd.DataFrame(
        {
            "kind": kind,
            "method": "figure",
            **_pair_columns(a, b),
            "quantity": names,
            "alpha": np.nan,
            "alpha_a": np.nan,
            "alpha_b": np.nan,
            "delta": delta,
            "u_delta": u,
            "u_interp": 0.0,
            "U_delta": COVERAGE_FACTOR * u,
            "significant": np.abs(delta) > COVERAGE_FACTOR * u,
        }
    )


def comparison_table(
    results,
    *,
    by: str = "config",
    names: Sequence[str] = COMPARED,
    reference=None,
    slope_range: tuple[float, float] = (0.0, 0.5),
    power_level: float | None = None,
    method: str = "paired",
    tolerance: float = PAIR_TOLERANCE,
    max_gap: float | None = None,
    include_flagged: bool = False,
) -> pd.DataFrame:
    """Every comparison of the campaign as one long table: curve differences and figure differences.

    Parameters
    ----------
    results : xarray.Dataset or pandas.DataFrame
    by : {"config", "speed", "re"}
        ``"config"``: each configuration against the reference configuration at the same
        nominal speed; ``"speed"``: each speed of a configuration against its reference speed;
        ``"re"``: each configuration against the reference one in the same Re band.
    names : sequence of str
        Coefficients compared; one missing from the results is skipped.
    reference : str or float, optional
        The reference configuration (``by="config"`` or ``"re"``) or speed [m/s]
        (``by="speed"``); default the first in run order within each group.
    slope_range, power_level
        As :func:`characteristics`.
    method : {"paired", "grid"}
        Curve differences at the measured spin ratios both sweeps share, paired within
        ``tolerance`` (:func:`paired_difference`, the default), or on the :func:`alpha_grid` of
        each pair's overlap, never across a step wider than ``max_gap`` (:func:`difference`).
    tolerance : float
        Largest |α_a − α_b| of a pair (``method="paired"``). [-]
    max_gap : float, optional
        Widest step in α a grid value may be interpolated across (``method="grid"``); default
        :func:`gap_limit` of the two sweeps. [-]
    include_flagged : bool
        Use runs that raised a quality flag in the curve differences (left out by default).

    Returns
    -------
    pandas.DataFrame
        One row per difference: ``kind`` (``by``, or ``"hysteresis"`` for up minus down legs of
        one sweep), ``method`` (``"paired"``, ``"grid"``, or ``"figure"`` for a characteristic
        figure), ``a``, ``b`` (sweep keys; Δ = a − b), ``config_a``, ``config_b``, ``speed_a``,
        ``speed_b`` [m/s], ``Re_a``, ``Re_b``, ``leg_a``, ``leg_b``, ``quantity``, ``alpha``
        (the pair's mean α or the grid point; NaN for a figure), ``alpha_a``, ``alpha_b`` (the
        measured α of each side of a pair; the grid point on a grid), ``delta``, ``u_delta``
        (k = 1), ``u_interp`` (the part of u_delta from interpolation), ``U_delta`` (k = 2) and
        ``significant`` (|Δ| > U_delta). Figure rows hold the differences of
        :func:`characteristics` (the two sweeps share no runs, so their u add in quadrature).

    Notes
    -----
    Legs are paired by direction and number (up with up, down with down); a ``"single"`` leg
    pairs with any leg of the other side. A spin ratio one sweep measured and the other did not
    gives no paired row: compare such sweeps with ``method="grid"``, where the steps allow.

    Examples
    --------
    >>> df = pd.DataFrame({"run": list("abcd"), "config": ["A", "A", "B", "B"],
    ...     "speed_set": 20.0, "spin_set": [0, 600, 0, 600], "alpha": [0.0, 0.5, 0.0, 0.5],
    ...     "u_alpha": 0.0, "CL": [0.0, -3.0, 0.0, -2.0], "u_CL": 0.1})
    >>> table = comparison_table(df, names=["CL"])
    >>> table[table.quantity == "CL"][["alpha", "delta"]].round(6).values.tolist()
    [[0.0, 0.0], [0.5, 1.0]]
    """
    if method not in METHODS:
        raise ValueError(f"method must be one of {METHODS}, not {method!r}")
    sweeps = find_sweeps(results, by=by)
    parts = []
    figures = {
        s.key: characteristics(s, slope_range=slope_range, power_level=power_level) for s in sweeps
    }
    for kind, pairs in (
        (by, _pairs(sweeps, by, reference)),
        ("hysteresis", _hysteresis_pairs(sweeps)),
    ):
        for a, b in pairs:
            for name in names:
                if has_coefficient(a, name) and has_coefficient(b, name):
                    d = difference_by_method(
                        a,
                        b,
                        name,
                        method=method,
                        tolerance=tolerance,
                        max_gap=max_gap,
                        include_flagged=include_flagged,
                    )
                    parts.append(_difference_rows(kind, a, b, d))
            if kind != "hysteresis":
                parts.append(_figure_rows(kind, a, b, figures[a.key], figures[b.key]))
    parts = [p for p in parts if not p.empty]
    if not parts:
        return pd.DataFrame(columns=list(_COMPARISON_COLUMNS))
    return pd.concat(parts, ignore_index=True)[list(_COMPARISON_COLUMNS)]


def comparison_section_data(results, *, reference: str | None = None) -> pd.DataFrame:
    """ΔCL and ΔCD of configurations at paired spin ratios, for the report's comparison section.

    Parameters
    ----------
    results : xarray.Dataset or pandas.DataFrame
    reference : str, optional
        The reference configuration; default the first in run order at each speed.

    Returns
    -------
    pandas.DataFrame
        Columns ``config``, ``reference``, ``speed`` [m/s], ``leg``, ``alpha`` (the mean α of a
        pair of measured points, :func:`paired_difference`), and for X in CL,
        CD: ``dX`` (config − reference), ``u_dX`` (k = 1) and ``sig_dX`` (|ΔX| > 2u). Empty
        (with these columns) when the campaign has a single configuration.

    Examples
    --------
    >>> df = pd.DataFrame({"run": list("ab"), "config": "A", "speed_set": 20.0,
    ...     "spin_set": [0, 600], "alpha": [0.0, 0.5], "u_alpha": 0.0,
    ...     "CL": [0.0, -3.0], "u_CL": 0.1, "CD": 1.0, "u_CD": 0.05})
    >>> comparison_section_data(df).empty
    True
    """
    columns = ["config", "reference", "speed", "leg", "alpha"]
    columns += [f"{p}{x}" for x in ("CL", "CD") for p in ("d", "u_d", "sig_d")]
    table = comparison_table(results, by="config", names=("CL", "CD"), reference=reference)
    curves = table[(table["kind"] == "config") & table["alpha"].notna()]
    if curves.empty:
        return pd.DataFrame(columns=columns)
    keys = ["config_a", "config_b", "speed_a", "leg_a", "alpha"]
    wide = curves.pivot_table(
        index=keys, columns="quantity", values=["delta", "u_delta", "significant"], aggfunc="first"
    )
    out = pd.DataFrame(index=wide.index).reset_index()
    out.columns = columns[:5]
    for x in ("CL", "CD"):
        for prefix, source in (("d", "delta"), ("u_d", "u_delta"), ("sig_d", "significant")):
            if (source, x) in wide.columns:
                out[f"{prefix}{x}"] = wide[(source, x)].to_numpy()
            else:
                out[f"{prefix}{x}"] = np.nan
    for x in ("CL", "CD"):
        out[f"sig_d{x}"] = out[f"sig_d{x}"].fillna(False).astype(bool)
    return out[columns]
