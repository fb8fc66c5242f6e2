"""The PDF test report of a reduced campaign (docs/report.md lists what it holds).

The report is built with reportlab's platypus from an output folder of
:func:`tunnelred.pipeline.campaign.reduce_campaign`: results.nc, budgets.csv and failures.csv, plus the
campaign folder when it is known (for campaign.toml and the flag tolerances). Figures are drawn by
:mod:`tunnelred.products.plotting` and embedded as 200 dpi PNG. Every piece of text that users wrote (titles,
notes, labels, run ids, file names) is escaped before it enters reportlab's paragraph markup, and
the file is written atomically.
"""

from __future__ import annotations

import importlib
import importlib.util
import io
import json
import math
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
    "Test conditions",
    "Wall corrections",
    "Results",
    "Surface pressure",
    "Uncertainty budget",
    "Quality flags",
    "Appendix: configuration and input files",
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
_PLOT_SIZE = (6.4, 3.7)  # inches, for figures drawn for the report
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
    }


# ---------------------------------------------------------------------------------------------
# Page furniture: running header, "page N of M"


def _canvas_class(title: str, date: str, faces: dict[str, str]):
    """A canvas that holds its pages back until the end, so each can say "page N of M"."""

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
                self.drawString(_MARGIN, top, _clip(title, 90))
                self.drawRightString(width - _MARGIN, top, f"report of {date}")
                self.line(_MARGIN, top - 2 * mm, width - _MARGIN, top - 2 * mm)
            self.setFont(faces["body"], 8)
            bottom = _MARGIN - 8 * mm
            self.line(_MARGIN, bottom + 4 * mm, width - _MARGIN, bottom + 4 * mm)
            self.drawString(_MARGIN, bottom, f"tunnelred {__version__}")
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
        """A paragraph; ``text`` is escaped unless it is our own markup."""
        return Paragraph(text if markup else escape(text), self.s[style])

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

    def table(
        self,
        header: list[str],
        rows: list[list],
        widths: list[float],
        *,
        caption: str = "",
        numeric_from: int = 1,
    ) -> None:
        """A table that splits across pages, repeating its header row; cells are escaped."""
        data = [[self.p(h, "head") for h in header]]
        for row in rows:
            data.append([c if not isinstance(c, str) else self.p(c, "cell") for c in row])
        scale = _WIDTH / sum(widths)
        table = LongTable(data, colWidths=[w * scale for w in widths], repeatRows=1)
        style = [
            ("GRID", (0, 0), (-1, -1), 0.4, _GRID),
            ("BACKGROUND", (0, 0), (-1, 0), _HEAD_FILL),
            ("VALIGN", (0, 0), (-1, -1), "MIDDLE"),
            ("TOPPADDING", (0, 0), (-1, -1), 1.5),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5),
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
        self.hashes = _json_attr(self.ds, "input_sha256")

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
# Sections


def _title_page(b: _Builder, data: _Inputs, date: str) -> None:
    ds = data.ds
    info = data.campaign.config.campaign if data.campaign is not None else None
    b.add(Spacer(1, 30 * mm))
    b.add(b.p("Wind-tunnel test report", "subtitle"))
    b.add(b.p(data.title, "title"))
    facility = str(ds.attrs.get("facility", ""))
    if facility:
        b.add(b.p(facility, "subtitle"))
    if info is not None and info.date:
        b.add(b.p(f"Test dates: {info.date}", "subtitle"))
    b.add(b.p(f"Report date: {date}", "subtitle"))
    n_runs = ds.sizes["run"]
    n_failed = data.failures["run"].nunique() if "run" in data.failures else 0
    n_flagged = int(sum(bool(f) for f in ds["flags"].values)) if "flags" in ds else 0
    b.add(Spacer(1, 6 * mm))
    b.add(
        b.p(
            f"{n_runs} data runs reduced, {n_flagged} flagged, {n_failed} could not be reduced",
            "subtitle",
        )
    )
    if info is not None and info.notes:
        b.add(Spacer(1, 4 * mm))
        b.add(b.p(info.notes, "body"))
    b.add(Spacer(1, 10 * mm))
    b.add(b.p("Cautions", "h2"))
    for text in CAUTIONS:
        b.add(b.p(f"• {text}", "caution"))
    b.add(b.p("Provenance", "h2"))
    methods = data.methods
    rows = [
        ["tunnelred version", str(ds.attrs.get("tunnelred_version", ""))],
        ["results created (UTC)", str(ds.attrs.get("created", ""))],
        ["campaign.toml SHA-256", str(ds.attrs.get("config_sha256", ""))],
        ["input files hashed", str(len(data.hashes))],
        ["blockage method", _blockage_text(methods)],
        ["lift interference", _on_off(methods.get("lift_interference"))],
        ["buoyancy", _on_off(methods.get("buoyancy"))],
        ["uncertainty", str(methods.get("uncertainty", "GUM linear propagation"))],
        ["results folder", str(data.out)],
    ]
    b.table(["item", "value"], rows, [1, 2.6])
    b.add(PageBreak())
    b.add(b.p("Contents", "h2"))
    toc = TableOfContents()
    toc.levelStyles = [b.s["toc"]]
    toc.dotsMinLevel = 0
    b.add(toc)
    b.add(PageBreak())


