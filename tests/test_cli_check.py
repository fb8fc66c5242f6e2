"""The `tunnelred` command: check, demo, --help, --version."""

import re
from pathlib import Path

import pytest

from tunnelred import __version__
from tunnelred.cli import main

REPO = Path(__file__).resolve().parents[1]
BROKEN = REPO / "sample_runs" / "broken"

# Each broken file (or runs.csv line) and the line `check` must name for it; see
# sample_runs/broken/README.md.
BROKEN_LOCATIONS = [
    "logs/unit_wrong_dimension.csv:1 [dp_pitot]",
    "logs/unit_unknown.csv:1 [p_baro]",
    "logs/non_numeric.csv:4 [T]",
    "logs/nan.csv:5 [dp_pitot]",
    "logs/inf.csv:3 [RH]",
    "logs/time_repeated.csv:5 [time]",
    "logs/time_decreasing.csv:5 [time]",
    "logs/truncated.csv:6",
    "logs/empty.csv:",
    "logs/latin1.csv:1",
    "logs/tap_undeclared.csv:1 [tap04]",
    "logs/tap_missing.csv:1 [tap03]",
    "logs/column_duplicate.csv:1 [T]",
    "logs/column_missing.csv:1 [RH]",
    "runs.csv:18 [tunnel_log]",
    "runs.csv:19 [zero]",
    "runs.csv:20 [tare]",
]


def test_check_broken_lists_every_problem(capsys):
    status = main(["check", str(BROKEN)])
    out, err = capsys.readouterr()
    assert status == 1
    assert "Traceback" not in out + err
    for location in BROKEN_LOCATIONS:
        assert location in out, location
    # one problem per broken item: the showcase shows each kind once
    assert f"{len(BROKEN_LOCATIONS)} problems" in out


def test_check_good_campaign(campaign_dir, capsys):
    assert main(["check", str(campaign_dir)]) == 0
    out = capsys.readouterr().out
    assert "Fixture campaign — Test tunnel" in out
    assert "runs: 4 (1 zero, 1 tare, 2 data)" in out
    assert "config A: 1 zero, 1 tare, 2 data" in out
    # the fixture logs 50 rows at 0.01 s: 100 Hz over 0.49 s
    assert re.search(r"tunnel +2 files; rate 100 Hz; duration 0.49 s; rows 50", out)
    assert "taps: 4 (tap01, tap02, tap03, tap04)" in out
    assert "no problems found" in out


def test_check_unusable_campaign_exits_1(campaign_dir, capsys):
    (campaign_dir / "campaign.toml").write_text("[campaign\n")
    assert main(["check", str(campaign_dir)]) == 1
    out, err = capsys.readouterr()
    assert "campaign.toml:1" in out and "Traceback" not in out + err


def test_check_missing_folder_is_usage_error(tmp_path, capsys):
    assert main(["check", str(tmp_path / "nowhere")]) == 2
    assert "no such folder" in capsys.readouterr().err


@pytest.mark.parametrize("argv", [[], ["check"], ["nonsense"], ["check", "a", "b"]])
def test_usage_errors(argv, capsys):
    assert main(argv) == 2


@pytest.mark.parametrize("argv", [["--help"], ["check", "--help"], ["demo", "--help"]])
def test_help_explains_itself(argv, capsys):
    assert main(argv) == 0
    out = capsys.readouterr().out
    assert "example" in out


def test_version(capsys):
    assert main(["--version"]) == 0
    assert __version__ in capsys.readouterr().out


def test_demo_refuses_non_empty_dest(tmp_path, capsys):
    (tmp_path / "keep.txt").write_text("mine")
    assert main(["demo", str(tmp_path)]) == 2
    assert "--force" in capsys.readouterr().err
    assert (tmp_path / "keep.txt").read_text() == "mine"


def test_demo_writes_a_campaign_that_passes_check(tmp_path, capsys):
    synth = pytest.importorskip("tunnelred.demo.writer")
    if not hasattr(synth, "write_demo_campaign"):
        pytest.skip("tunnelred.demo.writer.write_demo_campaign is not written yet")
    dest = tmp_path / "demo"
    assert main(["demo", str(dest), "--seed", "1"]) == 0
    assert main(["check", str(dest)]) == 0, capsys.readouterr().out


@pytest.mark.skipif(not (REPO / "sample_runs" / "campaign.toml").exists(),
                    reason="the demo campaign in sample_runs/ is not written yet")  # fmt: skip
def test_sample_campaign_passes_check(capsys):
    assert main(["check", str(REPO / "sample_runs")]) == 0, capsys.readouterr().out


def test_watch_help_states_the_live_defaults(capsys):
    # The help text is written without importing tunnelred.live.watcher; it must say what live uses.
    from tunnelred import cli
    from tunnelred.live import watcher as live

    assert float(cli._SETTLE_HELP) == live.DEFAULT_SETTLE
    assert float(cli._POLL_HELP) == live.DEFAULT_POLL
    assert cli.main(["watch", "--help"]) == 0
    assert f"default {cli._SETTLE_HELP} s" in capsys.readouterr().out
