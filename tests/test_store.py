"""tunnelred.products.store: the results Dataset, NetCDF/CSV files, atomic writes, provenance.

References checked against: xarray and netCDF4 (reading the files back), pandas.read_csv,
the OWASP "CSV Injection" page (owasp.org/www-community/attacks/CSV_Injection: cells starting
with = + - @ TAB CR are prefixed with a single quote), the CF Conventions 1.10 (§3.1 units,
§3.5 flag_values/flag_meanings), and docs/results.md (the names users rely on).
"""

from __future__ import annotations

import hashlib
import json
import re
from datetime import datetime
from pathlib import Path

import netCDF4
import numpy as np
import pandas as pd
import pytest
import xarray as xr

from tunnelred.engine.quality import FLAG_NAMES, Flag
from tunnelred.engine.reduction import RunResult
from tunnelred.inputs.readers import open_campaign
from tunnelred.products import store

DOCS = Path(__file__).resolve().parents[1] / "docs" / "results.md"
THETA = np.arange(2.5, 360.0, 5.0)


def _pressure_run(run="R1", **extra) -> RunResult:
    values = {
        "start": "2026-11-16T09:10:00",
        "U": 20.25,
        "u_U": 0.0625,
        "U_uncorrected": 19.875,
        "CL": -1.234567890123,
        "u_CL": 0.03125,
        "u_CL_mc": 0.0312,
        "CL_uncorrected": -1.25,
        "Mach": 0.0589,
        "dead_taps": "",
    }
    values.update(extra)
    cp = 1.0 - (0.5 + 2.0 * np.sin(np.radians(THETA))) ** 2
    return RunResult(
        run=run,
        config="bare",
        values=values,
        theta=THETA,
        profiles={"Cp": cp, "u_Cp": np.full(THETA.size, 0.01), "Cp_count": np.ones(THETA.size)},
        flags=(Flag("spin_scatter", 0.03, 0.02, "spin ratio scatters"),),
        inputs={"logs/r1.csv": "ab" * 32},
    )


def _balance_run(run="R2") -> RunResult:
    values = {"start": "2026-11-16T09:20:00", "U": 25.5, "u_U": 0.07, "CL": 0.5, "Mach": 0.07}
    return RunResult(run=run, config="plates", values=values, inputs={"logs/r2.csv": "cd" * 32})


def _dataset():
    return store.results_to_dataset(
        [_pressure_run(), _balance_run()],
        methods={"blockage": "maskell", "lift_interference": False, "buoyancy": True},
    )


def test_netcdf_round_trip_through_xarray(tmp_path):
    ds = _dataset()
    paths = store.write_results(ds, tmp_path)
    with xr.open_dataset(paths["results.nc"]) as back:
        # Plain xarray.open_dataset (default engine and decoding) gives the same values, dtypes
        # of the booleans and every attribute back.
        xr.testing.assert_identical(back.load(), ds)
        assert back["flag_spin_scatter"].dtype == bool
    xr.testing.assert_identical(store.read_results(tmp_path), ds)


def test_netcdf_on_disk_types(tmp_path):
    paths = store.write_results(_dataset(), tmp_path)
    with netCDF4.Dataset(paths["results.nc"]) as nc:
        assert nc.data_model == "NETCDF4"
        # netCDF4-python reports variable-length strings with dtype str.
        assert nc["config"].dtype is str and nc["run"].dtype is str
        flag = nc["flag_spin_scatter"]
        assert flag.dtype == np.int8
        # CF 1.10 §3.5: flag_values with flag_meanings, one word per value.
        assert list(flag.flag_values) == [0, 1]
        assert len(flag.flag_meanings.split()) == 2


def test_profiles_and_missing_values():
    ds = _dataset()
    assert ds["Cp"].dims == ("run", "theta")
    np.testing.assert_array_equal(ds["theta"].values, THETA)
    # The balance-only run has no pressure: NaN profile and NaN for values it lacks.
    assert np.isnan(ds["Cp"].sel(run="R2")).all()
    assert np.isnan(ds["U_uncorrected"].sel(run="R2"))
    assert ds["dead_taps"].sel(run="R2").item() == ""
    assert ds["flags"].values.tolist() == ["spin_scatter", ""]
    assert ds["flag_spin_scatter"].values.tolist() == [True, False]