def _axes():
    return Figure(figsize=_PLOT_SIZE, layout="constrained").add_subplot()


def _on_off(value) -> str:
    return "–" if value is None else ("on" if value else "off")


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
    header = ["configuration"] + [label for label, _ in speeds]
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
    b.add(b.p("Test matrix", "h2"))
    b.table(
        header,
        rows,
        [1.2] + [1.6] * len(speeds),
        caption=f"{b.next_table()} Runs by configuration and tunnel speed, with their "
        "spin-ratio range.",
    )
    flagged = [(r, f) for r, f in zip(data.runs, _flags(ds), strict=True) if f]
    b.add(b.p("Flagged runs", "h2"))
    if flagged:
        b.add(
            b.p(
                f"{len(flagged)} run(s) raised quality flags (reasons under Quality flags): "
                + ", ".join(f"{r} ({f.replace(';', ', ')})" for r, f in flagged)
                + "."
            )
        )
    else:
        b.add(b.p("No run raised a quality flag."))
    b.add(b.p("Lift and drag", "h2"))
    for name in ("CL", "CD"):
        if name in ds and np.isfinite(data.column(name)).any():
            ax = plotting.plot_coefficient(ds, name, ax=_axes())
            b.figure(
                ax.figure,
                f"{b.next_figure()} {name} against spin ratio, wall-corrected (filled) and "
                "uncorrected (hollow); bars are expanded uncertainties, k = 2."
                + (" The line is potential flow, CL = −2πα." if name == "CL" else ""),
                width=0.85 * _WIDTH,
            )


def _flags(ds: xr.Dataset) -> list[str]:
    if "flags" not in ds:
        return [""] * ds.sizes["run"]
    return ["" if not isinstance(f, str) else f for f in ds["flags"].values]


def _conditions(b: _Builder, data: _Inputs) -> None:
    b.section("Test conditions")
    b.add(
        b.p(
            "Run means of the free stream, wall-corrected (q, U, Re), and of the air: temperature "
            "T, barometric pressure p, relative humidity RH and density ρ (CIPM-2007).",
            "intro",
        )
    )
    cols = {n: data.column(n) for n in ("U", "q", "Re", "T", "p_baro", "RH", "rho")}
    rows = []
    for i, run in enumerate(data.runs):
        rows.append(
            [
                run,
                str(data.table["config"].iloc[i]) if "config" in data.table else "",
                _fixed(cols["U"][i], 2),
                _fixed(cols["q"][i], 1),
                _number(cols["Re"][i], 3),
                _fixed(cols["T"][i] - 273.15, 2),
                _fixed(cols["p_baro"][i] / 1000, 2),
                _fixed(100 * cols["RH"][i], 1),
                _fixed(cols["rho"][i], 4),
            ]
        )
    b.table(
        ["run", "config", "U [m/s]", "q [Pa]", "Re", "T [°C]", "p [kPa]", "RH [%]", "ρ [kg/m³]"],
        rows,
        [1.3, 1.1, 0.9, 0.9, 1.0, 0.8, 0.9, 0.8, 0.9],
        caption=f"{b.next_table()} Test conditions, one row a run.",
    )


def _blockage_text(methods: dict) -> str:
    """The method applied, and what campaign.toml asked for when config substituted it."""
    used = str(methods.get("blockage", "–"))
    requested = methods.get("blockage_requested")
    return f"{used} (campaign.toml: {requested})" if requested else used


