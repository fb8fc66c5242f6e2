"""What :func:`tunnelred.pipeline.campaign.reduce_campaign` returns: the dataset, tables and
the one-screen summary.
"""

from __future__ import annotations

import html
from dataclasses import dataclass
from pathlib import Path

import pandas as pd
import xarray as xr

from tunnelred.common.text import printable

# Lines of each list in the one-screen summary before "and N more".
_SUMMARY_LINES = 12


@dataclass
class CampaignResults:
    """What :func:`reduce_campaign` produced.

    ``reduced`` counts the data runs with results, ``from_cache`` those of them taken from the
    cache, ``failed`` the data runs without results (rows of ``failures``), ``flagged`` the runs
    with at least one quality flag. ``outputs`` maps each file name to where it was written
    (empty when no output folder was given). ``elapsed`` is the wall time [s].
    """

    dataset: xr.Dataset
    failures: pd.DataFrame
    budgets: pd.DataFrame
    outputs: dict[str, Path]
    reduced: int
    from_cache: int
    failed: int
    flagged: int
    elapsed: float
    title: str = ""
    notices: tuple[str, ...] = ()  # config's notices (campaign.toml), shown with the summary

    def _flagged_runs(self) -> list[tuple[str, str]]:
        if "flags" not in self.dataset:
            return []
        runs = self.dataset["run"].values
        return [
            (str(r), str(f)) for r, f in zip(runs, self.dataset["flags"].values, strict=True) if f
        ]

    def _failed_runs(self) -> list[tuple[str, str, str]]:
        rows = []
        for run, group in self.failures.groupby("run", sort=False):
            first = group.iloc[0]
            where = str(first["file"]) if first["file"] else ""
            if where and pd.notna(first["line"]):
                where += f":{int(first['line'])}"
            more = f" (+{len(group) - 1} more)" if len(group) > 1 else ""
            rows.append((str(run), where, f"{first['reason']}{more}"))
        return rows

    def summary(self) -> str:
        """The one-screen summary: runs reduced, flagged and failed, and where outputs went.

        Every string from a file in it (title, run ids, reasons, paths) is escaped for a
        terminal (:func:`tunnelred.common.text.printable`).
        """
        fresh = self.reduced - self.from_cache
        lines = [
            f"{printable(self.title or 'campaign')}: {self.reduced + self.failed} data runs in "
            f"{self.elapsed:.1f} s",
            f"  reduced  {self.reduced} ({fresh} now, {self.from_cache} from cache)",
            f"  flagged  {self.flagged}",
        ]
        lines += _capped([printable(f"    {run}  {f}") for run, f in self._flagged_runs()])
        lines.append(f"  failed   {self.failed}")
        lines += _capped(
            [
                printable(f"    {run}  {where + '  ' if where else ''}{reason}")
                for run, where, reason in self._failed_runs()
            ]
        )
        if self.outputs:
            folder = next(iter(self.outputs.values())).parent
            files = [name for name in self.outputs if "/" not in name and name != "report.pdf"]
            figures = sum(1 for name in self.outputs if name.startswith("figures/"))
            if figures:
                files.append(f"figures/ ({figures} PNG)")
            lines.append(f"  outputs  {printable(folder)}: {', '.join(files)}")
        else:
            lines.append("  outputs  none written (no output folder given)")
        lines += [f"  notice   {printable(text)}" for text in self.notices]
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.summary()

    def _repr_html_(self) -> str:
        fresh = self.reduced - self.from_cache
        head = (
            f"<p><b>{html.escape(self.title or 'campaign')}</b>: {self.reduced} runs reduced "
            f"({fresh} now, {self.from_cache} from cache), {self.flagged} flagged, "
            f"{self.failed} failed, in {self.elapsed:.1f} s</p>"
        )
        parts = [head]
        flagged = self._flagged_runs()
        if flagged:
            rows = "".join(
                f"<tr><td>{html.escape(r)}</td><td>{html.escape(f)}</td></tr>" for r, f in flagged
            )
            parts.append(f"<table><tr><th>flagged run</th><th>flags</th></tr>{rows}</table>")
        failed = self._failed_runs()
        if failed:
            rows = "".join(
                f"<tr><td>{html.escape(r)}</td><td>{html.escape(w)}</td>"
                f"<td>{html.escape(why)}</td></tr>"
                for r, w, why in failed
            )
            parts.append(
                f"<table><tr><th>failed run</th><th>where</th><th>reason</th></tr>{rows}</table>"
            )
        if self.outputs:
            folder = next(iter(self.outputs.values())).parent
            parts.append(f"<p>outputs in <code>{html.escape(str(folder))}</code></p>")
        return "".join(parts)


def _capped(lines: list[str]) -> list[str]:
    if len(lines) <= _SUMMARY_LINES:
        return lines
    shown = lines[: _SUMMARY_LINES - 1]
    return [*shown, f"    … and {len(lines) - len(shown)} more (see the results files)"]
