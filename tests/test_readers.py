"""Readers: the campaign folder and its CSV logs, good and bad."""

import hashlib
import math
import os

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tunnelred.common.errors import InputError
from tunnelred.inputs.readers import STREAMS, open_campaign, read_log

TUNNEL = ["dp_pitot", "T", "p_baro", "RH"]
HEADER = "time [s],dp_pitot [Pa],T [degC],p_baro [hPa],RH [%]\n"
ROWS = ["0.0,240.0,20.0,1013.25,45", "0.1,241.0,20.1,1013.20,46", "0.2,239.5,20.2,1013.1,45"]
GOOD = HEADER + "\n".join(ROWS) + "\n"


def write(tmp_path, text, name="log.csv"):
    path = tmp_path / name
    path.write_bytes(text.encode("utf-8") if isinstance(text, str) else text)
    return path


def problems_of(tmp_path, text, expected=TUNNEL, optional=("speed", "angle"), stream="tunnel"):
    write(tmp_path, text)
    with pytest.raises(InputError) as info:
        read_log("log.csv", root=tmp_path, stream=stream, expected_columns=expected,
                 optional_columns=optional)  # fmt: skip
    assert all(p.file == "log.csv" for p in info.value.problems)
    return info.value.problems


def only(tmp_path, text, **kw):
    found = problems_of(tmp_path, text, **kw)
    assert len(found) == 1, found
    return found[0]


# ---------------------------------------------------------------------------- good input


def test_good_log_in_si(tmp_path):
    write(tmp_path, GOOD)
    ds = read_log("log.csv", root=tmp_path, stream="tunnel", expected_columns=TUNNEL)
    assert list(ds.data_vars) == TUNNEL
    assert ds["time"].values.tolist() == [0.0, 0.1, 0.2]
    # SI Brochure 9th ed.: T/K = t/°C + 273.15 exactly; 1 hPa = 100 Pa by definition
    assert ds["T"].values[0] == pytest.approx(293.15, abs=1e-12)
    assert ds["p_baro"].values[0] == pytest.approx(101325.0, abs=1e-9)
    assert ds["RH"].values.tolist() == pytest.approx([0.45, 0.46, 0.45])
    assert ds["T"].attrs["units"] == "K" and ds["RH"].attrs["units"] == "1"
    assert ds.attrs["file"] == "log.csv" and ds.attrs["stream"] == "tunnel"
    assert ds.attrs["sha256"] == hashlib.sha256(GOOD.encode()).hexdigest()


@pytest.mark.parametrize(
    "text",
    [
        "\ufeff" + GOOD,  # byte-order mark
        GOOD.replace("\n", "\r\n"),  # Windows line ends
        GOOD.rstrip("\n"),  # no final newline, full last row
        GOOD + "\n\n",  # trailing blank lines
        GOOD.replace("240.0", '"240.0"'),  # quoted numbers
    ],
)
def test_accepted_variants(tmp_path, text):
    write(tmp_path, text)
    ds = read_log("log.csv", root=tmp_path, stream="tunnel", expected_columns=TUNNEL)
    assert ds.sizes["time"] == 3
    assert ds["dp_pitot"].values[0] == 240.0


def test_speed_rpm_to_rad_per_second(tmp_path):
    write(tmp_path, "time [ms],speed [rpm],angle [rad]\n0,600,0\n10,600,3.14159265358979\n")
    ds = read_log("log.csv", root=tmp_path, stream="balance", expected_columns=["speed", "angle"])
    assert ds["time"].values[1] == pytest.approx(0.01)
    assert ds["speed"].values[0] == pytest.approx(600 * 2 * math.pi / 60)  # by definition
    assert ds["angle"].values[1] == pytest.approx(180.0)
    assert ds["speed"].attrs["units"] == "rad s-1"


