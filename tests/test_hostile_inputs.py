"""Hostile and careless inputs: each ends in one message with its file, never a hang or traceback.

campaign.toml, runs.csv and the logs are replaced, in a copy of a small synthetic campaign
(tunnelred.demo), by FIFOs, devices, folders, links, oversized or pathological files, and
`tunnelred check` / `reduce` must refuse them with a message naming the file (docs/input-format.md,
"Limits and refusals"). Every test is bounded: in-process ones by an alarm, the FIFO and
/dev/zero cases by a subprocess timeout.
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from tunnelred.cli import main
from tunnelred.common.errors import MAX_PROBLEMS_PER_FILE, InputError
from tunnelred.inputs import files
from tunnelred.inputs.config import MAX_CP_BINS
from tunnelred.inputs.readers import open_campaign
from tunnelred.inputs.units import conversion, parse_quantity
from tunnelred.pipeline.campaign import reduce_campaign

REPO = Path(__file__).resolve().parents[1]
TUNNEL = "logs/R001_tunnel.csv"
SECONDS = 60  # no test here should come near this


@pytest.fixture(autouse=True)
def _bounded():
    """Fail a test that runs longer than SECONDS instead of letting it hang CI."""

    def expire(signum, frame):
        raise TimeoutError(f"test ran over {SECONDS} s")

    previous = signal.signal(signal.SIGALRM, expire)
    signal.alarm(SECONDS)
    yield
    signal.alarm(0)
    signal.signal(signal.SIGALRM, previous)


@pytest.fixture
def camp(small_campaign_copy) -> Path:
    return small_campaign_copy


def check(root: Path, capsys) -> tuple[int, str]:
    status = main(["check", str(root)])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return status, out + err


def problems(root: Path) -> list:
    try:
        return open_campaign(root, check_logs=True).problems
    except InputError as exc:
        return exc.problems


def lines_of(path: Path) -> list[str]:
    return path.read_text(encoding="utf-8").splitlines()


def write_lines(path: Path, lines: list[str]) -> None:
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def set_cell(path: Path, row: int, column: int, value: str) -> None:
    lines = lines_of(path)
    cells = lines[row].split(",")
    cells[column] = value
    lines[row] = ",".join(cells)
    write_lines(path, lines)


def in_toml(root: Path, old: str, new: str) -> None:
    path = root / "campaign.toml"
    text = path.read_text(encoding="utf-8")
    assert old in text
    path.write_text(text.replace(old, new, 1), encoding="utf-8")


def run_cli(*args, timeout=60):
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run(
        [sys.executable, "-m", "tunnelred", *map(str, args)],
        capture_output=True,
        text=True,
        env=env,
        timeout=timeout,
    )


# ------------------------------------------------------------------ item 6: what a file may be


@pytest.mark.parametrize("name", ["campaign.toml", "runs.csv", TUNNEL])
@pytest.mark.parametrize("kind", ["fifo", "dev-zero"])
def test_fifo_and_dev_zero_are_refused_under_a_timeout(camp, tmp_path, name, kind):
    # before: a FIFO as campaign.toml or runs.csv made check and reduce wait for ever, and a link
    # to /dev/zero was read until memory ran out
    path = camp / name
    path.unlink()
    if kind == "fifo":
        os.mkfifo(path)
    else:
        path.symlink_to("/dev/zero")
    for command in (["check", camp], ["reduce", camp, "-o", tmp_path / "out", "--quiet"]):
        done = run_cli(*command, timeout=60)  # a hang fails here with TimeoutExpired
        text = done.stdout + done.stderr
        assert "Traceback" not in text
        assert done.returncode in (1, 2)
        assert name in text
        assert ("FIFO" in text) if kind == "fifo" else ("outside the folder" in text)


def test_a_device_is_refused_from_stat_before_it_is_opened(monkeypatch):
    opened = []
    monkeypatch.setattr(files.os, "open", lambda *a, **k: opened.append(a) or 1 / 0)
    refused = files.read_regular(Path("/dev/zero"), files.MAX_LOG_BYTES, name="zero")
    assert isinstance(refused, files.Refusal) and "character device" in refused.found
    assert opened == []


@pytest.mark.parametrize("name", ["campaign.toml", "runs.csv", TUNNEL])
def test_a_folder_in_place_of_a_file_is_refused(camp, capsys, name):
    (camp / name).unlink()
    (camp / name).mkdir()
    status, out = check(camp, capsys)
    assert status == 1
    assert f"'{name}', a folder" in out


@pytest.mark.parametrize("name", ["campaign.toml", "runs.csv"])
def test_campaign_toml_and_runs_csv_follow_the_link_rules_of_logs(camp, tmp_path, capsys, name):
    elsewhere = tmp_path / f"elsewhere-{name}"
    shutil.move(camp / name, elsewhere)
    (camp / name).symlink_to(elsewhere)
    status, out = check(camp, capsys)
    assert status == 1 and "a link that resolves outside the folder" in out
    # a link that stays inside the campaign is followed, as for logs
    (camp / name).unlink()
    (camp / "kept").mkdir()
    shutil.move(elsewhere, camp / "kept" / name)
    (camp / name).symlink_to(Path("kept") / name)
    assert check(camp, capsys)[0] == 0


@pytest.mark.parametrize(
    ("name", "limit"),
    [
        ("campaign.toml", files.MAX_CONFIG_BYTES),
        ("runs.csv", files.MAX_RUNS_BYTES),
        (TUNNEL, files.MAX_LOG_BYTES),
    ],
)
def test_files_over_their_size_limit_are_refused_unread(camp, capsys, name, limit):
    os.truncate(camp / name, limit + 1)  # sparse: no disk used, and never read
    status, out = check(camp, capsys)
    assert status == 1
    assert f"a file of at most {limit / 2**20:g} MiB" in out


def test_a_log_of_a_million_columns_gives_one_short_message(camp, capsys):
    # before: check printed 194 MB and used 5 GB
    columns = 10**6
    header = ",".join(f"c{i} [Pa]" for i in range(columns))
    (camp / TUNNEL).write_text(header + "\n" + ",".join(["1"] * columns) + "\n")
    status, out = check(camp, capsys)
    assert status == 1
    assert f"at most {files.MAX_COLUMNS} columns" in out and f"{columns} columns" in out
    assert len(out) < 5000


def test_problems_listed_per_file_are_bounded(camp, capsys):
    extra = 3 * MAX_PROBLEMS_PER_FILE
    lines = lines_of(camp / TUNNEL)
    lines = [lines[0] + "".join(f",x{i} [V]" for i in range(extra))] + [
        line + ",0" * extra for line in lines[1:]
    ]
    write_lines(camp / TUNNEL, lines)
    found = [p for p in problems(camp) if p.file == TUNNEL]
    assert len(found) == MAX_PROBLEMS_PER_FILE + 1
    assert found[-1].found == f"{extra - MAX_PROBLEMS_PER_FILE} more problems in this file"
    status, out = check(camp, capsys)
    assert status == 1 and "more problems in this file" in out


def test_a_runs_csv_cell_over_the_csv_field_limit_is_a_message(camp, capsys):
    import csv

    over = csv.field_size_limit() + 10
    text = (camp / "runs.csv").read_text()
    first_notes = '"wind off, not spinning"'
    (camp / "runs.csv").write_text(text.replace(first_notes, '"' + "n" * over + '"', 1))
    status, out = check(camp, capsys)
    assert status == 1
    assert "runs.csv:2" in out and f"cells of at most {files.MAX_CELL_CHARS} characters" in out
    assert len(out) < 5000


def test_a_long_runs_csv_cell_stops_its_row_only(camp):
    text = (camp / "runs.csv").read_text()
    notes = '"up sweep, nominal alpha 0"'
    (camp / "runs.csv").write_text(text.replace(notes, '"' + "n" * 10_000 + '"', 1))
    campaign = open_campaign(camp, check_logs=False)
    (problem,) = campaign.run_problems("R001")
    assert (problem.file, problem.column) == ("runs.csv", "notes")
    assert "10000 characters" in problem.found
    assert campaign.run_problems("R002") == []


@pytest.mark.parametrize("char", ["\x00", "\x1b", "\x7f"])
def test_a_control_character_in_a_runs_csv_cell_stops_its_row_only(camp, char):
    # before: a NUL (or an escape) in R001's notes was accepted without a word
    text = (camp / "runs.csv").read_text()
    notes = '"up sweep, nominal alpha 0"'
    (camp / "runs.csv").write_text(text.replace(notes, f'"up sweep,{char} nominal alpha 0"', 1))
    campaign = open_campaign(camp, check_logs=False)
    (problem,) = campaign.run_problems("R001")
    assert (problem.file, problem.line, problem.column) == ("runs.csv", 7, "notes")
    assert problem.found.startswith(f"U+{ord(char):04X}, a control character, at character 10")
    assert char not in problem.found  # the cell is quoted escaped (repr), never raw
    assert campaign.run_problems("R002") == []


def test_tabs_and_line_breaks_in_a_quoted_notes_cell_are_text(camp):
    text = (camp / "runs.csv").read_text()
    notes = '"up sweep, nominal alpha 0"'
    (camp / "runs.csv").write_text(text.replace(notes, '"up sweep,\tnominal\nalpha 0"', 1))
    campaign = open_campaign(camp, check_logs=False)
    assert campaign.run_problems("R001") == []
    assert campaign.runs["R001"].notes == "up sweep,\tnominal\nalpha 0"


def test_a_nul_in_a_log_path_is_a_message_not_an_internal_error(camp, capsys):
    # before: "internal error: ValueError: embedded null byte" (exit 2) from check
    text = (camp / "runs.csv").read_text()
    (camp / "runs.csv").write_text(text.replace(TUNNEL, TUNNEL.replace("_", "_\x00"), 1))
    status, out = check(camp, capsys)
    assert status == 1
    assert "internal error" not in out
    assert "runs.csv:7 [tunnel_log]" in out and "U+0000" in out


def test_a_nul_in_a_file_name_of_campaign_toml_is_a_message(camp, capsys):
    # TOML writes a NUL as the escape \u0000; before: an internal error (embedded null byte)
    in_toml(camp, 'photo = "', 'photo = "\\u0000')
    status, out = check(camp, capsys)
    assert status == 1
    assert "internal error" not in out
    assert "[model.photo]: expected a file name without a NUL character" in out


def test_a_log_header_cell_over_the_csv_field_limit_is_a_message(camp, capsys):
    import csv

    lines = lines_of(camp / TUNNEL)
    lines[0] += ",big" + "x" * csv.field_size_limit() + " [Pa]"
    write_lines(camp / TUNNEL, [lines[0]] + [line + ",0" for line in lines[1:]])
    status, out = check(camp, capsys)
    assert status == 1 and f"{TUNNEL}:1" in out and len(out) < 5000


@pytest.mark.parametrize(
    ("value", "accepted"), [(MAX_CP_BINS, True), (MAX_CP_BINS + 1, False), (10**7, False)]
)
def test_cp_bins_is_bounded(camp, value, accepted):
    in_toml(camp, "[reduction]", f"[reduction]\ncp_bins = {value}")
    found = [p for p in problems(camp) if p.column == "reduction.cp_bins"]
    assert (found == []) == accepted
    if not accepted:
        assert found[0].expected == f"an integer from 8 to {MAX_CP_BINS}"


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("x = " + "[" * 100_000 + "]" * 100_000, "nested"),
        ("x = " + "{a=" * 5000 + "1" + "}" * 5000, "nested"),
        ("x = 1" + "0" * 5000, "numbers of ordinary size"),
    ],
    ids=["deep-arrays", "deep-inline-tables", "5000-digit-integer"],
)
def test_pathological_toml_gives_a_message_with_the_file(camp, capsys, text, expected):
    in_toml(camp, "[tunnel]", "[tunnel]\n" + text)
    (problem,) = problems(camp)
    assert problem.file == "campaign.toml" and expected in problem.expected
    status, out = check(camp, capsys)
    assert status == 1 and len(out) < 5000


def test_a_quantity_beyond_floating_point_is_a_message(camp):
    in_toml(camp, 'height = "1000 mm"', "height = 1" + "0" * 400)
    in_toml(camp, "width = 0.75", 'width = "1e400 mm"')
    found = {p.column: p for p in problems(camp)}
    assert found["tunnel.height"].hint == "Write a finite number."
    assert found["tunnel.width"].hint == "Write a finite number."


# ------------------------------------------------------------------ item 7: difference units


@pytest.mark.parametrize("unit", ["delta_degC", "delta_degF", "Δcelsius", "delta_degRe"])
def test_an_absolute_temperature_refuses_a_difference_unit(camp, unit):
    # before: 'T [delta_degC]' was read as 19.8 K (pint gives a difference unit the dimension of
    # a temperature; a difference of 1 delta_degC is 1 K, pint docs, "Temperature conversion")
    lines = lines_of(camp / TUNNEL)
    lines[0] = lines[0].replace("T [degC]", f"T [{unit}]")
    write_lines(camp / TUNNEL, lines)
    (problem,) = problems(camp)
    assert (problem.file, problem.line, problem.column) == (TUNNEL, 1, "T")
    assert "a temperature difference" in problem.found and "degC" in problem.hint


def test_difference_units_stay_right_for_differences():
    # 1 delta_degF = 5/9 K by definition of the Fahrenheit degree (NIST SP 811, B.8)
    assert conversion("delta_degF", "temperature_difference").scale == pytest.approx(5 / 9)
    assert parse_quantity("0.5 delta_degC", "temperature_difference", file="f", key="k") == 0.5
    with pytest.raises(InputError, match="a temperature difference"):
        parse_quantity("20 delta_degC", "temperature", file="campaign.toml", key="x.T")


# ---------------------------------------------- item 8: what reduce would call internal


@pytest.mark.parametrize(
    "log", [TUNNEL, "logs/R001_balance.csv", "logs/R003_pressure.csv", "logs/Z002_balance.csv"]
)
def test_check_finds_a_one_row_log(camp, log):
    write_lines(camp / log, lines_of(camp / log)[:2])
    found = [p for p in problems(camp) if p.file == log]
    assert [(p.line, p.found) for p in found] == [(2, "1 row")]


@pytest.mark.parametrize("value", ["1" + "0" * 300, "1e300", "-1e13"])
def test_check_finds_values_too_large_to_reduce(camp, value):
    set_cell(camp / TUNNEL, 5, 1, value)
    (problem,) = problems(camp)
    assert (problem.file, problem.line, problem.column) == (TUNNEL, 6, "dp_pitot")
    assert "magnitude at most" in problem.expected


@pytest.mark.parametrize(
    ("column", "value", "expected"),
    [
        (9, "1" + "0" * 300, "a value of magnitude at most 1e+12 (SI)"),
        (10, "1e300", "a value of magnitude at most 1e+12 (SI)"),
        (9, "1e400", "a finite number"),
    ],
)
def test_check_finds_set_points_too_large_or_not_finite(camp, column, value, expected):
    set_cell(camp / "runs.csv", 7, column, value)  # R002's speed_set [m/s] or spin_set [rpm]
    (problem,) = problems(camp)
    assert (problem.file, problem.line) == ("runs.csv", 8)
    assert problem.column == ("speed_set", "spin_set")[column - 9]
    assert problem.expected == expected


def _add_pressure_with(root: Path, merges: dict[str, str]) -> None:
    lines = lines_of(root / "runs.csv")
    lines[0] = lines[0].replace(",notes", ",pressure_with,notes")
    for i, line in enumerate(lines[1:], start=1):
        head, notes = line.split(',"')
        lines[i] = f'{head},{merges.get(head.split(",")[0], "")},"{notes}'
    write_lines(root / "runs.csv", lines)


def test_check_finds_pressure_with_naming_its_own_run(camp):
    _add_pressure_with(camp, {"R003": "R003"})
    (problem,) = problems(camp)
    assert (problem.file, problem.column) == ("runs.csv", "pressure_with")
    assert "the run itself" in problem.found


def test_a_run_naming_itself_as_zero_is_the_one_problem_of_its_row(camp):
    # R001's zeros become "R001;Z002": only R001 is wrong, Z002 is a zero run and must pass
    set_cell(camp / "runs.csv", 6, 7, "R001;Z002")
    (problem,) = problems(camp)
    assert (problem.file, problem.line, problem.column) == ("runs.csv", 7, "zero")
    assert problem.found == "'R001', the run itself"
    assert problem.expected == "the id of a zero run other than 'R001' itself"


def test_a_bad_reference_after_a_self_reference_keeps_its_own_reason(camp):
    # R002's tares become "R002;Z001": the second is wrong for its own reason (a zero run)
    set_cell(camp / "runs.csv", 7, 8, "R002;Z001")
    found = sorted((p.column, p.expected, p.found) for p in problems(camp))
    assert found == [
        ("tare", "the id of a tare run", "'Z001', a zero run"),
        ("tare", "the id of a tare run other than 'R002' itself", "'R002', the run itself"),
    ]


def test_check_finds_a_cycle_of_pressure_with(camp):
    shutil.copy(camp / "logs/R003_pressure.csv", camp / "logs/R004_pressure.csv")
    text = (camp / "runs.csv").read_text()
    old = "logs/R004_tunnel.csv,,"
    new = "logs/R004_tunnel.csv,logs/R004_pressure.csv,"
    (camp / "runs.csv").write_text(text.replace(old, new))
    _add_pressure_with(camp, {"R003": "R004", "R004": "R003"})
    found = problems(camp)
    assert sorted(p.found for p in found) == [
        "a cycle R003 → R004 → R003",
        "a cycle R004 → R003 → R004",
    ]


def test_a_problem_that_stops_every_run_stops_reduce_once(camp, tmp_path, capsys):
    # before: 84 failures with the message repeated, and empty results written
    in_toml(camp, 'blockage = "allen-vincenti"', 'blockage = "allen-vincent"')
    out = tmp_path / "out"
    status = main(["reduce", str(camp), "-o", str(out), "--quiet", "--workers", "1"])
    text = capsys.readouterr().out
    assert status == 2
    assert text.count("'allen-vincent'") == 1 and "nothing was written" in text
    assert not out.exists()


def test_an_unreadable_log_fails_its_runs_and_the_rest_reduce(camp, tmp_path, monkeypatch):
    log = camp / "logs/R002_balance.csv"
    if os.geteuid() == 0:
        # root reads through chmod 000: the refusal the kernel would give is emulated
        real = os.open

        def refusing(path, *args, **kwargs):
            if Path(path) == log:
                raise PermissionError(13, "Permission denied", str(path))
            return real(path, *args, **kwargs)

        monkeypatch.setattr(files.os, "open", refusing)
    else:
        log.chmod(0)
    try:
        results = reduce_campaign(camp, tmp_path / "out", workers=1, progress=False, figures=False)
    finally:
        log.chmod(0o644)
    assert results.failed == 1 and results.reduced == 3
    (row,) = results.failures.to_dict("records")
    assert (row["run"], row["file"]) == ("R002", "logs/R002_balance.csv")
    assert "Permission denied" in row["reason"]
