"""campaign.toml parsing and validation (tunnelred.inputs.config.load_config)."""

import pytest
from conftest import CAMPAIGN_TOML

from tunnelred.inputs.config import BLOCKAGE_METHODS, load_config


def load(tmp_path, text):
    path = tmp_path / "campaign.toml"
    path.write_text(text, encoding="utf-8")
    return load_config(path)


def test_fixture_config_in_si(tmp_path):
    config, problems = load(tmp_path, CAMPAIGN_TOML)
    assert problems == []
    assert config.tunnel.height == 1.2
    assert config.model.diameter == pytest.approx(0.1)  # "100 mm"
    assert config.model.radius == pytest.approx(0.05)
    assert config.configurations["B"].end_plate_diameter == pytest.approx(0.2)
    assert config.instruments.balance.full_scale == (100.0, 100.0, 5.0)
    assert [t.azimuth for t in config.taps] == [0.0, 90.0, 180.0, 270.0]
    assert config.reduction.blockage == "allen-vincenti"
    assert config.reduction.cp_bins == 72
    assert len(config.sha256) == 64


def test_three_d_model_defaults_to_maskell_3d(tmp_path):
    text = CAMPAIGN_TOML.replace("span = 0.8\n", "span = 0.8\nspans_section = false\n")
    config, problems = load(tmp_path, text)
    assert problems == []
    assert config.reduction.blockage == "maskell-3d"


def replaced(old, new):
    assert old in CAMPAIGN_TOML
    return CAMPAIGN_TOML.replace(old, new, 1)


def line_of(text, needle):
    return next(i for i, line in enumerate(text.splitlines(), 1) if needle in line)


# Each case: an edit of the valid file, the dotted key expected in the problem, the text on
# the line the problem must point to, and whether the configuration is unusable (a required
# value) or only reported.
BAD_VALUES = [
    ('diameter = "100 mm"', 'diameter = "-100 mm"', "model.diameter", "diameter =", True),
    ("span = 0.8", "span = 0", "model.span", "span =", True),
    ('height = "1.2 m"', "height = 0.0", "tunnel.height", "height =", True),
    ('diameter = "100 mm"', 'diameter = "3 Pa"', "model.diameter", "diameter =", True),
    ('diameter = "100 mm"', 'diameter = "1.5 m"', "model.diameter", "diameter =", True),
    ("[0.0, 0.0, 1.0]]", "[0.0, 0.0]]", "instruments.balance.matrix", "matrix =", True),
    ('q_source = "pitot"', 'q_source = "venturi"', "tunnel.q_source", "q_source", False),
    ('end_plate_diameter = "0.2 m"', 'end_plate_diameter = "5 cm"',
     "configurations.B.end_plate_diameter", "end_plate_diameter", False),
    ('description = "bare cylinder"', 'descripton = "bare cylinder"',
     "configurations.A.descripton", "descripton", False),
]  # fmt: skip


@pytest.mark.parametrize(("old", "new", "key", "needle", "fatal"), BAD_VALUES)
def test_bad_values_are_reported_with_key_and_line(tmp_path, old, new, key, needle, fatal):
    text = replaced(old, new)
    config, problems = load(tmp_path, text)
    # a 1.5 m diameter is also larger than configuration B's end plates: only the first counts
    problem = problems[0]
    assert problem.column == key
    assert problem.file == "campaign.toml"
    assert problem.line == line_of(text, needle)
    assert (config is None) == fatal


@pytest.mark.parametrize(
    ("table", "entry", "key"),
    [
        ("[reduction]", "cp_bins = 4", "reduction.cp_bins"),
        ("[reduction]", 'blockage = "glauert"', "reduction.blockage"),
        ("[reduction]", "base_arc = [200, 160]", "reduction.base_arc"),
        ("[instruments.hygrometer]", "u = 1.5", "instruments.hygrometer.u"),
        ("[instruments.thermometer]", 'u = "-0.1 K"', "instruments.thermometer.u"),
        ("[reduction.tolerances]", "spin_scatter = -0.1", "reduction.tolerances.spin_scatter"),
        ("[reduction.tolerances]", 'temperature_drift = "1 V"',
         "reduction.tolerances.temperature_drift"),
    ],
)  # fmt: skip
def test_optional_values_out_of_range(tmp_path, table, entry, key):
    text = CAMPAIGN_TOML + f"\n{table}\n{entry}\n"
    config, problems = load(tmp_path, text)
    assert [p.column for p in problems] == [key]
    assert problems[0].line == line_of(text, entry)
    # reported, and the documented default used so the logs can still be checked
    assert config is not None


def test_blockage_names_documented():
    assert "allen-vincenti" in BLOCKAGE_METHODS


def test_all_problems_collected_not_only_the_first(tmp_path):
    text = replaced("span = 0.8", "span = -1").replace('height = "1.2 m"', "height = -2")
    text += "\n[reduction]\ncp_bins = 2\n"
    _, problems = load(tmp_path, text)
    assert {p.column for p in problems} == {"model.span", "tunnel.height", "reduction.cp_bins"}


