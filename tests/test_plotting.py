"""Plotting: what each figure holds (artists, labels, data), checked on reduced synthetic results.

The results come from a small synthetic campaign (tunnelred.demo) reduced end to end: two
configurations, two speeds, an up and a down sweep, pressure logs on three runs and one planted
spin-scatter fault. Figures are drawn on the Agg backend and never shown.
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from matplotlib.colors import to_rgb  # noqa: E402
from matplotlib.container import ErrorbarContainer  # noqa: E402

from tunnelred.inputs.readers import open_campaign  # noqa: E402
from tunnelred.products import plotting  # noqa: E402
from tunnelred.products.store import read_results  # noqa: E402


@pytest.fixture(scope="module")
def results(reduced):
    return read_results(reduced[1])


@pytest.fixture(autouse=True)
def _no_pyplot_figures():
    """Every plotting function must leave pyplot's figure list as it found it."""
    before = plt.get_fignums()
    yield
    assert plt.get_fignums() == before


def _containers(ax):
    return [c for c in ax.containers if isinstance(c, ErrorbarContainer)]


def _legend_texts(ax):
    legend = ax.get_legend()
    return [t.get_text() for t in legend.get_texts()] + [legend.get_title().get_text()]


def _segment_half_lengths(collection, axis: int) -> np.ndarray:
    """Half the length of each error-bar segment along x (0) or y (1)."""
    segments = np.array(collection.get_segments())
    return 0.5 * np.abs(segments[:, 1, axis] - segments[:, 0, axis])


@pytest.mark.parametrize("name", ["CL", "CD", "CM", "C_power", "L_D"])
def test_coefficient_error_bars_carry_the_results_and_k2(results, name):
    ax = plotting.plot_coefficient(results, name, by="config")
    containers = _containers(ax)
    configs = list(dict.fromkeys(str(c) for c in results["config"].values))
    assert [c.get_label() for c in containers] == configs
    for container, config in zip(containers, configs, strict=True):
        mine = results.where(results["config"] == config, drop=True)
        # ErrorbarContainer.lines: (data line, caps, (x bars, y bars)).
        line, (xbars, ybars) = container.lines[0], container.lines[2]
        # The drawn points are the results' values, exactly (same floats).
        np.testing.assert_array_equal(line.get_xdata(), mine["alpha"].values)
        np.testing.assert_array_equal(line.get_ydata(), mine[name].values)
        # Bars are expanded uncertainties k = 2 (docs/conventions.md); segment ends are float sums,
        # so compare to 1e-12 relative.
        np.testing.assert_allclose(
            _segment_half_lengths(xbars, 0), 2 * mine["u_alpha"].values, rtol=1e-12
        )
        np.testing.assert_allclose(
            _segment_half_lengths(ybars, 1), 2 * mine[f"u_{name}"].values, rtol=1e-12
        )
    assert any("k = 2" in text for text in _legend_texts(ax))
    assert ax.get_xlabel() == plotting.COEFFICIENT_LABELS["alpha"]
    assert ax.get_ylabel() == plotting.COEFFICIENT_LABELS[name]


def test_corrected_filled_uncorrected_hollow(results):
    ax = plotting.plot_coefficient(results, "CL", theory=False, by="config")
    filled = [c.lines[0] for c in _containers(ax)]
    hollow = [line for line in ax.lines if line.get_gid() == plotting.UNCORRECTED_GID]
    assert len(hollow) == len(filled) == 2
    # One neutral legend key stands for every hollow series.
    assert "hollow: before wall corrections" in _legend_texts(ax)
    for line in filled:
        assert line.get_markerfacecolor() != "none"
    for line in hollow:
        assert line.get_markerfacecolor() == "none"
    drawn = np.sort(np.concatenate([line.get_ydata() for line in hollow]))
    np.testing.assert_array_equal(drawn, np.sort(results["CL_uncorrected"].values))


def test_cl_theory_line_and_prandtl_bound(results):
    ax = plotting.plot_coefficient(results, "CL")
    theory = next(line for line in ax.lines if "potential flow" in line.get_label())
    alpha = np.asarray(theory.get_xdata())
    # Kutta-Joukowski with Gamma = 2 pi omega R^2: CL = -2 pi alpha (Anderson, Fundamentals of
    # Aerodynamics, 6th ed., §3.16); computed here from the formula, not from
    # tunnelred.physics.theory.
    np.testing.assert_allclose(theory.get_ydata(), -2 * np.pi * alpha, rtol=1e-12)
    # The line stops where the stagnation points leave the surface, |alpha| = 2 (Anderson §3.15).
    assert alpha.max() == pytest.approx(2.0)
    bound = next(line for line in ax.lines if "Prandtl" in line.get_label())
    # Prandtl's limit |CL| = 4 pi (from memory; Anderson §3.15 gives the merging at |alpha| = 2).
    np.testing.assert_allclose(bound.get_ydata(), [-4 * np.pi, -4 * np.pi], rtol=1e-12)


