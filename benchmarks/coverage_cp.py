"""Coverage of u(Cp) per bin: the fraction of binned Cp within 2u of the truth, over seeds.

    python benchmarks/coverage_cp.py [--campaigns 6] [--draws 10] [--taps 3 16] [--seconds 4]

Each campaign is written by tunnelred.demo's independent forward model (a fault-free pressure
sweep at spin ratios 0.5, 1, 2, 3 of a 60 mm cylinder at 10 m/s, so about 1000 rad/s at
alpha = 3, taps with 4 ms tubing); its noise is its own. For each campaign, ``draws`` sets of
systematic errors are drawn from the standard uncertainties campaign.toml declares, and the
reduction is given the declared values while the instruments read with the errors: every tap's
installed azimuth and tubing delay, the encoder zero, every scanner port's offset, the pitot
offset and relative error, the thermometer, barometer, hygrometer, tachometer and the model
diameter. The reduction never sees the errors. Truth per bin is the forward model's free-air
Cp(theta) at the bin centre (tunnelred.demo.truth.shaped_cp with the run's true CL_p, CD_p),
in a 10 m section with no stream gradient so that the wall correction is negligible.

It prints, per number of taps and spin ratio, the fraction of bins with |Cp - truth| <= 2 u(Cp)
(the GUM k = 2 claim, ~95 % for a normal error), and the same for CL_p and CD_p.
tests/test_cp_coverage.py runs a short version; docs/methods.md keeps the measured table.
"""

from __future__ import annotations

import argparse
import tempfile
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import pandas as pd

from tunnelred.demo.spec import demo_spec
from tunnelred.demo.truth import shaped_cp
from tunnelred.demo.writer import make_campaign
from tunnelred.engine.reduction import reduce_run
from tunnelred.inputs.readers import RunData, open_campaign

ALPHAS = (0.5, 1.0, 2.0, 3.0)


def study_spec(seed: int, n_taps: int, seconds: float, speed: float = 10.0):
    """The fault-free pressure sweep of the study (tunnelred.demo SynthSpec)."""
    demo = demo_spec(seed)
    return replace(
        demo,
        configurations=demo.configurations[:1],
        diameter=0.06,
        tunnel_height=10.0,
        tunnel_width=10.0,
        static_pressure_gradient=0.0,
        u_static_pressure_gradient=0.0,
        speeds=(speed,),
        spin_ratios_up=ALPHAS,
        spin_ratios_down=(),
        pressure_speeds=(speed,),
        pressure_spin_ratios=ALPHAS,
        repeat_point=None,
        repeat_count=0,
        tare_rpms=(1000.0, 5000.0, 10000.0),
        data_duration=seconds,
        wind_off_duration=1.0,
        pressure_rate=1000.0,
        n_taps=n_taps,
        tap_delay_range=(4.0e-3, 4.0e-3),
        u_tubing_delay=5.0e-5,
        faults=(),
    )


@dataclass(frozen=True)
class _Errors:
    """One draw of the campaign's systematic errors (what the instruments get wrong)."""

    azimuth: np.ndarray  # declared minus true, per tap [deg]
    delay: np.ndarray  # declared minus true, per tap [s]
    diameter: float  # declared minus true [m]
    encoder: float  # reading minus true [deg]
    scanner: np.ndarray  # per port [Pa]
    pitot: float  # offset [Pa]
    pitot_relative: float  # [-]
    thermometer: float  # [K]
    barometer: float  # [Pa]
    hygrometer: float  # [-]
    tachometer: float  # relative [-]


def _draw(rng: np.random.Generator, cfg) -> _Errors:
    ins, taps = cfg.instruments, cfg.taps
    n = len(taps)
    return _Errors(
        azimuth=rng.normal(0.0, [t.u_azimuth for t in taps]),
        delay=rng.normal(0.0, [t.u_tubing_delay for t in taps]),
        diameter=rng.normal(0.0, cfg.model.u_diameter),
        encoder=rng.normal(0.0, ins.u_encoder),
        scanner=rng.normal(0.0, ins.u_scanner, n),
        pitot=rng.normal(0.0, ins.u_pitot),
        pitot_relative=rng.normal(0.0, ins.u_pitot_relative),
        thermometer=rng.normal(0.0, ins.u_thermometer),
        barometer=rng.normal(0.0, ins.u_barometer),
        hygrometer=rng.normal(0.0, ins.u_hygrometer),
        tachometer=rng.normal(0.0, ins.u_tachometer_relative),
    )


