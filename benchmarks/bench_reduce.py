"""Speed and memory of reduce_campaign on synthetic campaigns of several sizes.

Each measurement runs in a fresh Python process (so that peak RSS belongs to that measurement
alone), after tunnelred is imported there: import time is not counted. For each size it reports

- wall time of a first reduction (no cache) with 1 worker, and samples per second;
- the parse floor: the time pyarrow.csv.read_csv takes to parse the same CSV files, and the ratio;
- peak memory: the Python heap peak by tracemalloc (a second reduction, traced: numpy buffers
  are traced, pyarrow's are not) and the peak resident set size of the measuring process from
  resource.getrusage(RUSAGE_SELF), with 1 worker so that all the work is in that process (pool
  workers are forked by the forkserver, not by it, so RUSAGE_CHILDREN would not see them);
- the wall time of an unchanged re-run (every run from the cache), as a fraction of the first.

Then the 1 → 2 worker speed-up on the largest campaign, and the linearity of time in runs and in
samples per run. A "sample" is one row of one CSV log (every stream of every run, zero and tare
runs included), i.e. one time step of one instrument.

    python benchmarks/bench_reduce.py            # the full set (several minutes on 2 cores)
    python benchmarks/bench_reduce.py --quick    # a small set, to check it runs
    python benchmarks/bench_reduce.py --runs 20 50 --seconds 5 --rates 1000

Prints a table and writes benchmarks/results.json.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import subprocess
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

HERE = Path(__file__).resolve().parent


def _spec(runs: int, seconds: float, rate: float, taps: int):
    """A synthetic campaign of ``runs`` data runs, each with a balance, pressure and tunnel log.

    One configuration; runs spread over speeds × spin ratios. The balance and pressure streams
    are sampled at ``rate``, the tunnel stream at a tenth of it (tunnel sensors are slow).
    """
    import numpy as np

    from tunnelred.demo.spec import demo_spec

    demo = demo_spec()
    per_speed = 10 if runs >= 50 else 5
    n_speeds = -(-runs // per_speed)
    speeds = tuple(float(s) for s in np.round(np.linspace(6.0, 15.0, n_speeds), 2))
    ratios = tuple(float(a) for a in np.round(np.linspace(0.0, 3.0, per_speed), 3))
    return replace(
        demo,
        configurations=demo.configurations[:1],
        speeds=speeds,
        spin_ratios_up=ratios,
        spin_ratios_down=(),
        pressure_speeds=speeds,
        pressure_spin_ratios=ratios,
        repeat_point=None,
        faults=(),
        tare_rpms=(500.0, 2000.0, 4000.0, 6000.0, 7500.0),
        data_duration=float(seconds),
        wind_off_duration=min(float(seconds), 5.0),
        balance_rate=float(rate),
        pressure_rate=float(rate),
        tunnel_rate=float(rate) / 10.0,
        n_taps=int(taps),
    )


def _data_run_count(campaign: Path) -> int:
    import pandas as pd

    runs = pd.read_csv(campaign / "runs.csv", dtype=str)
    return int((runs["kind"] == "data").sum())


def _parse_floor(campaign: Path) -> tuple[float, int]:
    """Seconds to parse every log with pyarrow.csv.read_csv (default options), and its rows."""
    import pyarrow.csv as pacsv

    files = sorted((campaign / "logs").glob("*.csv"))
    rows = 0
    started = time.perf_counter()
    for path in files:
        rows += pacsv.read_csv(path).num_rows
    return time.perf_counter() - started, rows


def _child(args: dict) -> dict:
    """One measurement, in this (fresh) process."""
    import resource
    import tracemalloc

    from tunnelred.pipeline.campaign import reduce_campaign

    campaign = Path(args["campaign"])
    work = Path(args["work"])
    workers = args["workers"]
    out = work / f"out-{workers}"
    started = time.perf_counter()
    first = reduce_campaign(
        campaign, out, workers=workers, fresh=True, progress=False, figures=False
    )
    wall = time.perf_counter() - started
    rss_self = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    started = time.perf_counter()
    again = reduce_campaign(campaign, out, workers=workers, progress=False, figures=False)
    rerun = time.perf_counter() - started
    record = {
        "wall": wall,
        "rerun": rerun,
        "reduced": first.reduced,
        "failed": first.failed,
        "rerun_from_cache": again.from_cache,
        # Linux reports ru_maxrss in KiB, macOS in bytes.
        "rss_self_mib": rss_self / (1024 if sys.platform != "darwin" else 1024**2),
    }
    if args["trace"]:
        tracemalloc.start()
        reduce_campaign(
            campaign, work / "out-traced", workers=1, fresh=True, progress=False, figures=False
        )
        record["tracemalloc_peak_mib"] = tracemalloc.get_traced_memory()[1] / 1024**2
        tracemalloc.stop()
    record["floor"], record["samples"] = _parse_floor(campaign)
    return record


def _measure(campaign: Path, work: Path, workers: int, trace: bool) -> dict:
    payload = json.dumps(
        {"campaign": str(campaign), "work": str(work), "workers": workers, "trace": trace}
    )
    done = subprocess.run(
        [sys.executable, __file__, "--child", payload],
        check=True,
        capture_output=True,
        text=True,
    )
    return json.loads(done.stdout.strip().splitlines()[-1])


def _sizes(options) -> list[tuple[int, float, float, int]]:
    if options.quick:
        return [(5, 2.0, 500.0, 8), (10, 2.0, 500.0, 8), (5, 8.0, 500.0, 8), (5, 2.0, 2000.0, 8)]
    if options.runs or options.seconds or options.rates:
        return [
            (r, s, f, options.taps)
            for r in options.runs or [20]
            for s in options.seconds or [5.0]
            for f in options.rates or [1000.0]
        ]
    return [
        (20, 5.0, 1000.0, 8),
        (50, 5.0, 1000.0, 8),
        (100, 5.0, 1000.0, 8),
        (20, 20.0, 1000.0, 8),
        (20, 5.0, 4000.0, 8),
    ]


def _ratio(rows: list[dict], pick, key) -> list[dict]:
    """Time per unit of ``key`` of each row, relative to the smallest of a series."""
    series = sorted((r for r in rows if pick(r)), key=lambda r: r[key])
    if len(series) < 2:
        return []
    base = series[0]
    return [
        {
            "from": base["label"],
            "to": r["label"],
            "size_ratio": r[key] / base[key],
            "time_ratio": r["wall"] / base["wall"],
            # 1.0 is exactly linear; the target is within ±10 %.
            "linearity": (r["wall"] / base["wall"]) / (r[key] / base[key]),
        }
        for r in series[1:]
    ]


# ---------------------------------------------------------------------------------------------
# Side by side with the yardstick: whole processes, alternating rounds, medians.

_FLOOR_CODE = (
    "import sys, pathlib, pyarrow.csv as c\n"
    "for f in sorted(pathlib.Path(sys.argv[1]).glob('logs/*.csv')): c.read_csv(f)"
)


def _timed(command: list[str]) -> tuple[float, float]:
    """Wall time [s] of one whole command, and the peak RSS [MiB] of its largest process.

    The peak comes from wait4's rusage of the command, which covers it and every descendant it
    (or they) waited for: the pool and dask processes too.
    """
    started = time.perf_counter()
    child = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    stderr = child.stderr.read()
    _, status, usage = os.wait4(child.pid, 0)
    wall = time.perf_counter() - started
    child.returncode = os.waitstatus_to_exitcode(status)
    if child.returncode != 0:
        raise subprocess.CalledProcessError(child.returncode, command, stderr=stderr)
    return wall, usage.ru_maxrss / (1024 if sys.platform != "darwin" else 1024**2)


# The reduction alone, figures aside: reduce_campaign without figures, in a whole process.
_REDUCTION_CODE = (
    "import sys\n"
    "from tunnelred.pipeline.campaign import reduce_campaign\n"
    "reduce_campaign(sys.argv[1], sys.argv[2], workers=1, fresh=True, progress=False, "
    "figures=False)"
)


def _versus(campaign: Path, rounds: int, parallel: bool) -> dict:
    """Time ``tunnelred reduce`` (standard figures included) beside the hand-written script.

    Each round runs, one after the other: ``tunnelred reduce --workers 1 --fresh``, the naive
    script, the pyarrow parse of every log, an unchanged re-run of the CLI into the same folder,
    and with ``parallel`` ``--workers 2 --fresh`` and ``--dask local --workers 2 --fresh``. The
    rounds alternate the commands, so a change in the machine's load falls on all of them; the
    medians over the rounds are reported.
    """
    import statistics

    py = sys.executable
    cli = [py, "-m", "tunnelred", "reduce", str(campaign)]
    work = Path(tempfile.mkdtemp(prefix="tunnelred-versus-"))

    def commands_of(round_: int) -> dict[str, list[str]]:
        # A new OUT for every fresh reduction: an OUT whose previous generation holds the same
        # results would carry its figures over, and "fresh" would not draw them.
        out = {name: str(work / f"{name}_{round_}") for name in ("out1", "out2", "outd")}
        commands = {
            "tunnelred_1": [*cli, "-o", out["out1"], "--fresh", "--workers", "1"],
            "naive": [py, str(HERE / "naive_reference.py"), str(campaign), str(work / "naive.csv")],
            "floor": [py, "-c", _FLOOR_CODE, str(campaign)],
            "rerun": [*cli, "-o", out["out1"], "--workers", "1"],
            "reduction_1": [py, "-c", _REDUCTION_CODE, str(campaign), str(work / f"outr_{round_}")],
        }
        if parallel:
            commands["tunnelred_2"] = [*cli, "-o", out["out2"], "--fresh", "--workers", "2"]
            commands["dask_2"] = [
                *cli, "-o", out["outd"], "--fresh", "--workers", "2", "--dask", "local"
            ]  # fmt: skip
        return commands

    times: dict[str, list[float]] = {name: [] for name in commands_of(0)}
    rss: dict[str, list[float]] = {name: [] for name in commands_of(0)}
    load = [os.getloadavg()[0]]
    for round_ in range(rounds):
        for name, command in commands_of(round_).items():
            wall, peak = _timed(command)
            times[name].append(wall)
            rss[name].append(peak)
            print(f"  {name}: {wall:.2f} s, {peak:.0f} MiB", file=sys.stderr, flush=True)
        load.append(os.getloadavg()[0])
    median = {name: statistics.median(v) for name, v in times.items()}
    record = {
        "campaign": str(campaign),
        "bytes": sum(f.stat().st_size for f in campaign.glob("logs/*.csv")),
        "data_runs": _data_run_count(campaign),
        "rounds": rounds,
        "times": times,
        "median": median,
        "rss_peak_mib": {name: max(v) for name, v in rss.items()},
        "load_average_1min": load,
        "tunnelred_over_naive": median["tunnelred_1"] / median["naive"],
        "tunnelred_over_floor": median["tunnelred_1"] / median["floor"],
        "reduction_over_floor": median["reduction_1"] / median["floor"],
        "rerun_fraction": median["rerun"] / median["tunnelred_1"],
        "agreement": _agreement(work / "out1_0", work / "naive.csv"),
    }
    if parallel:
        record["speedup_2_workers"] = median["tunnelred_1"] / median["tunnelred_2"]
        record["dask_over_2_workers"] = median["dask_2"] / median["tunnelred_2"]
    return record


def _agreement(out: Path, naive_csv: Path) -> dict:
    """Median and largest |naive / tunnelred - 1| of CL and CD over the runs both reduced."""
    import pandas as pd
    import xarray as xr

    naive = pd.read_csv(naive_csv).set_index("run")
    with xr.open_dataset(out / "results.nc") as ds:
        ours = pd.DataFrame({k: ds[k].values for k in ("CL", "CD")}, index=ds["run"].values)
    both = naive.index.intersection(ours.index)
    found = {}
    for name in ("CL", "CD"):
        rel = (naive.loc[both, name] / ours.loc[both, name] - 1).abs()
        found[name] = {"median": float(rel.median()), "max": float(rel.max()), "runs": len(both)}
    return found


def _print_versus(r: dict) -> None:
    m = r["median"]
    print(f"\n{r['campaign']}: {r['data_runs']} data runs, {r['bytes'] / 1e6:.0f} MB of logs, "
          f"medians of {r['rounds']} alternating rounds (whole processes)")  # fmt: skip
    print(f"  tunnelred reduce --workers 1 --fresh  {m['tunnelred_1']:8.2f} s")
    print(f"  naive per-run script                  {m['naive']:8.2f} s   "
          f"tunnelred / naive = {r['tunnelred_over_naive']:.2f}")  # fmt: skip
    print(f"  pyarrow parse of every log            {m['floor']:8.2f} s   "
          f"tunnelred / floor = {r['tunnelred_over_floor']:.1f}")  # fmt: skip
    print(f"  reduction alone (no figures), 1 worker {m['reduction_1']:7.2f} s   "
          f"reduction / floor = {r['reduction_over_floor']:.2f}")  # fmt: skip
    print(f"  unchanged re-run                      {m['rerun']:8.2f} s   "
          f"{r['rerun_fraction']:.1%} of fresh")  # fmt: skip
    if "speedup_2_workers" in r:
        print(f"  --workers 2                           {m['tunnelred_2']:8.2f} s   "
              f"speed-up {r['speedup_2_workers']:.2f}x")  # fmt: skip
        print(f"  --dask local --workers 2              {m['dask_2']:8.2f} s   "
              f"{r['dask_over_2_workers']:.2f}x of --workers 2")  # fmt: skip
    for name, a in r["agreement"].items():
        print(
            f"  {name}: naive vs tunnelred median |rel diff| {a['median']:.2e}, max {a['max']:.2e}"
        )
    print("  peak RSS of the largest process [MiB]: "
          + ", ".join(f"{k} {v:.0f}" for k, v in r["rss_peak_mib"].items()))  # fmt: skip
    print(
        f"  1-minute load average during: {', '.join(f'{x:.1f}' for x in r['load_average_1min'])}"
    )


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="a small set of sizes")
    parser.add_argument("--runs", type=int, nargs="+", help="data runs per campaign")
    parser.add_argument("--seconds", type=float, nargs="+", help="record length of a data run")
    parser.add_argument("--rates", type=float, nargs="+", help="balance/pressure rate [Hz]")
    parser.add_argument("--taps", type=int, default=8, help="pressure taps")
    parser.add_argument("--output", type=Path, default=HERE / "results.json")
    parser.add_argument("--child", help=argparse.SUPPRESS)
    parser.add_argument(
        "--versus",
        type=Path,
        metavar="CAMPAIGN",
        help="time the CLI beside benchmarks/naive_reference.py and the parse floor on CAMPAIGN",
    )
    parser.add_argument(
        "--make-large",
        type=Path,
        metavar="FOLDER",
        help="write the large campaign (300 runs x 20 s x 1 kHz x 16 taps, ~1.1 GB) into FOLDER "
        "(outside the repository, e.g. under /tmp) and stop",
    )
    parser.add_argument("--rounds", type=int, default=3, help="alternating rounds for --versus")
    parser.add_argument(
        "--parallel", action="store_true", help="with --versus: also --workers 2 and --dask local"
    )
    options = parser.parse_args(argv)
    if options.child:
        print(json.dumps(_child(json.loads(options.child))))
        return 0
    if options.make_large:
        from tunnelred.demo.writer import make_campaign

        make_campaign(options.make_large, _spec(300, 20.0, 1000.0, 16))
        return 0
    if options.versus:
        record = _versus(options.versus.resolve(), options.rounds, options.parallel)
        _print_versus(record)
        options.output.with_name("versus.json").open("a", encoding="utf-8").write(
            json.dumps({"created": time.strftime("%Y-%m-%dT%H:%M:%S%z"), **record}) + "\n"
        )
        return 0

    from tunnelred import __version__
    from tunnelred.demo.writer import make_campaign

    load_before = os.getloadavg()
    rows = []
    speedup = None
    sizes = _sizes(options)
    largest = max(sizes, key=lambda s: (s[0], -s[1] * s[2]))
    with tempfile.TemporaryDirectory(prefix="tunnelred-bench-") as tmp:
        for runs, seconds, rate, taps in sizes:
            label = f"{runs} runs x {seconds:g} s x {rate / 1000:g} kHz x {taps} taps"
            work = Path(tmp) / label.replace(" ", "")
            campaign = work / "campaign"
            make_campaign(campaign, _spec(runs, seconds, rate, taps))
            print(f"measuring {label} ...", file=sys.stderr, flush=True)
            one = _measure(campaign, work, workers=1, trace=True)
            row = {
                "label": label,
                "runs": _data_run_count(campaign),
                "seconds": seconds,
                "rate": rate,
                "taps": taps,
                "samples_per_run": one["samples"] / _data_run_count(campaign),
                **one,
                "samples_per_second": one["samples"] / one["wall"],
                "floor_ratio": one["wall"] / one["floor"],
                "rerun_fraction": one["rerun"] / one["wall"],
            }
            rows.append(row)
            if (runs, seconds, rate, taps) == largest:
                two = _measure(campaign, work, workers=2, trace=False)
                speedup = {
                    "label": label,
                    "wall_1": one["wall"],
                    "wall_2": two["wall"],
                    "speedup": one["wall"] / two["wall"],
                }

    base = min(sizes, key=lambda s: (s[0], s[1] * s[2]))
    in_runs = _ratio(rows, lambda r: (r["seconds"], r["rate"]) == (base[1], base[2]), "runs")
    in_samples = _ratio(rows, lambda r: r["runs"] == rows[0]["runs"], "samples_per_run")
    memory = [
        {"label": r["label"], "runs": r["runs"], "tracemalloc_peak_mib": r["tracemalloc_peak_mib"],
         "rss_self_mib": r["rss_self_mib"]}
        for r in rows if (r["seconds"], r["rate"]) == (base[1], base[2])
    ]  # fmt: skip
    results = {
        "machine": {
            "platform": platform.platform(),
            "processor": platform.processor() or platform.machine(),
            "cpu_count": os.cpu_count(),
            "python": platform.python_version(),
            # Other processes on the machine slow every figure; the 1-minute load says how busy.
            "load_average_1min_start_end": [load_before[0], os.getloadavg()[0]],
        },
        "tunnelred_version": __version__,
        "created": time.strftime("%Y-%m-%dT%H:%M:%S%z"),
        "sizes": rows,
        "speedup_1_to_2_workers": speedup,
        "linearity_in_runs": in_runs,
        "linearity_in_samples_per_run": in_samples,
        "memory_versus_runs": memory,
    }
    _print(results)
    options.output.write_text(json.dumps(results, indent=2) + "\n", encoding="utf-8")
    print(f"\nwritten {options.output}")
    return 0


def _print(results: dict) -> None:
    head = (
        f"{'size':<36}{'wall s':>8}{'Msamp/s':>9}{'floor s':>9}{'x floor':>8}"
        f"{'heap MiB':>10}{'RSS MiB':>9}{'re-run':>8}"
    )
    print(head)
    print("-" * len(head))
    for r in results["sizes"]:
        print(
            f"{r['label']:<36}{r['wall']:>8.2f}{r['samples_per_second'] / 1e6:>9.2f}"
            f"{r['floor']:>9.3f}{r['floor_ratio']:>8.1f}{r['tracemalloc_peak_mib']:>10.1f}"
            f"{r['rss_self_mib']:>9.0f}{r['rerun_fraction']:>7.1%}"
        )
    s = results["speedup_1_to_2_workers"]
    if s:
        print(
            f"\n1 -> 2 workers on {s['label']}: {s['wall_1']:.2f} s -> {s['wall_2']:.2f} s, "
            f"speed-up {s['speedup']:.2f}x"
        )
    for title, key in (("runs", "linearity_in_runs"), ("samples", "linearity_in_samples_per_run")):
        for x in results[key]:
            print(
                f"time in {title}: {x['from']} -> {x['to']}: size x{x['size_ratio']:.2f}, "
                f"time x{x['time_ratio']:.2f}, linearity {x['linearity']:.2f}"
            )
    print(
        "\nheap = tracemalloc peak of the Python heap during a traced reduction (1 worker); "
        "RSS = getrusage(RUSAGE_SELF) peak resident set of the measuring process; "
        "re-run = unchanged re-run wall time / first run's."
    )


if __name__ == "__main__":
    sys.exit(main())