def test_no_theory_for_drag(results):
    ax = plotting.plot_coefficient(results, "CD")
    assert not [line for line in ax.lines if "potential flow" in line.get_label()]


def test_unknown_coefficient_is_refused(results):
    with pytest.raises(ValueError, match="cannot plot"):
        plotting.plot_coefficient(results, "Gamma")


def test_draws_on_the_given_axes_without_pyplot(results):
    from matplotlib.figure import Figure

    fig = Figure()
    ax = fig.add_subplot()
    assert plotting.plot_coefficient(results, "CD", ax=ax) is ax


def test_group_by_speed_labels(results):
    ax = plotting.plot_coefficient(results, "CL", by="speed")
    assert [c.get_label() for c in _containers(ax)] == ["U = 6 m/s", "U = 12 m/s"]


@pytest.mark.parametrize("polar", [False, True])
def test_cp_band_and_theory(results, polar):
    run = plotting.representative_runs(results)[-1]
    row = results.sel(run=run)
    ax = plotting.plot_cp(results, run, polar=polar)
    assert (ax.name == "polar") is polar
    measured = next(line for line in ax.lines if line.get_label() == f"measured, run {run}")
    theta = np.asarray(measured.get_xdata())
    theta_deg = np.degrees(theta) if polar else theta
    wrapped = (row["theta"].values + 180.0) % 360.0 - 180.0
    order = np.argsort(wrapped)
    np.testing.assert_array_equal(np.asarray(measured.get_ydata()), row["Cp"].values[order])
    np.testing.assert_allclose(theta_deg, wrapped[order], atol=1e-9)
    ideal = next(line for line in ax.lines if "potential flow" in line.get_label())
    x = np.asarray(ideal.get_xdata())
    x_deg = np.degrees(x) if polar else x
    alpha = float(row["alpha"])
    # Potential flow about a spinning cylinder, Cp = 1 - (alpha + 2 sin theta)^2 (Anderson §3.15, in
    # the azimuth of docs/conventions.md), written out here independently of
    # tunnelred.physics.theory.
    expected = 1 - (alpha + 2 * np.sin(np.radians(x_deg))) ** 2
    np.testing.assert_allclose(ideal.get_ydata(), expected, rtol=1e-12, atol=1e-12)
    band = ax.collections[0]
    assert "k = 2" in band.get_label()
    # The band spans Cp ± 2 u(Cp): its vertical extent is the widest 4 u where Cp is finite.
    ys = band.get_paths()[0].vertices[:, 1]
    cp, u = row["Cp"].values, row["u_Cp"].values
    finite = np.isfinite(cp)
    assert ys.max() == pytest.approx(np.max(cp[finite] + 2 * u[finite]), rel=1e-12)
    assert ys.min() == pytest.approx(np.min(cp[finite] - 2 * u[finite]), rel=1e-12)


def test_cp_of_a_run_without_pressure_is_refused(results):
    no_cp = [
        str(r)
        for r, cp in zip(results["run"].values, results["Cp"].values, strict=True)
        if not np.isfinite(cp).any()
    ]
    with pytest.raises(ValueError, match="no surface pressure"):
        plotting.plot_cp(results, no_cp[0])


def test_run_diagnostics_panels(reduced, results):
    campaign_dir, _ = reduced
    flagged = [
        str(r) for r, f in zip(results["run"].values, results["flags"].values, strict=True) if f
    ]
    run = next(r for r in flagged if "spin_scatter" in results.sel(run=r)["flags"].item())
    campaign = open_campaign(campaign_dir, check_logs=False)
    fig = plotting.plot_run_diagnostics(campaign, run)
    ax_alpha, ax_speed, ax_zero = fig.axes
    alpha_line = ax_alpha.lines[0]
    # The mean of the plotted alpha(t) is the run's uncorrected spin ratio, to within the
    # difference between a sample mean and reduce_run's ratio of means (a 5 % scatter makes the
    # two differ at the 1e-3 level: mean(w/U) vs mean(w)/mean(U)).
    assert np.mean(alpha_line.get_ydata()) == pytest.approx(
        float(results.sel(run=run)["alpha_uncorrected"]), rel=5e-3
    )
    assert "scatter" in ax_alpha.get_title()
    scatter = float(results.sel(run=run)["spin_scatter"])
    assert f"{100 * scatter:.2f} %" in ax_alpha.get_title()
    assert ax_speed.get_ylabel().startswith("$U(t)$")
    # One line per balance channel, plus the filled markers of the zeros the run uses.
    channels = campaign.config.instruments.balance.channels
    labelled = [line.get_label() for line in ax_zero.lines if not line.get_label().startswith("_")]
    assert [lab.split(" ")[0] for lab in labelled[: len(channels)]] == list(channels)
    assert f"run {run}" in labelled


