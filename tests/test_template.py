"""`tunnelred init`: the commented campaign.toml, runs.csv and run sheet (inputs.template)."""

from __future__ import annotations

import csv
import re
from dataclasses import asdict

import pytest

from tunnelred.cli import main
from tunnelred.inputs import schema
from tunnelred.inputs.config import load_config
from tunnelred.inputs.readers import KINDS
from tunnelred.inputs.template import TEMPLATE_FILES, campaign_toml_template, default_text

# What a user writes for the required keys (an invented small tunnel and model).
REQUIRED = {
    "title": '"New campaign"',
    "facility": '"Tunnel 2"',
    "height": '"1.2 m"',
    "width": "0.8",
    "diameter": '"100 mm"',
    "span": "0.8",
    "channels": '["N1", "N2", "N3"]',
    "matrix": "[[10.0, 0.0, 0.0], [0.0, 10.0, 0.0], [0.0, 0.0, 1.0]]",
    "full_scale": "[100.0, 100.0, 5.0]",
}


def _filled(text: str, *, defaults_too: bool) -> str:
    """The template with its required keys written and, optionally, every default uncommented."""
    out, table = [], ""
    for line in text.splitlines():
        if line.startswith(("[", "# [[")):
            table = line  # an array table's header stays commented: so do its keys
        m = re.match(r"^# (\w+) =(.*)$", line)
        if m and "[[" not in table:
            name, rest = m.group(1), m.group(2)
            if "REQUIRED" in rest and name in REQUIRED:
                line = f"{name} = {REQUIRED[name]}"
            elif defaults_too and "#" not in rest:
                line = f"{name} ={rest}"
        out.append(line)
    return "\n".join(out) + "\n"


def test_every_schema_key_is_in_the_template_with_unit_default_and_meaning():
    text = campaign_toml_template()
    for key in schema.KEYS:
        if key.unit == "table":
            continue
        assert f"# {key.name} [{key.unit}]" in text, key
        assert re.search(rf"^# {key.name} =", text, re.M), key
        default = default_text(key)
        if default not in ("required", "none"):
            assert f"# {key.name} = {default}" in text, key


def test_the_printed_defaults_are_the_loaders_defaults(tmp_path):
    # Writing every printed default out changes nothing: the template's defaults are the ones
    # load_config applies (read from the same dataclasses, not a copy that could drift).
    base = tmp_path / "a" / "campaign.toml"
    full = tmp_path / "b" / "campaign.toml"
    for path, defaults_too in ((base, False), (full, True)):
        path.parent.mkdir()
        path.write_text(_filled(campaign_toml_template(), defaults_too=defaults_too), "utf-8")
    (c1, p1), (c2, p2) = load_config(base), load_config(full)
    assert p1 == [] and p2 == [], (p1, p2)
    assert full.read_text().count("\nu_height = 0.0") == 1  # the defaults were written out
    one, two = asdict(c1), asdict(c2)
    one.pop("sha256"), two.pop("sha256")
    assert one == two


def test_init_writes_the_files_and_refuses_a_non_empty_folder(tmp_path, capsys):
    dest = tmp_path / "new"
    assert main(["init", str(dest)]) == 0
    assert sorted(p.name for p in dest.iterdir()) == sorted([*TEMPLATE_FILES, "logs"])
    before = (dest / "campaign.toml").read_text()
    (dest / "campaign.toml").write_text("# my edits\n")
    assert main(["init", str(dest)]) == 2
    assert "not empty" in capsys.readouterr().err
    assert (dest / "campaign.toml").read_text() == "# my edits\n"  # untouched
    assert main(["init", str(dest), "--force"]) == 0
    assert (dest / "campaign.toml").read_text() == before
    (tmp_path / "file").write_text("x")
    assert main(["init", str(tmp_path / "file")]) == 2


def test_runs_csv_has_one_example_of_each_kind(tmp_path):
    main(["init", str(tmp_path / "c")])
    with open(tmp_path / "c" / "runs.csv", newline="") as stream:
        rows = list(csv.DictReader(stream))
    assert [r["kind"] for r in rows] == list(KINDS)
    sheet = (tmp_path / "c" / "run_sheet.csv").read_text().splitlines()
    assert sheet[1].startswith("run,kind") and len(sheet) > 30


def test_check_says_what_is_still_to_be_filled(tmp_path, capsys):
    dest = tmp_path / "c"
    main(["init", str(dest)])
    capsys.readouterr()
    assert main(["check", str(dest)]) == 1
    out = capsys.readouterr().out
    for key in ("campaign.title", "campaign.facility", "tunnel.height", "model.diameter"):
        assert f"[{key}]" in out, key
    assert "Traceback" not in out
    # With the required keys written, what remains is runs.csv's example logs.
    text = _filled((dest / "campaign.toml").read_text(), defaults_too=False)
    (dest / "campaign.toml").write_text(text)
    assert main(["check", str(dest)]) == 1
    out = capsys.readouterr().out
    assert "campaign.toml" not in out.split("problems in")[-1].split("runs.csv")[0]
    assert "logs/R001_tunnel.csv" in out


@pytest.mark.parametrize("table", sorted(schema.TABLES))
def test_every_table_has_keys(table):
    assert schema.names_by_table().get(table), table


def test_schema_names_every_key_the_loader_accepts():
    # [reduction.tolerances] is read from the Tolerances fields; a new tolerance needs its Key.
    from tunnelred.inputs.config import Tolerances

    assert schema.names_by_table()["tolerances"] == tuple(Tolerances.__dataclass_fields__)
    for key in schema.KEYS:  # every default reference resolves
        default_text(key)