def test_open_campaign_good(campaign_dir):
    campaign = open_campaign(campaign_dir)
    assert campaign.problems == []
    assert [r.run for r in campaign.data_runs()] == ["d1", "d2"]
    assert [r.run for r in campaign.zero_runs()] == ["z1"]
    assert [r.run for r in campaign.tare_runs()] == ["t1"]
    d1 = campaign.runs["d1"]
    assert d1.zero == ("z1",) and d1.tare == ("t1",)
    assert d1.speed_set == 20.0 and d1.spin_set == 600.0 and d1.line == 4
    assert d1.logs == {"balance": "logs/d1_bal.csv", "pressure": "logs/d1_p.csv",
                       "tunnel": "logs/d1_tun.csv"}  # fmt: skip
    for rel, sha in campaign.file_hashes.items():
        assert sha == hashlib.sha256((campaign_dir / rel).read_bytes()).hexdigest()
    assert set(campaign.file_hashes) >= {"campaign.toml", "runs.csv", "logs/d2_all.csv"}
    assert campaign.log_info["logs/d1_tun.csv"].rows == 50
    assert "Fixture campaign" in repr(campaign) and "<table>" in campaign._repr_html_()


def test_load_run(campaign_dir):
    campaign = open_campaign(campaign_dir, check_logs=False)
    run = campaign.load_run("d1")
    assert set(run.streams) == set(STREAMS)
    bal = run.streams["balance"]
    assert bal["N2"].attrs["units"] == "V"  # logged in mV
    assert set(bal.data_vars) == {"N1", "N2", "N3", "speed"}
    assert run.streams["pressure"].attrs["stream"] == "pressure"
    assert campaign.run_problems("d1") == []


def test_one_file_several_streams(campaign_dir):
    run = open_campaign(campaign_dir).load_run("d2")
    assert {s: ds.attrs["file"] for s, ds in run.streams.items()} == dict.fromkeys(
        STREAMS, "logs/d2_all.csv"
    )
    assert set(run.streams["tunnel"].data_vars) == set(TUNNEL)
    assert set(run.streams["pressure"].data_vars) == {"tap01", "tap02", "tap03", "tap04"}
    # one parse: the streams share the file's arrays
    assert np.shares_memory(run.streams["balance"]["time"].values,
                            run.streams["tunnel"]["time"].values)  # fmt: skip


# ---------------------------------------------------------------------------- bad logs


@pytest.mark.parametrize(
    ("text", "line", "column", "found"),
    [
        (HEADER.replace("[Pa]", "[V]") + ROWS[0] + "\n", 1, "dp_pitot", "voltage"),
        (HEADER.replace("[hPa]", "[hPascal]") + ROWS[0] + "\n", 1, "p_baro", "unknown unit"),
        (HEADER.replace(" [degC]", "") + ROWS[0] + "\n", 1, "T", "no unit"),
        (HEADER.replace("RH [%]", "RH [deg]") + ROWS[0] + "\n", 1, "RH", "angle"),
        (HEADER.replace(",RH [%]", "") + "0,1,2,3\n", 1, "RH", "none"),
        (HEADER.replace("\n", ",T [K]\n") + "0,1,2,3,4,5\n", 1, "T", "columns 3 and 6"),
        (HEADER.replace("\n", ",tap99 [Pa]\n") + "0,1,2,3,4,5\n", 1, "tap99", "extra"),
        (HEADER + ROWS[0] + "\n" + ROWS[1].replace("20.1", "n/a") + "\n", 3, "T", "'n/a'"),
        (HEADER + ROWS[0] + "\n" + ROWS[1].replace("241.0", "1,0") + "\n", 3, None, "6"),
        (HEADER + ROWS[0] + "\n" + ROWS[1].replace("241.0", "NaN") + "\n", 3, "dp_pitot", "NaN"),
        (HEADER + ROWS[0] + "\n" + ROWS[1].replace(",46", ",inf") + "\n", 3, "RH", "inf"),
        (HEADER + ROWS[0] + "\n" + ROWS[0] + "\n", 3, "time", "repeated"),
        (HEADER + ROWS[1] + "\n" + ROWS[0] + "\n", 3, "time", "decreasing"),
        (HEADER + ROWS[0] + "\n" + ROWS[1][:9], 3, None, "2"),  # truncated last line
        (HEADER + ROWS[0] + "\n\n" + ROWS[1] + "\n", 3, None, "blank"),
        (HEADER + ROWS[0] + "\n" + ROWS[1].replace("20.1", "-300") + "\n", 3, "T", "-26.85"),
        (HEADER + ROWS[0] + "\n" + ROWS[1].replace(",46", ",146") + "\n", 3, "RH", "1.46"),
        (HEADER, 2, None, "header only"),
    ],
)
def test_bad_log(tmp_path, text, line, column, found):
    problem = only(tmp_path, text)
    assert (problem.line, problem.column) == (line, column)
    assert found in problem.found


