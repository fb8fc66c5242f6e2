"""The PDF test report: opened with pypdf, its text checked against the results files."""

from __future__ import annotations

import re

import matplotlib

matplotlib.use("Agg")

import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from pypdf import PdfReader  # noqa: E402

from tunnelred.products import (
    report,
    store,  # noqa: E402
)
from tunnelred.products.report import layout, summary  # noqa: E402

# The headings docs/report.md promises, written out here rather than taken from report.SECTIONS.
HEADINGS = (
    "Report number",
    "Revision",
    "Prepared by",
    "Checked by",
    "Approved by",
    "Cautions",
    "Provenance",
    "Contents",
    "Summary",
    "Model",
    "Test matrix",
    "Run log",
    "Test conditions",
    "Instrumentation",
    "Procedures",
    "Data reduction",
    "Wall corrections",
    "Uncertainty statement",
    "Results",
    "Drag polar",
    "Surface pressure",
    "Quality flags",
    "Appendix: input files",
    "not be reproduced except in full",
    "End of report",
)


def _text(pdf) -> tuple[str, list[str]]:
    pages = [page.extract_text() for page in PdfReader(pdf).pages]
    return "\n".join(pages), pages


@pytest.fixture(scope="module")
def built(reduced):
    campaign_dir, out = reduced
    pdf = report.write_report(out, campaign=campaign_dir)
    text, pages = _text(pdf)
    return pdf, text, pages, out


def test_written_atomically_into_the_output_folder(built):
    pdf, _, _, out = built
    assert pdf == out / "report.pdf"
    assert pdf.read_bytes()[:5] == b"%PDF-"
    assert not [p for p in out.iterdir() if p.name.endswith(".tmp")]


def test_every_section_heading(built):
    _, text, _, _ = built
    for heading in HEADINGS:
        assert heading in text, heading


def test_title_run_count_and_page_numbers(built):
    _, text, pages, out = built
    ds = store.read_results(out)
    assert ds.attrs["title"] in text.replace("\n", " ")
    assert f"{ds.sizes['run']} data runs reduced" in text
    total = len(pages)
    for number, page in enumerate(pages, start=1):
        assert f"page {number} of {total}" in page


def test_cautions_on_the_title_page(built):
    _, _, pages, _ = built
    first = " ".join(pages[0].split())
    assert "safety rules" in first
    assert "licensed engineering practice" in first
    assert "local codes" in first


def test_numbers_match_results_csv(built):
    _, text, _, out = built
    table = pd.read_csv(out / "results.csv")
    row = table.loc[table["CL"].abs().idxmax()]
    cell = report.format_uncertain(row["CL"], 2 * row["u_CL"])
    assert cell in text
    # The cell reads back as the results.csv values rounded to U's second significant digit
    # (GUM, JCGM 100:2008 §7.2.6): value within half a unit of the last digit shown.
    value, expanded = (float(x) for x in cell.split(" ± "))
    last = 10.0 ** -len(cell.split(" ± ")[1].split(".")[1])
    assert abs(value - row["CL"]) <= 0.5 * last + 1e-12
    assert abs(expanded - 2 * row["u_CL"]) <= 0.5 * last + 1e-12
    # The conditions table shows the run's speed to 0.01 m/s.
    assert f"{row['U']:.2f}" in text
    assert "k = 2" in text


def test_flag_table_names_the_planted_fault(built):
    _, text, _, out = built
    table = pd.read_csv(out / "results.csv", keep_default_na=False)
    flagged = table[table["flag_spin_scatter"].astype(str) == "True"]
    assert len(flagged) == 1
    run = flagged["run"].iloc[0]
    scatter = flagged["spin_scatter"].astype(float).iloc[0]
    # The reason gives the measured scatter as quality.spin_scatter words it.
    assert re.search(rf"{run}\s+spin_scatter\s+spin ratio scatter {100 * scatter:.1f} %", text)


def test_configuration_comparison_when_two_configurations(built):
    _, text, _, _ = built
    pytest.importorskip("tunnelred.products.compare")
    assert "Configuration comparison" in text


@pytest.mark.parametrize(
    ("value", "expanded", "expected"),
    [
        # JCGM 100:2008 §7.2.4: m_S = (100.021 47 ± 0.000 79) g.
        (100.02147, 0.00079, "100.02147 ± 0.00079"),
        # JCGM 100:2008 §7.2.6: an uncertainty rounded to two significant digits (worked by
        # hand: 0.0432 → 0.043, and the value to the same decimal).
        (-3.14159, 0.0432, "-3.142 ± 0.043"),
        (1234.5, 17.0, "1234 ± 17"),
        (-0.00004, 0.0073, "0.0000 ± 0.0073"),
    ],
)
def test_format_uncertain(value, expanded, expected):
    assert report.format_uncertain(value, expanded) == expected


def test_user_text_with_markup_characters(reduced, tmp_path):  # noqa: F811
    _, out = reduced
    ds = store.read_results(out)
    title = 'Rotor <b>sail</b> & "plates" <unclosed'
    ds.attrs["title"] = title
    ds.attrs["campaign_path"] = ""  # as if the campaign folder had been moved away
    failures = pd.DataFrame(
        [{"run": "R999", "file": "logs/<odd>&.csv", "line": 3, "reason": "expected <number>"}]
    )
    budgets = pd.read_csv(out / "budgets.csv")
    store.write_results(ds, tmp_path, failures=failures, budgets=budgets)
    pdf = report.write_report(tmp_path, tmp_path / "odd.pdf")
    text, _ = _text(pdf)
    flat = " ".join(text.split())
    assert title in flat
    assert "expected <number>" in flat
    # Without the campaign folder the model section says so instead of failing.
    assert "campaign folder was not given" in flat


