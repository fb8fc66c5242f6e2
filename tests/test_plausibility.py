"""Plausibility: impossible air data and spin rates are input problems; set points are flags.

The cases are those of issue 15: a header naming the wrong unit over valid-looking numbers. Each
is planted in a copy of a small campaign (tests/conftest.py) or of the demo, and ``check`` (or
``reduce``) must name the file, the line and the quantity. The ranges themselves are sourced in
tunnelred/engine/plausibility.py (RANGES); the tests put each planted value far outside them.
"""

from __future__ import annotations

import re
import shutil

import pytest

from tunnelred.cli import main
from tunnelred.common.errors import InputError
from tunnelred.engine import plausibility
from tunnelred.engine.reduction import reduce_run
from tunnelred.inputs.readers import open_campaign


def _relabel(path, old: str, new: str) -> None:
    lines = path.read_text(encoding="utf-8").split("\n", 1)
    assert old in lines[0]
    path.write_text(lines[0].replace(old, new) + "\n" + lines[1], encoding="utf-8")


def _check(root, capsys) -> tuple[int, str]:
    status = main(["check", str(root)])
    return status, capsys.readouterr().out


def _density_when_relabelled(
    campaign_dir, capsys, column: str, unit: str, wrong_unit: str, shown: str
) -> float:
    """``check`` after the tunnel log's ``column`` header says ``wrong_unit`` over data in
    ``unit``: it fails, names line 2 of that file, the column and the value ``shown``, and
    reports the air density found outside its range (returned)."""
    _relabel(campaign_dir / "logs/d1_tun.csv", f"{column} [{unit}]", f"{column} [{wrong_unit}]")
    status, out = _check(campaign_dir, capsys)
    assert status == 1
    assert f"logs/d1_tun.csv:2 [{column}]" in out and shown in out
    density = re.search(r"air density from 0.5 to 1.7 kg/m\^3; found ([\d.]+) kg/m\^3", out)
    assert density
    return float(density.group(1))


def test_fixture_campaign_is_plausible(campaign_dir):
    assert plausibility.campaign_problems(open_campaign(campaign_dir)) == []


def test_kelvin_header_on_celsius_data(campaign_dir, capsys):
    # 20 degC logged under [K]: 20 K, and ideal-gas rho = p / (R T) = 101325 / (287.05 * 20)
    # = 17.6 kg/m3 (R of dry air, ICAO Doc 7488/3): both far outside RANGES. (The CIPM-2007
    # moist-air formula, used far outside its range here, gives more; the order is the point.)
    density = _density_when_relabelled(campaign_dir, capsys, "T", "degC", "K", "20 K")
    assert density > 15.0


def test_pascal_header_on_hectopascal_data(campaign_dir, capsys):
    # 1013.25 hPa logged under [Pa]: 1013 Pa, rho = 1013.25 / (287.05 * 293.15) = 0.0120 kg/m3
    # for dry air (ideal gas); the 45 % humidity, at 23 hPa of vapour pressure, is then most of
    # the gas and lowers it further (water's R is 461.5 J/(kg K)).
    density = _density_when_relabelled(campaign_dir, capsys, "p_baro", "hPa", "Pa", "1013 Pa")
    assert 0.0 < density < 0.013


def test_millibar_header_on_pascal_data_past_the_incompressible_range(campaign_dir, capsys):
    # 240 Pa logged under [mbar]: q = 24 kPa, U = sqrt(2 q / rho) = 200 m/s, Mach 0.58 at
    # 20 degC (a = 343 m/s, ICAO Doc 7488/3), beyond the incompressible corrections' 0.3.
    _relabel(campaign_dir / "logs/d1_tun.csv", "dp_pitot [Pa]", "dp_pitot [mbar]")
    status, out = _check(campaign_dir, capsys)
    assert status == 1
    assert "logs/d1_tun.csv:2" in out and "Mach number below 0.3" in out


def test_spin_rate_above_the_models_rating(campaign_dir, capsys):
    toml = campaign_dir / "campaign.toml"
    toml.write_text(
        toml.read_text().replace("span = 0.8\n", 'span = 0.8\nmax_spin_rate = "500 rpm"\n')
    )
    status, out = _check(campaign_dir, capsys)
    assert status == 1
    # The fixture's tachometer reads 600 rpm in the tare run and the data run.
    for log in ("logs/t1_bal.csv:2 [speed]", "logs/d1_bal.csv:2 [speed]"):
        assert log in out
    assert "600 rpm from the tachometer" in out and "rated 500 rpm" in out
    toml.write_text(toml.read_text().replace('"500 rpm"', '"700 rpm"'))
    assert _check(campaign_dir, capsys)[0] == 0


@pytest.fixture
def demo_copy(tmp_path, demo_campaign_dir):
    root = tmp_path / "demo"
    shutil.copytree(demo_campaign_dir, root, ignore=shutil.ignore_patterns("broken"))
    return root


def test_reduce_refuses_an_implausible_run(demo_copy):
    _relabel(demo_copy / "logs/R002_tunnel.csv", "T [degC]", "T [K]")
    with pytest.raises(InputError) as info:
        reduce_run(open_campaign(demo_copy), "R002")
    located = {(p.file, p.line, p.column) for p in info.value.problems}
    assert ("logs/R002_tunnel.csv", 2, "T") in located


def test_millibar_on_the_demo_misses_the_set_speed(demo_copy, demo_campaign_dir):
    # The case: R002 is set to 6 m/s; its 21 Pa pitot reading under [mbar] is 2.1 kPa,
    # U = sqrt(2 * 2135 / 1.19) = 60 m/s (Bernoulli), Mach 0.18: plausible air, but ten times
    # the set speed, which the speed_setpoint flag reports.
    _relabel(demo_copy / "logs/R002_tunnel.csv", "dp_pitot [Pa]", "dp_pitot [mbar]")
    campaign = open_campaign(demo_copy)
    assert plausibility.campaign_problems(campaign) == []
    result = reduce_run(campaign, "R002")
    names = {f.name: f for f in result.flags}
    assert "speed_setpoint" in names
    assert result.values["U_uncorrected"] == pytest.approx(60.0, rel=0.05)
    assert "from the set 6 m/s" in names["speed_setpoint"].reason
    clean = reduce_run(open_campaign(demo_campaign_dir), "R002")
    assert not clean.flags