def _speed_labels(results):
    return [label for label, _ in plotting.group_runs(results, "speed")]


def test_default_series_name_configuration_and_speed(results):
    ax = plotting.plot_coefficient(results, "CL")
    configs = list(dict.fromkeys(str(c) for c in results["config"].values))
    expected = [f"{c}, {s}" for c in configs for s in _speed_labels(results)]
    assert [c.get_label() for c in _containers(ax)] == expected


def _joins(ax):
    """Lines that are neither an error-bar container's data line or caps, nor a legend key."""
    points = {id(x) for c in _containers(ax) for x in (c.lines[0], *c.lines[1])}
    return [
        line
        for line in ax.lines
        if id(line) not in points
        and len(line.get_xdata()) > 1
        and line.get_gid() != plotting.UNCORRECTED_GID
        and "potential flow" not in line.get_label()
        and "Prandtl" not in line.get_label()
        and line.get_label() != plotting.FLAGGED_LABEL
    ]


@pytest.mark.parametrize("draw", ["coefficient", "comparison", "polar"])
def test_flagged_runs_ringed_and_left_out_of_sweep_lines(results, draw):
    if draw == "coefficient":
        ax, xname, yname = (
            plotting.plot_coefficient(results, "CL", uncorrected=False),
            "alpha",
            "CL",
        )
    elif draw == "comparison":
        ax, xname, yname = plotting.plot_comparison(results, "CL", by="speed"), "alpha", "CL"
    else:
        ax, xname, yname = plotting.plot_drag_polar(results), "CD", "CL"
    flagged = plotting.flagged_runs(results)
    assert flagged.any()  # the small campaign plants a spin-scatter fault
    ring = next(line for line in ax.lines if line.get_label() == plotting.FLAGGED_LABEL)
    np.testing.assert_array_equal(ring.get_xdata(), results[xname].values[flagged])
    np.testing.assert_array_equal(ring.get_ydata(), results[yname].values[flagged])
    # A ring: hollow, black, larger than any series marker, so it reads in greyscale too.
    assert ring.get_markerfacecolor() == "none"
    assert to_rgb(ring.get_markeredgecolor()) == (0.0, 0.0, 0.0)
    assert ring.get_markersize() > 1.5 * max(c.lines[0].get_markersize() for c in _containers(ax))
    bad = {(x, y) for x, y in zip(ring.get_xdata(), ring.get_ydata(), strict=True)}
    joins = _joins(ax)
    assert joins
    # Each join holds the runs of one configuration at one speed, none of them flagged.
    table = {
        (float(x), float(y)): (str(c), float(s))
        for x, y, c, s in zip(
            results[xname].values,
            results[yname].values,
            results["config"].values,
            results["speed_set"].values,
            strict=True,
        )
    }
    for line in joins:
        pairs = list(zip(line.get_xdata(), line.get_ydata(), strict=True))
        assert not bad & set(pairs)
        assert len({table[(float(x), float(y))] for x, y in pairs}) == 1


def test_sweep_legs_split_by_direction(results):
    legs = plotting.sweep_legs(results)
    assert legs
    assert {leg for leg, _ in legs} <= {"up", "down", "single"}
    ax = plotting.plot_coefficient(results, "CL")
    labels = _legend_texts(ax)
    if {leg for leg, _ in legs} >= {"up", "down"}:
        assert "sweep, spin increasing" in labels and "sweep, spin decreasing" in labels


def test_sweeps_found_once_for_a_set_of_figures(results, monkeypatch):
    # The standard set finds the sweep legs once and every figure joins the same legs; outside
    # the set they are found afresh, so a Dataset changed between two figures is never stale.
    from tunnelred.products.plotting import runs

    alone = [(leg, list(positions)) for leg, positions in plotting.sweep_legs(results)]
    found = []
    original = runs._joined_sweeps
    monkeypatch.setattr(runs, "_joined_sweeps", lambda ds: found.append(1) or original(ds))
    with runs.sweeps_shared(results):
        lines = [_joins(plotting.plot_coefficient(results, name)) for name in ("CL", "CD")]
        shared = [(leg, list(positions)) for leg, positions in plotting.sweep_legs(results)]
    assert len(found) == 1 and shared == alone
    assert len(lines[0]) == len(lines[1]) > 0  # both figures join the same legs
    plotting.sweep_legs(results)
    assert len(found) == 2