def test_appendix_finds_the_recorded_campaign_folder(built):
    # reduce records the campaign folder (docs/results.md, campaign_path); the report, given
    # only the results, puts that folder's campaign.toml into the appendix.
    *_, out = built
    ds = store.read_results(out)
    assert ds.attrs["campaign_path"]
    text, _ = _text(report.write_report(out, out / "again.pdf", full_config=True))
    assert "[instruments.balance]" in text


def test_crafted_attributes_neither_embed_a_file_nor_break_markup(reduced, tmp_path):
    """Issue 14 item 9: strings from results.nc are escaped; only figures drawn are embedded."""
    import json

    from PIL import Image as PILImage

    _, out = reduced
    planted = tmp_path / "planted.png"
    PILImage.new("RGB", (7, 5), (255, 0, 0)).save(planted)  # a size no figure has
    tag = f'<img src="{planted}" width="50" height="50"/><a href="file:///etc">x</a>'
    ds = store.read_results(out)
    ds.attrs["title"] = "T " + tag
    ds.attrs["facility"] = tag
    ds.attrs["input_sha256"] = json.dumps({"logs/" + tag: tag})
    ds.attrs["config_sha256"] = tag
    ds.attrs["campaign_path"] = ""
    store.write_results(ds, tmp_path, budgets=pd.read_csv(out / "budgets.csv"))
    pdf = report.write_report(tmp_path, tmp_path / "crafted.pdf")
    reader = PdfReader(pdf)
    sizes = []
    for page in reader.pages:
        resources = page.get("/Resources") or {}
        for obj in (resources.get("/XObject") or {}).values():
            obj = obj.get_object()
            if obj.get("/Subtype") == "/Image":
                sizes.append((int(obj["/Width"]), int(obj["/Height"])))
    assert sizes  # the figures the report drew are there
    assert (7, 5) not in sizes
    flat = " ".join(" ".join(p.extract_text() for p in reader.pages).split())
    assert "<img src=" in flat  # printed as written, not interpreted


def test_own_markup_refuses_foreign_tags():
    with pytest.raises(ValueError, match="img"):
        layout._check_markup('<b>x</b><img src="a.png"/>')
    layout._check_markup("<b>bold</b> and <i>italic</i>")


def test_lift_efficiency_half_crossing_either_way():
    import numpy as np

    # Worked by hand: linear between (1.0, 0.4) and (1.5, 0.6) reaches 0.5 at α = 1.25; the
    # efficiency rises through 50 % there (the old helper saw only a falling crossing).
    alpha = np.array([0.5, 1.0, 1.5, 2.0])
    assert summary._efficiency_half(alpha, np.array([0.3, 0.4, 0.6, 0.7])) == pytest.approx(1.25)
    # Falling through: (1.0, 0.6) to (2.0, 0.4) gives 1.5; the sign of α does not matter.
    assert summary._efficiency_half(np.array([-1.0, -2.0]), np.array([0.6, 0.4])) == pytest.approx(
        1.5
    )
    below = np.array([0.2, 0.35, 0.46, 0.44])
    assert np.isnan(summary._efficiency_half(alpha, below))
    assert summary._efficiency_text(alpha, below) == "below 50 % throughout; peak 46 % at α 1.50"


def test_report_control_and_method_from_campaign_toml(built, reduced):
    from tunnelred.inputs.config import load_config

    campaign_dir, _ = reduced
    config, _ = load_config(campaign_dir / "campaign.toml")
    control = config.report
    assert control.number  # the demo scenario fills [report] (tunnelred.demo.spec)
    _, text, pages, _ = built
    flat = " ".join(text.split())
    for value in (control.client, control.prepared_by, control.checked_by, control.approved_by,
                  control.laboratory_address, control.date_of_issue, control.method):  # fmt: skip
        assert " ".join(value.split()) in flat, value
    assert f"Additions to or deviations from the method. {control.deviations}" in flat
    for page in pages:  # the report's identification on every page (ISO/IEC 17025 §7.8.2.1 c)
        assert f"Report number {control.number}, revision {control.revision}" in page
    for entry in control.revision_history:
        assert entry.change in flat
    for name, calibration in config.instruments.calibrations.items():
        assert calibration.reference in flat, name
    assert config.model.surface in flat and config.model.photo in flat


def test_provisional_runs_are_marked_in_tables_and_summary(provisional_results):
    # before: a report of the watch's results mid-test read as final (nothing said provisional)
    out = provisional_results
    assert store.read_results(out)["provisional"].values.tolist() == [True, True, False, False]
    text, _ = _text(report.write_report(out))
    assert re.search(r"Provisional results\.\s+2 run\(s\) are provisional", text)
    assert re.search(r"R001,\s+R002\.", text)
    marked = set(re.findall(r"\b(R00\d) ‡", text))
    assert marked == {"R001", "R002"}
    assert text.count("R001 ‡") >= 2  # the run log and the coefficient table
    assert "‡ marks a provisional run" in text


def test_a_report_of_final_results_says_nothing_provisional(built):
    _, text, _, _ = built
    assert "‡" not in text and "provisional" not in text.lower()
