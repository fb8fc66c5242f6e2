"""Coverage of every reported uncertainty: the fraction of |reduced − true| ≤ 2u, over seeds.

    nice -n 10 python benchmarks/coverage_study.py [--seeds 10] [--seconds 4] [--out FILE]

Each campaign is written by tunnelred.demo's independent forward model with
``systematic_errors=True``: every instrument offset and gain, the balance calibration and
alignment, the model and tunnel geometry, the flow angle, each tap's azimuth, tubing delay and
scanner port, and the encoder zero are one seeded draw from the standard uncertainty
campaign.toml declares (tunnelred.demo.systematics; per campaign, or per run for the pitot zero
and the balance channels). The reduction reads only the logs and campaign.toml, so it never
sees the errors. The campaigns are fault-free spin-ratio sweeps, 0 to 3 in steps of 0.5, every
run with a pressure log, in five cases:

- ``3 taps slow`` / ``16 taps slow``: the demo's 125 mm model at 9 m/s (430 rad/s at alpha 3),
  its sub-millisecond tubing;
- ``3 taps fast`` / ``16 taps fast``: a 60 mm model at 10 m/s (1000 rad/s at alpha 3) with 4 ms
  tubing known to 0.05 ms;
- ``16 taps fast, sparse tares``: the fast case with four spin tares (400, 2000, 5000,
  10000 rpm) instead of one every 1000 rpm.

For alpha, U, q, rho, Re, CL, CD, CM, C_power, CL_p, CD_p and every Cp bin it gives the fraction
of runs (bins) within 2u of the truth (truth.csv; a bin's truth is the free-air Cp(theta) at the
bin centre, tunnelred.demo.truth.shaped_cp with the run's true CL_p, CD_p), the GUM k = 2 claim
(about 95 % for a normal error; target 0.93 to 0.98), the median of |error|/u (0.67 for a normal
error whose u is right), and the fraction of runs raising each quality flag (target at most
1 %). Systematic errors are shared by a campaign's runs, so a fraction's resolution is set by the
number of seeds more than by the number of runs. It prints the tables and writes them to
benchmarks/coverage.json; tests/test_coverage.py runs a short version.
"""

from __future__ import annotations

import argparse
import json
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd

from tunnelred.demo.spec import demo_spec
from tunnelred.demo.truth import shaped_cp
from tunnelred.demo.writer import make_campaign
from tunnelred.engine.quality import FLAG_NAMES
from tunnelred.engine.reduction import reduce_run
from tunnelred.inputs.config import Tolerances
from tunnelred.inputs.readers import open_campaign

ALPHAS = (0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0)
#: Scalar results under study, as named in docs/results.md and truth.csv.
QUANTITIES = ("alpha", "U", "q", "rho", "Re", "CL", "CD", "CM", "C_power", "CL_p", "CD_p")
# Spin tares from 400 rpm, then every 1000 rpm to past the fastest data run, as dense as the
# demo's; and four tares only, whose linear interpolation misses the tare's curvature in ω by
# up to several u of the torque's other terms: the reduction's tare-interpolation input must
# cover it.
_SLOW_TARES = (400.0, *(1000.0 * k for k in range(1, 6)))
_FAST_TARES = (400.0, *(1000.0 * k for k in range(1, 11)))
_SPARSE_TARES = (400.0, 2000.0, 5000.0, 10000.0)
#: name: (taps, diameter [m], speed [m/s], tubing delay range [s], tare rpms)
CASES = {
    "3 taps slow": (3, 0.125, 9.0, (0.4e-3, 0.9e-3), _SLOW_TARES),
    "16 taps slow": (16, 0.125, 9.0, (0.4e-3, 0.9e-3), _SLOW_TARES),
    "3 taps fast": (3, 0.06, 10.0, (4.0e-3, 4.0e-3), _FAST_TARES),
    "16 taps fast": (16, 0.06, 10.0, (4.0e-3, 4.0e-3), _FAST_TARES),
    "16 taps fast, sparse tares": (16, 0.06, 10.0, (4.0e-3, 4.0e-3), _SPARSE_TARES),
}
K = 2.0  # coverage factor of the claim (JCGM 100:2008 §6.3)
OUT = Path(__file__).with_name("coverage.json")


