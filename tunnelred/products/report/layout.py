"""The report's page and its building blocks: fonts, paragraph styles, the page furniture (running
header, "page N of M"), the document template that fills the contents, and the builder the sections
write their paragraphs, tables and figures through.
"""

from __future__ import annotations

import io
import re
from pathlib import Path
from xml.sax.saxutils import escape

import matplotlib as mpl
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
    Image,
    KeepTogether,
    LongTable,
    Paragraph,
    Spacer,
    TableStyle,
)

from tunnelred import __version__

PAGE = A4
MARGIN = 18 * mm
WIDTH = PAGE[0] - 2 * MARGIN
_FIGURE_DPI = 200
_SECTION_ROOM = 70 * mm  # least room below a section heading for it to start on this page
TABLE_ROOM = 35 * mm  # least room for a table's caption and first rows
FIGURE_ROOM = 95 * mm  # least room below a heading for the figure that follows it
LINE_ROOM = 14 * mm  # a heading and one line of text
_PLOT_SIZE = (7.4, 3.5)  # inches, for figures drawn for the report
_GRID = colors.HexColor("#b0b0b0")
_HEAD_FILL = colors.HexColor("#e4ecf4")
_STRIPE = colors.HexColor("#f6f6f6")


def register_fonts() -> dict[str, str]:
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


#: The paragraph styles besides "body", each derived from it: ReportLab's ParagraphStyle
#: attributes, with ``face`` naming one of :func:`register_fonts`' faces for its fontName.
_PARAGRAPH_STYLES: dict[str, dict] = {
    "intro": dict(keepWithNext=1),
    "small": dict(fontSize=7.5, leading=9.5),
    "cell": dict(fontSize=7.2, leading=9, spaceAfter=0),
    "head": dict(face="bold", fontSize=7.5, leading=9),
    "caption": dict(face="italic", fontSize=8, leading=10, spaceAfter=8),
    "table_caption": dict(face="italic", fontSize=8, leading=10, spaceAfter=3),
    "h1": dict(face="bold", fontSize=14, leading=18, spaceBefore=6, spaceAfter=8, keepWithNext=1,
               textColor=colors.HexColor("#1b3a5c")),
    "h2": dict(face="bold", fontSize=10.5, leading=14, spaceBefore=8, spaceAfter=4, keepWithNext=1),
    "title": dict(face="bold", fontSize=22, leading=28, alignment=TA_CENTER, spaceAfter=10),
    "subtitle": dict(fontSize=12, leading=16, alignment=TA_CENTER, spaceAfter=4),
    "caution": dict(fontSize=9, leading=12, leftIndent=6, spaceAfter=4),
    "mono": dict(face="mono", fontSize=6.5, leading=8),
    "toc": dict(fontSize=10, leading=15),
    "formula": dict(leftIndent=14, spaceAfter=3),
    "end": dict(face="bold", alignment=TA_CENTER, spaceBefore=6),
}  # fmt: skip


def paragraph_styles(faces: dict[str, str]) -> dict[str, ParagraphStyle]:
    base = getSampleStyleSheet()
    body = ParagraphStyle(
        "body", parent=base["BodyText"], fontName=faces["body"], fontSize=9, leading=12
    )
    styles = {"body": body}
    for name, attributes in _PARAGRAPH_STYLES.items():
        attributes = dict(attributes)
        if "face" in attributes:
            attributes["fontName"] = faces[attributes.pop("face")]
        styles[name] = ParagraphStyle(name, parent=body, **attributes)
    return styles


def canvas_class(title: str, footer: str, faces: dict[str, str]):
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
            width, height = PAGE
            self.saveState()
            self.setStrokeColor(_GRID)
            self.setLineWidth(0.5)
            if self._pageNumber > 1:
                self.setFont(faces["body"], 8)
                top = height - MARGIN + 6 * mm
                self.drawString(MARGIN, top, _clip(title, 80))
                self.drawRightString(width - MARGIN, top, _clip(footer, 48))
                self.line(MARGIN, top - 2 * mm, width - MARGIN, top - 2 * mm)
            self.setFont(faces["body"], 8)
            bottom = MARGIN - 8 * mm
            self.line(MARGIN, bottom + 4 * mm, width - MARGIN, bottom + 4 * mm)
            self.drawString(MARGIN, bottom, _clip(footer, 60))
            self.drawCentredString(width / 2, bottom, f"tunnelred {__version__}")
            self.drawRightString(width - MARGIN, bottom, f"page {self._pageNumber} of {total}")
            self.restoreState()

    return _ReportCanvas


def _clip(text: str, length: int) -> str:
    return text if len(text) <= length else text[: length - 1] + "…"


class Document(BaseDocTemplate):
    """Numbered section headings go to the table of contents as they are laid out."""

    def afterFlowable(self, flowable):  # noqa: N802 - reportlab's name
        if isinstance(flowable, Paragraph) and getattr(flowable, "_toc_entry", None):
            text, key = flowable._toc_entry
            self.canv.bookmarkPage(key)
            self.canv.addOutlineEntry(text, key, level=0)
            self.notify("TOCEntry", (0, text, self.page, key))


_OWN_TAGS = {"b", "i", "br", "sub", "super"}  # the only tags the report's own markup uses
_TAG = re.compile(r"<\s*/?\s*([A-Za-z]+)[^>]*>")


def _check_markup(text: str) -> None:
    """Refuse markup with a tag the report never writes itself (a programming error)."""
    for match in _TAG.finditer(text):
        if match.group(1).lower() not in _OWN_TAGS:
            raise ValueError(f"markup with a <{match.group(1)}> tag: escape the text first")


class Builder:
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

    def subsection(self, title: str, room: float = TABLE_ROOM) -> None:
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
        scale = WIDTH / sum(widths)
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
            self.add(CondPageBreak(TABLE_ROOM), self.p(caption, "table_caption", markup=True))
        self.add(table)
        self.add(Spacer(1, 4 * mm))

    def figure(self, fig, caption: str, *, width: float = WIDTH) -> None:
        """A figure this report drew (the only images a report holds), with its caption."""
        if not isinstance(fig, Figure):
            raise TypeError("the report embeds only the figures it draws")
        buffer = io.BytesIO()
        fig.savefig(buffer, format="png", dpi=_FIGURE_DPI)
        w_in, h_in = fig.get_size_inches()
        buffer.seek(0)
        image = Image(buffer, width=width, height=width * h_in / w_in)
        self.add(KeepTogether([image, self.p(caption, "caption", markup=True)]))


def axes(size=_PLOT_SIZE):
    return Figure(figsize=size, layout="constrained").add_subplot()
