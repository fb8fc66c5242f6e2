"""The PDF test report of a reduced campaign (docs/report.md lists what it holds).

The report is built with reportlab's platypus from an output folder of
:func:`tunnelred.pipeline.campaign.reduce_campaign`: results.nc, budgets.csv and failures.csv,
plus the campaign folder when it is known (report control, model, instruments, flag
tolerances). Figures are drawn by :mod:`tunnelred.products.plotting` and embedded as 200 dpi PNG;
they are the only images a report holds. Every string from a file (results.nc attributes,
campaign.toml, CSV cells: titles, notes, labels, run ids, file names, hashes) is escaped before it
enters reportlab's paragraph markup, and the report's own markup is checked to hold only inline
tags. The file is written atomically.
"""

from __future__ import annotations

import importlib
import importlib.util
import io
import json
import math
import re
from datetime import UTC, datetime
from pathlib import Path
from xml.sax.saxutils import escape

import matplotlib as mpl
import numpy as np
import pandas as pd
import xarray as xr
from matplotlib.figure import Figure
from reportlab.lib import colors
from reportlab.lib.enums import TA_CENTER
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle, getSampleStyleSheet
from reportlab.lib.units import mm
from reportlab.pdfbase import pdfmetrics
from reportlab.pdfbase.ttfonts import TTFont
from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import (
    BaseDocTemplate,
    CondPageBreak,
    Frame,
    Image,
    KeepTogether,
    LongTable,
    PageBreak,
    PageTemplate,
    Paragraph,
    Preformatted,
    Spacer,
    TableStyle,
)
from reportlab.platypus.tableofcontents import TableOfContents

from tunnelred import __version__
from tunnelred.engine import quality
from tunnelred.engine.quality import FLAG_NAMES
from tunnelred.physics import corrections
from tunnelred.products import plotting, store

__all__ = ["SECTIONS", "CAUTIONS", "write_report", "format_uncertain"]

#: The numbered sections, in order (a configuration comparison follows the results when the
#: campaign has more than one configuration and tunnelred.products.compare is installed).
SECTIONS = (
    "Summary",
    "Model",
    "Test matrix and run log",
    "Instrumentation",
    "Procedures",
    "Data reduction",
    "Uncertainty statement",
    "Results",
    "Quality flags",
    "Appendix: input files",
)
_COMPARISON = "Configuration comparison"

#: The cautions printed on the title page.
CAUTIONS = (
    "Rotating models and machinery in a wind tunnel are hazardous: follow the facility's safety "
    "rules for spinning models, guards and interlocks at every test.",
    "These are model-scale results. They are not a full-scale design: applying them to a ship "
    "rotor, a lifting device or any structure is a matter for licensed engineering practice and "
    "the local codes.",
)

_PAGE = A4
_MARGIN = 18 * mm
_WIDTH = _PAGE[0] - 2 * _MARGIN
_K = plotting.COVERAGE_FACTOR
_FIGURE_DPI = 200
_BUDGET_ROWS = 6  # contributors listed per output
_SECTION_ROOM = 70 * mm  # least room below a section heading for it to start on this page
_TABLE_ROOM = 35 * mm  # least room for a table's caption and first rows
_FIGURE_ROOM = 95 * mm  # least room below a heading for the figure that follows it
_LINE_ROOM = 14 * mm  # a heading and one line of text
_PLOT_SIZE = (7.4, 3.5)  # inches, for figures drawn for the report
_GRID = colors.HexColor("#b0b0b0")
_HEAD_FILL = colors.HexColor("#e4ecf4")
_STRIPE = colors.HexColor("#f6f6f6")


# ---------------------------------------------------------------------------------------------
# Fonts and styles


def _register_fonts() -> dict[str, str]:
    """DejaVu (shipped with matplotlib) has the Greek letters and signs the report prints."""
    folder = Path(mpl.get_data_path()) / "fonts" / "ttf"
    faces = {
        "body": "DejaVuSans",
        "bold": "DejaVuSans-Bold",
        "italic": "DejaVuSans-Oblique",
        "bolditalic": "DejaVuSans-BoldOblique",
        "mono": "DejaVuSansMono",
    }
    for name in faces.values():
        if name not in pdfmetrics.getRegisteredFontNames():
            pdfmetrics.registerFont(TTFont(name, str(folder / f"{name}.ttf")))
    pdfmetrics.registerFontFamily(
        faces["body"],
        normal=faces["body"],
        bold=faces["bold"],
        italic=faces["italic"],
        boldItalic=faces["bolditalic"],
    )
    return faces


def _styles(faces: dict[str, str]) -> dict[str, ParagraphStyle]:
    base = getSampleStyleSheet()
    body = ParagraphStyle(
        "body", parent=base["BodyText"], fontName=faces["body"], fontSize=9, leading=12
    )
    return {
        "body": body,
        "intro": ParagraphStyle("intro", parent=body, keepWithNext=1),
        "small": ParagraphStyle("small", parent=body, fontSize=7.5, leading=9.5),
        "cell": ParagraphStyle("cell", parent=body, fontSize=7.2, leading=9, spaceAfter=0),
        "head": ParagraphStyle(
            "head", parent=body, fontName=faces["bold"], fontSize=7.5, leading=9
        ),
        "caption": ParagraphStyle(
            "caption", parent=body, fontName=faces["italic"], fontSize=8, leading=10, spaceAfter=8
        ),
        "table_caption": ParagraphStyle(
            "table_caption",
            parent=body,
            fontName=faces["italic"],
            fontSize=8,
            leading=10,
            spaceAfter=3,
        ),
        "h1": ParagraphStyle(
            "h1",
            parent=body,
            fontName=faces["bold"],
            fontSize=14,
            leading=18,
            spaceBefore=6,
            spaceAfter=8,
            keepWithNext=1,
            textColor=colors.HexColor("#1b3a5c"),
        ),
        "h2": ParagraphStyle(
            "h2",
            parent=body,
            fontName=faces["bold"],
            fontSize=10.5,
            leading=14,
            spaceBefore=8,
            spaceAfter=4,
            keepWithNext=1,
        ),
        "title": ParagraphStyle(
            "title",
            parent=body,
            fontName=faces["bold"],
            fontSize=22,
            leading=28,
            alignment=TA_CENTER,
            spaceAfter=10,
        ),
        "subtitle": ParagraphStyle(
            "subtitle", parent=body, fontSize=12, leading=16, alignment=TA_CENTER, spaceAfter=4
        ),
        "caution": ParagraphStyle(
            "caution", parent=body, fontSize=9, leading=12, leftIndent=6, spaceAfter=4
        ),
        "mono": ParagraphStyle(
            "mono", parent=body, fontName=faces["mono"], fontSize=6.5, leading=8
        ),
        "toc": ParagraphStyle("toc", parent=body, fontSize=10, leading=15),
        "formula": ParagraphStyle("formula", parent=body, leftIndent=14, spaceAfter=3),
        "end": ParagraphStyle(
            "end", parent=body, fontName=faces["bold"], alignment=TA_CENTER, spaceBefore=6
        ),
    }


# ---------------------------------------------------------------------------------------------
# Page furniture: running header, "page N of M"


