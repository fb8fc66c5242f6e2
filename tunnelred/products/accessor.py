"""``ds.tunnelred``: the results Dataset's own methods in a notebook.

Importing tunnelred (or any of its products) registers the accessor on xarray.Dataset::

    ds = tunnelred.read_results("out")
    ds.tunnelred.sweeps()            # the sweep legs (tunnelred.products.compare.find_sweeps)
    ds.tunnelred.plot_coefficients() # CL, CD, CM, C_power and L/D against α, one Figure
    ds.tunnelred.table()             # value ± U (k = 2) of each run, flags marked

It only gathers what plotting, compare and the report already do; nothing is computed here. The
modules it calls are imported when a method is called, so registering it costs nothing.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import xarray as xr

__all__ = ["TunnelredAccessor", "COEFFICIENTS"]

#: What ``plot_coefficients`` and ``table`` show by default.
COEFFICIENTS = ("CL", "CD", "CM", "C_power", "L_D")

_K = 2.0  # coverage factor of the expanded uncertainty shown (as in the report)


@xr.register_dataset_accessor("tunnelred")
class TunnelredAccessor:
    """Methods of a tunnelred results Dataset (``ds.tunnelred.…``)."""

    def __init__(self, ds: xr.Dataset):
        self._ds = ds

    def _check(self) -> None:
        if "run" not in self._ds.dims:
            raise ValueError("not tunnelred results: the Dataset has no 'run' dimension")

    def sweeps(self, by: str = "config") -> list:
        """The sweep legs of the results (:func:`tunnelred.products.compare.find_sweeps`)."""
        from tunnelred.products import compare

        self._check()
        return compare.find_sweeps(self._ds, by=by)

    def plot_coefficients(self, names=COEFFICIENTS, *, by: str = "series"):
        """One Figure with a panel per coefficient against α (:func:`plotting.plot_coefficient`).

        Coefficients the results do not hold (or hold only as NaN) are left out.
        """
        from matplotlib.figure import Figure

        from tunnelred.products import plotting

        self._check()
        shown = [n for n in names if n in self._ds and np.isfinite(self._ds[n].values).any()]
        if not shown:
            raise ValueError(f"the results hold none of {', '.join(names)}")
        rows = (len(shown) + 1) // 2
        fig = Figure(figsize=(12, 3.6 * rows), layout="constrained")
        axes = fig.subplots(rows, 2, squeeze=False).ravel()
        for ax, name in zip(axes, shown, strict=False):
            plotting.plot_coefficient(self._ds, name, ax=ax, by=by, uncorrected=False)
        for ax in axes[len(shown) :]:
            ax.set_visible(False)
        return fig

    def table(self, names=("alpha", *COEFFICIENTS)) -> pd.DataFrame:
        """Each run's value ± U (k = 2) of ``names``, rounded as the report rounds them.

        Columns ``run``, ``config``, ``U`` [m/s], ``rpm``, then one text column per name
        (``format_uncertain``), and ``flags`` ("" for a clean run).
        """
        from tunnelred.products.report import format_uncertain

        self._check()
        ds = self._ds
        out = pd.DataFrame({"run": ds["run"].values.astype(str)})
        if "config" in ds:
            out["config"] = ds["config"].values.astype(str)
        if "U" in ds:
            out["U [m/s]"] = np.round(ds["U"].values.astype(float), 2)
        if "omega" in ds:
            out["rpm"] = np.round(ds["omega"].values.astype(float) * 60.0 / (2.0 * np.pi))
        for name in names:
            if name not in ds:
                continue
            value = ds[name].values.astype(float)
            u = ds[f"u_{name}"].values.astype(float) if f"u_{name}" in ds else np.zeros_like(value)
            out[name] = [format_uncertain(v, _K * s) for v, s in zip(value, u, strict=True)]
        flags = ds["flags"].values if "flags" in ds else [""] * ds.sizes["run"]
        out["flags"] = ["" if not isinstance(f, str) else f for f in flags]
        return out
