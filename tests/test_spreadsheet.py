"""`tunnelred export OUT --xlsx FILE`: the workbook read back with openpyxl."""

from __future__ import annotations

import math
import shutil

import pandas as pd
import pytest
from openpyxl import load_workbook

from tunnelred.cli import main
from tunnelred.products.spreadsheet import FLAGGED_FILL, PROVISIONAL_FILL, SHEETS, write_xlsx


@pytest.fixture(scope="module")
def workbook(reduced, tmp_path_factory):
    _, out = reduced
    path = tmp_path_factory.mktemp("xlsx") / "results.xlsx"
    assert main(["export", str(out), "--xlsx", str(path)]) == 0
    return load_workbook(path), out


def _rows(sheet):
    return [list(r) for r in sheet.iter_rows(values_only=True)]


def test_sheets_and_results_with_a_units_row(workbook):
    book, out = workbook
    assert book.sheetnames == list(SHEETS)
    table = pd.read_csv(out / "results.csv")
    rows = _rows(book["results"])
    assert rows[0] == list(table.columns)  # results.csv's names as they are (docs/results.md)
    units = dict(zip(rows[0], rows[1], strict=True))
    # Units as docs/results.md states them (CF notation): U in m s-1, CL dimensionless "1",
    # T in K; identifiers have none.
    assert (units["U"], units["CL"], units["T"], units["run"]) == ("m s-1", "1", "K", None)
    assert len(rows) == 2 + len(table)
    for i, record in enumerate(table.itertuples(index=False)):
        for name, got in zip(table.columns, rows[2 + i], strict=True):
            want = getattr(record, name) if name.isidentifier() else record[rows[0].index(name)]
            if isinstance(want, float) and math.isnan(want):
                assert got is None, (i, name)
            elif isinstance(want, float):
                assert got == pytest.approx(want, rel=1e-15, abs=0), (i, name)
            else:
                assert got == want, (i, name)


def test_flagged_runs_highlighted(workbook):
    book, out = workbook
    table = pd.read_csv(out / "results.csv", keep_default_na=False)
    flagged = table["flags"].astype(str).str.strip() != ""
    assert flagged.any() and not flagged.all()  # the fixture plants one spin_scatter fault
    sheet = book["results"]
    for i, is_flagged in enumerate(flagged):
        colour = sheet.cell(row=3 + i, column=1).fill.start_color.rgb
        assert (colour == FLAGGED_FILL) == bool(is_flagged), table["run"][i]


def test_provisional_runs_marked(provisional_results, tmp_path):
    # before: a provisional run's row looked like a final one (only its TRUE in one column)
    path = write_xlsx(provisional_results, tmp_path / "provisional.xlsx")
    sheet = load_workbook(path)["results"]
    header = [c.value for c in sheet[1]]
    run, provisional, cl = (header.index(n) + 1 for n in ("run", "provisional", "CL"))
    for row in range(3, sheet.max_row + 1):
        marked = sheet.cell(row=row, column=provisional).value is True
        assert marked == (sheet.cell(row=row, column=run).value in ("R001", "R002"))
        assert (sheet.cell(row=row, column=run).fill.start_color.rgb == PROVISIONAL_FILL) == marked
        assert sheet.cell(row=row, column=cl).font.italic == marked


def test_budgets_failures_and_provenance(workbook):
    book, out = workbook
    budgets = pd.read_csv(out / "budgets.csv")
    rows = _rows(book["budgets"])
    header = rows[0]
    at = header.index("input")
    assert header[at + 1 : at + 3] == ["input name", "input unit"]
    assert len(rows) == 1 + len(budgets)
    names = {r[header.index("input")]: r[header.index("input name")] for r in rows[1:]}
    assert names["dp_spec"] != "dp_spec"  # a readable name beside the code name
    failures = pd.read_csv(out / "failures.csv")
    assert len(_rows(book["failures"])) == 1 + len(failures)
    provenance = dict(_rows(book["provenance"])[1:])
    assert (
        provenance["config_sha256"]
        == pd.read_json(out / "provenance.json", typ="series")["config_sha256"]
    )
    assert any(k.startswith("input_sha256: logs/") for k in provenance)


def test_text_that_looks_like_a_formula_stays_text(reduced, tmp_path):
    _, out = reduced
    copy = tmp_path / "out"
    copy.mkdir()
    for name in ("results.csv", "budgets.csv", "failures.csv", "provenance.json"):
        shutil.copyfile(out / name, copy / name)
    table = pd.read_csv(copy / "results.csv")
    table.loc[0, "config"] = '=HYPERLINK("http://x")'
    table.to_csv(copy / "results.csv", index=False)
    book = load_workbook(write_xlsx(copy, tmp_path / "w.xlsx"))
    cell = book["results"].cell(row=3, column=list(table.columns).index("config") + 1)
    assert cell.data_type == "s" and cell.value.startswith("=HYPERLINK")


def test_a_folder_without_results_is_reported_not_raised(tmp_path, capsys):
    assert main(["export", str(tmp_path), "--xlsx", str(tmp_path / "w.xlsx")]) == 1
    assert "results.csv" in capsys.readouterr().out
    assert not (tmp_path / "w.xlsx").exists()
    assert main(["export", str(tmp_path), "--xlsx", str(tmp_path / "w.csv")]) == 2