def test_empty_file(tmp_path):
    problem = only(tmp_path, b"")
    assert problem.line is None and "empty" in problem.found


def test_latin1_reports_byte_offset(tmp_path):
    text = HEADER.replace("[degC]", "[°C]") + ROWS[0] + "\n"
    problem = only(tmp_path, text.encode("latin-1"))
    offset = text.encode("latin-1").index(b"\xb0")
    assert problem.line == 1 and f"offset {offset}" in problem.found


def test_latin1_in_data_row(tmp_path):
    text = (HEADER + ROWS[0] + "\n" + ROWS[1].replace("20.1", "20\xb11") + "\n").encode("latin-1")
    problem = only(tmp_path, text)
    offset = text.index(b"\xb1")
    assert problem.line == 3 and f"offset {offset}" in problem.found


def test_many_bad_rows_are_counted(tmp_path):
    rows = [f"{i * 0.1:.1f},nan,20,1013,45" for i in range(10)]
    problem = only(tmp_path, HEADER + "\n".join(rows) + "\n")
    assert problem.line == 2
    assert "lines 2, 3, 4 and 7 more" in problem.found


def test_all_problems_of_a_file_are_collected(tmp_path):
    text = HEADER.replace(",RH [%]", ",RH") + ROWS[0] + "\n" + ROWS[0] + "\n" + "0.3,x,1,2,3\n"
    found = problems_of(tmp_path, text)
    assert {(p.line, p.column) for p in found} == {(1, "RH"), (3, "time"), (4, "dp_pitot")}


def test_declared_taps(tmp_path):
    taps = ["tap01", "tap02", "tap03"]
    text = "time [s],tap01 [Pa],tap03 [Pa],tap07 [Pa]\n0,1,2,3\n"
    found = problems_of(tmp_path, text, expected=taps, optional=(), stream="pressure")
    assert {(p.line, p.column) for p in found} == {(1, "tap02"), (1, "tap07")}


# ---------------------------------------------------------------------------- runs.csv


def edit_runs(campaign_dir, old, new):
    path = campaign_dir / "runs.csv"
    text = path.read_text()
    assert old in text
    path.write_text(text.replace(old, new, 1))


def row_problem(campaign_dir, old, new, run=None):
    edit_runs(campaign_dir, old, new)
    campaign = open_campaign(campaign_dir)
    assert len(campaign.problems) == 1, campaign.problems
    problem = campaign.problems[0]
    if run is not None:
        assert problem in campaign.run_problems(run)
    return problem


@pytest.mark.parametrize(
    ("old", "new", "line", "column", "run"),
    [
        ("d2,data,A", "d1,data,A", 5, "run", "d1"),  # duplicate id
        ("d2,data,A", "d2,wind,A", 5, "kind", "d2"),
        ("d2,data,A", "d2,data,C", 5, "config", "d2"),
        ("2026-11-16T09:10:00", "16/11/2026 09:10", 4, "start", "d1"),
        ("2026-11-16T09:10:00", "2026-11-16", 4, "start", "d1"),
        ("logs/d1_tun.csv", "../d1_tun.csv", 4, "tunnel_log", "d1"),
        ("logs/d1_tun.csv", "/etc/passwd", 4, "tunnel_log", "d1"),
        ("logs/d1_tun.csv", "logs/d1_tunnel.csv", 4, "tunnel_log", "d1"),
        ("z1,t1,20,600", "z9,t1,20,600", 4, "zero", "d1"),
        ("z1,t1,20,600", "z1,d2,20,600", 4, "tare", "d1"),
        ("z1,t1,20,600", "t1,t1,20,600", 4, "zero", "d1"),
        ("d1,data,A,2026-11-16T09:10:00,logs/d1_bal.csv", "d1,data,A,2026-11-16T09:10:00,", 4,
         "zero", "d1"),  # zero without a balance log … is still fine, so it is the tare
        ("20,600,\n", "-5,600,\n", 4, "speed_set", "d1"),
        ("20,600,\n", "fast,600,\n", 4, "speed_set", "d1"),
    ],
)  # fmt: skip
def test_bad_runs_rows(campaign_dir, old, new, line, column, run):
    if column == "zero" and old.startswith("d1,data"):
        column = "tare"
    problem = row_problem(campaign_dir, old, new, run)
    assert problem.file == "runs.csv"
    assert (problem.line, problem.column) == (line, column)