def _declared(cfg, e: _Errors):
    """The configuration as campaign.toml would state it: true values plus the errors."""
    taps = tuple(
        replace(t, azimuth=t.azimuth + a, tubing_delay=t.tubing_delay + d)
        for t, a, d in zip(cfg.taps, e.azimuth, e.delay, strict=True)
    )
    model = replace(cfg.model, diameter=cfg.model.diameter + e.diameter)
    return replace(cfg, taps=taps, model=model)


def _misread(data: RunData, cfg, e: _Errors) -> RunData:
    """The run's logs as instruments with these errors would have written them."""
    streams = {}
    for name, ds in data.streams.items():
        ds = ds.copy()
        if "dp_pitot" in ds:
            ds["dp_pitot"] = ds["dp_pitot"] * (1.0 + e.pitot_relative) + e.pitot
        if "T" in ds:
            ds["T"] = ds["T"] + e.thermometer
            ds["p_baro"] = ds["p_baro"] + e.barometer
            ds["RH"] = ds["RH"] + e.hygrometer
        if "speed" in ds:
            ds["speed"] = ds["speed"] * (1.0 + e.tachometer)
        if "angle" in ds:
            ds["angle"] = ds["angle"] + e.encoder
        for k, tap in enumerate(cfg.taps):
            if tap.name in ds:
                ds[tap.name] = ds[tap.name] + e.scanner[k]
        streams[name] = ds
    return RunData(data.spec, streams)


def campaign_errors(seed: int, n_taps: int, seconds: float, draws: int, folder: Path):
    """Per run and draw: alpha, each bin's error and u, and CL_p, CD_p errors and u."""
    spec = study_spec(seed, n_taps, seconds)
    truth = make_campaign(folder, spec).set_index("run")
    campaign = open_campaign(folder)
    true_cfg = campaign.config
    load = campaign.load_run
    rng = np.random.default_rng(10_000 + seed)
    rows = []
    for draw in range(draws):
        errors = _draw(rng, true_cfg)
        campaign.config = _declared(true_cfg, errors)
        campaign.load_run = lambda run, e=errors: _misread(load(run), true_cfg, e)
        for run in truth.index[truth["has_pressure"].astype(bool)]:
            result = reduce_run(campaign, run)
            t = truth.loc[run]
            theta = np.radians(result.theta)
            true_cp = shaped_cp(theta, t["CL_p"], t["CD_p"])
            rows.append(
                {
                    "taps": n_taps,
                    "alpha": round(float(t["alpha"]) * 2) / 2,
                    "seed": seed,
                    "draw": draw,
                    "cp_error": result.profiles["Cp"] - true_cp,
                    "u_cp": result.profiles["u_Cp"],
                    "cl_error": result.values["CL_p"] - t["CL_p"],
                    "u_cl": result.values["u_CL_p"],
                    "cd_error": result.values["CD_p"] - t["CD_p"],
                    "u_cd": result.values["u_CD_p"],
                    "dead_tap": bool(result.values.get("dead_taps")),
                    "errors": errors,
                }
            )
    campaign.config, campaign.load_run = true_cfg, load
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


def run_study(campaigns: int, draws: int, taps=(3,), seconds: float = 4.0) -> pd.DataFrame:
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n_taps in taps:
            for seed in range(campaigns):
                folder = Path(tmp) / f"c{n_taps}_{seed}"
                rows += campaign_errors(seed, n_taps, seconds, draws, folder)
    return coverage_table(rows)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--campaigns", type=int, default=6, help="forward seeds per tap count")
    parser.add_argument("--draws", type=int, default=10, help="error draws per campaign")
    parser.add_argument("--taps", type=int, nargs="+", default=[3, 16])
    parser.add_argument("--seconds", type=float, default=4.0, help="record length")
    args = parser.parse_args()
    table = run_study(args.campaigns, args.draws, tuple(args.taps), args.seconds)
    print(table.to_string(index=False, float_format=lambda v: f"{v:.3f}"))


if __name__ == "__main__":
    main()