def _canvas_class(title: str, footer: str, faces: dict[str, str]):
    """A canvas that holds its pages back until the end, so each can say "page N of M".

    Every page carries the report's identification (number and revision) and "page N of M"
    (ISO/IEC 17025:2017 §7.8.2.1 c); pages after the first also the title.
    """

    class _ReportCanvas(Canvas):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            self._pages: list[dict] = []

        def showPage(self):  # noqa: N802 - reportlab's name
            self._pages.append(dict(self.__dict__))
            self._startPage()

        def save(self):
            total = len(self._pages)
            for state in self._pages:
                self.__dict__.update(state)
                self._furniture(total)
                super().showPage()
            super().save()

        def _furniture(self, total: int) -> None:
            width, height = _PAGE
            self.saveState()
            self.setStrokeColor(_GRID)
            self.setLineWidth(0.5)
            if self._pageNumber > 1:
                self.setFont(faces["body"], 8)
                top = height - _MARGIN + 6 * mm
                self.drawString(_MARGIN, top, _clip(title, 80))
                self.drawRightString(width - _MARGIN, top, _clip(footer, 48))
                self.line(_MARGIN, top - 2 * mm, width - _MARGIN, top - 2 * mm)
            self.setFont(faces["body"], 8)
            bottom = _MARGIN - 8 * mm
            self.line(_MARGIN, bottom + 4 * mm, width - _MARGIN, bottom + 4 * mm)
            self.drawString(_MARGIN, bottom, _clip(footer, 60))
            self.drawCentredString(width / 2, bottom, f"tunnelred {__version__}")
            self.drawRightString(width - _MARGIN, bottom, f"page {self._pageNumber} of {total}")
            self.restoreState()

    return _ReportCanvas


def _clip(text: str, length: int) -> str:
    return text if len(text) <= length else text[: length - 1] + "…"


class _Document(BaseDocTemplate):
    """Numbered section headings go to the table of contents as they are laid out."""

    def afterFlowable(self, flowable):  # noqa: N802 - reportlab's name
        if isinstance(flowable, Paragraph) and getattr(flowable, "_toc_entry", None):
            text, key = flowable._toc_entry
            self.canv.bookmarkPage(key)
            self.canv.addOutlineEntry(text, key, level=0)
            self.notify("TOCEntry", (0, text, self.page, key))


# ---------------------------------------------------------------------------------------------
# Numbers


def format_uncertain(value: float, expanded: float) -> str:
    """A value with its expanded uncertainty, both to the uncertainty's second significant digit.

    Parameters
    ----------
    value : float
        The measured value.
    expanded : float
        Its expanded uncertainty U = k·u (k = 2 in the report); NaN or 0 for none.

    Returns
    -------
    str
        ``"value ± U"``; the value alone with 4 significant digits when U is NaN or 0; ``"–"``
        for a NaN value.

    Notes
    -----
    GUM §7.2.6 asks for an uncertainty of at most two significant digits, and for the value
    rounded to the same decimal place.

    References
    ----------
    .. [1] JCGM 100:2008, *Evaluation of measurement data — Guide to the expression of
       uncertainty in measurement*, §7.2.6.

    Examples
    --------
    >>> format_uncertain(-3.14159, 0.0432)
    '-3.142 ± 0.043'
    >>> format_uncertain(1234.5, 17.0)
    '1234 ± 17'
    """
    if value is None or not np.isfinite(value):
        return "–"
    if expanded is None or not np.isfinite(expanded) or expanded <= 0:
        return _number(value)
    decimals = max(1 - math.floor(math.log10(abs(expanded))), 0)
    shown = f"{value:.{decimals}f}"
    if float(shown) == 0:
        # A value that rounds to zero is shown without the sign of its unrounded part.
        shown = f"{0.0:.{decimals}f}"
    return f"{shown} ± {expanded:.{decimals}f}"


def _number(value, digits: int = 4) -> str:
    """A plain number to ``digits`` significant digits ("–" for NaN)."""
    if value is None or (isinstance(value, float) and not np.isfinite(value)):
        return "–"
    value = float(value)
    if value == 0:
        return "0"
    exponent = math.floor(math.log10(abs(value)))
    if exponent >= digits or exponent < -3:
        return f"{value:.{digits - 1}e}"
    return f"{value:.{max(digits - 1 - exponent, 0)}f}"


def _fixed(value, decimals: int) -> str:
    return "–" if value is None or not np.isfinite(value) else f"{value:.{decimals}f}"


# ---------------------------------------------------------------------------------------------
# Building blocks


_OWN_TAGS = {"b", "i", "br", "sub", "super"}  # the only tags the report's own markup uses
_TAG = re.compile(r"<\s*/?\s*([A-Za-z]+)[^>]*>")


def _check_markup(text: str) -> None:
    """Refuse markup with a tag the report never writes itself (a programming error)."""
    for match in _TAG.finditer(text):
        if match.group(1).lower() not in _OWN_TAGS:
            raise ValueError(f"markup with a <{match.group(1)}> tag: escape the text first")


class _Builder:
    """Holds the styles and the story while the sections are written."""

    def __init__(self, styles: dict[str, ParagraphStyle]):
        self.s = styles
        self.story: list = []
        self._sections = 0
        self._tables = 0
        self._figures = 0

    def next_table(self) -> str:
        self._tables += 1
        return f"Table {self._tables}."

    def next_figure(self) -> str:
        self._figures += 1
        return f"Figure {self._figures}."

    def p(self, text: str, style: str = "body", *, markup: bool = False) -> Paragraph:
        """A paragraph; ``text`` is escaped unless it is our own markup.

        Our own markup holds only the inline tags of :data:`_OWN_TAGS`, with every piece of
        text from a file escaped into it; anything else (an image, a link) is refused, so no
        string from results.nc, a CSV or campaign.toml can make the report embed or link a file.
        """
        if markup:
            _check_markup(text)
        return Paragraph(text if markup else escape(str(text)), self.s[style])

    def add(self, *flowables) -> None:
        self.story.extend(flowables)

    def section(self, title: str) -> None:
        # A heading low on a page would sit alone there: start a new page instead.
        self.add(CondPageBreak(_SECTION_ROOM))
        self._sections += 1
        text = f"{self._sections}  {title}"
        heading = Paragraph(escape(text), self.s["h1"])
        heading._toc_entry = (text, f"section{self._sections}")
        self.add(heading)

    def subsection(self, title: str, room: float = _TABLE_ROOM) -> None:
        """A second-level heading with room below it for what follows, or a new page.

        keepWithNext cannot reach past the CondPageBreak a captioned table or a figure starts
        with, so the room is asked for here.
        """
        self.add(CondPageBreak(room), self.p(title, "h2"))

    def table(
        self,
        header: list[str],
        rows: list[list],
        widths: list[float],
        *,
        caption: str = "",
        compact: bool = False,
        padding: float = 1.5,
    ) -> None:
        """A table that splits across pages, repeating its header row; cells are escaped.

        A cell is text (escaped here) or a Paragraph this builder made; nothing else.
        """
        cell = "small" if compact else "cell"
        data = [[self.p(h, "head") for h in header]]
        for row in rows:
            for c in row:
                if not isinstance(c, str | Paragraph):
                    raise TypeError(f"a table cell must be text or a Paragraph, not {c!r}")
            data.append([c if not isinstance(c, str) else self.p(c, cell) for c in row])
        scale = _WIDTH / sum(widths)
        table = LongTable(data, colWidths=[w * scale for w in widths], repeatRows=1)
        style = [
            ("GRID", (0, 0), (-1, -1), 0.4, _GRID),
            ("BACKGROUND", (0, 0), (-1, 0), _HEAD_FILL),
            ("VALIGN", (0, 0), (-1, -1), "MIDDLE"),
            ("TOPPADDING", (0, 0), (-1, -1), padding),
            ("BOTTOMPADDING", (0, 0), (-1, -1), padding),
            ("LEFTPADDING", (0, 0), (-1, -1), 3),
            ("RIGHTPADDING", (0, 0), (-1, -1), 3),
        ]
        style += [("BACKGROUND", (0, i), (-1, i), _STRIPE) for i in range(2, len(data), 2)]
        table.setStyle(TableStyle(style))
        if caption:
            # Room for the caption and a few rows, or a new page; a long table then splits
            # under its repeated header (keepWithNext would move the whole table instead).
            self.add(CondPageBreak(_TABLE_ROOM), self.p(caption, "table_caption", markup=True))
        self.add(table)
        self.add(Spacer(1, 4 * mm))

    def figure(self, fig, caption: str, *, width: float = _WIDTH) -> None:
        """A figure this report drew (the only images a report holds), with its caption."""
        if not isinstance(fig, Figure):
            raise TypeError("the report embeds only the figures it draws")
        buffer = io.BytesIO()
        fig.savefig(buffer, format="png", dpi=_FIGURE_DPI)
        w_in, h_in = fig.get_size_inches()
        buffer.seek(0)
        image = Image(buffer, width=width, height=width * h_in / w_in)
        self.add(KeepTogether([image, self.p(caption, "caption", markup=True)]))


