"""The ``tunnelred`` command.

Each subcommand is a pair of functions: ``_add_<name>(subparsers)`` declares its arguments and
``_run_<name>(args) -> int`` does the work and returns the exit status. Add a subcommand by
writing the pair (``_add_<name>`` starts its parser with :func:`_command`) and listing
``_add_<name>`` in :data:`_SUBCOMMANDS`.

Exit status: 0 success, 1 problems in the input (or a run that failed), 2 a usage error (or an
output folder that cannot be used), 130 interrupted by Ctrl-C, 143 stopped by SIGTERM, 141 the
reader of the output went away (``| head``). No traceback reaches a user: every error ends in
one message (set ``TUNNELRED_TRACEBACK=1`` to see the traceback of an internal error).

Every string that came from a file (a title, a description, a header cell, a run id, a path) is
printed through :func:`tunnelred.common.text.printable`, so that no control character in it
reaches the terminal.
"""

from __future__ import annotations

import argparse
import contextlib
import importlib
import os
import signal
import sys
import textwrap
import threading
import traceback
from collections import Counter, defaultdict
from pathlib import Path

from tunnelred import __version__
from tunnelred.common.errors import (
    InputError,
    OutputFolderError,
    Terminated,
    TunnelredError,
    UsageError,
)
from tunnelred.common.text import printable

__all__ = ["main"]


class _HelpFormatter(argparse.HelpFormatter):
    """Wraps prose paragraphs to the terminal; keeps indented lines (examples) as written."""

    def _fill_text(self, text, width, indent):
        paragraphs = []
        for paragraph in text.split("\n\n"):
            if any(line.startswith("  ") for line in paragraph.splitlines()):
                paragraphs.append("\n".join(indent + line for line in paragraph.splitlines()))
            else:
                prose = " ".join(paragraph.split())
                paragraphs.append(
                    textwrap.fill(prose, width, initial_indent=indent, subsequent_indent=indent)
                )
        return "\n\n".join(paragraphs)


def _fail_usage(message: str) -> int:
    print(f"tunnelred: error: {printable(message)}", file=sys.stderr)
    return 2


def _require_folders(*folders: Path | None) -> None:
    """Stop with a usage error (exit 2) at the first of ``folders`` that is not a folder; ``None``
    stands for an optional folder not given."""
    for folder in folders:
        if folder is not None and not folder.is_dir():
            raise UsageError(f"{folder}: no such folder")


def _refuse_campaign_target(path: Path) -> None:
    """Stop with a usage error (exit 2) when ``path``, a report, workbook or comparison to
    write, is in a campaign folder (one holding campaign.toml) or below one: tunnelred never
    writes among the inputs (`report -o CAMPAIGN/runs.csv` replaced runs.csv by a PDF)."""
    target = Path(os.path.realpath(path.expanduser()))
    for folder in (target, *target.parents):
        if (folder / "campaign.toml").is_file():
            raise UsageError(
                f"{path} is inside the campaign folder {folder}, which tunnelred never writes; "
                "choose a place outside it"
            )


def _lines(lines) -> str:
    """Lines of output for the terminal, each escaped (see :func:`printable`)."""
    return "\n".join(printable(line) for line in lines)


def _command(subparsers, run, help: str, description: str, epilog: str) -> argparse.ArgumentParser:
    """The parser of the subcommand whose work is ``run`` (``_run_<name>``), in the house format;
    its arguments are the caller's to add."""
    p = subparsers.add_parser(
        run.__name__.removeprefix("_run_"),
        help=help,
        description=description,
        epilog=epilog,
        formatter_class=_HelpFormatter,
    )
    p.set_defaults(run=run)
    return p


# ---------------------------------------------------------------------------------------------
# check


