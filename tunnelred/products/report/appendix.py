"""The appendix: the SHA-256 of every input file, and campaign.toml when asked for."""

from __future__ import annotations

from pathlib import Path
from xml.sax.saxutils import escape

from reportlab.platypus import Preformatted

from tunnelred.products.report.data import ReportData
from tunnelred.products.report.layout import Builder


def appendix_section(b: Builder, data: ReportData, full_config: bool) -> None:
    b.section("Appendix: input files")
    b.add(
        b.p(
            "The SHA-256 of every input file the results were reduced from; a file that hashes "
            "the same is the file reduced.",
            "intro",
        )
    )
    # Two files a row, each digest on two lines of 32 hex digits: the whole list in half the
    # pages of one file a row, every digest still printed in full.
    cells = [
        [path, b.p(f"{sha[:32]}<br/>{sha[32:]}", "mono", markup=True)]
        for path, sha in sorted((str(k), escape(str(v))) for k, v in data.hashes.items())
    ]
    rows = [
        cells[i] + (cells[i + 1] if i + 1 < len(cells) else ["", ""])
        for i in range(0, len(cells), 2)
    ]
    if rows:
        b.table(["file", "SHA-256", "file", "SHA-256"], rows, [1.25, 1.45, 1.25, 1.45],
                compact=True)  # fmt: skip
    else:
        b.add(b.p("The results record no input hashes."))
    if not full_config:
        b.add(
            b.p(
                "The full campaign.toml is not reproduced (write the report with --full-config "
                f"to include it); its SHA-256 is {data.ds.attrs.get('config_sha256', '–')}."
            )
        )
        return
    b.add(b.p("campaign.toml", "h2"))
    if data.campaign is None:
        b.add(b.p("The campaign folder was not given, so campaign.toml is not reproduced here."))
        return
    path = Path(data.campaign.root) / "campaign.toml"
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        b.add(b.p(f"campaign.toml could not be read: {exc}"))
        return
    b.add(Preformatted(text.expandtabs(4), b.s["mono"], maxLineLength=118, newLineChars="  ↪ "))