# ---------------------------------------------------------------------------------------------
# The report's data


class _Inputs:
    def __init__(self, out_dir: Path, campaign):
        self.out = out_dir
        self.ds = store.read_results(out_dir)
        self.budgets = _read_csv(out_dir / "budgets.csv")
        self.failures = _read_csv(out_dir / "failures.csv")
        recorded = self.ds.attrs.get("campaign_path", "")
        if campaign is None and recorded and (Path(recorded) / "campaign.toml").is_file():
            campaign = recorded  # the folder reduce recorded, while it is still there
        self.campaign = _campaign(campaign)
        self.table = store.run_table(self.ds)
        self.methods = _json_attr(self.ds, "methods")
        self.hashes = {str(k): str(v) for k, v in _json_attr(self.ds, "input_sha256").items()}
        self.control = _Control(self.campaign)

    @property
    def title(self) -> str:
        return str(self.ds.attrs.get("title", "")) or "Wind-tunnel test"

    @property
    def runs(self) -> list[str]:
        return [str(r) for r in self.ds["run"].values]

    def column(self, name: str) -> np.ndarray:
        if name not in self.table:
            return np.full(len(self.table), np.nan)
        return np.asarray(self.table[name], dtype=float)


def _read_csv(path: Path) -> pd.DataFrame:
    try:
        return pd.read_csv(path, keep_default_na=True)
    except (FileNotFoundError, pd.errors.EmptyDataError):
        return pd.DataFrame()


def _json_attr(ds: xr.Dataset, key: str) -> dict:
    try:
        value = json.loads(ds.attrs.get(key, "{}"))
    except (TypeError, ValueError):
        return {}
    return value if isinstance(value, dict) else {}


def _campaign(campaign):
    if campaign is None or hasattr(campaign, "config"):
        return campaign
    from tunnelred.inputs.readers import open_campaign

    return open_campaign(campaign, check_logs=False)


# ---------------------------------------------------------------------------------------------
# Report control: the [report] table of campaign.toml, blank where absent


class _Control:
    """Report number, revision, client, signatories … as campaign.toml states them ('' if not)."""

    FIELDS = (
        "number",
        "revision",
        "laboratory",
        "client",
        "client_address",
        "laboratory_address",
        "location",
        "prepared_by",
        "checked_by",
        "approved_by",
        "date_of_issue",
        "method",
        "deviations",
    )

    def __init__(self, campaign):
        config = campaign.config if campaign is not None else None
        info = getattr(config, "report", None)
        for name in self.FIELDS:
            setattr(self, name, str(getattr(info, name, "") or ""))
        self.distribution = tuple(str(d) for d in (getattr(info, "distribution", ()) or ()))
        self.history = tuple(getattr(info, "revision_history", ()) or ())

    @property
    def footer(self) -> str:
        number = self.number or "____________"
        return f"Report number {number}, revision {self.revision or '__'}"


# ---------------------------------------------------------------------------------------------
# Sections


_BLANK = "_" * 28  # a line to fill in by hand, where campaign.toml states nothing
_SIGNATURE = "_" * 30

#: The statements ISO/IEC 17025:2017 §7.8.2.1 asks of every report.
STATEMENTS = (
    "The results relate only to the item tested, as received and in the configurations "
    "described in this report.",
    "This report shall not be reproduced except in full without the written approval of the "
    "laboratory.",
)


def _or_blank(text: str) -> str:
    return text if text else _BLANK


def _title_page(b: _Builder, data: _Inputs, date: str) -> None:
    ds = data.ds
    control = data.control
    info = data.campaign.config.campaign if data.campaign is not None else None
    b.add(Spacer(1, 8 * mm))
    b.add(b.p("Wind-tunnel test report", "subtitle"))
    b.add(b.p(data.title, "title"))
    facility = str(ds.attrs.get("facility", ""))
    b.add(b.p(control.laboratory or facility or "(laboratory not stated)", "subtitle"))
    if control.laboratory_address:
        b.add(b.p(control.laboratory_address, "subtitle"))
    b.add(Spacer(1, 4 * mm))
    n_runs = ds.sizes["run"]
    n_failed = data.failures["run"].nunique() if "run" in data.failures else 0
    n_flagged = int(plotting.flagged_runs(ds).sum())
    rows = [
        ["Report number", _or_blank(control.number)],
        ["Revision", _or_blank(control.revision)],
        ["Client", _or_blank(control.client)],
        ["Client address", _or_blank(control.client_address)],
        ["Laboratory", _or_blank(control.laboratory or facility)],
        ["Laboratory address", _or_blank(control.laboratory_address)],
        ["Place of test", _or_blank(control.location or facility)],
        ["Dates of test", _or_blank(info.date if info is not None else "")],
        ["Date of issue", _or_blank(control.date_of_issue)],
        ["Report generated", date],
        ["Distribution", _or_blank("; ".join(control.distribution))],
        [
            "Runs",
            f"{n_runs} data runs reduced, {n_flagged} flagged, {n_failed} could not be reduced",
        ],
    ]
    b.table(["report control", ""], rows, [1.1, 3.0])
    b.add(b.p("Signatures", "h2"))
    rows = [
        [role, _or_blank(name), _SIGNATURE, "date: ________"]
        for role, name in (
            ("Prepared by", control.prepared_by),
            ("Checked by", control.checked_by),
            ("Approved by", control.approved_by),
        )
    ]
    b.table(["", "name", "signature", ""], rows, [0.9, 1.5, 1.5, 0.9], padding=6)
    b.add(b.p("Approved by: the person who authorises this report for issue.", "small"))
    for text in STATEMENTS:
        b.add(b.p(text, "caution"))
    b.add(b.p("Cautions", "h2"))
    for text in CAUTIONS:
        b.add(b.p(f"• {text}", "caution"))
    b.add(PageBreak())
    b.add(b.p("Revision history", "h2"))
    history = [
        [str(getattr(h, key, "")) for key in ("revision", "date", "change")]
        for h in control.history
    ] or [[_or_blank(control.revision), _or_blank(control.date_of_issue), "first issue"]]
    b.table(["revision", "date", "change"], history, [0.8, 1.0, 4.0])
    if info is not None and info.notes:
        b.add(b.p("Campaign notes", "h2"))
        b.add(b.p(info.notes))
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


def _axes(size=_PLOT_SIZE):
    return Figure(figsize=size, layout="constrained").add_subplot()


def _on_off(value) -> str:
    return "–" if value is None else ("on" if value else "off")


