"""compare on reduced campaigns: no hysteresis or difference found where the truth has none, a
planted one found at its size, and no sweep line drawn across a step the data do not support.

The campaigns come from tunnelred.demo's forward model (independent of the reduction); their
truth is known: two configurations of one model (no difference), up and down sweeps of one truth
(no hysteresis), and a copy whose down sweeps carry a planted lift offset. At k = 2 a true null
is called significant at about 4.6 % of points when u is right (the two-sided normal tail beyond
2σ, common practice); the rate asked for is at most 5 %.
"""

from __future__ import annotations

import math
from dataclasses import replace

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402

from tunnelred.demo.spec import twin_spec  # noqa: E402
from tunnelred.demo.writer import make_campaign  # noqa: E402
from tunnelred.pipeline.campaign import reduce_campaign  # noqa: E402
from tunnelred.products import compare, plotting  # noqa: E402
from tunnelred.products.store import read_results  # noqa: E402

NULL_RATE = 0.05  # the false-positive rate allowed (the brief)
PLANTED = 0.3  # ΔCL added to the true lift of every down-sweep run of the planted campaign


def _reduce(root, spec) -> pd.DataFrame:
    truth = make_campaign(root / "campaign", spec)
    results = reduce_campaign(root / "campaign", root / "out", workers=2, progress=False)
    assert results.failures.empty, results.failures
    return compare.sweeps.results_table(read_results(root / "out")), truth


@pytest.fixture(scope="module")
def null_campaign(tmp_path_factory):
    """Two identical configurations, two speeds, up and down sweeps: no difference anywhere."""
    return _reduce(tmp_path_factory.mktemp("null"), twin_spec(31))


@pytest.fixture(scope="module")
def planted_campaign(tmp_path_factory):
    """One configuration at one speed whose down sweep's true CL is PLANTED higher."""
    spec = twin_spec(32, down_sweep_lift_offset=PLANTED)
    spec = replace(spec, configurations=spec.configurations[:1], speeds=(9.0,))
    return _reduce(tmp_path_factory.mktemp("planted"), spec)


def _curve_rows(table: pd.DataFrame, kind: str) -> pd.DataFrame:
    return table[(table["kind"] == kind) & table["alpha"].notna()]


@pytest.mark.parametrize("method", ["paired", "grid"])
def test_no_difference_or_hysteresis_found_where_the_truth_has_none(null_campaign, method):
    results, truth = null_campaign
    assert (truth["planted_fault"] == "").all()
    table = compare.comparison_table(results, method=method)
    for kind in ("config", "hysteresis"):
        rows = _curve_rows(table, kind)
        assert len(rows) >= 20, (kind, len(rows))
        assert rows["significant"].mean() <= NULL_RATE, rows[rows["significant"]]


def test_paired_hysteresis_points_are_the_down_sweeps_set_points(null_campaign):
    results, _ = null_campaign
    table = compare.comparison_table(results, names=["CL"])
    rows = _curve_rows(table, "hysteresis")
    # Down sweep 2.5, 1.5, 0.5 against the up sweep: three pairs per leg pair, never a value
    # from between two set points, and the two sides within the tolerance.
    assert rows.groupby("a").size().tolist() == [3] * 4
    np.testing.assert_array_equal(np.unique(np.round(rows.alpha * 2) / 2), [0.5, 1.5, 2.5])
    assert (np.abs(rows.alpha_a - rows.alpha_b) <= compare.PAIR_TOLERANCE).all()


def test_a_planted_hysteresis_is_found_at_its_size(planted_campaign):
    results, _ = planted_campaign
    for method in ("paired", "grid"):
        rows = _curve_rows(compare.comparison_table(results, method=method), "hysteresis")
        cl = rows[rows["quantity"] == "CL"]
        # The turning run (top of the up sweep) belongs to both legs and carries no offset, so
        # the planted down curve steps back at it; a grid value between it and the last offset
        # down run mixes the two (a jump no interpolant can follow): judge below that run.
        top_offset = results.loc[results["spin_set"] < results["spin_set"].max(), "alpha"].max()
        cl = cl[cl["alpha"] <= top_offset + compare.PAIR_TOLERANCE]
        assert len(cl) >= (3 if method == "paired" else 1), method
        # Up minus down is −PLANTED: every point significant, each estimate within 3 u of it
        # (99.7 % per point for a normal error with the stated u).
        assert cl["significant"].all(), (method, cl)
        z = (cl["delta"] + PLANTED) / cl["u_delta"]
        assert (np.abs(z) < 3.0).all(), (method, z)
        # The offset is in the lift alone: the other coefficients stay within the null rate.
        others = rows[rows["quantity"] != "CL"]
        assert others["significant"].mean() <= NULL_RATE, others[others["significant"]]


