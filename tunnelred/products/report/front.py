"""The title page: report control, signatures, the statements and cautions, revision history,
provenance and the contents.
"""

from __future__ import annotations

from reportlab.lib.units import mm
from reportlab.platypus import PageBreak, Spacer
from reportlab.platypus.tableofcontents import TableOfContents

from tunnelred.products import plotting
from tunnelred.products.report.data import ReportData
from tunnelred.products.report.formatting import or_blank
from tunnelred.products.report.layout import Builder

#: The cautions printed on the title page.
CAUTIONS = (
    "Rotating models and machinery in a wind tunnel are hazardous: follow the facility's safety "
    "rules for spinning models, guards and interlocks at every test.",
    "These are model-scale results. They are not a full-scale design: applying them to a ship "
    "rotor, a lifting device or any structure is a matter for licensed engineering practice and "
    "the local codes.",
)


_SIGNATURE = "_" * 30

#: The statements ISO/IEC 17025:2017 §7.8.2.1 asks of every report.
STATEMENTS = (
    "The results relate only to the item tested, as received and in the configurations "
    "described in this report.",
    "This report shall not be reproduced except in full without the written approval of the "
    "laboratory.",
)


def title_page(b: Builder, data: ReportData, date: str) -> None:
    """The first two pages: report control, signatures, statements and cautions; then revision
    history, campaign notes, provenance and the contents.
    """
    _heading(b, data)
    _control_table(b, data, date)
    _signatures(b, data.control)
    for text in STATEMENTS:
        b.add(b.p(text, "caution"))
    b.add(b.p("Cautions", "h2"))
    for text in CAUTIONS:
        b.add(b.p(f"• {text}", "caution"))
    b.add(PageBreak())
    _revision_history(b, data)
    _provenance(b, data)
    _contents(b)


def _campaign_info(data: ReportData):
    """The [campaign] table of campaign.toml, or None when the campaign is not known."""
    return data.campaign.config.campaign if data.campaign is not None else None


def _heading(b: Builder, data: ReportData) -> None:
    control = data.control
    b.add(Spacer(1, 8 * mm))
    b.add(b.p("Wind-tunnel test report", "subtitle"))
    b.add(b.p(data.title, "title"))
    facility = str(data.ds.attrs.get("facility", ""))
    b.add(b.p(control.laboratory or facility or "(laboratory not stated)", "subtitle"))
    if control.laboratory_address:
        b.add(b.p(control.laboratory_address, "subtitle"))
    b.add(Spacer(1, 4 * mm))


def _control_table(b: Builder, data: ReportData, date: str) -> None:
    ds = data.ds
    control = data.control
    info = _campaign_info(data)
    facility = str(ds.attrs.get("facility", ""))
    n_runs = ds.sizes["run"]
    n_failed = data.failures["run"].nunique() if "run" in data.failures else 0
    n_flagged = int(plotting.flagged_runs(ds).sum())
    rows = [
        ["Report number", or_blank(control.number)],
        ["Revision", or_blank(control.revision)],
        ["Client", or_blank(control.client)],
        ["Client address", or_blank(control.client_address)],
        ["Laboratory", or_blank(control.laboratory or facility)],
        ["Laboratory address", or_blank(control.laboratory_address)],
        ["Place of test", or_blank(control.location or facility)],
        ["Dates of test", or_blank(info.date if info is not None else "")],
        ["Date of issue", or_blank(control.date_of_issue)],
        ["Report generated", date],
        ["Distribution", or_blank("; ".join(control.distribution))],
        [
            "Runs",
            f"{n_runs} data runs reduced, {n_flagged} flagged, {n_failed} could not be reduced",
        ],
    ]
    b.table(["report control", ""], rows, [1.1, 3.0])


def _signatures(b: Builder, control) -> None:
    b.add(b.p("Signatures", "h2"))
    rows = [
        [role, or_blank(name), _SIGNATURE, "date: ________"]
        for role, name in (
            ("Prepared by", control.prepared_by),
            ("Checked by", control.checked_by),
            ("Approved by", control.approved_by),
        )
    ]
    b.table(["", "name", "signature", ""], rows, [0.9, 1.5, 1.5, 0.9], padding=6)
    b.add(b.p("Approved by: the person who authorises this report for issue.", "small"))


def _revision_history(b: Builder, data: ReportData) -> None:
    """The revisions campaign.toml lists (else this one as the first issue), and its notes."""
    control = data.control
    info = _campaign_info(data)
    b.add(b.p("Revision history", "h2"))
    history = [
        [str(getattr(h, key, "")) for key in ("revision", "date", "change")]
        for h in control.history
    ] or [[or_blank(control.revision), or_blank(control.date_of_issue), "first issue"]]
    b.table(["revision", "date", "change"], history, [0.8, 1.0, 4.0])
    if info is not None and info.notes:
        b.add(b.p("Campaign notes", "h2"))
        b.add(b.p(info.notes))


def _provenance(b: Builder, data: ReportData) -> None:
    ds = data.ds
    b.add(b.p("Provenance", "h2"))
    methods = data.methods
    rows = [
        ["tunnelred version", str(ds.attrs.get("tunnelred_version", ""))],
        ["results created (UTC)", str(ds.attrs.get("created", ""))],
        ["campaign.toml SHA-256", str(ds.attrs.get("config_sha256", ""))],
        ["input files hashed", f"{len(data.hashes)} (listed in the appendix)"],
        ["blockage method", _blockage_text(methods)],
        ["lift interference", _on_off(methods.get("lift_interference"))],
        ["buoyancy", _on_off(methods.get("buoyancy"))],
        ["uncertainty", str(methods.get("uncertainty", "GUM linear propagation"))],
        ["results folder", str(data.out)],
    ]
    b.table(["item", "value"], rows, [1, 2.6])


def _contents(b: Builder) -> None:
    b.add(b.p("Contents", "h2"))
    toc = TableOfContents()
    toc.levelStyles = [b.s["toc"]]
    toc.dotsMinLevel = 0
    b.add(toc)
    b.add(PageBreak())


def _blockage_text(methods: dict) -> str:
    """The method applied, and what campaign.toml asked for when config substituted it."""
    used = str(methods.get("blockage", "–"))
    requested = methods.get("blockage_requested")
    return f"{used} (campaign.toml: {requested})" if requested else used


def _on_off(value) -> str:
    return "–" if value is None else ("on" if value else "off")