def _efficiency_half(alpha: np.ndarray, efficiency: np.ndarray) -> float:
    """The first |α|, going up from 0, where the lift efficiency passes through 50 %.

    Lift efficiency is CL / (−2πα), the lift as a fraction of potential flow's. The crossing is
    taken either way (rising or falling), linear between neighbouring runs, and NaN when the
    efficiency stays on one side of 50 % over the whole sweep.
    """
    usable = np.isfinite(alpha) & np.isfinite(efficiency) & (np.abs(alpha) > 0)
    a, e = np.abs(alpha[usable]), efficiency[usable]
    order = np.argsort(a, kind="stable")
    a, e = a[order], e[order] - 0.5
    cross = np.flatnonzero(np.sign(e[:-1]) * np.sign(e[1:]) <= 0)
    if cross.size == 0:
        return np.nan
    i = cross[0]
    if e[i] == e[i + 1]:
        return float(a[i])
    return float(a[i] + (a[i + 1] - a[i]) * e[i] / (e[i] - e[i + 1]))


def _efficiency_text(alpha: np.ndarray, efficiency: np.ndarray) -> str:
    """The summary's lift-efficiency cell: the |α| of 50 %, or why there is none, and the peak."""
    usable = np.isfinite(alpha) & np.isfinite(efficiency) & (np.abs(alpha) > 0)
    if not usable.any():
        return "–"
    peak = int(np.argmax(np.where(usable, efficiency, -np.inf)))
    peak_text = f"peak {100 * efficiency[peak]:.0f} % at α {_fixed(abs(alpha[peak]), 2)}"
    half = _efficiency_half(alpha, efficiency)
    if np.isfinite(half):
        return f"50 % at |α| {_fixed(half, 2)}; {peak_text}"
    side = "below" if efficiency[peak] < 0.5 else "above"
    return f"{side} 50 % throughout; {peak_text}"


def _findings(data: _Inputs) -> list[list[str]]:
    """One row per sweep: lift slope, max |CL|, min CD, max |L/D|, α at lift efficiency 50 %."""
    from tunnelred.products import compare

    rows = []
    sweeps = compare.find_sweeps(data.ds)
    for sweep in sweeps:
        if np.unique(sweep.arrays["spin_point"]).size < 3:
            continue  # a retake of one or two points is no sweep to characterise
        c = compare.characteristics(sweep)
        arrays = sweep.arrays
        efficiency = _efficiency_text(
            np.asarray(arrays.get("alpha", []), dtype=float),
            np.asarray(arrays.get("lift_efficiency", np.full(len(sweep.runs), np.nan)), float),
        )
        rows.append(
            [
                sweep.key,
                format_uncertain(c["dCL_dalpha"], _K * c["u_dCL_dalpha"]),
                format_uncertain(c["CL_peak"], _K * c["u_CL_peak"])
                + f" at α {_fixed(c['alpha_CL_peak'], 2)}",
                format_uncertain(c["CD_min"], _K * c["u_CD_min"])
                + f" at α {_fixed(c['alpha_CD_min'], 2)}",
                format_uncertain(c["L_D_peak"], _K * c["u_L_D_peak"])
                + f" at α {_fixed(c['alpha_L_D_peak'], 2)}",
                efficiency,
            ]
        )
    return rows


def _summary(b: _Builder, data: _Inputs) -> None:
    ds = data.ds
    b.section("Summary")
    alpha = data.column("alpha")
    configs = plotting.group_runs(ds, "config")
    speeds = plotting.group_runs(ds, "speed")
    b.add(
        b.p(
            f"{ds.sizes['run']} data runs in {len(configs)} configuration(s) at "
            f"{len(speeds)} tunnel speed(s); spin ratio from {_fixed(np.nanmin(alpha), 3)} to "
            f"{_fixed(np.nanmax(alpha), 3)}. Coefficients are wall-corrected; error bars and "
            f"tabulated uncertainties are expanded uncertainties with coverage factor k = 2.",
            "intro",
        )
    )
    rows = _findings(data)
    if rows:
        b.table(
            ["sweep", "dCL/dα", "max |CL|", "min CD", "max |L/D|", "lift efficiency"],
            rows,
            [1.5, 1.1, 1.6, 1.6, 1.6, 1.5],
            caption=f"{b.next_table()} Findings of each sweep (configuration | speed | "
            "direction of the spin steps); values ± expanded uncertainty (k = 2). dCL/dα: "
            "weighted straight line through |α| ≤ 0.5 (potential flow: −2π = −6.283). Lift "
            "efficiency: CL / (−2πα), the lift as a fraction of potential flow's; the |α| where it "
            "passes 50 %, or the side of 50 % it stays on, and its peak.",
        )
    flagged = [(r, f) for r, f in zip(data.runs, _flags(ds), strict=True) if f]
    if flagged:
        b.add(
            b.p(
                f"<b>Flags.</b> {len(flagged)} run(s) raised quality flags (reasons under "
                "Quality flags): "
                + ", ".join(f"{escape(r)} ({escape(f.replace(';', ', '))})" for r, f in flagged)
                + ".",
                markup=True,
            )
        )
    else:
        b.add(b.p("No run raised a quality flag."))


def _flags(ds: xr.Dataset) -> list[str]:
    if "flags" not in ds:
        return [""] * ds.sizes["run"]
    return ["" if not isinstance(f, str) else f for f in ds["flags"].values]


def _model(b: _Builder, data: _Inputs) -> None:
    b.section("Model")
    cfg = data.campaign.config if data.campaign is not None else None
    if cfg is None:
        b.add(b.p("The campaign folder was not given: the model is described by its results only."))
        return
    model, tunnel = cfg.model, cfg.tunnel
    b.add(
        b.p(
            "The item tested: a circular cylinder spun about its own axis (z), mounted across the "
            "test section on the force balance.",
            "intro",
        )
    )
    surface = str(getattr(model, "surface", "") or "")
    photo = str(getattr(model, "photo", "") or "")
    rows = [
        ["diameter d", f"{format_uncertain(1000 * model.diameter, 2000 * model.u_diameter)} mm"],
        ["span b", f"{format_uncertain(1000 * model.span, 2000 * model.u_span)} mm"],
        ["aspect ratio b/d", _fixed(model.span / model.diameter, 2)],
        ["spans the section", "yes (two-dimensional)" if model.spans_section else "no"],
        ["surface", _or_blank(surface)],
        ["photograph (file, not embedded)", _or_blank(photo)],
        [
            "test section",
            f"{tunnel.section}, {_fixed(tunnel.height, 3)} m (y) × {_fixed(tunnel.width, 3)} m (z)",
        ],  # fmt: skip
        ["diameter / height d/h", _fixed(model.diameter / tunnel.height, 4)],
    ]
    if model.transducer_radius:
        rows.append(["radius of the on-board transducer", f"{1000 * model.transducer_radius:g} mm"])
    b.table(["geometry", "value (± U, k = 2)"], rows, [1.4, 2.6],
            caption=f"{b.next_table()} Model and test section.")  # fmt: skip
    rows = []
    for label, c in cfg.configurations.items():
        plates = "yes" if c.end_plates else "no"
        if c.end_plates and c.end_plate_diameter:
            plates += f", diameter {1000 * c.end_plate_diameter:g} mm"
        rows.append([label, c.description, plates])
    b.table(["configuration", "description", "end plates"], rows, [1.0, 3.0, 1.6],
            caption=f"{b.next_table()} Configurations tested.")  # fmt: skip


_RPM = 60.0 / (2.0 * math.pi)