def test_symlink_leaving_the_folder(campaign_dir, tmp_path):
    outside = tmp_path / "elsewhere.csv"
    outside.write_text((campaign_dir / "logs/d1_tun.csv").read_text())
    os.symlink(outside, campaign_dir / "logs/link.csv")
    problem = row_problem(campaign_dir, "logs/d1_tun.csv", "logs/link.csv", "d1")
    assert (problem.line, problem.column) == (4, "tunnel_log")
    assert "outside" in problem.found


def test_tare_problem_stops_the_data_run_that_uses_it(campaign_dir):
    (campaign_dir / "logs/t1_bal.csv").write_text("time [s],N1 [V],N2 [mV],N3 [V]\n0,1,2\n")
    campaign = open_campaign(campaign_dir)
    (problem,) = campaign.problems
    assert problem.file == "logs/t1_bal.csv" and problem.line == 2
    assert campaign.run_problems("d1") == [problem]
    assert campaign.run_problems("d2") == []
    with pytest.raises(InputError):
        campaign.load_run("d1")
    assert campaign.load_run("d2").spec.run == "d2"


def test_check_logs_false_reads_headers_only(campaign_dir):
    path = campaign_dir / "logs/d1_tun.csv"
    path.write_text(path.read_text().replace(",240,", ",nan,", 1))
    lazy = open_campaign(campaign_dir, check_logs=False)
    assert lazy.problems == []
    with pytest.raises(InputError) as info:
        lazy.load_run("d1")
    assert [(p.file, p.line, p.column) for p in info.value.problems] == [
        ("logs/d1_tun.csv", 2, "dp_pitot")
    ]
    assert lazy.run_problems("d1") == info.value.problems  # now known
    assert open_campaign(campaign_dir).run_problems("d1") == info.value.problems


def test_spinning_pressure_run_needs_angle(campaign_dir):
    path = campaign_dir / "logs/d1_p.csv"
    lines = path.read_text().splitlines()
    path.write_text("\n".join(",".join(c for i, c in enumerate(line.split(",")) if i != 1)
                              for line in lines) + "\n")  # fmt: skip
    (problem,) = open_campaign(campaign_dir).problems
    assert (problem.file, problem.line, problem.column) == ("logs/d1_p.csv", 1, "angle")


@pytest.mark.parametrize(
    ("name", "content"),
    [
        ("runs.csv", None),  # missing
        ("runs.csv", "run,kind,config\nd1,data,A\n"),  # no start column
        ("campaign.toml", "[campaign\n"),  # not TOML
    ],
)
def test_unusable_campaign_raises(campaign_dir, name, content):
    path = campaign_dir / name
    if content is None:
        path.unlink()
    else:
        path.write_text(content)
    with pytest.raises(InputError) as info:
        open_campaign(campaign_dir)
    assert info.value.problems[0].file == name


# ---------------------------------------------------------------------------- fuzzing

_SEED_TEXT = GOOD + "0.3,238.9,20.3,1013.0,44\n"


def _mutate(text: str, ops) -> str:
    for kind, position, payload in ops:
        i = position % (len(text) + 1)
        if kind == "delete":
            text = text[:i] + text[i + 1 :]
        elif kind == "duplicate":
            text = text[:i] + text[i : i + 1] * 2 + text[i + 1 :]
        elif kind == "insert":
            text = text[:i] + payload + text[i:]
        elif kind == "cut":
            text = text[:i]
        elif kind == "swap":
            lines = text.split("\n")
            row = lines[i % len(lines)].split(",")
            if len(row) > 1:
                j = i % (len(row) - 1)
                row[j], row[j + 1] = row[j + 1], row[j]
            lines[i % len(lines)] = ",".join(row)
            text = "\n".join(lines)
    return text


