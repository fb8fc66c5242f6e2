"""The command under bad arguments and hostile text: one message, the documented exit status.

Issue 14 items 8 and 9: every bad ``--dask`` address, ``report`` and ``compare`` on a folder
that holds no results or a corrupt results.nc, a reader that goes away (``| head``), and
control characters in strings from files, which must never reach the terminal raw.
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from tunnelred.cli import main
from tunnelred.common.text import printable
from tunnelred.live.watcher import RunLine, Status, render_lines

REPO = Path(__file__).resolve().parents[1]

# ESC ] 0 ; ... BEL sets a terminal's window title (OSC 0, ECMA-48 §8.3.89 and xterm's control
# sequences); ESC [ 2 J erases the screen (ED, ECMA-48 §8.3.39); U+009B is the one-byte CSI of
# the C1 set (ECMA-48 §5.3); U+202E reorders the text after it (Unicode UAX #9, RLO).
HOSTILE = "RS\x1b]0;owned\x07-12\x1b[2J \x9b31m \u202eevil \r\n forged"


def _no_controls(text: str) -> None:
    for char in ("\x1b", "\x07", "\x9b", "\u202e", "\r"):
        assert char not in text, repr(char)


def test_printable_escapes_controls_and_keeps_text():
    shown = printable(HOSTILE)
    _no_controls(shown)
    assert "\n" not in shown
    assert shown == ("RS\\x1b]0;owned\\x07-12\\x1b[2J \\x9b31m \\u202eevil \\r\\n forged")
    assert printable("α = 2.0, CL ± u, Ø 60 mm, tap04") == "α = 2.0, CL ± u, Ø 60 mm, tap04"
    assert printable(Path("a/b")) == "a/b"
    # an undecodable byte of a file name (surrogateescape) cannot even be encoded for output
    assert printable(os.fsdecode(b"logs/\xff.csv")) == "logs/\\udcff.csv"


def _hostile_campaign(campaign_dir: Path) -> Path:
    toml = campaign_dir / "campaign.toml"
    text = toml.read_text(encoding="utf-8")
    escaped = HOSTILE.encode("unicode_escape").decode("ascii").replace("\\x", "\\u00")
    lines = [
        f'title = "{escaped}"' if line.startswith("title") else line for line in text.splitlines()
    ]
    toml.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return campaign_dir


def test_check_and_reduce_escape_the_title(campaign_dir, tmp_path, capsys):
    _hostile_campaign(campaign_dir)
    assert main(["check", str(campaign_dir)]) == 0
    out, err = capsys.readouterr()
    assert "RS\\x1b]0;owned\\x07-12" in out
    _no_controls(out + err)
    assert main(["reduce", str(campaign_dir), "-o", str(tmp_path / "out"), "--quiet",
                 "--workers", "1"]) == 0  # fmt: skip
    out, err = capsys.readouterr()
    assert "RS\\x1b]0;owned\\x07-12" in out
    _no_controls(out + err)


def test_problems_escape_the_header_cells_they_quote(campaign_dir, capsys):
    runs = campaign_dir / "runs.csv"
    lines = runs.read_text(encoding="utf-8").splitlines()
    lines[0] = lines[0] + ",\x1b]0;owned\x07"
    runs.write_text("\n".join(lines) + "\n", encoding="utf-8")
    main(["check", str(campaign_dir)])
    out, err = capsys.readouterr()
    _no_controls(out + err)


def test_watch_lines_escape_run_ids_reasons_and_titles():
    status = Status(
        HOSTILE,
        "camp\x1b[2J",
        "out",
        runs=(RunLine("R\x1b]0;x\x07", "failed", "A\x1b[31m", reason="bad \x9b row"),),
        problems=("runs.csv: \x1b[2J",),
        note="note \x07",
    )
    for text, _ in render_lines(status):
        _no_controls(text)
        assert "\n" not in text


# ---------------------------------------------------------------------------------------------
# --dask


@pytest.mark.parametrize("address", ["xyz:::", "foo", "tcp://host:abc", "http://x:1", "tcp://:1"])
def test_malformed_dask_address_is_refused_at_once(campaign_dir, tmp_path, capsys, address):
    pytest.importorskip("distributed")
    started = time.monotonic()
    status = main(["reduce", str(campaign_dir), "-o", str(tmp_path / "out"), "--dask", address])
    out, err = capsys.readouterr()
    assert status == 2
    assert time.monotonic() - started < 5
    assert "is not a scheduler address" in err and "Traceback" not in out + err
    assert len(err.strip().splitlines()) == 1
    assert not (tmp_path / "out").exists()  # refused before OUT was made


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_dask_address_where_nothing_listens(campaign_dir, tmp_path, capsys):
    pytest.importorskip("distributed")
    address = f"tcp://127.0.0.1:{_free_port()}"
    started = time.monotonic()
    status = main(["reduce", str(campaign_dir), "-o", str(tmp_path / "out"), "--dask", address])
    out, err = capsys.readouterr()
    assert status == 2 and time.monotonic() - started < 10
    assert "no dask scheduler answers" in err and "Traceback" not in out + err
    assert not (tmp_path / "out").exists()


def test_dask_address_of_something_that_is_not_a_scheduler(campaign_dir, tmp_path, capsys):
    """A port that accepts and says nothing: dask's own client waited there until the peer
    closed; the command gives up after its short timeout."""
    pytest.importorskip("distributed")
    server = socket.socket()
    server.bind(("127.0.0.1", 0))
    server.listen(4)
    accepted: list = []
    stop = threading.Event()

    def serve():
        server.settimeout(0.2)
        while not stop.is_set():
            try:
                accepted.append(server.accept()[0])
            except OSError:
                pass

    thread = threading.Thread(target=serve, daemon=True)
    thread.start()
    try:
        address = f"tcp://127.0.0.1:{server.getsockname()[1]}"
        started = time.monotonic()
        status = main(["reduce", str(campaign_dir), "-o", str(tmp_path / "o"), "--dask", address])
        elapsed = time.monotonic() - started
    finally:
        stop.set()
        thread.join()
        for conn in accepted:
            conn.close()
        server.close()
    out, err = capsys.readouterr()
    assert status == 2 and elapsed < 15
    assert "does not answer as a dask scheduler" in err and "Traceback" not in out + err


# ---------------------------------------------------------------------------------------------
# report and compare on folders without results


@pytest.mark.parametrize("command", ["report", "compare"])
def test_report_and_compare_on_a_campaign_folder(campaign_dir, tmp_path, capsys, command):
    argv = [command, str(campaign_dir)] + (["-o", str(tmp_path / "c")] * (command == "compare"))
    assert main(argv) == 1
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    assert "Reduce the campaign first" in out
    assert not list(campaign_dir.glob("*.pdf")) and not (tmp_path / "c").exists()


@pytest.mark.parametrize("command", ["report", "compare"])
def test_report_and_compare_on_a_corrupt_results_file(tmp_path, capsys, command):
    folder = tmp_path / "out"
    folder.mkdir()
    (folder / "results.nc").write_bytes(b"\x89HDF\r\n\x1a\n" + b"\0" * 500)  # a cut-off file
    argv = [command, str(folder)] + (["-o", str(tmp_path / "c")] * (command == "compare"))
    assert main(argv) == 1
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    assert "results.nc" in out and "cannot be read" in out
    assert not (folder / "report.pdf").exists()


@pytest.mark.parametrize(
    ("command", "target"),
    [
        ("report", "runs.csv"),  # before: the PDF replaced runs.csv
        ("report", "logs/report.pdf"),
        ("export", "results.xlsx"),
        ("compare", "comparison"),
    ],
)
def test_nothing_is_written_into_a_campaign_folder(reduced, tmp_path, capsys, command, target):
    campaign_dir, out = reduced
    campaign = tmp_path / "campaign"
    (campaign / "logs").mkdir(parents=True)
    for name in ("campaign.toml", "runs.csv"):
        shutil.copy(campaign_dir / name, campaign / name)
    before = {p: p.read_bytes() for p in campaign.rglob("*") if p.is_file()}
    option = {"report": "-o", "export": "--xlsx", "compare": "-o"}[command]
    assert main([command, str(out), option, str(campaign / target)]) == 2
    _, err = capsys.readouterr()
    assert "Traceback" not in err
    assert "campaign folder" in err or "must end in .pdf" in err
    assert {p: p.read_bytes() for p in campaign.rglob("*") if p.is_file()} == before


def test_a_report_is_a_pdf(reduced, tmp_path, capsys):
    _, out = reduced
    assert main(["report", str(out), "-o", str(tmp_path / "entry.csv")]) == 2
    assert "the report's name must end in .pdf" in capsys.readouterr().err
    assert not (tmp_path / "entry.csv").exists()


# ---------------------------------------------------------------------------------------------
# | head


def test_a_reader_that_goes_away_ends_the_command_quietly(campaign_dir):
    """`tunnelred check CAMPAIGN | head -0`: the pipe is closed before anything is written."""
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen(
        [sys.executable, "-m", "tunnelred", "check", str(campaign_dir)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        env=env,
    )
    proc.stdout.close()  # the reader has gone
    err = proc.stderr.read()
    proc.stderr.close()
    assert proc.wait(timeout=120) == 141
    assert err == b""


def test_an_internal_error_is_one_message(monkeypatch, campaign_dir, capsys):
    from tunnelred.inputs import readers

    def broken(*args, **kwargs):
        raise ZeroDivisionError("planted")

    monkeypatch.setattr(readers, "open_campaign", broken)
    monkeypatch.delenv("TUNNELRED_TRACEBACK", raising=False)
    assert main(["check", str(campaign_dir)]) == 1
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    assert "internal error: ZeroDivisionError: planted" in err


# ---------------------------------------------------------------------------------------------
# --monte-carlo


@pytest.mark.parametrize("draws", ["1", "0", "-5", "1000001", "99999999999", "1e6", "many"])
def test_monte_carlo_out_of_range_is_refused_at_once(campaign_dir, tmp_path, capsys, draws):
    # 99999999999 draws never ended (stopped after 120 s); 1 draw was an internal error per run
    started = time.monotonic()
    out_dir = tmp_path / "out"
    status = main(["reduce", str(campaign_dir), "-o", str(out_dir), "--monte-carlo", draws])
    out, err = capsys.readouterr()
    assert status == 2 and time.monotonic() - started < 5
    assert "--monte-carlo" in err and "Traceback" not in out + err
    assert not out_dir.exists()


def test_monte_carlo_bound_is_stated_and_kept_by_the_pipeline(campaign_dir, capsys):
    from tunnelred import cli
    from tunnelred.pipeline import campaign as engine

    assert cli._MAX_DRAWS_HELP == engine.MAX_MONTE_CARLO_DRAWS
    assert cli.main(["reduce", "--help"]) == 0
    help_text = " ".join(capsys.readouterr().out.split())
    assert f"N is 2 to {cli._MAX_DRAWS_HELP}" in help_text and "JCGM 101 §7.2.2" in help_text
    with pytest.raises(ValueError, match="monte_carlo takes 0"):
        engine.reduce_campaign(campaign_dir, None, monte_carlo=engine.MAX_MONTE_CARLO_DRAWS + 1)