def _add_check(subparsers) -> None:
    p = _command(
        subparsers,
        _run_check,
        help="validate a campaign folder and summarise it",
        description="Read campaign.toml, runs.csv and every log of a campaign folder, check "
        "them against the input format (docs/input-format.md) and print a summary: runs by "
        "kind and configuration, streams with sample rates, durations and row counts, taps, and "
        "every problem found, grouped by file, with its line and column.",
        epilog="example:\n  tunnelred check sample_runs/broken\n\n"
        "exit status: 0 no problems, 1 problems found, 2 usage error.",
    )
    p.add_argument("campaign", type=Path, help="the campaign folder (holds campaign.toml)")


def _range(values, fmt: str) -> str:
    import numpy as np  # here: `tunnelred --help` and Ctrl-C at start-up need no numpy

    lo, hi = min(values), max(values)
    return fmt.format(lo) if np.isclose(lo, hi) else f"{fmt.format(lo)}–{fmt.format(hi)}"


def _run_check(args) -> int:
    from tunnelred.inputs.readers import KINDS, STREAMS, open_campaign

    _require_folders(args.campaign)
    campaign = open_campaign(args.campaign, check_logs=True)
    config = campaign.config
    out = []
    out.append(f"{config.campaign.title} — {config.campaign.facility}")
    out.append(f"folder: {campaign.root}")
    kinds = Counter(r.kind for r in campaign.runs.values())
    out.append(f"runs: {len(campaign.runs)} (" + ", ".join(f"{kinds[k]} {k}" for k in KINDS) + ")")
    by_config: dict[str, Counter] = defaultdict(Counter)
    for spec in campaign.runs.values():
        by_config[spec.config or "(none)"][spec.kind] += 1
    for label, counts in sorted(by_config.items()):
        text = ", ".join(f"{counts[k]} {k}" for k in KINDS if counts[k])
        description = config.configurations.get(label)
        extra = f"  ({description.description})" if description and description.description else ""
        out.append(f"  config {label}: {text}{extra}")
    out.append("streams:")
    for stream in STREAMS:
        files = {spec.logs[stream] for spec in campaign.runs.values() if stream in spec.logs}
        infos = [campaign.log_info[f] for f in files if f in campaign.log_info]
        if not files:
            continue
        line = f"  {stream:<9} {len(files)} files"
        if infos:
            rates = [1.0 / i.median_dt for i in infos if i.median_dt > 0]
            line += (f"; rate {_range(rates, '{:.4g}')} Hz" if rates else "") + (
                f"; duration {_range([i.duration for i in infos], '{:.4g}')} s"
                f"; rows {_range([i.rows for i in infos], '{:d}')}"
            )
        if len(infos) < len(files):
            line += f"; {len(files) - len(infos)} with problems"
        out.append(line)
    if config.taps:
        names = [t.name for t in config.taps]
        shown = ", ".join(names) if len(names) <= 12 else f"{', '.join(names[:12])}, …"
        out.append(f"taps: {len(names)} ({shown})")
    for notice in campaign.notices:
        out.append(f"notice: {notice.location()}: {notice.hint}")
    print(_lines(out))
    from tunnelred.engine.plausibility import campaign_problems

    return _print_problems(campaign.problems + campaign_problems(campaign))


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" if n == 1 else f"{n} {noun}s"


def _print_problems(problems) -> int:
    if not problems:
        print("no problems found")
        return 0
    by_file: dict[str, list] = defaultdict(list)
    for p in problems:
        by_file[p.file].append(p)
    print(f"\n{_count(len(problems), 'problem')} in {_count(len(by_file), 'file')}:")
    for file, items in by_file.items():
        print(f"\n{printable(file)}")
        for p in sorted(items, key=lambda p: (p.line or 0, p.column or "")):
            print(printable(f"  {p.location()}: expected {p.expected}; found {p.found}."))
            if p.hint:
                print(f"      {printable(p.hint)}")
    return 1


# ---------------------------------------------------------------------------------------------
# demo


