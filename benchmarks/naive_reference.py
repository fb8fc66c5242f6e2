"""The yardstick: a per-run reduction script of the kind a lab engineer writes in a notebook.

It knows nothing of tunnelred: pandas.read_csv of each log, means, wind-off zeros interpolated in
time, the calibration matrix, spin tares interpolated in omega, balance to wind axes, q from the
pitot, ideal-gas density, Allen & Vincenti solid and wake blockage and horizontal buoyancy, Cp in
72 azimuth bins integrated by the trapezoid rule, and uncertainties carried by the
`uncertainties` package (standard deviations of the mean, no autocorrelation, no budgets, no
flags, no figures). benchmarks/bench_reduce.py times it beside `tunnelred reduce` and checks that
its CL and CD agree with tunnelred's.

    python benchmarks/naive_reference.py CAMPAIGN_FOLDER OUT.csv

Formulas (the same published ones tunnelred uses, written out again here):
- loads F = K (s - s0), s0 linear in time between the two zero runs named for the run;
- D = Fx cos(phi) - Fy sin(phi), L = Fx sin(phi) + Fy cos(phi), phi = alignment - flow angle;
- CL = L / (q d b), CD = D / (q d b), q = dp_pitot (incompressible), rho = p / (R_air T);
- Allen & Vincenti (NACA Report 782): eps_sb = (pi^2/12)(d/h)^2, eps_wb = (d / 4h) CD;
  CL_c = CL / (1 + eps)^2, CD_c = (CD - dCD_B)(1 - 3 eps_sb - 2 eps_wb), dCD_B = -(pi d / 2q) dp/dx.
"""

from __future__ import annotations

import math
import sys
import tomllib
from datetime import datetime
from pathlib import Path

import numpy as np
import pandas as pd
from uncertainties import ufloat

R_AIR = 287.05  # specific gas constant of dry air [J/(kg K)] (common practice)
UNITS = {"mm": 1e-3, "m": 1.0, "deg": 1.0, "hPa": 100.0, "Pa": 1.0, "ms": 1e-3, "s": 1.0}


def number(value):
    """A campaign.toml value: a number, or "number unit" with a unit of the table above."""
    if isinstance(value, int | float):
        return float(value)
    text, unit = value.split()
    return float(text) * UNITS[unit]


def read_log(folder, rel):
    frame = pd.read_csv(folder / rel)
    frame.columns = [c.split(" [")[0] for c in frame.columns]
    return frame


def mean_u(values):
    values = np.asarray(values, dtype=float)
    return ufloat(values.mean(), values.std(ddof=1) / math.sqrt(values.size))


