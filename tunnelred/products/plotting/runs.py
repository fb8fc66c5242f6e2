"""Which runs a figure draws and how they group: the results Dataset, groups by configuration, speed
or Reynolds number, flagged runs, sweep legs, representative runs.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

import numpy as np
import xarray as xr

from tunnelred.products import store
from tunnelred.products.plotting.style import significant

_SAME_RE = 0.05  # runs whose Re differ by less than 5 % form one Reynolds-number group


def results_dataset(results) -> xr.Dataset:
    """The results Dataset from a Dataset, a CampaignResults or an output folder / results.nc.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults, str or path-like

    Returns
    -------
    xarray.Dataset
    """
    if isinstance(results, xr.Dataset):
        return results
    if hasattr(results, "dataset"):
        return results.dataset
    return store.read_results(results)


def run_values(ds: xr.Dataset, name: str) -> np.ndarray:
    """A result's values along ``run`` as floats (NaN throughout when the results lack it)."""
    if name not in ds:
        return np.full(ds.sizes["run"], np.nan)
    return np.asarray(ds[name].values, dtype=float)


def group_runs(results, by: str) -> list[tuple[str, np.ndarray]]:
    """The runs in groups by configuration, tunnel speed or Reynolds number.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
    by : str
        ``"series"`` (one group per configuration and speed, labelled with whichever of the two
        varies in the campaign), ``"config"`` (the label), ``"speed"`` (the set speed, else the
        measured one to 1 m/s) or ``"re"`` (runs within 5 % of the group's lowest Re).

    Returns
    -------
    list of (str, numpy.ndarray)
        Each group's label and its positions along ``run``, in a stable order.
    """
    ds = results_dataset(results)
    n = ds.sizes["run"]
    if by == "config":
        labels = [str(c) for c in ds["config"].values] if "config" in ds else [""] * n
        return [(lab, np.flatnonzero(np.array(labels) == lab)) for lab in dict.fromkeys(labels)]
    if by == "series":
        return _series_groups(ds)
    if by == "speed":
        speed = run_values(ds, "speed_set")
        # Runs without a set point are grouped by their measured speed to the nearest 1 m/s.
        speed = np.where(np.isfinite(speed), speed, np.round(run_values(ds, "U")))
        keys = np.round(speed, 1)
        out = []
        for key in np.unique(keys[np.isfinite(keys)]):
            out.append((f"U = {key:g} m/s", np.flatnonzero(keys == key)))
        return out
    if by == "re":
        re = run_values(ds, "Re")
        order = np.argsort(re)
        out, current = [], []
        for i in order:
            if not np.isfinite(re[i]):
                continue
            if current and re[i] > re[current[0]] * (1 + _SAME_RE):
                out.append(current)
                current = []
            current.append(i)
        if current:
            out.append(current)
        return [(f"Re ≈ {significant(float(np.mean(re[g])))}", np.array(g)) for g in out]
    raise ValueError(f"by must be 'series', 'config', 'speed' or 're', not {by!r}")


def _series_groups(ds: xr.Dataset) -> list[tuple[str, np.ndarray]]:
    """One group per configuration and tunnel speed, labelled by what varies in the campaign."""
    configs = group_runs(ds, "config")
    speeds = group_runs(ds, "speed")
    out = []
    for config, in_config in configs:
        for speed, at_speed in speeds:
            idx = np.intersect1d(in_config, at_speed)
            if idx.size == 0:
                continue
            parts = ([config or "all runs"] if len(configs) > 1 else []) + (
                [speed] if len(speeds) > 1 else []
            )
            out.append((", ".join(parts) or config or "all runs", idx))
    # Runs without a speed at all (no set point, no measured U) still get drawn.
    grouped = np.concatenate([g for _, g in out]) if out else np.array([], dtype=int)
    rest = np.setdiff1d(np.arange(ds.sizes["run"]), grouped)
    if rest.size:
        out.append(("other runs", rest))
    return out


_LEAST_JOINED = 3  # distinct set spin rates a sweep leg needs to be drawn as a line


def flagged_runs(results) -> np.ndarray:
    """Which runs raised at least one quality flag (``flags`` not empty), as a bool array."""
    ds = results_dataset(results)
    if "flags" not in ds:
        return np.zeros(ds.sizes["run"], dtype=bool)
    return np.array([isinstance(f, str) and f != "" for f in ds["flags"].values])


