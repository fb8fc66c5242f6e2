"""What a report is written from: the results folder (results.nc, budgets.csv, failures.csv), the
campaign when it is known, and its report control ([report] of campaign.toml).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from tunnelred.products import plotting, store


class ReportData:
    """The results, budgets, failures and campaign (when known) one report is written from."""

    def __init__(self, out_dir: Path, campaign):
        self.out = out_dir
        self.ds = store.read_results(out_dir)
        self.budgets = _read_csv(out_dir / "budgets.csv")
        self.failures = _read_csv(out_dir / "failures.csv")
        recorded = self.ds.attrs.get("campaign_path", "")
        if campaign is None and recorded and (Path(recorded) / "campaign.toml").is_file():
            campaign = recorded  # the folder reduce recorded, while it is still there
        self.campaign = _campaign(campaign)
        self.table = store.run_table(self.ds)
        self.methods = _json_attr(self.ds, "methods")
        self.hashes = {str(k): str(v) for k, v in _json_attr(self.ds, "input_sha256").items()}
        self.control = _Control(self.campaign)

    @property
    def title(self) -> str:
        return str(self.ds.attrs.get("title", "")) or "Wind-tunnel test"

    @property
    def runs(self) -> list[str]:
        return [str(r) for r in self.ds["run"].values]

    def groups(self, by: str) -> list[tuple[str, np.ndarray]]:
        """The runs grouped as the figures group them (:func:`plotting.group_runs`)."""
        return plotting.group_runs(self.ds, by)

    def column(self, name: str) -> np.ndarray:
        if name not in self.table:
            return np.full(len(self.table), np.nan)
        return np.asarray(self.table[name], dtype=float)


def _read_csv(path: Path) -> pd.DataFrame:
    try:
        return pd.read_csv(path, keep_default_na=True)
    except (FileNotFoundError, pd.errors.EmptyDataError):
        return pd.DataFrame()


def _json_attr(ds: xr.Dataset, key: str) -> dict:
    try:
        value = json.loads(ds.attrs.get(key, "{}"))
    except (TypeError, ValueError):
        return {}
    return value if isinstance(value, dict) else {}


def _campaign(campaign):
    if campaign is None or hasattr(campaign, "config"):
        return campaign
    from tunnelred.inputs.readers import open_campaign

    return open_campaign(campaign, check_logs=False)


class _Control:
    """Report number, revision, client, signatories … as campaign.toml states them ('' if not)."""

    FIELDS = (
        "number",
        "revision",
        "laboratory",
        "client",
        "client_address",
        "laboratory_address",
        "location",
        "prepared_by",
        "checked_by",
        "approved_by",
        "date_of_issue",
        "method",
        "deviations",
    )

    def __init__(self, campaign):
        config = campaign.config if campaign is not None else None
        info = getattr(config, "report", None)
        for name in self.FIELDS:
            setattr(self, name, str(getattr(info, name, "") or ""))
        self.distribution = tuple(str(d) for d in (getattr(info, "distribution", ()) or ()))
        self.history = tuple(getattr(info, "revision_history", ()) or ())

    @property
    def footer(self) -> str:
        number = self.number or "____________"
        return f"Report number {number}, revision {self.revision or '__'}"


def run_flags(ds: xr.Dataset) -> list[str]:
    if "flags" not in ds:
        return [""] * ds.sizes["run"]
    return ["" if not isinstance(f, str) else f for f in ds["flags"].values]


#: The mark of a provisional run in the report's tables (a flagged one has †).
PROVISIONAL_MARK = "‡"


def run_provisional(ds: xr.Dataset) -> np.ndarray:
    """Whether each run's result is provisional: reduced by the watch before its closing zero
    was in (results' ``provisional``; absent from results of older versions: none)."""
    if "provisional" not in ds:
        return np.zeros(ds.sizes["run"], dtype=bool)
    return ds["provisional"].values.astype(bool)


def run_mark(ds: xr.Dataset, i: int) -> str:
    """The marks the report's tables put after run ``i``'s id: † flagged, ‡ provisional."""
    flagged = bool(run_flags(ds)[i])
    return (" †" if flagged else "") + (f" {PROVISIONAL_MARK}" if run_provisional(ds)[i] else "")


def run_config(data: ReportData, i: int) -> str:
    return str(data.table["config"].iloc[i]) if "config" in data.table else ""