def main(folder, out):
    folder = Path(folder)
    cfg = tomllib.loads((folder / "campaign.toml").read_text())
    runs = pd.read_csv(folder / "runs.csv", dtype=str).fillna("")
    runs = runs.set_index("run")
    bal = cfg["instruments"]["balance"]
    channels = bal["channels"]
    K = np.array(bal["matrix"])
    k_cal = ufloat(1.0, bal["u_matrix_relative"])
    d = ufloat(number(cfg["model"]["diameter"]), number(cfg["model"]["u_diameter"]))
    b = ufloat(number(cfg["model"]["span"]), number(cfg["model"]["u_span"]))
    h = number(cfg["tunnel"]["height"])
    dpdx = ufloat(
        number(cfg["tunnel"]["static_pressure_gradient"]),
        number(cfg["tunnel"]["u_static_pressure_gradient"]),
    )
    phi = math.radians(number(bal["alignment_angle"]) - number(cfg["tunnel"]["flow_angle"]))
    taps = cfg.get("taps", [])
    u_pitot = cfg["instruments"]["pitot"]["u"]
    u_pitot_rel = cfg["instruments"]["pitot"]["u_relative"]

    zero_cache, tare_cache = {}, {}

    def zero(run_id):
        """Mean signals of a zero run and its mid-time [s since 1970]."""
        if run_id not in zero_cache:
            log = read_log(folder, runs.loc[run_id, "balance_log"])
            start = datetime.fromisoformat(runs.loc[run_id, "start"]).timestamp()
            mid = start + 0.5 * (log["time"].iloc[0] + log["time"].iloc[-1])
            zero_cache[run_id] = (mid, log[channels].mean().to_numpy())
        return zero_cache[run_id]

    def zero_at(names, when):
        points = sorted(zero(z) for z in names.split(";"))
        times = [p[0] for p in points]
        signals = np.array([p[1] for p in points])
        return np.array([np.interp(when, times, signals[:, j]) for j in range(len(channels))])

    def loads(run_id, log):
        start = datetime.fromisoformat(runs.loc[run_id, "start"]).timestamp()
        mid = start + 0.5 * (log["time"].iloc[0] + log["time"].iloc[-1])
        s0 = zero_at(runs.loc[run_id, "zero"], mid)
        return (log[channels].to_numpy() - s0) @ K.T

    def tare(run_id):
        """Spin rate [rad/s] and mean loads of a tare run."""
        if run_id not in tare_cache:
            log = read_log(folder, runs.loc[run_id, "balance_log"])
            omega = log["speed"].mean() * 2 * math.pi / 60
            tare_cache[run_id] = (omega, loads(run_id, log).mean(axis=0))
        return tare_cache[run_id]

    rows = []
    for run_id, row in runs.iterrows():
        if row["kind"] != "data":
            continue
        log = read_log(folder, row["balance_log"])
        tunnel = read_log(folder, row["tunnel_log"])
        F = loads(run_id, log)
        omega = log["speed"].mean() * 2 * math.pi / 60
        Fx, Fy = mean_u(F[:, 0]), mean_u(F[:, 1])
        if row["tare"]:
            points = sorted(tare(t) for t in row["tare"].split(";"))
            rates = [p[0] for p in points]
            tare_loads = np.array([p[1] for p in points])
            Fx = Fx - np.interp(omega, rates, tare_loads[:, 0])
            Fy = Fy - np.interp(omega, rates, tare_loads[:, 1])
        Fx, Fy = Fx * k_cal, Fy * k_cal
        drag = Fx * math.cos(phi) - Fy * math.sin(phi)
        lift = Fx * math.sin(phi) + Fy * math.cos(phi)

        dp = mean_u(tunnel["dp_pitot"])
        q = ufloat(dp.n, math.hypot(dp.s, u_pitot, u_pitot_rel * dp.n))
        T = mean_u(tunnel["T"]) + 273.15
        p = mean_u(tunnel["p_baro"]) * 100.0
        rho = p / (R_AIR * T)
        U = (2 * q / rho) ** 0.5
        alpha = omega * d / 2 / U

        CL = lift / (q * d * b)
        CD = drag / (q * d * b)
        eps_sb = math.pi**2 / 12 * (d / h) ** 2
        eps_wb = d / (4 * h) * CD
        eps = eps_sb + eps_wb
        dcd_b = -math.pi * d / (2 * q) * dpdx
        CL_c = CL / (1 + eps) ** 2
        CD_c = (CD - dcd_b) * (1 - 3 * eps_sb - 2 * eps_wb)
        result = {
            "run": run_id,
            "alpha": (alpha * (1 + eps) ** -1).n,
            "CL": CL_c.n,
            "u_CL": CL_c.s,
            "CD": CD_c.n,
            "u_CD": CD_c.s,
            "CL_p": np.nan,
            "CD_p": np.nan,
        }

        if row["pressure_log"] and taps:
            pressure = read_log(folder, row["pressure_log"])
            angle = pressure["angle"].to_numpy() if "angle" in pressure else 0.0
            sums, counts = np.zeros(72), np.zeros(72)
            for tap in taps:
                theta = np.mod(angle + number(tap["azimuth"]), 360.0)
                cell = np.minimum((theta // 5.0).astype(int), 71)
                sums += np.bincount(cell, pressure[tap["name"]].to_numpy(), 72)
                counts += np.bincount(cell, minlength=72)
            filled = counts > 0
            if filled.sum() >= 8:
                cp = sums[filled] / counts[filled] / q.n
                th = np.radians((np.flatnonzero(filled) + 0.5) * 5.0)
                # Closed loop: the first bin repeated one turn on.
                th_c, cp_c = np.append(th, th[0] + 2 * np.pi), np.append(cp, cp[0])
                result["CL_p"] = 0.5 * np.trapezoid(cp_c * np.sin(th_c), th_c)
                result["CD_p"] = 0.5 * np.trapezoid(cp_c * np.cos(th_c), th_c)
        rows.append(result)
    pd.DataFrame(rows).to_csv(out, index=False)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1], sys.argv[2]))