def _add_demo(subparsers) -> None:
    p = _command(
        subparsers,
        _run_demo,
        help="write a synthetic demo campaign with known truth",
        description="Write a synthetic campaign folder (campaign.toml, runs.csv, logs and "
        "truth.csv with the free-air values used to make it) into DEST.",
        epilog="example:\n  tunnelred demo my-demo --seed 3\n  tunnelred check my-demo",
    )
    p.add_argument("dest", type=Path, help="folder to write (created; must be empty)")
    p.add_argument("--seed", type=int, help="random seed of the noise (default: the demo's own)")
    p.add_argument("--force", action="store_true", help="write into a non-empty DEST")


def _run_demo(args) -> int:
    dest: Path = args.dest
    if dest.exists() and not dest.is_dir():
        return _fail_usage(f"{dest} exists and is not a folder")
    if dest.is_dir() and any(dest.iterdir()) and not args.force:
        return _fail_usage(f"{dest} is not empty; choose another folder or add --force")
    from tunnelred.demo.writer import (
        write_demo_campaign,  # imported here: only this command needs it
    )

    if args.seed is None:
        write_demo_campaign(dest)
    else:
        write_demo_campaign(dest, seed=args.seed)
    print(f"demo campaign written to {printable(dest)}")
    return 0


# ---------------------------------------------------------------------------------------------
# reduce


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected 1 or more, got {value}")
    return value


# The bound lives in tunnelred.pipeline.campaign (a test keeps this copy in step); importing it
# here would make every `tunnelred --help` load the whole pipeline.
_MAX_DRAWS_HELP = 1_000_000


