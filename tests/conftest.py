"""Shared fixtures: a small valid campaign folder written by code."""

from __future__ import annotations

import shutil
import textwrap
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

CAMPAIGN_TOML = """\
[campaign]
title = "Fixture campaign"
facility = "Test tunnel"

[tunnel]
height = "1.2 m"
width = 0.8
q_source = "pitot"

[model]
diameter = "100 mm"
span = 0.8

[configurations.A]
description = "bare cylinder"

[configurations.B]
end_plates = true
end_plate_diameter = "0.2 m"

[instruments.balance]
channels = ["N1", "N2", "N3"]
matrix = [[10.0, 0.0, 0.0], [0.0, 10.0, 0.0], [0.0, 0.0, 1.0]]
full_scale = [100.0, 100.0, "5 N*m"]

[[taps]]
name = "tap01"
azimuth = 0.0

[[taps]]
name = "tap02"
azimuth = "90 deg"

[[taps]]
name = "tap03"
azimuth = 180

[[taps]]
name = "tap04"
azimuth = 270
"""

RUNS_CSV = "\n".join(
    [
        "run,kind,config,start,balance_log,pressure_log,tunnel_log,zero,tare,"
        "speed_set [m/s],spin_set [rpm],notes",
        "z1,zero,A,2026-11-16T09:00:00,logs/z1_bal.csv,,,,,,,pre-run zero",
        "t1,tare,A,2026-11-16T09:05:00,logs/t1_bal.csv,,,z1,,0,600,spin tare",
        "d1,data,A,2026-11-16T09:10:00,logs/d1_bal.csv,logs/d1_p.csv,logs/d1_tun.csv,z1,t1,20,600,",
        "d2,data,A,2026-11-16T09:20:00,logs/d2_all.csv,logs/d2_all.csv,logs/d2_all.csv,z1,,20,0,"
        '"one file, three streams"',
        "",
    ]
)


def _log(path: Path, header: list[str], columns: list[np.ndarray]) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    rows = np.column_stack(columns)
    body = "\n".join(",".join(f"{v:.6g}" for v in row) for row in rows)
    path.write_text(",".join(header) + "\n" + body + "\n", encoding="utf-8")


def write_campaign(root: Path, *, rows: int = 50) -> Path:
    """Write the fixture campaign into ``root`` and return ``root``."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "campaign.toml").write_text(CAMPAIGN_TOML, encoding="utf-8")
    (root / "runs.csv").write_text(RUNS_CSV, encoding="utf-8")
    rng = np.random.default_rng(1)
    t = np.arange(rows) * 0.01
    bal = ["time [s]", "N1 [V]", "N2 [mV]", "N3 [V]"]
    for name in ("z1", "t1", "d1"):
        _log(
            root / f"logs/{name}_bal.csv",
            bal + ["speed [rpm]"],
            [
                t,
                rng.normal(0, 0.01, rows),
                rng.normal(0, 10, rows),
                rng.normal(0, 0.01, rows),
                np.full(rows, 600.0 if name != "z1" else 0.0),
            ],
        )
    tunnel = ["time [s]", "dp_pitot [Pa]", "T [degC]", "p_baro [hPa]", "RH [%]"]
    _log(
        root / "logs/d1_tun.csv",
        tunnel,
        [t, np.full(rows, 240.0), np.full(rows, 20.0), np.full(rows, 1013.25), np.full(rows, 45.0)],
    )
    taps = [f"tap0{i} [Pa]" for i in range(1, 5)]
    _log(
        root / "logs/d1_p.csv",
        ["time [s]", "angle [deg]", *taps],
        [t, (t * 3600.0) % 360.0, *(rng.normal(0, 50, rows) for _ in taps)],
    )
    _log(
        root / "logs/d2_all.csv",
        ["time [s]", *bal[1:], "dp_pitot [Pa]", "T [K]", "p_baro [Pa]", "RH [1]", *taps],
        [
            t,
            *(rng.normal(0, 0.01, rows) for _ in range(3)),
            np.full(rows, 240.0),
            np.full(rows, 293.15),
            np.full(rows, 101325.0),
            np.full(rows, 0.45),
            *(rng.normal(0, 50, rows) for _ in taps),
        ],
    )
    return root


@pytest.fixture
def campaign_dir(tmp_path: Path) -> Path:
    """A small valid campaign folder: zero, tare and two data runs (one sharing a file)."""
    return write_campaign(tmp_path / "campaign")


def dedent(text: str) -> str:
    return textwrap.dedent(text).lstrip("\n")


REPO = Path(__file__).resolve().parents[1]
SAMPLE_RUNS = REPO / "sample_runs"


def small_spec(repeat_count: int = 1):
    """A small synthetic campaign (tunnelred.demo): one configuration at 9 m/s, spin ratios 0, 1
    and 2 up, three spin tares, one pressure run at α = 2 and ``repeat_count`` repeats of it,
    short records, no planted faults; a dozen runs that reduce in seconds."""
    from tunnelred.demo.spec import demo_spec

    demo = demo_spec()
    return replace(
        demo,
        configurations=demo.configurations[:1],
        speeds=(9.0,),
        spin_ratios_up=(0.0, 1.0, 2.0),
        spin_ratios_down=(),
        tare_rpms=(1000.0, 3000.0, 4000.0),
        repeat_point=(demo.configurations[0].label, 9.0, 2.0),
        repeat_count=repeat_count,
        faults=(),
        pressure_speeds=(9.0,),
        pressure_spin_ratios=(2.0,),
        data_duration=2.0,
        wind_off_duration=1.0,
    )


@pytest.fixture(scope="module")
def small_campaign(tmp_path_factory) -> Path:
    """The campaign of :func:`small_spec`, written once per test module; a test that changes its
    files takes :func:`small_campaign_copy`."""
    from tunnelred.demo.writer import make_campaign

    root = tmp_path_factory.mktemp("small_campaign") / "campaign"
    make_campaign(root, small_spec())
    return root


@pytest.fixture
def small_campaign_copy(small_campaign, tmp_path) -> Path:
    """A copy of :func:`small_campaign` of this test's own."""
    root = tmp_path / "campaign"
    shutil.copytree(small_campaign, root, symlinks=True)
    return root