def test_comparison_legend_names_both_splits(results):
    ax = plotting.plot_comparison(results, "CL", by="config")
    configs = list(dict.fromkeys(str(c) for c in results["config"].values))
    expected = [f"{c}, {s}" for c in configs for s in _speed_labels(results)]
    assert [c.get_label() for c in _containers(ax)] == expected
    for line in _joins(ax):
        x = np.asarray(line.get_xdata())
        assert np.all(np.diff(x) >= 0)  # joined in order of alpha
    ax_re = plotting.plot_comparison(results, "CD", by="re")
    labels = [c.get_label() for c in _containers(ax_re)]
    assert all(lab.startswith("Re ≈") for lab in labels)
    assert all(any(c in lab for c in configs) for lab in labels)
    with pytest.raises(ValueError, match="by must be"):
        plotting.plot_comparison(results, "CL", by="colour")


def test_pressure_lift_against_balance_lift(results):
    ax = plotting.plot_pressure_lift(results)
    both = np.isfinite(results["CL"].values) & np.isfinite(results["CL_p"].values)
    drawn = np.concatenate([c.lines[0].get_xdata() for c in _containers(ax)])
    np.testing.assert_array_equal(np.sort(drawn), np.sort(results["CL"].values[both]))
    equality = next(line for line in ax.lines if "C_{L,p} = C_L" in line.get_label())
    np.testing.assert_array_equal(equality.get_xdata(), equality.get_ydata())


def test_cp_pair_shows_the_band_width(results):
    run = plotting.representative_runs(results)[-1]
    fig = plotting.plot_cp_pair(results, run)
    ax_cp, ax_u, ax_polar = fig.axes
    assert ax_polar.name == "polar"
    strip = ax_u.lines[0]
    wrapped = (results["theta"].values + 180.0) % 360.0 - 180.0
    order = np.argsort(wrapped)
    # The strip is the band's half-width, k u(Cp) with k = 2 (docs/conventions.md).
    np.testing.assert_allclose(
        strip.get_ydata(), 2 * results.sel(run=run)["u_Cp"].values[order], rtol=1e-12
    )


def test_cp_pair_text_neither_overlaps_nor_leaves_the_figure(results):
    # At rest the polar radius spans Cp -3 to 1.5 (potential flow's minimum, 1 - (2 sin θ)²):
    # before, ten radial labels every 0.5 ran into each other near the centre, and the polar
    # title stood partly above the figure's top edge.
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    pressure = np.isfinite(results["CL_p"].values)
    at_rest = [r for r, a in zip(results["run"].values[pressure], results["alpha"].values[pressure],
                                 strict=True) if abs(a) < 0.01]  # fmt: skip
    assert at_rest, "the fixture has a pressure run at rest"
    for run in (at_rest[0], plotting.representative_runs(results)[-1]):
        fig = plotting.plot_cp_pair(results, run)
        canvas = FigureCanvasAgg(fig)
        canvas.draw()
        renderer = canvas.get_renderer()
        ax_polar = fig.axes[2]
        boxes = [t.get_window_extent(renderer) for t in ax_polar.get_yticklabels() if t.get_text()]
        assert 2 <= len(boxes) <= 6, run
        for i, a in enumerate(boxes):
            assert not any(a.overlaps(b) for b in boxes[i + 1 :]), (run, i)
        for text in (ax_polar.title, *ax_polar.get_xticklabels(), *ax_polar.get_yticklabels()):
            box = text.get_window_extent(renderer)
            assert fig.bbox.x0 <= box.x0 and box.x1 <= fig.bbox.x1, (run, text.get_text())
            assert fig.bbox.y0 <= box.y0 and box.y1 <= fig.bbox.y1, (run, text.get_text())


def test_axes_sketch_names_the_conventions():
    ax = plotting.plot_axes_sketch()
    texts = " ".join(t.get_text() for t in ax.texts)
    # docs/conventions.md: x downstream, y the lift axis, z along the cylinder axis, omega > 0
    # counter-clockwise, positive spin gives negative lift.
    for word in ("x", "y (lift axis)", "z", r"$\omega > 0$", "L < 0 for ω > 0"):
        assert word in texts