def _run_log(b: _Builder, data: _Inputs) -> None:
    ds = data.ds
    b.section("Test matrix and run log")
    alpha = data.column("alpha")
    configs = plotting.group_runs(ds, "config")
    speeds = plotting.group_runs(ds, "speed")
    rows = []
    for label, idx in configs:
        row = [label or "(none)"]
        for _, members in speeds:
            both = np.intersect1d(idx, members)
            if both.size == 0:
                row.append("–")
                continue
            a = alpha[both]
            row.append(
                f"{both.size} runs, α {_fixed(np.nanmin(a), 2)} to {_fixed(np.nanmax(a), 2)}"
            )
        rows.append(row)
    b.table(
        ["configuration"] + [label for label, _ in speeds],
        rows,
        [1.2] + [1.6] * len(speeds),
        caption=f"{b.next_table()} Test matrix: runs by configuration and tunnel speed, with "
        "their spin-ratio range.",
    )
    b.subsection("Run log")
    start = data.table["start"].astype(str) if "start" in data.table else [""] * len(data.runs)
    omega = data.column("omega")
    rows = []
    for i, run in enumerate(data.runs):
        rows.append(
            [
                run,
                str(start[i]).replace("T", " "),
                _config(data, i),
                _fixed(data.column("speed_set")[i], 1),
                _fixed(data.column("spin_set")[i], 0),
                _fixed(omega[i] * _RPM, 0),
                _fixed(alpha[i], 3),
                _flags(ds)[i].replace(";", ", "),
            ]
        )
    b.table(
        [
            "run",
            "start",
            "config",
            "set U [m/s]",
            "set [rpm]",
            "measured [rpm]",
            "α",
            "flags",
        ],  # fmt: skip
        rows,
        [0.6, 1.5, 0.7, 0.7, 0.7, 0.8, 0.6, 2.2],
        caption=f"{b.next_table()} Run log: every data run in order, its set points, measured "
        "spin rate and spin ratio (wall-corrected), and the flags it raised.",
    )
    _conditions(b, data)


def _config(data: _Inputs, i: int) -> str:
    return str(data.table["config"].iloc[i]) if "config" in data.table else ""


def _conditions(b: _Builder, data: _Inputs) -> None:
    b.subsection("Test conditions")
    cols = {n: data.column(n) for n in ("U", "q", "Re", "Mach", "T", "p_baro", "RH", "rho")}
    rows = []
    for i, run in enumerate(data.runs):
        rows.append(
            [
                run,
                _config(data, i),
                _fixed(cols["U"][i], 2),
                _fixed(cols["q"][i], 1),
                _number(cols["Re"][i], 3),
                _fixed(cols["Mach"][i], 3),
                _fixed(cols["T"][i] - 273.15, 2),
                _fixed(cols["p_baro"][i] / 1000, 2),
                _fixed(100 * cols["RH"][i], 1),
                _fixed(cols["rho"][i], 4),
            ]
        )
    b.table(
        [
            "run",
            "config",
            "U [m/s]",
            "q [Pa]",
            "Re",
            "Mach",
            "T [°C]",
            "p [kPa]",
            "RH [%]",
            "ρ [kg/m³]",
        ],  # fmt: skip
        rows,
        [0.8, 0.8, 0.8, 0.8, 1.0, 0.7, 0.8, 0.8, 0.7, 0.9],
        caption=f"{b.next_table()} Test conditions, run means: free stream wall-corrected (U, q, "
        "Re, Mach); air temperature T, barometric pressure p, relative humidity RH and density "
        "ρ (CIPM-2007).",
    )


#: Instruments: (name in campaign.toml, what it measures, how its declared uncertainty reads).
def _instrument_rows(cfg) -> list[list[str]]:
    ins = cfg.instruments
    bal = ins.balance
    calibrations = getattr(ins, "calibrations", {}) or {}

    def cal(name: str) -> list[str]:
        entry = calibrations.get(name)
        reference = str(getattr(entry, "reference", "") or "") if entry else ""
        when = str(getattr(entry, "date", "") or "") if entry else ""
        return [_or_blank(reference), _or_blank(when)]

    rows = []
    if bal is not None:
        fs = ", ".join(f"{_number(f, 3)}" for f in bal.full_scale)
        u_fs = ", ".join(f"{100 * f:g} %" for f in bal.u_fraction_of_full_scale)
        text = f"{u_fs} of full scale ({fs} N, N, N·m)"
        if bal.coefficient_covariance is not None:
            count = len(bal.coefficient_covariance)
            text += f"; covariance of the {count} calibration coefficients ({bal.calibration_file})"
        elif bal.u_matrix_relative:
            text += f"; calibration matrix {100 * bal.u_matrix_relative:g} %"
        if bal.u_alignment_angle:
            text += f"; alignment {bal.u_alignment_angle:g}°"
        rows.append(["balance", "Fx, Fy, Mz (channels " + ", ".join(bal.channels) + ")", text,
                     *cal("balance")])  # fmt: skip
    if ins.scanner_full_scale is not None or ins.u_scanner:
        rows.append(["scanner", "surface-tap pressures", f"{_number(ins.u_scanner, 3)} Pa",
                     *cal("scanner")])  # fmt: skip
    pitot = f"{_number(ins.u_pitot, 3)} Pa"
    if ins.u_pitot_relative:
        pitot += f" + {100 * ins.u_pitot_relative:g} % of reading"
    rows.append(["pitot", "dynamic pressure", pitot, *cal("pitot")])
    rows.append(["thermometer", "air temperature", f"{_number(ins.u_thermometer, 3)} K",
                 *cal("thermometer")])  # fmt: skip
    rows.append(["barometer", "barometric pressure", f"{_number(ins.u_barometer, 3)} Pa",
                 *cal("barometer")])  # fmt: skip
    rows.append(["hygrometer", "relative humidity", f"{100 * ins.u_hygrometer:g} % RH",
                 *cal("hygrometer")])  # fmt: skip
    rows.append(["tachometer", "spin rate", f"{100 * ins.u_tachometer_relative:g} % of reading",
                 *cal("tachometer")])  # fmt: skip
    if ins.u_encoder:
        rows.append(["encoder", "model azimuth", f"{ins.u_encoder:g}°", *cal("encoder")])
    return rows


def _instrumentation(b: _Builder, data: _Inputs) -> None:
    b.section("Instrumentation")
    if data.campaign is None:
        b.add(b.p("The campaign folder was not given: its instruments are not listed."))
        return
    b.add(
        b.p(
            "Each instrument with the standard uncertainty campaign.toml declares for it (type B "
            "in the budgets) and its calibration reference and date.",
            "intro",
        )
    )
    b.table(
        [
            "instrument",
            "measures",
            "declared standard uncertainty",
            "calibration reference",
            "calibrated",
        ],  # fmt: skip
        _instrument_rows(data.campaign.config),
        [0.9, 1.4, 2.2, 1.3, 0.8],
        caption=f"{b.next_table()} Instruments.",
    )


