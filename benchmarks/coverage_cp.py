"""Coverage of u(Cp) per bin: the fraction of binned Cp within 2u of the truth, over seeds.

    python benchmarks/coverage_cp.py [--campaigns 40] [--taps 3 16] [--seconds 4]

Each campaign is coverage_study.py's fast case (tunnelred.demo's independent forward model: a
fault-free pressure sweep, here at spin ratios 0.5, 1, 2, 3, of a 60 mm cylinder at 10 m/s, so
about 1000 rad/s at alpha = 3, taps with 4 ms tubing known to ±0.05 ms) in a 10 m section
without a stream gradient, which isolates the Cp model from the wall correction. coverage_study.py
judges every result in the demo's own section; this script adds the before/after dead-tap
figures and the Cp table of docs/methods.md. With ``systematic_errors`` the forward
model draws every systematic error from the standard uncertainty campaign.toml declares
(tunnelred.demo.systematics: geometry, each tap's azimuth and delay, each scanner port, encoder,
tachometer, pitot, air data, balance), runs the physics with them, and campaign.toml keeps the
declared values; the reduction never sees the errors. One seed is one campaign, its own noise
and its own draw of errors. Truth per bin is the forward model's free-air
Cp(theta) at the bin centre (tunnelred.demo.truth.shaped_cp with the run's true CL_p, CD_p),
in a 10 m section with no stream gradient so that the wall correction is negligible.

It prints, per number of taps and spin ratio, the fraction of bins with |Cp - truth| <= 2 u(Cp)
(the GUM k = 2 claim, ~95 % for a normal error), and the same for CL_p and CD_p.
tests/test_cp_coverage.py runs a short version; docs/methods.md keeps the measured table.
"""

from __future__ import annotations

import argparse
import tempfile
from dataclasses import replace
from pathlib import Path

import coverage_study  # benchmarks/coverage_study.py, the study of every uncertainty
import numpy as np
import pandas as pd

from tunnelred.demo.truth import shaped_cp
from tunnelred.demo.writer import make_campaign
from tunnelred.engine.reduction import reduce_run
from tunnelred.inputs.readers import open_campaign

ALPHAS = (0.5, 1.0, 2.0, 3.0)


def study_spec(seed: int, n_taps: int, seconds: float):
    """coverage_study's fast case, in a 10 m section without a stream gradient, at ALPHAS."""
    base = coverage_study.study_spec(f"{n_taps} taps fast", seed, seconds)
    return replace(
        base,
        tunnel_height=10.0,
        tunnel_width=10.0,
        static_pressure_gradient=0.0,
        u_static_pressure_gradient=0.0,
        spin_ratios_up=ALPHAS,
        pressure_spin_ratios=ALPHAS,
    )


def campaign_errors(seed: int, n_taps: int, seconds: float, folder: Path) -> list[dict]:
    """One campaign (one draw of its systematic errors): per run, each bin's error and u, etc."""
    spec = study_spec(seed, n_taps, seconds)
    truth = make_campaign(folder, spec).set_index("run")
    campaign = open_campaign(folder)
    rows = []
    for run in truth.index[truth["has_pressure"].astype(bool)]:
        result = reduce_run(campaign, run)
        t = truth.loc[run]
        true_cp = shaped_cp(np.radians(result.theta), t["CL_p"], t["CD_p"])
        rows.append(
            {
                "taps": n_taps,
                "alpha": round(float(t["alpha"]) * 2) / 2,
                "seed": seed,
                "cp_error": result.profiles["Cp"] - true_cp,
                "u_cp": result.profiles["u_Cp"],
                "cl_error": result.values["CL_p"] - t["CL_p"],
                "u_cl": result.values["u_CL_p"],
                "cd_error": result.values["CD_p"] - t["CD_p"],
                "u_cd": result.values["u_CD_p"],
                "dead_tap": bool(result.values.get("dead_taps")),
            }
        )
    return rows


def coverage_table(rows) -> pd.DataFrame:
    """Fractions within 2u per (taps, alpha): Cp bins, CL_p, CD_p; and runs flagged dead_tap."""
    df = pd.DataFrame(rows)
    out = []
    for (taps, alpha), g in df.groupby(["taps", "alpha"]):
        err = np.concatenate(g["cp_error"].to_numpy())
        u = np.concatenate(g["u_cp"].to_numpy())
        ok = np.isfinite(err) & np.isfinite(u)
        out.append(
            {
                "taps": taps,
                "alpha": alpha,
                "runs": len(g),
                "Cp bins": float(np.mean(np.abs(err[ok]) <= 2 * u[ok])),
                "CL_p": float(np.mean(np.abs(g["cl_error"]) <= 2 * g["u_cl"])),
                "CD_p": float(np.mean(np.abs(g["cd_error"]) <= 2 * g["u_cd"])),
                "dead_tap flagged": float(np.mean(g["dead_tap"])),
            }
        )
    return pd.DataFrame(out)


def run_study(campaigns: int, taps=(3,), seconds: float = 4.0) -> pd.DataFrame:
    """The table over ``campaigns`` seeds (each its own draw of errors) per number of taps."""
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n_taps in taps:
            for seed in range(campaigns):
                folder = Path(tmp) / f"c{n_taps}_{seed}"
                rows += campaign_errors(seed, n_taps, seconds, folder)
    return coverage_table(rows)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--campaigns", type=int, default=40, help="seeds (draws) per tap count")
    parser.add_argument("--taps", type=int, nargs="+", default=[3, 16])
    parser.add_argument("--seconds", type=float, default=4.0, help="record length")
    args = parser.parse_args()
    table = run_study(args.campaigns, tuple(args.taps), args.seconds)
    print(table.to_string(index=False, float_format=lambda v: f"{v:.3f}"))


if __name__ == "__main__":
    main()
