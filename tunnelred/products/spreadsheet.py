"""The results of a campaign as one Excel workbook (``tunnelred export OUT --xlsx FILE``).

For colleagues who work in a spreadsheet: a ``results`` sheet with the names of results.csv
(docs/results.md) in row 1 and their units in row 2, flagged runs filled in colour, provisional
runs (the watch's, before their closing zero) in italics with their run id filled; the
uncertainty ``budgets`` with each input's readable name and unit beside its code name; the
``failures``; and the ``provenance`` on a sheet of its own. Written with openpyxl, atomically.
Text that a spreadsheet would take for a formula is stored as text.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
from openpyxl import Workbook
from openpyxl.styles import Font, PatternFill
from openpyxl.utils import get_column_letter

from tunnelred.common.errors import InputError, Problem
from tunnelred.products.store import atomic_path, variable_metadata

__all__ = ["SHEETS", "FLAGGED_FILL", "PROVISIONAL_FILL", "write_xlsx"]

#: The workbook's sheets, in order.
SHEETS = ("results", "budgets", "failures", "provenance")

#: The fill of a flagged run's row on the results sheet (ARGB).
FLAGGED_FILL = "FFFFE08A"
#: The fill of a provisional run's id (and its ``provisional`` cell) on the results sheet (ARGB);
#: the rest of its row is in italics, over the flagged fill if it has one.
PROVISIONAL_FILL = "FFB8D8F0"

_BOLD = Font(bold=True)
_UNITS_FONT = Font(italic=True, color="FF555555")


def _units(name: str) -> str:
    try:
        return variable_metadata(name)[0]
    except KeyError:
        return ""  # run, config, start, flags …: no unit


def _cell_value(value):
    """A value openpyxl can store: NaN and NA empty, numpy scalars as Python ones."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _put(sheet, row: int, column: int, value) -> None:
    cell = sheet.cell(row=row, column=column, value=_cell_value(value))
    if isinstance(cell.value, str) and cell.value.startswith("="):
        cell.data_type = "s"  # text, never a formula (OWASP "CSV Injection", same for xlsx)


def _write_table(sheet, table: pd.DataFrame, units: list[str] | None = None) -> int:
    """Header (and units) rows, then the table; returns the first data row."""
    for j, name in enumerate(table.columns, start=1):
        _put(sheet, 1, j, str(name))
        sheet.cell(row=1, column=j).font = _BOLD
    first = 2
    if units is not None:
        for j, unit in enumerate(units, start=1):
            _put(sheet, 2, j, unit)
            sheet.cell(row=2, column=j).font = _UNITS_FONT
        first = 3
    for i, row in enumerate(table.itertuples(index=False), start=first):
        for j, value in enumerate(row, start=1):
            _put(sheet, i, j, value)
    sheet.freeze_panes = sheet.cell(row=first, column=2)
    for j, name in enumerate(table.columns, start=1):
        sheet.column_dimensions[get_column_letter(j)].width = max(9, min(28, len(str(name)) + 2))
    return first


def _read(out: Path, name: str) -> pd.DataFrame:
    path = out / name
    if not path.is_file():
        raise InputError(
            Problem(
                str(path),
                None,
                None,
                f"a results folder holding {name}",
                "no such file",
                "Reduce the campaign first: tunnelred reduce CAMPAIGN -o OUT.",
            )  # fmt: skip
        )
    return pd.read_csv(path, keep_default_na=True, low_memory=False)


def _flagged(table: pd.DataFrame) -> np.ndarray:
    if "flags" not in table:
        return np.zeros(len(table), dtype=bool)
    flags = table["flags"]
    return (flags.notna() & (flags.astype(str).str.strip() != "")).to_numpy()


def _provisional(table: pd.DataFrame) -> np.ndarray:
    if "provisional" not in table:
        return np.zeros(len(table), dtype=bool)
    return table["provisional"].astype(str).str.strip().str.lower().eq("true").to_numpy()


def _budgets(table: pd.DataFrame) -> pd.DataFrame:
    from tunnelred.products.report import budget_label  # the report's readable names

    if "input" not in table or table.empty:
        return table
    labels = [budget_label(str(name)) for name in table["input"]]
    at = list(table.columns).index("input") + 1
    table = table.copy()
    table.insert(at, "input name", [label for label, _ in labels])
    table.insert(at + 1, "input unit", [unit for _, unit in labels])
    return table


def _provenance_rows(out: Path) -> list[tuple[str, str]]:
    path = out / "provenance.json"
    if not path.is_file():
        return [("provenance.json", "not in the results folder")]
    record = json.loads(path.read_text(encoding="utf-8"))
    rows = []
    for key, value in record.items():
        if isinstance(value, dict):
            rows.extend((f"{key}: {k}", json.dumps(v) if not isinstance(v, str) else v)
                        for k, v in value.items())  # fmt: skip
        else:
            rows.append((key, value if isinstance(value, str) else json.dumps(value)))
    return rows


def write_xlsx(out_dir, path) -> Path:
    """Write the results of an output folder as an Excel workbook.

    Parameters
    ----------
    out_dir : str or path-like
        An output folder of ``tunnelred reduce`` (results.csv, budgets.csv, failures.csv,
        provenance.json).
    path : str or path-like
        The workbook to write (.xlsx); written atomically, its folder made if missing.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    InputError
        ``out_dir`` holds no results.csv.
    """
    out = Path(out_dir)
    results = _read(out, "results.csv")
    workbook = Workbook()
    sheet = workbook.active
    sheet.title = "results"
    first = _write_table(sheet, results, [_units(str(c)) for c in results.columns])
    fill = PatternFill("solid", start_color=FLAGGED_FILL, end_color=FLAGGED_FILL)
    for i in np.flatnonzero(_flagged(results)):
        for j in range(1, results.shape[1] + 1):
            sheet.cell(row=first + int(i), column=j).fill = fill
    marked = PatternFill("solid", start_color=PROVISIONAL_FILL, end_color=PROVISIONAL_FILL)
    columns = list(results.columns)
    filled = [columns.index(c) + 1 for c in ("run", "provisional") if c in columns]
    for i in np.flatnonzero(_provisional(results)):
        for j in range(1, results.shape[1] + 1):
            sheet.cell(row=first + int(i), column=j).font = Font(italic=True)
        for j in filled:
            sheet.cell(row=first + int(i), column=j).fill = marked
    for name in ("budgets", "failures"):
        table = _read(out, f"{name}.csv") if (out / f"{name}.csv").is_file() else pd.DataFrame()
        _write_table(workbook.create_sheet(name), _budgets(table) if name == "budgets" else table)
    provenance = workbook.create_sheet("provenance")
    _write_table(provenance, pd.DataFrame(_provenance_rows(out), columns=["item", "value"]))
    provenance.column_dimensions["A"].width = 40
    provenance.column_dimensions["B"].width = 80
    path = Path(path)
    with atomic_path(path) as tmp:
        workbook.save(tmp)
    return path
