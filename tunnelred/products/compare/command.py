"""``tunnelred compare``: results folders in, comparison tables and figures out."""

from __future__ import annotations

import re
from collections.abc import Sequence
from pathlib import Path

import pandas as pd
from matplotlib.axes import Axes

from tunnelred.common.errors import InputError
from tunnelred.products.compare.characteristics import COMPARED, characteristics_table
from tunnelred.products.compare.figures import plot_difference, plot_sweeps
from tunnelred.products.compare.paired import PAIR_TOLERANCE, difference_by_method
from tunnelred.products.compare.sweeps import (
    BY,
    Sweep,
    find_sweeps,
    has_coefficient,
    results_table,
)
from tunnelred.products.compare.tables import comparison_table
from tunnelred.products.store import atomic_path, read_results, write_csv

__all__ = ["run_compare"]


def _slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9.]+", "-", text).strip("-") or "x"


def _save(ax: Axes, path: Path) -> Path:
    with atomic_path(path) as tmp:
        ax.figure.savefig(tmp, format="png", dpi=150)
    return path


def _read_folder(path: Path) -> pd.DataFrame:
    if (path / "results.nc").is_file():
        return results_table(read_results(path))
    if (path / "results.csv").is_file():
        return results_table(pd.read_csv(path / "results.csv"))
    raise InputError.single(
        path,
        None,
        None,
        "a results folder holding results.nc or results.csv",
        "neither" if path.is_dir() else "no such folder",
        "Reduce the campaign first: tunnelred reduce CAMPAIGN -o OUT.",
    )


def _combined(out_dirs: Sequence[Path]) -> pd.DataFrame:
    """One table of several results folders, run ids and configurations prefixed by folder."""
    tables = [_read_folder(p) for p in out_dirs]
    if len(tables) == 1:
        return tables[0]
    labels: list[str] = []
    for p in out_dirs:
        label = p.resolve().name
        while label in labels:
            label = f"{label}+"
        labels.append(label)
    prefixed = [
        t.assign(campaign=label, run=label + ":" + t["run"], config=label + ":" + t["config"])
        for label, t in zip(labels, tables, strict=True)
    ]
    return pd.concat(prefixed, ignore_index=True)


def run_compare(
    out_dirs,
    *,
    by: str = "config",
    dest,
    names: Sequence[str] = COMPARED,
    power_level: float | None = None,
    method: str = "paired",
    tolerance: float = PAIR_TOLERANCE,
    max_gap: float | None = None,
    include_flagged: bool = False,
) -> dict[str, Path]:
    """Compare the runs of one or several results folders and write tables and figures.

    Parameters
    ----------
    out_dirs : path-like or sequence of path-like
        Results folders of ``tunnelred reduce`` (results.nc, else results.csv).
    by : {"config", "speed", "re"}
        What is compared (:func:`comparison_table`).
    dest : path-like
        Output folder; made if missing.
    names : sequence of str
        Coefficients compared.
    power_level : float, optional
        Power coefficient whose crossing α is reported. [-]
    method, tolerance, max_gap, include_flagged
        How curve differences are formed (:func:`comparison_table`); ``max_gap`` also breaks
        the sweep lines of the figures (:func:`plot_sweeps`).

    Returns
    -------
    dict of str to Path
        Name relative to ``dest`` → path: ``comparison.csv`` (:func:`comparison_table`),
        ``characteristics.csv`` (:func:`characteristics_table`), ``figures/sweeps_*.png`` (one a
        compared group and coefficient) and ``figures/delta_*.png`` (one a compared pair and
        coefficient). Every file is written atomically.

    Notes
    -----
    With several folders (several campaigns or tunnel entries), run ids and configuration labels
    are prefixed with the folder's name (``entry1:bare``), so that the same configuration in two
    entries is compared like two configurations; the column ``campaign`` keeps the folder name.
    A folder without results raises :class:`tunnelred.common.errors.InputError`.
    """
    if isinstance(out_dirs, str | Path):
        out_dirs = [out_dirs]
    folders = [Path(p) for p in out_dirs]
    if by not in BY:
        raise ValueError(f"by must be one of {BY}, not {by!r}")
    table = _combined(folders)
    dest = Path(dest)
    written: dict[str, Path] = {}
    options = dict(
        method=method, tolerance=tolerance, max_gap=max_gap, include_flagged=include_flagged
    )
    comparison = comparison_table(table, by=by, names=names, power_level=power_level, **options)
    written["comparison.csv"] = write_csv(comparison, dest / "comparison.csv")
    figures = characteristics_table(table, by=by, power_level=power_level)
    written["characteristics.csv"] = write_csv(figures, dest / "characteristics.csv")
    sweeps = find_sweeps(table, by=by)
    groups: dict[str, list[Sweep]] = {}
    for sweep in sweeps:
        label = (
            sweep.config
            if by == "speed"
            else (f"Re {sweep.Re:.3g}" if by == "re" else f"{sweep.speed:g} m/s")
        )
        groups.setdefault(label, []).append(sweep)
    for label, members in groups.items():
        for name in names:
            if any(has_coefficient(s, name) for s in members):
                rel = f"figures/sweeps_{name}_{_slug(label)}.png"
                ax = plot_sweeps(members, name, max_gap=max_gap, include_flagged=include_flagged)
                written[rel] = _save(ax, dest / rel)
    by_key = {s.key: s for s in sweeps}
    pairs = comparison[comparison["alpha"].notna()][["kind", "a", "b", "quantity"]]
    for kind, a, b, name in pairs.drop_duplicates().itertuples(index=False):
        d = difference_by_method(by_key[a], by_key[b], name, **options)
        rel = f"figures/delta_{name}_{_slug(a)}_minus_{_slug(b)}.png"
        if kind == "hysteresis":
            rel = f"figures/hysteresis_{name}_{_slug(a)}.png"
        written[rel] = _save(plot_difference(d), dest / rel)
    return written