def test_a_planted_hysteresis_raises_no_repeat_disagreement(planted_campaign):
    # Up and down legs at one set point differ by the planted 0.3 in CL, about 15 u: before,
    # the repeat check took them as repeats and flagged every down run and its up partner.
    results, _ = planted_campaign
    down = results["spin_set"].duplicated(keep=False)  # set points visited on both legs
    assert down.sum() >= 6
    assert not results["flag_repeat_disagreement"].astype(bool).any(), results.loc[
        results["flag_repeat_disagreement"].astype(bool), ["run", "spin_set", "flag_reasons"]
    ]


def test_demo_hysteresis_false_positive_rate(demo_results):
    # The demo's truth has no hysteresis (sample_runs/README.md); on its sparse down sweeps the
    # earlier grid-only comparison called 253 of 468 points significant.
    results = compare.sweeps.results_table(demo_results.dataset)
    for method in ("paired", "grid"):
        rows = _curve_rows(compare.comparison_table(results, method=method), "hysteresis")
        assert len(rows) > 0 and rows["significant"].mean() <= NULL_RATE, (method, rows)
    # The grid no longer reaches between the down sweep's points a whole unit of α apart.
    sweeps = {s.key: s for s in compare.find_sweeps(results)}
    up, down = sweeps["plates | 6 m/s | up"], sweeps["plates | 6 m/s | down"]
    d = compare.hysteresis(up, down, "CL", method="grid", grid=[0.4])
    assert not d.covered[0]


def _segments(line) -> list[tuple[float, float]]:
    """Consecutive finite (x, x') of a drawn line: the stretches a reader sees joined."""
    x = np.asarray(line.get_xdata(), dtype=float)
    y = np.asarray(line.get_ydata(), dtype=float)
    ok = np.isfinite(x) & np.isfinite(y)
    return [(x[i], x[i + 1]) for i in range(x.size - 1) if ok[i] and ok[i + 1]]


def _unflagged_points(sweep) -> np.ndarray:
    """Sorted mean α of each set point of the sweep's unflagged runs (what its line may join)."""
    keep = ~sweep.arrays["flagged"]
    alpha, spin = sweep.arrays["alpha"][keep], sweep.arrays["spin_point"][keep]
    return np.sort([alpha[spin == level].mean() for level in np.unique(spin)])


def test_sweep_lines_join_one_sweep_and_bridge_no_gap(demo_results):
    results = compare.sweeps.results_table(demo_results.dataset)
    sweeps = compare.find_sweeps(results)
    at_9 = [s for s in sweeps if s.speed == 9.0]
    # The plates' repeats at α 2 after the down sweep make a leg "up 2" of two set points,
    # α 0 and α 2: no line may join them (the earlier figure drew one).
    assert "plates | 9 m/s | up 2" in {s.key for s in at_9}
    ax = compare.plot_sweeps(at_9, "CL")
    limit = compare.gap_limit([compare.sweeps.point_alpha(s) for s in at_9])
    assert math.isfinite(limit) and limit < 1.0
    by_key = {s.key: s for s in at_9}
    drawn = [line for line in ax.get_lines() if line.get_label() in by_key]
    assert len(drawn) == len(at_9)
    for line in drawn:
        nodes = _unflagged_points(by_key[line.get_label()])
        for x0, x1 in _segments(line):
            # Each joined stretch lies inside one step of its own sweep, no wider than the limit.
            k = np.searchsorted(nodes, x0, side="right") - 1
            assert nodes[k] <= x0 <= x1 <= nodes[k + 1] + 1e-12
            assert nodes[k + 1] - nodes[k] <= limit
        if line.get_label() == "plates | 9 m/s | up 2":
            assert not _segments(line)
    # The standard coefficient figure: every sweep line holds the runs of one leg (one
    # configuration, speed and direction) and no step wider than the limit.
    ax = plotting.plot_coefficient(demo_results.dataset, "CL", uncorrected=False, theory=False)
    legs = [set(s.runs) for s in sweeps]
    table = results.set_index("run")
    lines = [line for line in ax.get_lines() if line.get_gid() == "sweep"]
    assert lines
    for line in lines:
        x, y = np.asarray(line.get_xdata()), np.asarray(line.get_ydata())
        runs = {
            table.index[(np.abs(table.alpha - a) < 1e-12) & (np.abs(table.CL - c) < 1e-12)][0]
            for a, c in zip(x, y, strict=True)
        }
        assert any(runs <= leg for leg in legs)
        assert np.all(
            np.diff(x) <= compare.gap_limit([compare.sweeps.point_alpha(s) for s in sweeps])
        )