_OPS = st.lists(
    st.tuples(
        st.sampled_from(["delete", "duplicate", "insert", "cut", "swap"]),
        st.integers(0, 400),
        st.sampled_from([",", '"', "\n", "\r", " ", "x", "1e999", "nan", "[", "]", "\ufeff"]),
    ),
    min_size=1,
    max_size=6,
)


def _only_input_error(tmp_path, data: bytes):
    (tmp_path / "fuzz.csv").write_bytes(data)
    try:
        ds = read_log("fuzz.csv", root=tmp_path, stream="tunnel", expected_columns=TUNNEL,
                      optional_columns=("speed", "angle"))  # fmt: skip
    except InputError as exc:
        assert exc.problems  # every failure says why
        for p in exc.problems:
            assert p.file == "fuzz.csv" and p.expected and p.found
        return
    # what passes is clean: finite values and strictly increasing time
    assert np.all(np.diff(ds["time"].values) > 0)
    assert all(np.isfinite(ds[v].values).all() for v in ds.data_vars)


@settings(
    max_examples=600, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(ops=_OPS)
def test_mutated_csv_only_raises_input_error(tmp_path, ops):
    _only_input_error(tmp_path, _mutate(_SEED_TEXT, ops).encode("utf-8"))


@settings(
    max_examples=300, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(data=st.binary(max_size=300))
def test_random_bytes_only_raise_input_error(tmp_path, data):
    _only_input_error(tmp_path, data)


@settings(
    max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(prefix=st.binary(max_size=40))
def test_random_bytes_after_a_good_header(tmp_path, prefix):
    _only_input_error(tmp_path, HEADER.encode() + prefix)


def test_tare_of_another_configuration(campaign_dir):
    problem = row_problem(campaign_dir, "t1,tare,A", "t1,tare,B", "d1")
    assert (problem.line, problem.column) == (4, "tare")
    assert "configuration 'B'" in problem.found


def test_unknown_runs_column_concerns_every_run(campaign_dir):
    edit_runs(campaign_dir, ",notes\n", ",operator\n")
    campaign = open_campaign(campaign_dir)
    (problem,) = campaign.problems
    assert (problem.file, problem.line, problem.column) == ("runs.csv", 1, "operator")
    assert all(problem in campaign.run_problems(r) for r in campaign.runs)


def test_header_problems_found_without_parsing(campaign_dir):
    path = campaign_dir / "logs/d1_tun.csv"
    path.write_text(path.read_text().replace("RH [%]", "RH [V]"))
    (problem,) = open_campaign(campaign_dir, check_logs=False).problems
    assert (problem.file, problem.line, problem.column) == ("logs/d1_tun.csv", 1, "RH")


def test_missing_folder(tmp_path):
    with pytest.raises(InputError):
        open_campaign(tmp_path / "nowhere")


def test_campaign_pickles_for_worker_processes(campaign_dir):
    import pickle

    campaign = pickle.loads(pickle.dumps(open_campaign(campaign_dir, check_logs=False)))
    assert campaign.load_run("d2").streams["tunnel"].sizes["time"] == 50
    assert len(campaign.file_hashes["logs/d2_all.csv"]) == 64


def test_a_broken_runs_row_stops_only_its_own_run(campaign_dir):
    # An unquoted comma in the notes gives the row one field too many (RFC 4180 §2: a field
    # holding a comma must be quoted). That row's run cannot be read; the others still can.
    runs = campaign_dir / "runs.csv"
    text = runs.read_text(encoding="utf-8")
    text += "d3,data,A,2026-11-16T09:30:00,logs/d1_bal.csv,,logs/d1_tun.csv,z1,,20,0,a, b\n"
    runs.write_text(text, encoding="utf-8")
    campaign = open_campaign(campaign_dir)
    assert campaign.run_problems("d1") == []
    assert "d3" in campaign.unreadable_runs
    (problem,) = campaign.run_problems("d3")
    assert (problem.file, problem.line) == ("runs.csv", 6)
    assert problem.expected == "12 fields" and problem.found == "13"