def test_toml_syntax_error_gives_its_line(tmp_path):
    text = CAMPAIGN_TOML.replace('title = "Fixture campaign"', "title = Fixture campaign")
    config, problems = load(tmp_path, text)
    assert config is None
    (problem,) = problems
    assert problem.line == line_of(text, "title = Fixture")


def test_missing_required_table_and_key(tmp_path):
    text = CAMPAIGN_TOML.replace("[configurations.", "[configurationz.").replace(
        "width = 0.8\n", ""
    )
    config, problems = load(tmp_path, text)
    assert config is None
    columns = {p.column for p in problems}
    assert {"tunnel.width", "configurations", "configurationz"} <= columns


def test_missing_file(tmp_path):
    config, problems = load_config(tmp_path / "campaign.toml")
    assert config is None and problems[0].file == "campaign.toml"


def test_non_utf8_file(tmp_path):
    (tmp_path / "campaign.toml").write_bytes(
        CAMPAIGN_TOML.replace("Test", "T\xe9st").encode("latin-1")
    )
    config, problems = load_config(tmp_path / "campaign.toml")
    assert config is None
    assert problems[0].line == line_of(CAMPAIGN_TOML, "Test")
    assert "0xe9" in problems[0].found


def test_duplicate_tap_and_reserved_name(tmp_path):
    text = CAMPAIGN_TOML.replace('name = "tap02"', 'name = "tap01"').replace(
        'name = "tap04"', 'name = "angle"'
    )
    config, problems = load(tmp_path, text)
    assert config is None
    assert {p.column for p in problems} == {"taps[1].name", "taps[3].name"}
    assert sorted(p.line for p in problems) == [
        line_of(text, 'name = "tap01"') + 4,  # the second [[taps]] table
        line_of(text, 'name = "angle"'),
    ]


def _with_configuration_a_tolerances(lines: str) -> str:
    """CAMPAIGN_TOML with a [configurations.A.tolerances] table holding ``lines``."""
    return CAMPAIGN_TOML.replace(
        '[configurations.A]\ndescription = "bare cylinder"',
        '[configurations.A]\ndescription = "bare cylinder"\n\n'
        f"[configurations.A.tolerances]\n{lines}",
    )


def test_configuration_tolerances_replace_the_campaign_ones(tmp_path):
    # A bare cylinder's mid-span pressure lift exceeds its whole-span balance lift (end effects):
    # the configuration states the expected difference; the other configuration keeps the default.
    cfg, problems = load(
        tmp_path, _with_configuration_a_tolerances("cl_agreement = 0.2\nspin_scatter = 0.05")
    )
    assert problems == []
    assert cfg.tolerances_for("A").cl_agreement == 0.2
    assert cfg.tolerances_for("A").spin_scatter == 0.05
    assert cfg.tolerances_for("A").speed_drift == cfg.reduction.tolerances.speed_drift
    assert cfg.tolerances_for("B") == cfg.reduction.tolerances


def test_configuration_tolerance_unknown_key_is_reported(tmp_path):
    _, problems = load(tmp_path, _with_configuration_a_tolerances("wobble = 1"))
    assert any(p.column == "configurations.A.tolerances.wobble" for p in problems), problems


def test_model_spin_rate_limit_is_optional_and_in_si(tmp_path):
    config, problems = load(tmp_path, CAMPAIGN_TOML)
    assert config.model.max_spin_rate is None
    text = CAMPAIGN_TOML.replace("span = 0.8\n", 'span = 0.8\nmax_spin_rate = "6000 rpm"\n')
    config, problems = load(tmp_path, text)
    assert problems == []
    # 1 rpm = 2 pi / 60 rad/s (SI Brochure, 9th ed., the revolution per minute) (from memory)
    assert config.model.max_spin_rate == pytest.approx(6000 * 2 * 3.141592653589793 / 60)
    config, problems = load(tmp_path, text.replace('"6000 rpm"', '"100 Hz"'))
    assert any(p.column == "model.max_spin_rate" for p in problems)


def test_a_two_d_method_on_a_three_d_model_is_resolved_once_with_a_notice(tmp_path):
    text = CAMPAIGN_TOML.replace("span = 0.8\n", "span = 0.8\nspans_section = false\n")
    text += '\n[reduction]\nblockage = "allen-vincenti"\n'
    config, problems = load(tmp_path, text)
    assert problems == []
    assert config.reduction.blockage == "maskell-3d"
    assert config.reduction.blockage_requested == "allen-vincenti"
    (notice,) = config.notices
    assert notice.column == "reduction.blockage" and "maskell-3d" in notice.hint
    assert notice.line == text.splitlines().index('blockage = "allen-vincenti"') + 1