def _procedures(b: _Builder, data: _Inputs) -> None:
    b.section("Procedures")
    control = data.control
    version = str(data.ds.attrs.get("tunnelred_version", ""))
    method = control.method or (
        "the zero, tare and data-run procedure described in this section, reduced as Data "
        f"reduction states (tunnelred {version})"
    )
    b.add(b.p(f"<b>Method.</b> {escape(method)}", markup=True))
    b.add(
        b.p(
            "<b>Additions to or deviations from the method.</b> "
            + escape(control.deviations or _BLANK),
            markup=True,
        )
    )
    b.add(
        b.p(
            "<b>Zeros.</b> Wind-off, not-spinning balance readings (zero runs) are taken before "
            "and after each block of data runs; a data run subtracts the mean of the zeros it "
            "names, and the zero_shift flag compares them. <b>Tares.</b> Wind-off readings at "
            "spin (tare runs) give the spin tare, interpolated in spin rate and subtracted from "
            "the spinning data runs. <b>Data runs.</b> At each set tunnel speed the spin rate is "
            "stepped up and back down; each run is averaged over its whole record after the "
            "steadiness checks of the quality flags.",
            markup=True,
        )
    )
    b.add(
        b.p(
            "<b>Axes and sign conventions.</b> x downstream, y the lift axis, z = x × y along the "
            "cylinder axis; the spin rate ω is positive counter-clockwise seen from +z; spin ratio "
            "α = ωR/U is signed with ω; θ is measured on the surface from the windward point, "
            "increasing in the sense of positive spin. Positive spin gives lift towards −y, so CL "
            "is negative (CL = −2πα in potential flow); CM is the torque about +z on q·d·b·R and "
            "C_power the power to spin on q·U·d·b.",
            markup=True,
        )
    )
    ax = plotting.plot_axes_sketch(_axes((4.6, 3.0)))
    b.figure(ax.figure, f"{b.next_figure()} Axes and sign conventions, seen from +z.",
             width=0.55 * _WIDTH)  # fmt: skip


def _reduction(b: _Builder, data: _Inputs) -> None:
    b.section("Data reduction")
    b.add(
        b.p(
            "Forces and torque from the balance, in wind axes after the zero and spin tare are "
            "removed: L (along y), D (along x), T (about z). With the dynamic pressure q, the "
            "free-stream speed U = √(2q/ρ), diameter d, span b and radius R = d/2:",
            "intro",
        )
    )
    for formula in (
        "CL = L / (q·d·b),   CD = D / (q·d·b),   CM = T / (q·d·b·R),   "
        "C_power = T·ω / (q·U·d·b),   L/D = CL / CD",
        "α = ωR / U,   Re = ρ·U·d / μ,   Cp = (p − p∞) / q",
        "from the surface pressure at mid-span: CL_p = ½∮Cp sin θ dθ,   CD_p = ½∮Cp cos θ dθ",
    ):
        b.add(b.p(formula, "formula"))
    b.subsection("Wall corrections")
    methods = data.methods
    method = methods.get("blockage")
    if method in corrections.METHODS:
        summary = corrections.correction_summary(
            method,
            lift_interference=bool(methods.get("lift_interference")),
            buoyancy=bool(methods.get("buoyancy", False)),
            blockage_factor=methods.get("maskell_factor"),
        )
        b.add(b.p("The corrections applied to every run, in the order they act:"))
        for line in summary.splitlines():
            name, _, formula = line.partition(": ")
            b.add(b.p(f"<b>{escape(name)}</b>: {escape(formula)}", markup=True))
    else:
        b.add(b.p("The results do not record the correction methods used."))
    show_lift = bool(methods.get("lift_interference"))
    header = ["run", "config", "ε_solid", "ε_wake", "ΔCD buoyancy"]
    names = ["eps_solid", "eps_wake", "delta_CD_buoyancy"]
    if show_lift:
        header.append("Δα lift")
        names.append("delta_alpha_lift")
    cols = [data.column(n) for n in names]
    rows = [
        [run, _config(data, i), *(_fixed(c[i], 5) for c in cols)] for i, run in enumerate(data.runs)
    ]
    b.table(
        header,
        rows,
        [1.3, 1.1] + [1.0] * len(names),
        caption=f"{b.next_table()} Size of the wall corrections: solid- and wake-blockage velocity "
        "increments and the horizontal-buoyancy drag coefficient removed.",
    )


#: Readable names and units of the budget inputs (the names the run model gives them).
BUDGET_INPUTS: dict[str, tuple[str, str]] = {
    "dp": ("pitot pressure difference, time average", "Pa"),
    "dp_spec": ("pitot transducer", "Pa"),
    "T": ("air temperature, time average", "K"),
    "T_spec": ("thermometer", "K"),
    "p": ("barometric pressure, time average", "Pa"),
    "p_spec": ("barometer", "Pa"),
    "RH": ("relative humidity, time average", "–"),
    "RH_spec": ("hygrometer", "–"),
    "omega": ("spin rate, time average", "rad/s"),
    "omega_spec": ("spin-rate sensor, relative", "–"),
    "Fx": ("balance Fx, time average", "N"),
    "Fy": ("balance Fy, time average", "N"),
    "Mz": ("balance Mz, time average", "N·m"),
    "Fx_spec": ("balance Fx specification", "N"),
    "Fy_spec": ("balance Fy specification", "N"),
    "Mz_spec": ("balance Mz specification", "N·m"),
    "Fx_tare": ("spin tare Fx", "N"),
    "Fy_tare": ("spin tare Fy", "N"),
    "Mz_tare": ("spin tare Mz", "N·m"),
    "calibration": ("balance calibration factor", "–"),
    "calibration_coefficients": (
        "balance calibration coefficients (with covariance)",
        "per channel unit",
    ),
    "alignment": ("balance alignment angle", "deg"),
    "flow_angle": ("flow angularity", "deg"),
    "height": ("test-section height", "m"),
    "width": ("test-section width", "m"),
    "diameter": ("model diameter", "m"),
    "span": ("model span", "m"),
    "dpdx": ("empty-tunnel static-pressure gradient", "Pa/m"),
    "p_bin": ("tap pressure, per azimuth bin", "Pa"),
    "p_scanner": ("pressure scanner, per tap", "Pa"),
    "tap_azimuth": ("tap azimuth, per tap (installed, tubing delay)", "deg"),
    "encoder": ("encoder zero", "deg"),
}


def budget_label(name: str) -> tuple[str, str]:
    """The readable name and unit of a budget input (its own name, no unit, if unknown)."""
    if name in BUDGET_INPUTS:
        return BUDGET_INPUTS[name]
    base, _, tail = name.partition("_")
    if tail == "spec" and base in BUDGET_INPUTS:
        return f"{BUDGET_INPUTS[base][0]} (instrument)", BUDGET_INPUTS[base][1]
    return name, ""


_STATED = ("alpha", "CL", "CD", "CM")


def _budget_runs(data: _Inputs) -> list[str]:
    """A low, a mid and a high spin-ratio run among those with a budget (unflagged preferred)."""
    have = set(data.budgets["run"].astype(str)) if "run" in data.budgets else set()
    if not have:
        return []
    sub = data.ds.isel(run=[i for i, r in enumerate(data.runs) if r in have])
    return plotting.representative_runs(sub.drop_vars("Cp", errors="ignore"), 3)


def _uncertainty(b: _Builder, data: _Inputs) -> None:
    b.section("Uncertainty statement")
    b.add(
        b.p(
            "Uncertainties are evaluated by linear propagation of the standard uncertainties of "
            "every input through the run's reduction model (JCGM 100:2008, the GUM): type A from "
            "the time series of each run (with the effective number of independent samples), type "
            "B from the declared uncertainties of the instruments, geometry and tunnel. The "
            "expanded uncertainty is U = k·u with coverage factor k = 2, which for a normal "
            "distribution gives a coverage probability of about 95 %. Every tabulated ± and every "
            "error bar in this report is such an expanded uncertainty.",
            "intro",
        )
    )
    rows = []
    for label, idx in plotting.group_runs(data.ds, "config"):
        row = [label or "(all runs)"]
        for name in _STATED:
            u = _K * data.column(f"u_{name}")[idx]
            u = u[np.isfinite(u)]
            row.append(f"{_number(u.min(), 2)} to {_number(u.max(), 2)}" if u.size else "–")
        rows.append(row)
    b.table(
        ["configuration", "U(α)", "U(CL)", "U(CD)", "U(CM)"],
        rows,
        [1.2, 1.2, 1.2, 1.2, 1.2],
        caption=f"{b.next_table()} Range of the expanded uncertainty (k = 2) over the runs of "
        "each configuration.",
    )
    for run in _budget_runs(data):
        _budget_table(b, data, run)