def test_house_style_distinct_in_greyscale():
    colours = [s.color for s in plotting.HOUSE_STYLE]
    markers = [s.marker for s in plotting.HOUSE_STYLE]
    dashes = [str(s.linestyle) for s in plotting.HOUSE_STYLE]
    assert len(set(markers)) == len(set(dashes)) == len(set(colours)) == len(colours)
    # Okabe & Ito (2008), "Color Universal Design", the eight-colour palette (RGB 0-255; from
    # memory). Exact integers, so the check is equality.
    okabe_ito = {
        (0, 0, 0),
        (230, 159, 0),
        (86, 180, 233),
        (0, 158, 115),
        (240, 228, 66),
        (0, 114, 178),
        (213, 94, 0),
        (204, 121, 167),
    }
    for colour in colours:
        assert tuple(round(255 * v) for v in to_rgb(colour)) in okabe_ito


def test_standard_figures_written(results, tmp_path):
    paths = plotting.save_standard_figures(results, tmp_path)
    names = {p.name for p in paths}
    assert {"CL_alpha.png", "CD_alpha.png", "CL_by_speed.png", "drag_polar.png"} <= names
    assert any(n.startswith("cp_") for n in names)
    for path in paths:
        assert path.parent == tmp_path / "figures"
        # PNG signature (ISO/IEC 15948 §5.2, from memory) and no temporary file left beside it.
        assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert sorted(p.name for p in (tmp_path / "figures").iterdir()) == sorted(names)
    from PIL import Image

    with Image.open(paths[0]) as image:
        # 150 dpi (the PNG pHYs chunk stores pixels per metre: 150/0.0254 = 5906).
        assert image.info["dpi"][0] == pytest.approx(150, abs=0.5)
        assert image.size == (960, 660)  # FIGURE_SIZE 6.4 in × 4.4 in at 150 dpi


def test_figures_drawn_on_a_kept_figure_are_those_drawn_alone(results, tmp_path):
    # The standard set is drawn on one Figure a size, cleared job after job (its renderer keeps
    # text metrics); each PNG must be the one a new Figure gives, byte for byte (Agg rendering
    # and zlib are deterministic for the same figure and backend).
    from tunnelred.products.plotting import standard

    kept = plotting.save_standard_figures(results, tmp_path / "kept")
    (tmp_path / "alone" / "figures").mkdir(parents=True)
    for job, path in zip(standard.standard_figures(results), kept, strict=True):
        alone = plotting.draw_standard_figure(results, job, tmp_path / "alone")
        assert alone.name == path.name
        assert alone.read_bytes() == path.read_bytes(), path.name


def test_figures_drawn_in_a_pool_are_those_drawn_here(results, tmp_path):
    # Drawing is shared with a process pool (tunnelred reduce --workers N): each job must give
    # the same PNG, byte for byte, as when this process draws it (Agg rendering and zlib are
    # deterministic for the same figure and backend).
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    serial = plotting.save_standard_figures(results, tmp_path / "serial")
    context = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=2, mp_context=context) as executor:
        shared = plotting.save_standard_figures(
            results, tmp_path / "pool", executor=executor, helpers=2
        )
    assert [p.name for p in shared] == [p.name for p in serial]
    for a, b in zip(serial, shared, strict=True):
        assert a.read_bytes() == b.read_bytes(), a.name


def test_steadiness_figure_singles_out_the_unsteady_spin_run(results):
    # The small campaign plants a 5 % rpm scatter in one run; the tolerance is the documented
    # default of 2 % (docs/input-format.md, [reduction.tolerances] spin_scatter).
    ax = plotting.plot_steadiness(results, "spin_scatter")
    flagged = [str(r) for r in results["run"].values[results["flag_spin_scatter"].values]]
    assert len(flagged) == 1
    annotations = [t.get_text() for t in ax.texts]
    assert annotations == flagged
    tolerance_lines = [line for line in ax.get_lines() if line.get_label().startswith("tolerance")]
    assert tolerance_lines and np.allclose(tolerance_lines[0].get_ydata(), 2.0)
    plotted = np.concatenate([line.get_ydata() for line in ax.get_lines()[:2]])
    expected = np.abs(results["spin_scatter"].values) * 100  # runs at rest have none (NaN)
    assert np.allclose(
        np.sort(plotted[np.isfinite(plotted)]), np.sort(expected[np.isfinite(expected)])
    )
    with pytest.raises(ValueError, match="steadiness measure"):
        plotting.plot_steadiness(results, "CL")