def _corrections(b: _Builder, data: _Inputs) -> None:
    b.section("Wall corrections")
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
    rows = []
    for i, run in enumerate(data.runs):
        config = str(data.table["config"].iloc[i]) if "config" in data.table else ""
        rows.append([run, config, *(_fixed(c[i], 5) for c in cols)])
    b.table(
        header,
        rows,
        [1.3, 1.1] + [1.0] * len(names),
        caption=f"{b.next_table()} Size of the wall corrections: solid- and wake-blockage velocity "
        "increments and the horizontal-buoyancy drag coefficient removed.",
    )


def _value_table(b: _Builder, data: _Inputs, names: list[str], caption: str) -> None:
    """Value ± U (k = 2) of ``names`` for every run that has the last of them."""
    header = ["run", "config"] + [_HEADS[n] for n in names]
    rows = []
    has = np.isfinite(data.column(names[-1]))
    for i, run in enumerate(data.runs):
        if not has[i]:
            continue
        config = str(data.table["config"].iloc[i]) if "config" in data.table else ""
        cells = [format_uncertain(data.column(n)[i], _K * data.column(f"u_{n}")[i]) for n in names]
        rows.append([run, config, *cells])
    b.table(header, rows, [0.7, 0.7] + [1.45] * len(names), caption=caption)


_HEADS = {
    "alpha": "α",
    "CL": "CL",
    "CD": "CD",
    "CM": "CM",
    "C_power": "C_power",
    "CL_p": "CL_p",
    "CD_p": "CD_p",
}