def _budget_table(b: _Builder, data: _Inputs, run: str) -> None:
    """One run's budget: the inputs with the largest shares, their share of each output."""
    mine = data.budgets[data.budgets["run"].astype(str) == run]
    if mine.empty:
        return
    share = mine.pivot_table(index="input", columns="output", values="share", aggfunc="sum")
    first = mine.drop_duplicates("input").set_index("input")
    top = share.max(axis=1).sort_values(ascending=False).head(_BUDGET_ROWS + 2).index
    i = data.runs.index(run)
    rows = []
    for name in top:
        label, unit = budget_label(str(name))
        kind = str(first.loc[name, "kind"]) if "kind" in first else ""
        row = [label, unit, kind if kind != "nan" else "", _number(first.loc[name, "value"]),
               _number(first.loc[name, "u"], 2)]  # fmt: skip
        for output in _STATED:
            value = share.loc[name, output] if output in share else np.nan
            row.append(_fixed(100 * value, 1))
        rows.append(row)
    totals = ["combined: U (k = 2)", "", "", "", ""]
    totals += [_number(_K * data.column(f"u_{o}")[i], 2) for o in _STATED]
    rows.append(totals)
    b.table(
        [
            "input",
            "unit",
            "type",
            "value",
            "u",
            "share of u²(α) [%]",
            "CL [%]",
            "CD [%]",
            "CM [%]",
        ],  # fmt: skip
        rows,
        [2.4, 0.6, 0.45, 0.9, 0.8, 0.8, 0.6, 0.6, 0.6],
        caption=f"{b.next_table()} Uncertainty budget of run {escape(run)} (α = "
        f"{_fixed(data.column('alpha')[i], 2)}, {escape(_config(data, i))}): the inputs that "
        "contribute most, with their share of the variance of each output; last row: the "
        "expanded uncertainty of each output.",
    )


def _value_table(b: _Builder, data: _Inputs, names: list[str], caption: str) -> None:
    """Value ± U (k = 2) of ``names`` for every run that has the last of them; flagged runs †."""
    header = ["run", "config", "rpm"] + [_HEADS[n] for n in names]
    rows = []
    has = np.isfinite(data.column(names[-1]))
    flags = _flags(data.ds)
    rpm = data.column("omega") * _RPM
    for i, run in enumerate(data.runs):
        if not has[i]:
            continue
        cells = [format_uncertain(data.column(n)[i], _K * data.column(f"u_{n}")[i]) for n in names]
        rows.append([run + (" †" if flags[i] else ""), _config(data, i), _fixed(rpm[i], 0),
                     *cells])  # fmt: skip
    b.table(header, rows, [0.75, 0.7, 0.55] + [1.45] * len(names), caption=caption)


_HEADS = {
    "alpha": "α",
    "CL": "CL",
    "CD": "CD",
    "CM": "CM",
    "C_power": "C_power",
    "CL_p": "CL_p",
    "CD_p": "CD_p",
}

_FIGURE_NOTE = (
    " Filled: wall-corrected, bars ± U (k = 2); ringed: flagged runs (left out of the lines); "
    "solid lines join a sweep of increasing spin, dotted ones a sweep of decreasing spin."
)


def _results(b: _Builder, data: _Inputs, runs: list[str]) -> None:
    ds = data.ds
    b.section("Results")
    b.add(
        b.p(
            "Wall-corrected coefficients on q·d·b (CM on q·d·b·R), with the measured spin rate. "
            "Each cell is the value and its expanded uncertainty U = k·u with k = 2, rounded to "
            "U's second significant digit. † marks a flagged run (see Quality flags).",
            "intro",
        )
    )
    _value_table(
        b,
        data,
        ["alpha", "CL", "CD", "CM", "C_power"],
        f"{b.next_table()} Balance coefficients against spin ratio; value ± expanded "
        "uncertainty (k = 2).",
    )
    if np.isfinite(data.column("CL_p")).any():
        _value_table(
            b,
            data,
            ["alpha", "CL_p", "CD_p"],
            f"{b.next_table()} Coefficients from the mid-span surface pressure (∮Cp); "
            "value ± expanded uncertainty (k = 2).",
        )
    b.subsection("Figures", _FIGURE_ROOM)
    for name, what in (
        ("CL", "Lift coefficient against spin ratio; the line is potential flow, CL = −2πα."),
        ("CD", "Drag coefficient against spin ratio."),
        ("CM", "Torque coefficient against spin ratio."),
        ("C_power", "Power coefficient against spin ratio."),
        ("L_D", "Lift-to-drag ratio against spin ratio."),
    ):
        if name in ds and np.isfinite(data.column(name)).any():
            ax = plotting.plot_coefficient(ds, name, ax=_axes(), uncorrected=name != "L_D")
            note = _FIGURE_NOTE + (" Hollow: before wall corrections." if name != "L_D" else "")
            b.figure(ax.figure, f"{b.next_figure()} {what}{note}")
    if np.isfinite(data.column("CL")).any() and np.isfinite(data.column("CD")).any():
        ax = plotting.plot_drag_polar(ds, ax=_axes())
        b.figure(ax.figure, f"{b.next_figure()} Drag polar, CL against CD.{_FIGURE_NOTE}")
    if (np.isfinite(data.column("CL")) & np.isfinite(data.column("CL_p"))).any():
        ax = plotting.plot_pressure_lift(ds, ax=_axes())
        b.figure(ax.figure, f"{b.next_figure()} Lift from the mid-span surface pressure against "
                 "lift from the balance; the dashed line is equality. The pressure sees one "
                 "section, the balance the whole span.")  # fmt: skip
    _surface_pressure(b, data, runs)


def _comparison(b: _Builder, data: _Inputs) -> None:
    """The configuration comparison of tunnelred.products.compare, with figures."""
    ds = data.ds
    if len({str(c) for c in data.table.get("config", [])}) < 2:
        return
    if importlib.util.find_spec("tunnelred.products.compare") is None:
        return
    compare = importlib.import_module("tunnelred.products.compare")
    table = compare.comparison_section_data(ds)
    if table is None or len(table) == 0:
        return
    b.section(_COMPARISON)
    b.add(
        b.p(
            "Differences between configurations at the spin ratios both measured, sweep leg by "
            "sweep leg at each tunnel speed (tunnelred.products.compare): points paired within "
            f"Δα ≤ {compare.PAIR_TOLERANCE:g}, each moved to the pair's mean α along its own "
            "slope; ΔX = X(configuration) − X(reference), with its expanded uncertainty (k = 2). "
            "Flagged runs are left out. A difference marked * exceeds its expanded uncertainty.",
            "intro",
        )
    )
    rows = []
    for row in table.itertuples(index=False):
        cells = [str(row.config), str(row.reference), _fixed(row.speed, 1), str(row.leg)]
        cells.append(_fixed(row.alpha, 2))
        for x in ("CL", "CD"):
            text = format_uncertain(getattr(row, f"d{x}"), _K * getattr(row, f"u_d{x}"))
            cells.append(text + (" *" if getattr(row, f"sig_d{x}") else ""))
        rows.append(cells)
    b.table(
        ["config", "reference", "U [m/s]", "leg", "α", "ΔCL", "ΔCD"],
        rows,
        [1.0, 1.0, 0.8, 0.6, 0.6, 1.5, 1.5],
        caption=f"{b.next_table()} Configuration differences of CL and CD; value ± expanded "
        "uncertainty (k = 2); * marks a difference larger than its expanded uncertainty.",
    )
    for name in ("CL", "CD"):
        for by, what in (("speed", "tunnel speed"), ("re", "Reynolds number")):
            if len(plotting.group_runs(ds, by)) < 2 or not np.isfinite(data.column(name)).any():
                continue
            ax = plotting.plot_comparison(ds, name, by=by, ax=_axes())
            b.figure(ax.figure, f"{b.next_figure()} {name} by {what}: colour the {what}, marker "
                     f"the configuration.{_FIGURE_NOTE}")  # fmt: skip


