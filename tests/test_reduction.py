"""End to end: the demo campaign, reduced, recovers the truth synth built it from.

tunnelred.demo runs a forward model of the test (free stream, spin, balance channels through the
inverse calibration, zero drift, spin tares, rotating taps with tubing delay and centrifugal head,
and the wall interference of the configured method applied forward). The reduction must undo all of
it. The tolerance of every comparison is the result's own expanded uncertainty, U = 2u (JCGM
100:2008 §6.2, k = 2), plus nothing: a result outside it is a defect of the reduction or of its u.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from tunnelred.engine.quality import FLAG_NAMES
from tunnelred.engine.reduction import BUDGET_OUTPUTS, RUN_OUTPUTS, reduce_run
from tunnelred.inputs.readers import open_campaign

K = 2.0  # coverage factor of the comparisons (JCGM 100:2008 §6.3)


@pytest.fixture(scope="module")
def table(demo_results):
    return demo_results.dataset.to_dataframe().reset_index().drop_duplicates("run").set_index("run")


@pytest.fixture(scope="module")
def clean(demo_truth, table):
    truth = demo_truth.loc[table.index]
    return truth.index[truth["planted_fault"] == ""]


def _z(table, truth, runs, name, truth_name=None):
    got = table.loc[runs, name]
    want = truth.loc[runs, truth_name or name]
    return ((got - want) / table.loc[runs, f"u_{name}"]).dropna()


@pytest.mark.parametrize("name", ["U", "q", "Re", "alpha", "CL", "CD", "CM", "C_power"])
def test_corrected_results_recover_the_free_air_truth(table, demo_truth, clean, name):
    z = _z(table, demo_truth, clean, name)
    assert len(z) >= 0.8 * len(clean)
    assert np.all(np.abs(z) <= K), z[np.abs(z) > K]


@pytest.mark.parametrize("name", ["U", "alpha", "CL", "CD", "CM"])
def test_uncorrected_results_miss_the_free_air_truth(table, demo_truth, clean, name):
    # The walls change the demo's coefficients by a few per cent, far more than their
    # uncertainty: without the corrections most runs would sit outside their own U = 2u.
    z = (table.loc[clean, f"{name}_uncorrected"] - demo_truth.loc[clean, name]) / table.loc[
        clean, f"u_{name}"
    ]
    spinning = demo_truth.loc[clean, "alpha"].abs() > 0.1 if name == "alpha" else slice(None)
    assert np.median(np.abs(z[spinning].dropna())) > 2 * K


@pytest.mark.parametrize("name", ["U", "alpha", "CL", "CD", "CM"])
def test_uncorrected_results_match_the_in_tunnel_truth(table, demo_truth, clean, name):
    z = _z(table, demo_truth, clean, f"{name}_uncorrected")
    assert np.all(np.abs(z) <= K), z[np.abs(z) > K]


@pytest.mark.parametrize("name", ["CL_p", "CD_p"])
def test_pressure_coefficients_recover_the_truth(table, demo_truth, clean, name):
    with_pressure = [r for r in clean if demo_truth.loc[r, "has_pressure"] in (True, "True")]
    z = _z(table, demo_truth, with_pressure, name)
    assert len(z) >= 3
    assert np.all(np.abs(z) <= K), z[np.abs(z) > K]


def test_wall_correction_sizes_are_reported(table, demo_truth, clean):
    for name in ("eps_solid", "eps_wake", "delta_CD_buoyancy"):
        got, want = table.loc[clean, name], demo_truth.loc[clean, name]
        assert np.allclose(got, want, rtol=5e-3, atol=1e-6), name
    # d/h sets eps_solid = (pi^2/12)(d/h)^2 for every run alike (Allen & Vincenti, NACA R-782).
    assert table["eps_solid"].nunique() == 1


def test_only_the_planted_faults_are_flagged(demo_results, demo_truth, table):
    flagged = {run for run in table.index if table.loc[run, "flags"]}
    planted = set(demo_truth.index[demo_truth["planted_fault"] != ""])
    assert flagged == planted
    for run in planted:
        fault = demo_truth.loc[run, "planted_fault"]
        assert table.loc[run, f"flag_{fault}"], (run, fault, table.loc[run, "flags"])


def test_the_dead_tap_is_named(table, demo_truth):
    run = demo_truth.index[demo_truth["planted_fault"] == "dead_tap"][0]
    assert table.loc[run, "dead_taps"] != ""
    assert np.isfinite(table.loc[run, "CL_p"])  # integrated without it


def test_every_result_has_its_uncertainty(demo_results):
    ds = demo_results.dataset
    for name in RUN_OUTPUTS:
        assert name in ds and f"u_{name}" in ds, name
    assert "u_Cp" in ds and ds["u_Cp"].dims == ds["Cp"].dims
    assert "corr_CL_alpha" in ds
    assert np.all(np.abs(ds["corr_CL_alpha"].dropna("run")) <= 1.0)
    for name in FLAG_NAMES:
        assert f"flag_{name}" in ds


def test_theory_comparison_carries_its_uncertainty(table, demo_truth, clean):
    # CL_ideal = -2 pi alpha (Kutta-Joukowski, docs/conventions.md): its u is 2 pi u(alpha) exactly,
    # a linear function of one input (JCGM 100:2008 eq. 10).
    spinning = [r for r in clean if abs(table.loc[r, "alpha"]) > 0.1]
    assert np.allclose(table.loc[spinning, "CL_ideal"], -2 * np.pi * table.loc[spinning, "alpha"])
    assert np.allclose(
        table.loc[spinning, "u_CL_ideal"], 2 * np.pi * table.loc[spinning, "u_alpha"]
    )
    # The measured stagnation point and suction peak of a pressure run have a finite,
    # non-zero uncertainty (the tap azimuth uncertainty alone moves them).
    with_pressure = [r for r in spinning if np.isfinite(table.loc[r, "theta_stag"])]
    assert with_pressure
    for name in ("theta_stag", "Cp_max", "Cp_min", "theta_Cp_min", "Cp_base"):
        u = table.loc[with_pressure, f"u_{name}"]
        assert np.all(np.isfinite(u) & (u > 0)), name


def test_budgets_account_for_the_variance(demo_results):
    budgets = demo_results.budgets
    assert set(budgets["output"]) == set(BUDGET_OUTPUTS)
    shares = budgets.groupby(["run", "output"])["share"].sum()
    # Shares of the variance, the correlation terms included, sum to one (JCGM 100:2008 eq. 13).
    assert np.allclose(shares, 1.0, atol=1e-6)


def test_monte_carlo_agrees_with_the_linear_propagation(demo_campaign_dir, demo_truth):
    # JCGM 101:2008 §8: the linear (GUM) result is validated when Monte Carlo reproduces it;
    # 20 000 draws estimate u to about 0.5 % (relative standard error 1/sqrt(2M)), and the model
    # is close to linear over a few u, so 5 % is a comfortable, still meaningful limit.
    campaign = open_campaign(demo_campaign_dir, check_logs=False)
    run = demo_truth.index[(demo_truth["planted_fault"] == "") & (demo_truth["alpha"] > 1.5)][0]
    result = reduce_run(campaign, run, monte_carlo=20000, seed=1)
    for name in ("alpha", "CL", "CD", "CM", "q", "U"):
        linear, mc = result.values[f"u_{name}"], result.values[f"u_{name}_mc"]
        assert mc == pytest.approx(linear, rel=0.05), name


# Fields of RunMeasures a clean spinning run with every stream legitimately leaves at their
# defaults: omega and tare_range are filled only when the spin rate lies outside the tare runs'
# (for the tare_extrapolated flag's reason; tare_extrapolated stays False), dead_taps only when a
# tap is excluded, pressure_gap only when the pressure forces are left out.
EMPTY_ON_A_CLEAN_RUN = {"tare_extrapolated", "omega", "tare_range", "dead_taps", "pressure_gap"}


def _is_empty(value) -> bool:
    if isinstance(value, float):
        return np.isnan(value)
    if isinstance(value, tuple) and value and isinstance(value[0], float):
        return bool(np.isnan(value).any())
    return not value


def test_a_run_with_every_stream_fills_every_measure(demo_campaign_dir, demo_truth, monkeypatch):
    # A measure the reduction stops producing must fail here, not silently disable its flag.
    # R016: balance, tunnel and pressure logs, spinning (tachometer and encoder), tares around
    # its spin rate, no planted fault.
    from dataclasses import fields

    from tunnelred.engine import quality

    assert demo_truth.loc["R016", "planted_fault"] == ""
    judged = []
    check_run = quality.check_run
    monkeypatch.setattr(quality, "check_run", lambda m, tol: judged.append(m) or check_run(m, tol))
    reduce_run(open_campaign(demo_campaign_dir, check_logs=False), "R016")
    (measures,) = judged
    values = {f.name: getattr(measures, f.name) for f in fields(quality.RunMeasures)}
    assert EMPTY_ON_A_CLEAN_RUN <= set(values)
    empty = {name for name, value in values.items() if _is_empty(value)}
    assert empty == EMPTY_ON_A_CLEAN_RUN
    # Defaults that are numbers (0.0) rather than NaN are filled too: a record's noise makes
    # each of these non-zero.
    for name in ("u_speed_drift", "u_Cp_max", "corr_CL_CL_p"):
        assert values[name] != 0.0, name
    assert len(values["zero_shift"]) == len(values["overload"]) == 3


def test_a_zero_or_tare_run_is_not_reduced(demo_campaign_dir):
    campaign = open_campaign(demo_campaign_dir, check_logs=False)
    zero = campaign.zero_runs()[0].run
    with pytest.raises(Exception, match="only data runs"):
        reduce_run(campaign, zero)


def test_results_table_is_one_row_a_run(demo_results, demo_truth):
    csv = pd.read_csv(demo_results.outputs["results.csv"], keep_default_na=False)
    assert list(csv["run"]) == list(demo_results.dataset["run"].values)
    assert set(csv["run"]) == set(demo_truth.index)


def test_indexed_runs_at_rest_merge_to_cover_the_circle(tmp_path):
    # A model at rest with taps every 90° is indexed to 30° and 60° in two more runs; merged,
    # the three runs give a tap every 30°, inside the default max_tap_gap. The surface pressure
    # written is Cp = 1 - 4 sin²θ + a cos θ (potential flow at α = 0, Anderson §3.13, plus a
    # first harmonic): ½∮Cp cos θ dθ = π a / 2 exactly, ½∮Cp sin θ dθ = 0, and the trapezoid
    # rule on 12 equal steps integrates these harmonics exactly (Trefethen & Weideman 2014).
    from conftest import write_campaign

    from tunnelred.physics import conditions

    root = write_campaign(tmp_path / "campaign", rows=400)
    a = 0.2
    rows = 400
    t = np.arange(rows) * 0.01
    q = float(conditions.dynamic_pressure(240.0, 101325.0))  # the fixture's pitot and barometer
    lines = (root / "runs.csv").read_text(encoding="utf-8").splitlines()
    header = lines[0] + ",pressure_with"
    body = [line + "," for line in lines[1:]]
    for index in (0.0, 30.0, 60.0):
        name = f"i{int(index):02d}"
        taps = np.array([0.0, 90.0, 180.0, 270.0]) + index
        cp = 1 - 4 * np.sin(np.radians(taps)) ** 2 + a * np.cos(np.radians(taps))
        columns = [t, np.full(rows, index), *(np.full(rows, c * q) for c in cp)]
        table = np.column_stack(columns)
        text = "time [s],angle [deg],tap01 [Pa],tap02 [Pa],tap03 [Pa],tap04 [Pa]\n"
        text += "\n".join(",".join(f"{v:.9g}" for v in row) for row in table) + "\n"
        (root / f"logs/{name}_p.csv").write_text(text, encoding="utf-8")
        merge = "i30;i60" if index == 0 else ""
        body.append(
            f"{name},data,A,2026-11-16T09:3{int(index) // 30}:00,,logs/{name}_p.csv,"
            f"logs/d1_tun.csv,,,20,0,index {index:g} deg,{merge}"
        )
    (root / "runs.csv").write_text("\n".join([header, *body]) + "\n", encoding="utf-8")
    campaign = open_campaign(root)
    assert campaign.run_problems("i00") == []
    assert campaign.dependencies("i00") == ["i00", "i30", "i60"]

    alone = reduce_run(campaign, "i30")
    assert np.isnan(alone.values["CL_p"])  # 90° between taps: too wide to integrate
    merged = reduce_run(campaign, "i00")
    assert merged.values["CD_p_uncorrected"] == pytest.approx(np.pi * a / 2, rel=1e-6)
    assert merged.values["CL_p_uncorrected"] == pytest.approx(0.0, abs=1e-9)
    assert np.count_nonzero(np.isfinite(merged.profiles["Cp"])) == 12
    assert {f"logs/i{k}_p.csv" for k in ("00", "30", "60")} <= set(merged.inputs)
    # Cp is given at the bin centres (2.5° past each tap with the default 72 bins), not at the
    # taps: the written curve there, to the second-order shift's error on 30° spacing (the
    # tap's own value is up to 4 sin 2θ × 2.5° = 0.17 away).
    seen = np.isfinite(merged.profiles["Cp_uncorrected"])
    centre = np.radians(merged.theta[seen])
    written = 1 - 4 * np.sin(centre) ** 2 + a * np.cos(centre)
    assert np.max(np.abs(merged.profiles["Cp_uncorrected"][seen] - written)) < 0.04


def test_pressure_with_must_name_a_data_run_with_pressure(campaign_dir):
    runs = campaign_dir / "runs.csv"
    lines = runs.read_text(encoding="utf-8").splitlines()
    lines[0] += ",pressure_with"
    lines[1:] = [line + ("," + "z1" if line.startswith("d1,") else ",") for line in lines[1:]]
    runs.write_text("\n".join(lines) + "\n", encoding="utf-8")
    problems = open_campaign(campaign_dir).run_problems("d1")
    assert any(p.column == "pressure_with" and "'z1', a zero run" in p.found for p in problems)


def test_a_three_d_model_records_the_method_it_was_corrected_with(campaign_dir, tmp_path):
    # campaign.toml asks for Allen & Vincenti's 2-D method on a model that does not span the
    # section; config substitutes Maskell's 3-D method once, and every output says so.
    import json

    from tunnelred.pipeline.campaign import reduce_campaign

    toml = campaign_dir / "campaign.toml"
    text = toml.read_text(encoding="utf-8").replace("span = 0.8\n", "span = 0.5\n")
    text = text.replace("[model]\n", "[model]\nspans_section = false\n")
    toml.write_text(text + '\n[reduction]\nblockage = "allen-vincenti"\n', encoding="utf-8")
    results = reduce_campaign(campaign_dir, tmp_path / "out", workers=1, progress=False)
    ds = results.dataset
    assert results.failed == 0 and results.reduced == 2
    methods = json.loads(ds.attrs["methods"])
    assert methods["blockage"] == "maskell-3d"
    assert methods["blockage_requested"] == "allen-vincenti"
    assert "maskell-3d" in ds["CL"].attrs["method"]
    assert "allen-vincenti" not in ds["CL"].attrs["method"]
    assert any("maskell-3d" in line for line in results.notices)
    assert "notice" in results.summary()
    # The numbers are Maskell's (ARC R&M 3400): no solid blockage, and
    # eps = sqrt(1 + 5/2 CD_u S/C) - 1 with S = d b = 0.1 m * 0.5 m, C = h w = 1.2 m * 0.8 m.
    assert np.all(ds["eps_solid"].values == 0.0)
    cd_u = ds["CD_uncorrected"].values
    want = np.sqrt(1.0 + 2.5 * cd_u * 0.1 * 0.5 / (1.2 * 0.8)) - 1.0
    np.testing.assert_allclose(ds["eps_wake"].values, want, rtol=1e-9)