def study_spec(case: str, seed: int, seconds: float = 4.0, alphas=ALPHAS):
    """The fault-free sweep of one case, its systematic errors drawn (tunnelred.demo SynthSpec)."""
    taps, diameter, speed, delays, tares = CASES[case]
    demo = demo_spec(seed)
    return replace(
        demo,
        configurations=demo.configurations[:1],
        diameter=diameter,
        speeds=(speed,),
        spin_ratios_up=tuple(alphas),
        spin_ratios_down=(),
        pressure_speeds=(speed,),
        pressure_spin_ratios=tuple(alphas),
        repeat_point=None,
        repeat_count=0,
        tare_rpms=tares,
        data_duration=seconds,
        wind_off_duration=1.0,
        pressure_rate=1000.0,
        n_taps=taps,
        tap_delay_range=delays,
        faults=(),
        photo="",
        systematic_errors=True,
    )


def campaign_rows(
    case: str, seed: int, folder: Path, seconds: float = 4.0, alphas=ALPHAS
) -> list[dict]:
    """One campaign written and reduced: per data run, each quantity's error and u, the Cp bins'
    errors and u, and the flags raised."""
    truth = make_campaign(folder, study_spec(case, seed, seconds, alphas)).set_index("run")
    campaign = open_campaign(folder)
    rows = []
    for run in truth.index:
        t = truth.loc[run]
        result = reduce_run(campaign, run)
        v = result.values
        row = {"case": case, "seed": seed, "run": run, "alpha_nominal": _nominal(t["alpha"])}
        for name in QUANTITIES:
            row[f"{name}_error"] = float(v[name]) - float(t[name])
            row[f"{name}_u"] = float(v[f"u_{name}"])
        row["raised"] = sorted({f.name for f in result.flags})
        for name in ("speed_drift", "spin_drift"):
            row[name] = float(v[name])
        if result.theta is not None:
            true_cp = shaped_cp(np.radians(result.theta), t["CL_p"], t["CD_p"])
            row["Cp_error"] = (result.profiles["Cp"] - true_cp).tolist()
            row["Cp_u"] = np.asarray(result.profiles["u_Cp"]).tolist()
        rows.append(row)
    return rows


def _nominal(alpha: float) -> float:
    return round(float(alpha) * 2.0) / 2.0


def _within(errors: np.ndarray, u: np.ndarray) -> tuple[int, int, float]:
    """Count within K u, count judged, median |error|/u (NaN and u = 0 are not judged)."""
    errors, u = np.asarray(errors, dtype=float), np.asarray(u, dtype=float)
    ok = np.isfinite(errors) & np.isfinite(u) & (u > 0)
    ratio = np.abs(errors[ok]) / u[ok]
    median = float(np.median(ratio)) if ratio.size else float("nan")
    return int(np.sum(ratio <= K)), int(ratio.size), median


def coverage_table(rows: list[dict], by: str = "case") -> pd.DataFrame:
    """Fraction within 2u (and count judged) per quantity and group (``case`` or
    ``alpha_nominal``), with the pooled column ``all``."""
    df = pd.DataFrame(rows)
    groups = [(str(key), g) for key, g in df.groupby(by, sort=False)] + [("all", df)]
    records = []
    for name in (*QUANTITIES, "Cp"):
        for label, g in groups:
            if name == "Cp":
                if "Cp_error" not in g:
                    continue
                kept = g["Cp_error"].dropna()
                err = np.concatenate([np.asarray(x) for x in kept])
                u = np.concatenate([np.asarray(x) for x in g.loc[kept.index, "Cp_u"]])
            else:
                err, u = g[f"{name}_error"].to_numpy(), g[f"{name}_u"].to_numpy()
            inside, judged, median = _within(err, u)
            records.append(
                {
                    "quantity": name,
                    by: label,
                    "within_2u": inside / judged if judged else float("nan"),
                    "judged": judged,
                    "median_z": median,
                }
            )
    return pd.DataFrame(records)