def sweep_legs(results) -> list[tuple[str, np.ndarray]]:
    """The sweep legs of the results as (direction, positions along ``run``).

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like

    Returns
    -------
    list of (str, numpy.ndarray)
        ``"up"``, ``"down"`` or ``"single"`` and the positions of the leg's runs, as
        :func:`tunnelred.products.compare.find_sweeps` groups them (one configuration, one speed,
        one direction of the set spin rate in time), those with at least three set spin rates
        (a retake of one or two set points is not a curve to follow). Empty when the results
        lack the set points that define a sweep.
    """
    return [(s.leg, positions) for s, positions in joined_sweeps(results_dataset(results))]


# The legs of the Datasets whose figures are being drawn as one set (see `sweeps_shared`).
_SHARED_LEGS: dict[int, tuple[xr.Dataset, list | None]] = {}


@contextlib.contextmanager
def sweeps_shared(ds: xr.Dataset) -> Iterator[None]:
    """Within: :func:`joined_sweeps` of ``ds`` is found once and reused by every figure.

    For a set of figures drawn from one Dataset that nothing changes meanwhile (the standard
    figures): finding the sweeps costs about as much as drawing a figure.
    """
    if id(ds) in _SHARED_LEGS:  # already shared by an enclosing set
        yield
        return
    _SHARED_LEGS[id(ds)] = (ds, None)  # the Dataset is held so that its id stays its own
    try:
        yield
    finally:
        del _SHARED_LEGS[id(ds)]


def joined_sweeps(ds: xr.Dataset) -> list:
    """(Sweep, positions along ``run``) of each leg with at least three set spin rates."""
    shared = _SHARED_LEGS.get(id(ds))
    if shared is None:
        return _joined_sweeps(ds)
    if shared[1] is None:
        _SHARED_LEGS[id(ds)] = (ds, _joined_sweeps(ds))
    return _SHARED_LEGS[id(ds)][1]


def _joined_sweeps(ds: xr.Dataset) -> list:
    # compare imports plotting's style at import time; it is needed only when drawing.
    from tunnelred.products import compare

    if "config" not in ds or "alpha" not in ds:
        return []
    index = {str(r): i for i, r in enumerate(ds["run"].values)}
    return [
        (s, np.array([index[r] for r in s.runs], dtype=int))
        for s in compare.find_sweeps(ds)
        # Retakes at one or two set points make a "leg" too short to follow as a curve.
        if np.unique(s.arrays["spin_point"]).size >= _LEAST_JOINED
    ]


def representative_runs(results, count: int = 3) -> list[str]:
    """Runs that span the campaign's spin ratios, for Cp figures and budgets.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
    count : int
        How many runs at most.

    Returns
    -------
    list of str
        Run ids with surface pressure data (any run when none has it), unflagged ones preferred,
        one per distinct |α| (to 0.01), closest to evenly spaced quantiles of |α| (smallest,
        middle, largest for three), in that order.
    """
    ds = results_dataset(results)
    runs = np.asarray(ds["run"].values, dtype=object)
    alpha = np.abs(run_values(ds, "alpha"))
    ok = np.isfinite(alpha)
    if "Cp" in ds:
        has_cp = np.isfinite(np.asarray(ds["Cp"].values, dtype=float)).any(axis=1)
        if (ok & has_cp).any():
            ok &= has_cp
    if "flags" in ds:
        clean = np.array([not f for f in ds["flags"].values])
        if (ok & clean).sum() >= min(count, ok.sum()):
            ok &= clean
    candidates = np.flatnonzero(ok)
    if candidates.size == 0:
        return []
    # Repeats and the other sweep leg sit at the same spin ratio: one run per distinct |alpha|.
    _, first = np.unique(np.round(alpha[candidates], 2), return_index=True)
    candidates = candidates[np.sort(first)]
    targets = np.quantile(alpha[candidates], np.linspace(0.0, 1.0, count))
    chosen: list[str] = []
    for target in targets:
        free = [i for i in candidates if runs[i] not in chosen]
        if not free:
            break
        best = min(free, key=lambda i: abs(alpha[i] - target))
        chosen.append(str(runs[best]))
    return chosen


def has_both(ds: xr.Dataset, a: str, b: str) -> bool:
    return bool((np.isfinite(run_values(ds, a)) & np.isfinite(run_values(ds, b))).any())


def has_values(ds: xr.Dataset, name: str) -> bool:
    return name in ds and bool(np.isfinite(run_values(ds, name)).any())