def _surface_pressure(b: _Builder, data: _Inputs, runs: list[str]) -> None:
    b.subsection("Surface pressure", _FIGURE_ROOM)
    if "Cp" not in data.ds or not runs:
        b.add(b.p("No run had a pressure log."))
        return
    b.add(
        b.p(
            "Measured Cp(θ) at mid-span of representative runs (the smallest, a middle and the "
            "largest spin ratio), cartesian and polar, against potential flow Cp = 1 − (α + 2 sin "
            "θ)² at the run's corrected α. θ is measured from the windward point, positive in the "
            "sense of positive spin. The band Cp ± U (k = 2) is narrow at the scale of Cp; the "
            "strip below each plot shows its half-width U(Cp).",
            "intro",
        )
    )
    for run in runs:
        fig = plotting.plot_cp_pair(data.ds, run, fig=Figure(figsize=(9.6, 4.4),
                                                            layout="constrained"))  # fmt: skip
        b.figure(fig, f"{b.next_figure()} Surface pressure of run {escape(run)}: measured with "
                 "its k = 2 band, potential flow dashed.")  # fmt: skip


def _flag_reasons(data: _Inputs, i: int, names: list[str]) -> dict[str, str]:
    """Why each raised flag was raised, as the results record it (``flag_reasons``)."""
    stored = quality.parse_flag_reasons(data.table["flag_reasons"].iloc[i])
    return {name: stored.get(name, "") for name in names}


def _quality(b: _Builder, data: _Inputs) -> None:
    b.section("Quality flags")
    b.add(
        b.p(
            "A flag never removes a run: it marks a run whose steadiness, zeros, loads or "
            "agreement break a tolerance of campaign.toml, so that it is looked at before its "
            "numbers are used.",
            "intro",
        )
    )
    rows = []
    for i, (run, flags) in enumerate(zip(data.runs, _flags(data.ds), strict=True)):
        names = [n for n in flags.split(";") if n]
        reasons = _flag_reasons(data, i, names)
        for name in sorted(names, key=lambda n: FLAG_NAMES.index(n) if n in FLAG_NAMES else 99):
            extra = ""
            if name == "dead_tap" and "dead_taps" in data.table:
                extra = f": {data.table['dead_taps'].iloc[i]}"
            rows.append([run, name, reasons.get(name, "") + extra])
    if rows:
        b.table(
            ["run", "flag", "reason"],
            rows,
            [1.0, 1.3, 4.5],
            caption=f"{b.next_table()} Raised quality flags and their reasons.",
        )
    else:
        b.add(b.p("No run raised a quality flag."))
    _failed_runs(b, data)
    # The figure after the short lists, so that a one-line list never takes a page of its own.
    if "spin_scatter" in data.ds and np.isfinite(data.column("spin_scatter")).any():
        # A low strip: one measure along the runs needs no more height, and it fits below
        # the flag table instead of taking a page of its own.
        ax = plotting.plot_steadiness(data.ds, "spin_scatter", ax=_axes((7.2, 2.4)))
        b.figure(ax.figure, f"{b.next_figure()} Spin-ratio scatter of every run against its "
                 "tolerance; flagged runs labelled.", width=0.85 * _WIDTH)  # fmt: skip


def _failed_runs(b: _Builder, data: _Inputs) -> None:
    failures = data.failures
    b.subsection("Runs that could not be reduced", _LINE_ROOM if failures.empty else _TABLE_ROOM)
    if failures.empty:
        b.add(b.p("Every data run was reduced."))
        return
    rows = []
    for row in failures.itertuples(index=False):
        where = "" if pd.isna(row.file) else str(row.file)
        if where and not pd.isna(row.line):
            where += f", line {int(row.line)}"
        rows.append([str(row.run), where, str(row.reason)])
    b.table(
        ["run", "where", "reason"],
        rows,
        [1.0, 1.8, 4.0],
        caption=f"{b.next_table()} Failed runs (failures.csv): none of their numbers enter "
        "this report.",
    )


def _appendix(b: _Builder, data: _Inputs, full_config: bool) -> None:
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


# ---------------------------------------------------------------------------------------------


def write_report(out_dir, pdf_path=None, *, campaign=None, full_config: bool = False) -> Path:
    """Write the PDF test report of a reduced campaign.

    Parameters
    ----------
    out_dir : str or path-like
        An output folder of :func:`tunnelred.pipeline.campaign.reduce_campaign` (results.nc,
        budgets.csv, failures.csv).
    pdf_path : str or path-like, optional
        Where to write; default ``out_dir``/report.pdf. Written atomically.
    campaign : tunnelred.inputs.readers.Campaign or path-like, optional
        The campaign folder (or the opened campaign); default: the folder the results record,
        if it is still there. It gives the report control ([report]), the model, the
        instruments, and the tolerances behind the flag reasons.
    full_config : bool
        Reproduce campaign.toml in the appendix (default: its hash only).

    Returns
    -------
    pathlib.Path
        The report written.

    Notes
    -----
    Title page (report control, signatures, statements, cautions), revision history,
    provenance and contents, then the sections of :data:`SECTIONS`; a configuration comparison
    follows the results when the campaign has more than one configuration. Tabulated
    uncertainties are expanded, k = 2, rounded per GUM §7.2.6. The contents follow ISO/IEC
    17025:2017 §7.8.2.1 and §7.8.3.1 (docs/report.md maps each item to its place).

    References
    ----------
    .. [1] JCGM 100:2008 (GUM), §7.2 (reporting uncertainty).
    .. [2] ISO/IEC 17025:2017, *General requirements for the competence of testing and
       calibration laboratories*, §7.8.
    """
    out = Path(out_dir)
    pdf = Path(pdf_path) if pdf_path is not None else out / "report.pdf"
    data = _Inputs(out, campaign)
    faces = _register_fonts()
    b = _Builder(_styles(faces))
    date = datetime.now(UTC).date().isoformat()
    runs = plotting.representative_runs(data.ds)

    _title_page(b, data, date)
    _summary(b, data)
    _model(b, data)
    _run_log(b, data)
    _instrumentation(b, data)
    _procedures(b, data)
    _reduction(b, data)
    _uncertainty(b, data)
    _results(b, data, runs)
    _comparison(b, data)
    _quality(b, data)
    _appendix(b, data, full_config)
    b.add(Spacer(1, 6 * mm))
    b.add(b.p(f"End of report {data.control.number or ''}".rstrip() + ".", "end"))

    with store.atomic_path(pdf) as tmp:
        doc = _Document(
            str(tmp),
            pagesize=_PAGE,
            leftMargin=_MARGIN,
            rightMargin=_MARGIN,
            topMargin=_MARGIN,
            bottomMargin=_MARGIN,
            title=data.title,
            author="tunnelred",
            subject="Wind-tunnel test report",
            creator=f"tunnelred {__version__}",
        )
        frame = Frame(_MARGIN, _MARGIN, _WIDTH, _PAGE[1] - 2 * _MARGIN, id="body")
        doc.addPageTemplates([PageTemplate(id="page", frames=[frame])])
        doc.multiBuild(b.story, canvasmaker=_canvas_class(data.title, data.control.footer, faces))
    return pdf