def flag_table(rows: list[dict]) -> pd.DataFrame:
    """Fraction of (fault-free) runs raising each flag, per case and pooled."""
    df = pd.DataFrame(rows)
    groups = [(str(key), g) for key, g in df.groupby("case", sort=False)] + [("all", df)]
    records = []
    for flag in FLAG_NAMES:
        for label, g in groups:
            raised = int(sum(flag in f for f in g["raised"]))
            records.append({"flag": flag, "case": label, "rate": raised / len(g), "runs": len(g)})
    return pd.DataFrame(records)


def run_study(seeds, cases=tuple(CASES), seconds: float = 4.0, alphas=ALPHAS) -> list[dict]:
    rows: list[dict] = []
    with tempfile.TemporaryDirectory() as tmp:
        for case in cases:
            for seed in seeds:
                folder = Path(tmp) / f"{case.replace(' ', '_')}_{seed}"
                rows += campaign_rows(case, seed, folder, seconds, alphas)
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=10, help="campaigns per case")
    parser.add_argument("--first-seed", type=int, default=0)
    parser.add_argument("--seconds", type=float, default=4.0, help="record length [s]")
    parser.add_argument("--out", type=Path, default=OUT)
    parser.add_argument(
        "--alphas", type=float, nargs="+", default=ALPHAS, help="nominal spin ratios swept"
    )
    parser.add_argument("--cases", nargs="+", default=list(CASES), choices=list(CASES))
    args = parser.parse_args()
    started = time.time()
    seeds = range(args.first_seed, args.first_seed + args.seeds)
    rows = run_study(seeds, tuple(args.cases), seconds=args.seconds, alphas=args.alphas)
    by_case = coverage_table(rows, "case")
    by_alpha = coverage_table(rows, "alpha_nominal")
    flags = flag_table(rows)
    wide = by_case.pivot(index="quantity", columns="case", values="within_2u")
    wide = wide.reindex(index=[*QUANTITIES, "Cp"], columns=[*args.cases, "all"])
    median = by_case[by_case["case"] == "all"].set_index("quantity")["median_z"]
    wide["median |e|/u"] = median
    print(f"Fraction of |reduced - true| <= 2u, {args.seeds} seeds per case, by case:")
    print(wide.to_string(float_format=lambda v: f"{v:.3f}"))
    print("\nBy nominal spin ratio (all cases):")
    print(
        by_alpha.pivot(index="quantity", columns="alpha_nominal", values="within_2u")
        .reindex([*QUANTITIES, "Cp"])
        .to_string(float_format=lambda v: f"{v:.3f}")
    )
    raised = flags[(flags["case"] == "all") & (flags["rate"] > 0)]
    print(f"\nFlags raised on fault-free runs ({len(rows)} runs):")
    print(raised.to_string(index=False) if len(raised) else "none")
    tolerances = Tolerances()
    for name in ("speed_drift", "spin_drift"):
        alone = sum(float(r[name]) > getattr(tolerances, name) for r in rows)
        print(f"{name} beyond its tolerance alone (the rule before its u): {alone} of {len(rows)}")
    payload = {
        "date": time.strftime("%Y-%m-%d", time.gmtime()),
        "seeds": list(seeds),
        "seconds": args.seconds,
        "runs": len(rows),
        "elapsed_s": round(time.time() - started, 1),
        "coverage_by_case": by_case.to_dict(orient="records"),
        "coverage_by_alpha": by_alpha.to_dict(orient="records"),
        "flag_rates": flags.to_dict(orient="records"),
    }
    args.out.write_text(json.dumps(payload, indent=1) + "\n", encoding="utf-8")
    print(f"\nwritten {args.out}")


if __name__ == "__main__":
    main()
