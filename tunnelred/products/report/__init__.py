"""The PDF test report of a reduced campaign (docs/report.md lists what it holds).

The report is built with reportlab's platypus from an output folder of
:func:`tunnelred.pipeline.campaign.reduce_campaign`: results.nc, budgets.csv and failures.csv,
plus the campaign folder when it is known (report control, model, instruments, flag
tolerances). Figures are drawn by :mod:`tunnelred.products.plotting` and embedded as 200 dpi PNG;
they are the only images a report holds. Every string from a file (results.nc attributes,
campaign.toml, CSV cells: titles, notes, labels, run ids, file names, hashes) is escaped before it
enters reportlab's paragraph markup, and the report's own markup is checked to hold only inline
tags. The file is written atomically.

One module for each part of the report: :mod:`.layout` (page, styles, furniture, the builder),
:mod:`.formatting` (how values print), :mod:`.data` (what the report is written from),
:mod:`.front` (title page), :mod:`.summary`, :mod:`.description` (model, run log, conditions,
instrumentation, procedures), :mod:`.method` (data reduction, uncertainty), :mod:`.results`
(results and the configuration comparison), :mod:`.plan` (the pre-test uncertainty analysis),
:mod:`.flags` (quality flags) and :mod:`.appendix`; this module puts them together in
:func:`write_report`.
"""

from __future__ import annotations

import os
from datetime import UTC, datetime
from pathlib import Path

from reportlab.lib.units import mm
from reportlab.platypus import Frame, PageTemplate, Spacer

from tunnelred import __version__
from tunnelred.products import plotting, results_folder, store
from tunnelred.products.plan.core import read_plan
from tunnelred.products.report.appendix import appendix_section
from tunnelred.products.report.data import ReportData
from tunnelred.products.report.description import (
    instrumentation_section,
    model_section,
    procedures_section,
    run_log_section,
)
from tunnelred.products.report.flags import quality_section
from tunnelred.products.report.formatting import format_uncertain
from tunnelred.products.report.front import CAUTIONS, title_page
from tunnelred.products.report.front import STATEMENTS as STATEMENTS
from tunnelred.products.report.layout import (
    MARGIN,
    PAGE,
    WIDTH,
    Builder,
    Document,
    canvas_class,
    paragraph_styles,
    register_fonts,
)
from tunnelred.products.report.method import BUDGET_INPUTS as BUDGET_INPUTS
from tunnelred.products.report.method import budget_label as budget_label
from tunnelred.products.report.method import reduction_section, uncertainty_section
from tunnelred.products.report.plan import plan_section
from tunnelred.products.report.results import comparison_section, results_section
from tunnelred.products.report.summary import summary_section

__all__ = ["SECTIONS", "CAUTIONS", "write_report", "format_uncertain"]

#: The numbered sections, in order (a configuration comparison follows the results when the
#: campaign has more than one configuration and tunnelred.products.compare is installed, and a
#: pre-test uncertainty analysis follows them when a plan sits beside the results).
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


def write_report(out_dir, pdf_path=None, *, campaign=None, full_config: bool = False) -> Path:
    """Write the PDF test report of a reduced campaign.

    Parameters
    ----------
    out_dir : str or path-like
        An output folder of :func:`tunnelred.pipeline.campaign.reduce_campaign` (results.nc,
        budgets.csv, failures.csv), or a folder holding those three files. The results are
        read from OUT's current generation, so that a reduction switching meanwhile cannot mix
        two sets.
    pdf_path : str or path-like, optional
        Where to write; default ``out_dir``/report.pdf. Written atomically. The default in an
        output folder of generations goes into the current generation, beside the results it
        was made from (OUT is locked meanwhile, and OUT/report.pdf links to it), so that the
        next reduction, which makes a new generation, does not leave it beside newer results.
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
    if results_folder.generation_of(out) != out and _is_published(out, pdf):
        return _report_into_current(out, campaign, full_config)
    _build(results_folder.generation_of(out), pdf, campaign, full_config, plan=read_plan(out))
    return pdf


def _is_published(out: Path, pdf: Path) -> bool:
    """``pdf`` is OUT/report.pdf, the name a generation publishes (however it was written)."""
    return pdf.name == "report.pdf" and os.path.realpath(pdf.parent) == os.path.realpath(out)


def _report_into_current(out: Path, campaign, full_config: bool) -> Path:
    with results_folder.open_results_folder(out) as folder:
        generation = folder.current()
        if generation is None:  # removed meanwhile: nothing to report on
            store.read_results(out)  # says so, with the file and a hint
        plan = read_plan(out)
        _build(generation, generation / "report.pdf", campaign, full_config, plan=plan)
        results_folder.link_outputs(folder.root)
        return folder.root / "report.pdf"


def _build(out: Path, pdf: Path, campaign, full_config: bool, *, plan=None) -> None:
    """The report of the results in ``out``, written to ``pdf`` (with ``plan``, read_plan's)."""
    data = ReportData(out, campaign)
    faces = register_fonts()
    b = Builder(paragraph_styles(faces))
    date = datetime.now(UTC).date().isoformat()
    runs = plotting.representative_runs(data.ds)

    title_page(b, data, date)
    summary_section(b, data)
    model_section(b, data)
    run_log_section(b, data)
    instrumentation_section(b, data)
    procedures_section(b, data)
    reduction_section(b, data)
    uncertainty_section(b, data)
    results_section(b, data, runs)
    comparison_section(b, data)
    if plan is not None:
        plan_section(b, data, plan)
    quality_section(b, data)
    appendix_section(b, data, full_config)
    b.add(Spacer(1, 6 * mm))
    b.add(b.p(f"End of report {data.control.number or ''}".rstrip() + ".", "end"))

    with store.atomic_path(pdf) as tmp:
        doc = Document(
            str(tmp),
            pagesize=PAGE,
            leftMargin=MARGIN,
            rightMargin=MARGIN,
            topMargin=MARGIN,
            bottomMargin=MARGIN,
            title=data.title,
            author="tunnelred",
            subject="Wind-tunnel test report",
            creator=f"tunnelred {__version__}",
        )
        frame = Frame(MARGIN, MARGIN, WIDTH, PAGE[1] - 2 * MARGIN, id="body")
        doc.addPageTemplates([PageTemplate(id="page", frames=[frame])])
        doc.multiBuild(b.story, canvasmaker=canvas_class(data.title, data.control.footer, faces))