def test_theta_absent_without_pressure_runs():
    ds = store.results_to_dataset([_balance_run()])
    assert "theta" not in ds.dims and ds.sizes["run"] == 1


def test_cf_attributes():
    ds = _dataset()
    # CF 1.10 §3.1: units on every dimensional or dimensionless number ("1"); none on text.
    assert ds["U"].attrs["units"] == "m s-1"
    assert ds["CL"].attrs["units"] == "1"
    assert ds["theta"].attrs["units"] == "degree"
    assert "units" not in ds["config"].attrs and "units" not in ds["flags"].attrs
    assert ds["u_U"].attrs["units"] == ds["U"].attrs["units"]
    assert ds["u_U"].attrs["long_name"].startswith("standard uncertainty (k = 1)")
    assert "before wall corrections" in ds["U_uncorrected"].attrs["long_name"]
    for name, var in ds.variables.items():
        assert var.attrs["long_name"], name
    # The method travels on wall-corrected values only.
    assert "maskell" in ds["CL"].attrs["method"] and "maskell" in ds["u_CL"].attrs["method"]
    assert "maskell" in ds["Cp"].attrs["method"]
    assert "method" not in ds["CL_uncorrected"].attrs
    assert "method" not in ds["Mach"].attrs


def test_unknown_result_name_is_refused():
    with pytest.raises(ValueError, match="CL_typo"):
        store.results_to_dataset([_pressure_run(CL_typo=1.0)])


def test_csv_readable_by_pandas(tmp_path):
    ds = _dataset()
    paths = store.write_results(ds, tmp_path)
    table = pd.read_csv(paths["results.csv"])
    run_only = [str(n) for n, v in ds.data_vars.items() if v.dims == ("run",)]
    assert list(table.columns) == ["run", *run_only]
    assert "Cp" not in table.columns and "u_U" in table.columns and "u_CL_mc" in table.columns
    assert table["run"].tolist() == ["R1", "R2"]
    # Every digit survives the text form (the float's shortest repr is written).
    assert table["CL"].tolist() == [-1.234567890123, 0.5]
    assert table["flag_spin_scatter"].tolist() == [True, False]
    assert table["flags"].fillna("").tolist() == ["spin_scatter", ""]


def test_csv_formula_text_escaped_numbers_not(tmp_path):
    # OWASP CSV Injection: each of = + - @ TAB CR at the start of a text cell gets a quote.
    formulas = ["=1+2", "+SUM(A1)", "-2+3", "@cmd", "\tx", "\rx"]
    results = [
        _pressure_run(run=f"R{i}", dead_taps=text, CL=-1.5) for i, text in enumerate(formulas)
    ]
    ds = store.results_to_dataset(results)
    failures = pd.DataFrame(
        {"run": ["R9"], "file": ["=evil.csv"], "line": [12], "reason": ["-expected a number"]}
    )
    paths = store.write_results(ds, tmp_path, failures=failures)
    table = pd.read_csv(paths["results.csv"], keep_default_na=False)
    assert table["dead_taps"].tolist() == ["'" + t for t in formulas]
    # A negative number is a number, not text: it stays as it is.
    assert table["CL"].tolist() == [-1.5] * len(formulas)
    assert table["CL"].dtype == float
    back = pd.read_csv(paths["failures.csv"])
    assert back["file"].tolist() == ["'=evil.csv"]
    assert back["reason"].tolist() == ["'-expected a number"]
    assert back["line"].tolist() == [12]


def test_failures_and_budgets_headers_when_empty(tmp_path):
    paths = store.write_results(_dataset(), tmp_path)
    assert paths["failures.csv"].read_text().strip() == "run,file,line,reason"
    assert paths["budgets.csv"].read_text().strip() == ",".join(store.BUDGET_COLUMNS)


def test_budgets_written(tmp_path):
    budgets = pd.DataFrame(
        {
            "run": ["R1"],
            "output": ["CL"],
            "input": ["q"],
            "value": [240.0],
            "u": [1.2],
            "sensitivity": [-0.005],
            "contribution": [0.006],
            "share": [0.4],
        }
    )
    paths = store.write_results(_dataset(), tmp_path, budgets=budgets)
    pd.testing.assert_frame_equal(pd.read_csv(paths["budgets.csv"]), budgets)


