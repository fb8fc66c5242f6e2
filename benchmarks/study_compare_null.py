"""compare's false-positive rate over seeds of a null campaign, and the detection of planted
hysteresis of several sizes.

    python benchmarks/study_compare_null.py [--seeds 4] [--sizes 0.05 0.1 0.3] [--workers 2]

Each seed writes tunnelred.demo's null campaign (``twin_spec``: two entries of one model, up and
down sweeps of one truth), reduces it, and counts the significant points (k = 2) of every curve
difference, paired and on the grid. Each size plants ``down_sweep_lift_offset`` on a one-entry,
one-speed copy and counts the up-minus-down CL points found significant, and how many lie within
3 u(Δ) of the planted size. Prints a table; writes nothing outside a temporary folder.
"""

from __future__ import annotations

import argparse
import tempfile
from dataclasses import replace
from pathlib import Path

import pandas as pd

from tunnelred.demo.spec import twin_spec
from tunnelred.demo.writer import make_campaign
from tunnelred.pipeline.campaign import reduce_campaign
from tunnelred.products import compare
from tunnelred.products.store import read_results


def _results(root: Path, spec, workers: int) -> pd.DataFrame:
    make_campaign(root / "campaign", spec)
    reduce_campaign(root / "campaign", root / "out", workers=workers, progress=False)
    return compare.sweeps.results_table(read_results(root / "out"))


def _curves(results: pd.DataFrame, method: str) -> pd.DataFrame:
    table = compare.comparison_table(results, method=method)
    return table[table["alpha"].notna()]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=4)
    parser.add_argument("--sizes", type=float, nargs="+", default=[0.05, 0.1, 0.3])
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args()
    null_rows, planted_rows = [], []
    with tempfile.TemporaryDirectory() as tmp:
        for seed in range(100, 100 + args.seeds):
            results = _results(Path(tmp) / f"null{seed}", twin_spec(seed), args.workers)
            for method in compare.METHODS:
                for kind, rows in _curves(results, method).groupby("kind"):
                    null_rows.append(
                        {
                            "seed": seed,
                            "method": method,
                            "kind": kind,
                            "points": len(rows),
                            "significant": int(rows["significant"].sum()),
                        }
                    )
        for k, size in enumerate(args.sizes):
            spec = twin_spec(200 + k, down_sweep_lift_offset=size)
            spec = replace(spec, configurations=spec.configurations[:1], speeds=(9.0,))
            results = _results(Path(tmp) / f"planted{k}", spec, args.workers)
            rows = _curves(results, "paired")
            cl = rows[(rows["kind"] == "hysteresis") & (rows["quantity"] == "CL")]
            planted_rows.append(
                {
                    "size": size,
                    "points": len(cl),
                    "significant": int(cl["significant"].sum()),
                    "within_3u": int(((cl["delta"] + size).abs() < 3 * cl["u_delta"]).sum()),
                    "median_U": float((2 * cl["u_delta"]).median()),
                }
            )
    null = pd.DataFrame(null_rows)
    total = null.groupby(["method", "kind"])[["points", "significant"]].sum()
    total["rate"] = total["significant"] / total["points"]
    print("null campaigns (no difference, no hysteresis in truth):")
    print(total.to_string())
    print("\nplanted hysteresis, paired, CL (up minus down = -size):")
    print(pd.DataFrame(planted_rows).to_string(index=False))


if __name__ == "__main__":
    main()