def test_a_method_that_fits_gives_no_notice(tmp_path):
    config, problems = load(tmp_path, CAMPAIGN_TOML + '\n[reduction]\nblockage = "maskell"\n')
    assert problems == [] and config.notices == ()
    assert config.reduction.blockage == config.reduction.blockage_requested == "maskell"


def test_maskell_factor_only_with_a_method_that_has_one(tmp_path):
    text = CAMPAIGN_TOML + '\n[reduction]\nblockage = "allen-vincenti"\nmaskell_factor = 1.0\n'
    config, problems = load(tmp_path, text)
    assert [p.column for p in problems] == ["reduction.maskell_factor"]


# [report], calibration references and the model photograph (docs/input-format.md)
REPORT_TABLE = """
[report]
number = "LAB-TR-1"
revision = "B"
client = "A client"
prepared_by = "P. One"
distribution = ["client", "file"]
method = "procedure P-7"
deviations = "none"

[[report.revision_history]]
revision = "A"
date = "2026-01-02"
change = "first issue"

[[report.revision_history]]
revision = "B"
change = "second"
"""


def test_report_table_is_read_and_optional(tmp_path):
    config, problems = load(tmp_path, CAMPAIGN_TOML)
    assert problems == [] and config.report.number == "" and config.report.revision_history == ()
    config, problems = load(tmp_path, CAMPAIGN_TOML + REPORT_TABLE)
    assert problems == []
    r = config.report
    assert (r.number, r.revision, r.client, r.prepared_by) == (
        "LAB-TR-1",
        "B",
        "A client",
        "P. One",
    )
    assert r.distribution == ("client", "file")
    assert (r.method, r.deviations, r.approved_by) == ("procedure P-7", "none", "")
    assert [(h.revision, h.date, h.change) for h in r.revision_history] == [
        ("A", "2026-01-02", "first issue"),
        ("B", "", "second"),
    ]


def test_report_table_misspelt_key_is_reported(tmp_path):
    text = CAMPAIGN_TOML + REPORT_TABLE.replace("client =", "cliant =")
    config, problems = load(tmp_path, text)
    assert config is not None  # an optional table: reported, the rest still usable
    assert [p.column for p in problems] == ["report.cliant"]
    assert problems[0].line == line_of(text, "cliant")


def test_calibration_reference_and_date_per_instrument(tmp_path):
    text = replaced(
        'full_scale = [100.0, 100.0, "5 N*m"]',
        'full_scale = [100.0, 100.0, "5 N*m"]\ncalibration_reference = "CAL-B-1"\n'
        "calibration_date = 2026-02-20\n\n[instruments.pitot]\nu = 0.1\n"
        'calibration_reference = "CAL-P-9"',
    )
    config, problems = load(tmp_path, text)
    assert problems == []
    cal = config.instruments.calibrations
    # A bare TOML date (TOML 1.0 §Local Date) is kept as its ISO text.
    assert (cal["balance"].reference, cal["balance"].date) == ("CAL-B-1", "2026-02-20")
    assert (cal["pitot"].reference, cal["pitot"].date) == ("CAL-P-9", "")
    assert "thermometer" not in cal


PNG_HEAD = b"\x89PNG\r\n\x1a\n"  # the PNG signature (ISO/IEC 15948, §5.2)


@pytest.mark.parametrize(
    ("photo", "make", "ok"),
    [
        ("model.png", {"model.png": PNG_HEAD + b"rest"}, True),
        ("pics/m.jpg", {"pics/m.jpg": b"\xff\xd8\xff\xe0rest"}, True),  # JPEG SOI + marker
        ("model.png", {"model.png": b"not an image"}, False),
        ("missing.png", {}, False),
        ("pics", {"pics/m.png": PNG_HEAD}, False),  # a folder, not a regular file
        ("../outside.png", {"../outside.png": PNG_HEAD}, False),
    ],
)
def test_model_photo_must_be_an_image_inside_the_campaign(tmp_path, photo, make, ok):
    root = tmp_path / "campaign"
    root.mkdir()
    for name, data in make.items():
        (root / name).parent.mkdir(parents=True, exist_ok=True)
        (root / name).write_bytes(data)
    text = replaced("span = 0.8\n", f'span = 0.8\nsurface = "painted"\nphoto = "{photo}"\n')
    config, problems = load(root, text)
    assert config is not None and config.model.surface == "painted"
    if ok:
        assert problems == [] and config.model.photo == photo
    else:
        assert [p.column for p in problems] == ["model.photo"] and config.model.photo == ""


def test_model_photo_link_out_of_the_campaign_is_refused(tmp_path):
    root = tmp_path / "campaign"
    root.mkdir()
    (tmp_path / "elsewhere.png").write_bytes(PNG_HEAD)
    (root / "model.png").symlink_to(tmp_path / "elsewhere.png")
    config, problems = load(root, replaced("span = 0.8\n", 'span = 0.8\nphoto = "model.png"\n'))
    assert [p.column for p in problems] == ["model.photo"] and config.model.photo == ""