def _results(b: _Builder, data: _Inputs) -> None:
    b.section("Results")
    b.add(
        b.p(
            "Wall-corrected coefficients on q·d·b (CM on q·d·b·R). Each cell is the value and its "
            "expanded uncertainty U = k·u with k = 2 (about 95 % coverage for a normal "
            "distribution), rounded to U's second significant digit.",
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


def _comparison(b: _Builder, data: _Inputs) -> None:
    """The configuration comparison of tunnelred.products.compare, when that module is installed."""
    if len({str(c) for c in data.table.get("config", [])}) < 2:
        return
    if importlib.util.find_spec("tunnelred.products.compare") is None:
        return
    compare = importlib.import_module("tunnelred.products.compare")
    table = compare.comparison_section_data(data.ds)
    if table is None or len(table) == 0:
        return
    b.section(_COMPARISON)
    b.add(
        b.p(
            "Differences between configurations on a common spin-ratio grid, sweep leg by sweep "
            "leg at each tunnel speed (tunnelred.products.compare): ΔX = X(configuration) − "
            "X(reference), with its expanded uncertainty (k = 2). A difference marked * exceeds "
            "its expanded uncertainty.",
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


def _surface_pressure(b: _Builder, data: _Inputs, runs: list[str]) -> None:
    b.section("Surface pressure")
    if "Cp" not in data.ds or not runs:
        b.add(b.p("No run had a pressure log."))
        return
    b.add(
        b.p(
            "Measured Cp(θ) at mid-span of representative runs (the smallest, a middle and the "
            "largest spin ratio), with the band of expanded uncertainty (k = 2), against potential "
            "flow Cp = 1 − (α + 2 sin θ)² at the run's corrected α. θ is measured from the "
            "windward point, positive in the sense of positive spin.",
            "intro",
        )
    )
    for run in runs:
        ax = plotting.plot_cp(data.ds, run, ax=_axes())
        b.figure(
            ax.figure,
            f"{b.next_figure()} Surface pressure of run {escape(run)} against potential flow; "
            "band: expanded uncertainty, k = 2.",
            width=0.8 * _WIDTH,
        )


def _budget(b: _Builder, data: _Inputs, runs: list[str]) -> None:
    b.section("Uncertainty budget")
    budgets = data.budgets
    if budgets.empty or not runs:
        b.add(b.p("No uncertainty budget was recorded."))
        return
    run = runs[len(runs) // 2]
    mine = budgets[budgets["run"].astype(str) == run]
    b.add(
        b.p(
            f"Budget of run {run}: the inputs that contribute most to the variance of α, CL, CD "
            "and CM (linear propagation, JCGM 100:2008). Contribution = sensitivity × standard "
            "uncertainty; share = its fraction of the output variance.",
            "intro",
        )
    )
    for output in ("alpha", "CL", "CD", "CM"):
        part = mine[mine["output"] == output]
        if part.empty:
            continue
        part = part.sort_values("share", ascending=False).head(_BUDGET_ROWS)
        i = data.runs.index(run) if run in data.runs else None
        u_total = data.column(f"u_{output}")[i] if i is not None else np.nan
        rows = []
        for row in part.itertuples(index=False):
            kind = str(getattr(row, "kind", "") or "")
            rows.append(
                [
                    str(row.input),
                    kind if kind != "nan" else "",
                    _number(row.value),
                    _number(row.u, 3),
                    _number(row.sensitivity, 3),
                    _number(row.contribution, 3),
                    _fixed(100 * row.share, 1),
                ]
            )
        b.table(
            ["input", "type", "value", "u", "sensitivity", "contribution", "share [%]"],
            rows,
            [2.2, 0.6, 1.0, 1.0, 1.0, 1.0, 0.8],
            caption=f"{b.next_table()} Largest contributors to u({_HEADS[output]}) of run "
            f"{escape(run)}; "
            f"combined standard uncertainty u = {_number(u_total, 3)}, expanded U = "
            f"{_number(_K * u_total, 3)} (k = 2).",
        )


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
        for name in sorted(names, key=FLAG_NAMES.index):
            extra = ""
            if name == "dead_tap" and "dead_taps" in data.table:
                extra = f": {data.table['dead_taps'].iloc[i]}"
            rows.append([run, name, reasons[name] + extra])
    if rows:
        b.table(
            ["run", "flag", "reason"],
            rows,
            [1.0, 1.3, 4.5],
            caption=f"{b.next_table()} Raised quality flags and their reasons.",
        )
    else:
        b.add(b.p("No run raised a quality flag."))
    failures = data.failures
    b.add(b.p("Runs that could not be reduced", "h2"))
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


def _appendix(b: _Builder, data: _Inputs) -> None:
    b.section("Appendix: configuration and input files")
    if data.campaign is not None:
        path = Path(data.campaign.root) / "campaign.toml"
        b.add(b.p("campaign.toml", "h2"))
        try:
            text = path.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            b.add(b.p(f"campaign.toml could not be read: {exc}"))
        else:
            b.add(
                Preformatted(
                    text.expandtabs(4), b.s["mono"], maxLineLength=118, newLineChars="  ↪ "
                )
            )
    else:
        b.add(
            b.p(
                "The campaign folder was not given, so campaign.toml is not reproduced here; its "
                f"SHA-256 is {data.ds.attrs.get('config_sha256', '–')}."
            )
        )
    b.add(b.p("SHA-256 of every input file", "h2"))
    rows = [[path, Paragraph(sha, b.s["mono"])] for path, sha in sorted(data.hashes.items())]
    if rows:
        b.table(["file", "SHA-256"], rows, [1.6, 2.6])
    else:
        b.add(b.p("The results record no input hashes."))


# ---------------------------------------------------------------------------------------------


def write_report(out_dir, pdf_path=None, *, campaign=None) -> Path:
    """Write the PDF test report of a reduced campaign.

    Parameters
    ----------
    out_dir : str or path-like
        An output folder of :func:`tunnelred.pipeline.campaign.reduce_campaign` (results.nc, budgets.csv,
        failures.csv).
    pdf_path : str or path-like, optional
        Where to write; default ``out_dir``/report.pdf. Written atomically.
    campaign : tunnelred.inputs.readers.Campaign or path-like, optional
        The campaign folder (or the opened campaign); default: the folder the results record,
        if it is still there. Its campaign.toml goes into the appendix
        and its tolerances into the flag reasons.

    Returns
    -------
    pathlib.Path
        The report written.

    Notes
    -----
    Sections: title page (cautions, provenance), contents, then those of :data:`SECTIONS`; a
    configuration comparison follows the results when the campaign has more than one
    configuration and :mod:`tunnelred.products.compare` is installed. Tabulated uncertainties are
    expanded, k = 2, rounded per GUM §7.2.6.

    References
    ----------
    .. [1] JCGM 100:2008 (GUM), §7.2 (reporting uncertainty).
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
    b.add(PageBreak())
    _conditions(b, data)
    _corrections(b, data)
    _results(b, data)
    _comparison(b, data)
    b.add(PageBreak())
    _surface_pressure(b, data, runs)
    _budget(b, data, runs)
    _quality(b, data)
    b.add(PageBreak())
    _appendix(b, data)

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
        doc.multiBuild(b.story, canvasmaker=_canvas_class(data.title, date, faces))
    return pdf