def _draws(text: str) -> int:
    """--monte-carlo N: 2 draws at least (a standard deviation), at most _MAX_DRAWS_HELP."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if not 2 <= value <= _MAX_DRAWS_HELP:
        raise argparse.ArgumentTypeError(f"expected 2 to {_MAX_DRAWS_HELP} draws, got {value}")
    return value


def _add_reduce(subparsers) -> None:
    p = _command(
        subparsers,
        _run_reduce,
        help="reduce every data run of a campaign to coefficients with uncertainties",
        description="Reduce every data run of a campaign folder: free stream, balance loads "
        "(zeros, spin tares, wind axes), surface pressure, wall corrections, GUM uncertainty and "
        "quality flags. Writes OUT/results.nc, results.csv, budgets.csv, failures.csv, "
        "provenance.json and figures/. Runs already reduced from unchanged inputs are taken "
        "from the cache in OUT/.cache.",
        epilog="examples:\n  tunnelred reduce sample_runs -o out --report\n"
        "  tunnelred reduce big-campaign -o out --workers 2\n"
        "  tunnelred reduce big-campaign -o out --dask tcp://scheduler:8786\n\n"
        "exit status: 0 every run reduced, 1 some runs failed (see OUT/failures.csv), "
        "2 usage error, or a campaign problem that stops every run (nothing is written).",
    )
    p.add_argument("campaign", type=Path, help="the campaign folder (holds campaign.toml)")
    p.add_argument("-o", "--out", type=Path, required=True, help="output folder (created)")
    p.add_argument("--workers", type=_positive_int, help="processes to use (default: every core)")
    p.add_argument(
        "--dask",
        metavar="ADDRESS",
        help="reduce on a dask.distributed cluster: 'local' starts one on this machine, "
        "'tcp://host:port' uses a running scheduler",
    )
    p.add_argument("--fresh", action="store_true", help="ignore the cache and reduce every run")
    p.add_argument(
        "--monte-carlo",
        type=_draws,
        metavar="N",
        default=0,
        help="also propagate the uncertainty with N Monte Carlo draws (JCGM 101) to check the "
        f"linear result; both are recorded. N is 2 to {_MAX_DRAWS_HELP}: 10^6 draws already "
        "give a 95 %% interval to one or two significant digits (JCGM 101 §7.2.2), and every "
        "draw of a run's outputs is held in memory, about 3 GB for a run with a Cp profile at "
        "10^6, in each worker",
    )
    p.add_argument("--report", action="store_true", help="also write OUT/report.pdf")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument(
        "--force",
        action="store_true",
        help="write into a non-empty OUT that is not a tunnelred results folder",
    )


def _run_reduce(args) -> int:
    from tunnelred.pipeline.campaign import reduce_campaign

    _require_folders(args.campaign)
    if args.out.exists() and not args.out.is_dir():
        return _fail_usage(f"{args.out} exists and is not a folder")
    try:
        results = reduce_campaign(
            args.campaign,
            args.out,
            workers=args.workers,
            dask=args.dask,
            fresh=args.fresh,
            monte_carlo=args.monte_carlo,
            progress=not args.quiet,
            report=args.report,
            force=args.force,
        )
    except InputError as exc:
        # Every run would fail the same way: stop once, write nothing.
        print("the campaign cannot be reduced as it is (nothing was written):")
        _print_problems(exc.problems)
        return 2
    print(results.summary())  # its strings from files are escaped where it is composed
    if args.report:
        print(f"  report   {printable(results.outputs['report.pdf'])}")
    return 1 if results.failed else 0


# ---------------------------------------------------------------------------------------------
# report


def _add_report(subparsers) -> None:
    p = _command(
        subparsers,
        _run_report,
        help="write the PDF test report of reduced results",
        description="Write the test report of a results folder made by 'tunnelred reduce': "
        "title page with the cautions, summary and test matrix, test conditions, the wall "
        "corrections with their per-run sizes, results with expanded uncertainties (k = 2), "
        "Cp against potential flow, an uncertainty budget, the quality flags with their "
        "reasons, the configuration comparison, and an appendix with the configuration and the "
        "SHA-256 of every input.",
        epilog="examples:\n  tunnelred report out\n  tunnelred report out -o entry-3.pdf",
    )
    p.add_argument("results", type=Path, help="results folder of tunnelred reduce")
    p.add_argument("-o", "--out", type=Path, help="PDF to write (default RESULTS/report.pdf)")
    p.add_argument(
        "--campaign",
        type=Path,
        help="the campaign folder, for the configuration appendix (default: as recorded)",
    )
    p.add_argument(
        "--full-config", action="store_true", help="reproduce campaign.toml in the appendix"
    )


def _run_report(args) -> int:
    from tunnelred.products.report import write_report

    _require_folders(args.results, args.campaign)
    if args.out is not None:
        if args.out.suffix.lower() != ".pdf":
            return _fail_usage(f"{args.out}: the report's name must end in .pdf")
        _refuse_campaign_target(args.out)
    pdf = write_report(args.results, args.out, campaign=args.campaign, full_config=args.full_config)
    print(f"report written to {printable(pdf)}")
    return 0


# ---------------------------------------------------------------------------------------------
# export


def _add_export(subparsers) -> None:
    p = _command(
        subparsers,
        _run_export,
        help="write the results of an output folder as a spreadsheet",
        description="Write the results of an output folder as an Excel workbook: a results "
        "sheet (results.csv's names, their units in the row below, flagged runs filled in "
        "colour), the uncertainty budgets with readable input names and units, the failures, "
        "and the provenance on a sheet of its own.",
        epilog="example:\n  tunnelred export out --xlsx out/results.xlsx",
    )
    p.add_argument("results", type=Path, help="the output folder of 'tunnelred reduce'")
    p.add_argument("--xlsx", type=Path, required=True, metavar="FILE",
                   help="the workbook to write (.xlsx)")  # fmt: skip


def _run_export(args) -> int:
    from tunnelred.products.spreadsheet import write_xlsx

    _require_folders(args.results)
    if args.xlsx.suffix.lower() != ".xlsx":
        return _fail_usage(f"{args.xlsx}: the workbook's name must end in .xlsx")
    _refuse_campaign_target(args.xlsx)
    print(f"workbook written to {printable(write_xlsx(args.results, args.xlsx))}")
    return 0


# ---------------------------------------------------------------------------------------------
# compare


def _add_compare(subparsers) -> None:
    p = _command(
        subparsers,
        _run_compare,
        help="compare sweeps and configurations with their uncertainties",
        description="Group reduced runs into sweeps (configuration and speed, up and down legs) "
        "and write the differences between configurations (or speeds, or Reynolds-number bands) "
        "with their significance at k = 2, the up/down hysteresis, repeatability and each "
        "sweep's characteristic figures (lift slope, maximum |CL|, minimum CD, maximum |L/D|). "
        "Differences are taken at the spin ratios both sweeps measured, paired within a "
        "tolerance (default), or on an interpolated spin-ratio grid with the interpolation "
        "error in the uncertainty and no step wider than --max-gap bridged. Flagged runs are "
        "left out of the differences unless --include-flagged.",
        epilog="examples:\n  tunnelred compare out -o out/comparison\n"
        "  tunnelred compare entry1/out entry2/out --by re -o comparison\n",
    )
    p.add_argument("results", type=Path, nargs="+", help="results folders of tunnelred reduce")
    p.add_argument(
        "--by",
        choices=("config", "speed", "re"),
        default="config",
        help="what to compare: configurations (default), tunnel speeds, or Reynolds-number bands",
    )
    p.add_argument(
        "--power-level",
        type=float,
        metavar="C",
        help="also find the spin ratio where the power coefficient crosses C",
    )
    p.add_argument(
        "--method",
        choices=("paired", "grid"),
        default="paired",
        help="differences at measured spin ratios paired within --pair-tolerance (default), "
        "or on an interpolated spin-ratio grid",
    )
    p.add_argument(
        "--pair-tolerance",
        type=float,
        metavar="DA",
        help="largest difference of measured spin ratio of two points compared as one "
        "(default 0.05)",
    )
    p.add_argument(
        "--max-gap",
        type=float,
        metavar="DA",
        help="widest step in spin ratio between measured points that a grid value or a sweep "
        "line may bridge (default 1.5 times the median step of the finest sweep compared)",
    )
    p.add_argument(
        "--include-flagged",
        action="store_true",
        help="use runs that raised a quality flag in the differences",
    )
    p.add_argument("-o", "--out", type=Path, required=True, help="folder for tables and figures")


def _run_compare(args) -> int:
    from tunnelred.products.compare import PAIR_TOLERANCE, run_compare

    _require_folders(*args.results)
    _refuse_campaign_target(args.out)
    for option, value in (("--pair-tolerance", args.pair_tolerance), ("--max-gap", args.max_gap)):
        if value is not None and not value >= 0.0:
            return _fail_usage(f"{option} takes a spin-ratio step of 0 or more, not {value}")
    written = run_compare(
        args.results,
        by=args.by,
        dest=args.out,
        power_level=args.power_level,
        method=args.method,
        tolerance=PAIR_TOLERANCE if args.pair_tolerance is None else args.pair_tolerance,
        max_gap=args.max_gap,
        include_flagged=args.include_flagged,
    )
    figures = [name for name in written if name.startswith("figures/")]
    print(f"comparison by {args.by} written to {printable(args.out)}:")
    for name, path in written.items():
        if name not in figures:
            print(printable(f"  {name:18s} {path}"))
    print(f"  {len(figures)} figures in {printable(args.out / 'figures')}")
    return 0


# ---------------------------------------------------------------------------------------------
# init


def _add_init(subparsers) -> None:
    p = _command(
        subparsers,
        _run_init,
        help="start a new campaign folder to fill in",
        description="Write a campaign folder to fill in: campaign.toml with every key commented "
        "(unit, default and meaning; required keys marked), runs.csv with its header and one "
        "example row of each run kind, run_sheet.csv for the operator to print, and an empty "
        "logs/. Then 'tunnelred check DEST' lists what is still to be filled.",
        epilog="example:\n  tunnelred init entry-4\n  tunnelred check entry-4\n\n"
        "exit status: 0 written, 2 DEST not empty (without --force) or a usage error.",
    )
    p.add_argument("dest", type=Path, help="the new campaign folder (created)")
    p.add_argument("--force", action="store_true",
                   help="write into a non-empty folder (replacing the template files)")  # fmt: skip


def _run_init(args) -> int:
    from tunnelred.inputs.template import write_template

    written = write_template(args.dest, force=args.force)
    print(f"wrote {', '.join(p.name for p in written)} and logs/ in {args.dest}")
    print(f"fill them in, then: tunnelred check {args.dest}")
    return 0


# ---------------------------------------------------------------------------------------------
# watch

# The defaults themselves live in tunnelred.live.watcher (a test keeps these texts in step);
# importing it here would make every `tunnelred --help` load the whole pipeline.
_SETTLE_HELP = "2"
_POLL_HELP = "0.5"


def _add_watch(subparsers) -> None:
    p = _command(
        subparsers,
        _run_watch,
        help="reduce and flag each run while the test is still running",
        description="Watch a campaign folder while the data acquisition writes into it. A run "
        "is reduced as soon as it is complete: its row in runs.csv is a whole line, every log "
        "it (and its zero and tare runs) names exists and ends with a line break, and none of "
        "them has changed for SETTLE seconds. OUT is kept up to date (results, figures/live.png) "
        "and a live view shows the latest runs with their flags. Ctrl-C stops it cleanly.",
        epilog="example:\n  tunnelred watch /data/entry-3 -o /data/entry-3-out --settle 5\n\n"
        "exit status: 0 stopped with Ctrl-C, 143 stopped by SIGTERM, 2 usage error or OUT in "
        "use by another reduction or watch.",
    )
    p.add_argument("campaign", type=Path, help="the campaign folder being written")
    p.add_argument("-o", "--out", type=Path, required=True, help="output folder (created)")
    p.add_argument(
        "--settle",
        type=float,
        metavar="SECONDS",
        help="how long a run's files must stay unchanged before it counts as complete "
        f"(default {_SETTLE_HELP} s)",
    )
    p.add_argument(
        "--poll",
        type=float,
        metavar="SECONDS",
        help=f"how often to look at the folder (default {_POLL_HELP} s)",
    )
    p.add_argument("--workers", type=_positive_int, default=1, help="processes (default 1)")


def _run_watch(args) -> int:
    from tunnelred.live.watcher import main_watch

    return main_watch(args)


# ---------------------------------------------------------------------------------------------
# plan


_NOISE_OPTIONS = (
    "turbulence", "turbulence_time", "balance_noise", "pitot_noise", "spin_jitter",
    "spin_jitter_time", "tap_noise", "tap_noise_floor", "unsteady_cl", "unsteady_cl_decay",
    "shedding_bandwidth", "imbalance", "wind_off_record",
)  # fmt: skip


def _add_plan(subparsers) -> None:
    p = _command(
        subparsers,
        _run_plan,
        help="pre-test uncertainty analysis of a planned test matrix",
        description="Predict, for every point of a planned test matrix, the conditions (q, U, "
        "Re, Mach, rpm), the balance loads as fractions of full scale, the scanner range used, "
        "the revolutions per record, the size of each wall correction, and the standard and "
        "expanded (k = 2) uncertainties of alpha, CL, CD, CM, C_power, CL_p and Cp with their "
        "dominant contributors, using the campaign's tunnel, model, instruments and tolerances "
        "and the reduction's own uncertainty model. Writes plan.csv, plan.nc, plan_budgets.csv, "
        "plan.json and figures/ into OUT (into OUT/plan/ when OUT holds results, where "
        "'tunnelred report' finds it). The coefficients come from a stated prior and the noise "
        "from stated levels (docs/plan.md). A point past the model's max_spin_rate is warned "
        "of loudly; the facility's safety rules and licensed engineering practice decide what "
        "may be run.",
        epilog="examples:\n  tunnelred plan my-campaign --matrix PLAN.csv -o plan-out\n"
        "  tunnelred plan my-campaign --matrix PLAN.csv -o out --prior out --target CL=0.01",
    )
    p.add_argument("campaign", type=Path, help="campaign folder (campaign.toml is read)")
    p.add_argument("--matrix", type=Path, required=True, metavar="PLAN.csv",
                   help="the planned points (docs/plan.md)")  # fmt: skip
    p.add_argument("-o", "--out", type=Path, required=True, help="output folder")
    p.add_argument(
        "--prior",
        default="illustrative",
        help="expected coefficients: 'illustrative' (a built-in curve shaped like published "
        "rotating-cylinder data, not measured data; default), 'potential' (potential flow, an "
        "upper bound of lift) or the results folder of an earlier campaign",
    )
    p.add_argument("--target", metavar="NAME=U",
                   help="wanted standard uncertainty of an output, e.g. CL=0.01: the record "
                   "length that reaches it is reported per point")  # fmt: skip
    p.add_argument("--eps-limit", type=float, default=0.05, metavar="EPS",
                   help="total blockage eps above which to warn (default 0.05)")  # fmt: skip
    # Names only: importing the plan (pandas, xarray) would slow every 'tunnelred --help'.
    noise = p.add_argument_group(
        "noise levels assumed (each default, its unit and meaning: docs/plan.md)"
    )
    for name in _NOISE_OPTIONS:
        noise.add_argument(
            f"--{name.replace('_', '-')}", type=float, dest=f"noise_{name}", metavar="X"
        )
    air = p.add_argument_group("air assumed (default 293.15 K, 101325 Pa, RH 0.5)")
    air.add_argument("--temperature", type=float, metavar="K", help="[K]")
    air.add_argument("--pressure", type=float, metavar="PA", help="barometric pressure [Pa]")
    air.add_argument("--humidity", type=float, metavar="RH", help="relative humidity, fraction [-]")


def _run_plan(args) -> int:
    from tunnelred.products.plan.core import SAFETY, plan_folder, plan_test, write_plan
    from tunnelred.products.plan.levels import AirState, NoiseLevels

    if not (args.campaign / "campaign.toml").is_file():
        return _fail_usage(f"{args.campaign}: no campaign.toml there")
    if not args.matrix.is_file():
        return _fail_usage(f"{args.matrix}: no such file")
    target = None
    if args.target:
        name, _, value = args.target.partition("=")
        try:
            target = (name.strip(), float(value))
        except ValueError:
            return _fail_usage(f"--target {args.target!r}: write NAME=U, e.g. CL=0.01")
        if not target[1] > 0:
            return _fail_usage(f"--target {args.target!r}: the uncertainty must be positive")
    given = {k: getattr(args, f"noise_{k}") for k in _NOISE_OPTIONS}
    noise = NoiseLevels(**{k: v for k, v in given.items() if v is not None})
    air = AirState(
        **{
            key: value
            for key, value in (
                ("T", args.temperature), ("p_baro", args.pressure), ("RH", args.humidity)
            )
            if value is not None
        }
    )  # fmt: skip
    folder = plan_folder(args.out, args.campaign)
    prior = args.prior
    result = plan_test(
        args.campaign, args.matrix, prior=prior, noise=noise, air=air, target=target,
        eps_limit=args.eps_limit,
    )  # fmt: skip
    write_plan(result, folder, args.campaign)
    print(f"{len(result.table)} planned points; plan written to {folder}")
    loud = [w for w in result.warnings if "SPIN LIMIT" in w or "OVERLOAD" in w]
    for warning in result.warnings:
        print(f"  warning: {warning}", file=sys.stderr if warning in loud else sys.stdout)
    if loud:
        print(f"\n{SAFETY}", file=sys.stderr)
    return 0


# ---------------------------------------------------------------------------------------------

_SUBCOMMANDS = (
    _add_init,
    _add_check,
    _add_reduce,
    _add_report,
    _add_export,
    _add_compare,
    _add_watch,
    _add_plan,
    _add_demo,
)


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="tunnelred",
        description="Reduce wind-tunnel data from rotating-cylinder tests: validate a campaign "
        "folder, reduce its runs to wall-corrected coefficients with uncertainties, and report.",
        epilog="examples:\n  tunnelred demo my-demo\n  tunnelred check my-demo\n"
        "  tunnelred reduce my-demo -o out --report\n\n"
        "Run 'tunnelred COMMAND --help' for a command's options.",
        formatter_class=_HelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"tunnelred {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    for add in _SUBCOMMANDS:
        add(subparsers)
    return parser


_PRELOAD = {"reduce": ("tunnelred.pipeline.campaign",), "watch": ("tunnelred.live.watcher",)}


def _raise_terminated(signum, frame) -> None:
    raise Terminated()


@contextlib.contextmanager
def _sigterm_as_interrupt():
    if threading.current_thread() is not threading.main_thread():
        yield  # only the main thread may set a handler (main() called from a thread)
        return
    previous = signal.signal(signal.SIGTERM, _raise_terminated)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def _os_error_text(exc: OSError) -> str:
    where = f"{exc.filename}: " if exc.filename else ""
    return f"{where}{exc.strerror or exc}"


def _reader_gone() -> int:
    # `tunnelred ... | head`: the reader left; say nothing more. Python would still try to
    # flush stdout at exit and report that it failed, so stdout goes to /dev/null.
    with contextlib.suppress(OSError, ValueError):
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    return 141


def _preload(command: str) -> None:
    """Import a long-running command's modules before any handler is set.

    A KeyboardInterrupt raised in the middle of an import can be swallowed by a library that
    imports an optional dependency in a try block, leaving that module half-imported (a later
    AttributeError); SIGINT and SIGTERM then just end the command, which has started nothing.
    """
    modules = _PRELOAD.get(command, ())
    if not modules or threading.current_thread() is not threading.main_thread():
        return
    previous = signal.signal(signal.SIGINT, signal.SIG_DFL)
    try:
        for module in modules:
            with contextlib.suppress(Exception):  # a broken install: reported by the command
                importlib.import_module(module)
    finally:
        signal.signal(signal.SIGINT, previous)


def _dispatch(args) -> int:
    try:
        status = args.run(args)
        sys.stdout.flush()  # a closed pipe shows here, not at exit
        return status
    except BrokenPipeError:
        raise
    except InputError as exc:
        print("the input cannot be used as it is:")
        return _print_problems(exc.problems)
    except (OutputFolderError, UsageError) as exc:
        return _fail_usage(str(exc))
    except TunnelredError as exc:
        print(f"tunnelred: {printable(exc)}", file=sys.stderr)
        return 1
    except Terminated:
        print("tunnelred: stopped (SIGTERM); nothing half-written was kept", file=sys.stderr)
        return 143
    except KeyboardInterrupt:
        print("tunnelred: interrupted; nothing half-written was kept", file=sys.stderr)
        return 130
    except MemoryError:
        print("tunnelred: out of memory", file=sys.stderr)
        return 1
    except OSError as exc:
        print(f"tunnelred: {printable(_os_error_text(exc))}", file=sys.stderr)
        return 1
    except Exception as exc:
        if os.environ.get("TUNNELRED_TRACEBACK"):
            traceback.print_exc()
        print(
            f"tunnelred: internal error: {printable(type(exc).__name__)}: {printable(exc)}\n"
            "  This is a fault in tunnelred, not in your data; please report it with the "
            "command you ran (TUNNELRED_TRACEBACK=1 shows where it happened).",
            file=sys.stderr,
        )
        return 1


def main(argv=None) -> int:
    """Run the ``tunnelred`` command; returns the exit status (see the module's docstring)."""
    try:
        parser = _parser()
        try:
            args = parser.parse_args(argv)
        except SystemExit as exc:  # argparse exits 2 on usage errors, 0 for --help/--version
            sys.stdout.flush()
            return int(exc.code or 0)
        _preload(args.command)
        with _sigterm_as_interrupt():
            return _dispatch(args)
    except BrokenPipeError:
        return _reader_gone()
    except KeyboardInterrupt:  # while parsing, or while a message above was printed
        return 130


if __name__ == "__main__":
    sys.exit(main())