@pytest.fixture(scope="session")
def demo_campaign_dir(tmp_path_factory) -> Path:
    """The committed demo campaign (sample_runs/), or a fresh copy from synth if absent."""
    if (SAMPLE_RUNS / "campaign.toml").is_file():
        return SAMPLE_RUNS
    from tunnelred.demo.writer import write_demo_campaign

    dest = tmp_path_factory.mktemp("demo") / "campaign"
    write_demo_campaign(dest)
    return dest


@pytest.fixture(scope="session")
def demo_results(demo_campaign_dir, tmp_path_factory):
    """The demo campaign reduced once for the whole session (two worker processes)."""
    from tunnelred.pipeline.campaign import reduce_campaign

    out = tmp_path_factory.mktemp("demo_out") / "out"
    return reduce_campaign(demo_campaign_dir, out, workers=2, progress=False)


@pytest.fixture(scope="session")
def demo_truth(demo_campaign_dir):
    """synth's truth.csv of the demo campaign, indexed by run."""
    import pandas as pd

    return pd.read_csv(demo_campaign_dir / "truth.csv", keep_default_na=False).set_index("run")


@pytest.fixture(scope="session")
def reduced(tmp_path_factory):
    """(campaign folder, output folder) of a small synthetic campaign, reduced once a session."""
    from tunnelred.demo.spec import Fault, demo_spec
    from tunnelred.demo.writer import make_campaign
    from tunnelred.pipeline.campaign import reduce_campaign

    root = tmp_path_factory.mktemp("small")
    demo = demo_spec()
    plates = demo.configurations[0].label
    spec = replace(
        demo,
        speeds=(6.0, 12.0),
        spin_ratios_up=(0.0, 1.0, 2.0, 3.0),
        spin_ratios_down=(1.5,),
        pressure_speeds=(12.0,),
        pressure_spin_ratios=(0.0, 1.0, 2.0),
        tare_rpms=(500.0, 2000.0, 4000.0, 6000.0),
        repeat_point=None,
        repeat_count=0,
        faults=(Fault("spin_scatter", plates, 12.0, 3.0, 0.05),),
        data_duration=3.0,
        wind_off_duration=1.0,
    )
    make_campaign(root / "campaign", spec)
    reduce_campaign(root / "campaign", root / "out", workers=2, progress=False)
    return root / "campaign", root / "out"


@pytest.fixture(scope="module")
def provisional_results(small_campaign, tmp_path_factory) -> Path:
    """A results folder as the watch leaves it mid-test: the small campaign without its
    closing zero Z003, R001 and R002 (which name it) reduced provisionally from Z002 alone,
    R003 and R004 (here naming Z002 only) final."""
    from tunnelred.pipeline.campaign import reduce_campaign

    root = tmp_path_factory.mktemp("provisional") / "campaign"
    shutil.copytree(small_campaign, root)
    rows = (root / "runs.csv").read_text(encoding="utf-8").splitlines()
    rows = [r for r in rows if not r.startswith("Z003,")]
    rows = [r.replace(",Z002;Z003,", ",Z002,") if r[:4] in ("R003", "R004") else r for r in rows]
    (root / "runs.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    out = root.parent / "out"
    reduce_campaign(root, out, workers=1, progress=False, provisional=True, figures=False)
    return out