@pytest.mark.parametrize("error", [RuntimeError, KeyboardInterrupt])
def test_atomic_write_leaves_old_file_when_writer_raises(tmp_path, error):
    target = tmp_path / "results.csv"
    target.write_bytes(b"old content\n")

    def chunks():
        yield b"new content, first half"
        raise error("writer stopped mid-way")

    with pytest.raises(error):
        store.atomic_write_bytes(target, chunks())
    assert target.read_bytes() == b"old content\n"
    assert [p.name for p in tmp_path.iterdir()] == ["results.csv"]


def test_atomic_path_replaces_only_on_success(tmp_path):
    target = tmp_path / "sub" / "out.bin"
    with store.atomic_path(target) as tmp:
        assert tmp.parent == target.parent and not target.exists()
        tmp.write_bytes(b"whole")
    assert target.read_bytes() == b"whole"
    assert sorted(p.name for p in target.parent.iterdir()) == ["out.bin"]


def test_provenance(campaign_dir, tmp_path):
    campaign = open_campaign(campaign_dir, check_logs=False)
    ds = store.results_to_dataset([_pressure_run()], campaign=campaign)
    attrs = ds.attrs
    assert attrs["title"] == "Fixture campaign" and attrs["facility"] == "Test tunnel"
    assert attrs["tunnelred_version"]
    # Hashes recomputed here with hashlib, independently of the readers.
    toml_sha = hashlib.sha256((campaign_dir / "campaign.toml").read_bytes()).hexdigest()
    assert attrs["config_sha256"] == toml_sha
    inputs = json.loads(attrs["input_sha256"])
    for rel in ("campaign.toml", "runs.csv", "logs/d1_tun.csv", "logs/z1_bal.csv"):
        assert inputs[rel] == hashlib.sha256((campaign_dir / rel).read_bytes()).hexdigest()
    assert json.loads(attrs["methods"])["blockage"] == "allen-vincenti"  # the default
    created = datetime.fromisoformat(attrs["created"])
    assert created.utcoffset().total_seconds() == 0
    paths = store.write_results(ds, tmp_path)
    sidecar = json.loads(paths["provenance.json"].read_text())
    assert sidecar["input_sha256"] == inputs and sidecar["config_sha256"] == toml_sha


def _documented_names() -> dict[str, str]:
    """name → units of every plain name in the tables of docs/results.md."""
    names = {}
    for line in DOCS.read_text(encoding="utf-8").splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) != 3 or cells[0] in ("name", "file") or set(cells[0]) <= set("-"):
            continue
        if "." in cells[0] or "<" in cells[0]:
            continue
        row_names = [n.strip() for n in cells[0].split(",")]
        units = [u.strip() for u in cells[1].split(",")]
        units = units * len(row_names) if len(units) == 1 else units
        names.update(zip(row_names, units, strict=True))
    return names


def test_every_documented_name_has_metadata():
    documented = _documented_names()
    assert {"CL", "Cp", "theta", "eps_wake", "corr_CL_alpha"} <= set(documented)
    same = {"deg": "degree", "–": "", "-": ""}
    for name, units in documented.items():
        assert store.variable_metadata(name)[0] == same.get(units, units), name
    for flag in FLAG_NAMES:
        assert f"flag_{flag}" in store.VARIABLES
    # The "<X>_uncorrected" row lists the variables kept before wall corrections.
    listed = re.search(r"before wall corrections \(([^)]*)\)", DOCS.read_text(encoding="utf-8"))
    assert tuple(n.strip() for n in listed.group(1).split(",")) == store.UNCORRECTED


def test_derived_names():
    assert store.variable_metadata("u_Cp")[0] == "1"
    assert store.variable_metadata("u_CD_p_uncorrected")[0] == "1"
    assert "Monte Carlo" in store.variable_metadata("u_alpha_mc")[1]
    for bad in ("u_config", "Mach_uncorrected", "u_flags", "nonsense"):
        with pytest.raises(KeyError):
            store.variable_metadata(bad)
