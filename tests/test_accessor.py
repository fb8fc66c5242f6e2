"""``ds.tunnelred``: the accessor of results Datasets (tunnelred.products.accessor)."""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
import xarray as xr  # noqa: E402

import tunnelred.products  # noqa: E402, F401  (registers the accessor)
from tunnelred.products import store  # noqa: E402


@pytest.fixture(scope="module")
def ds(reduced):
    return store.read_results(reduced[1])


def test_table_reads_back_as_the_results(ds, reduced):
    table = ds.tunnelred.table()
    csv = pd.read_csv(reduced[1] / "results.csv", keep_default_na=False)
    assert list(table["run"]) == list(csv["run"])
    assert list(table["flags"]) == list(csv["flags"])
    for cell, value, u in zip(table["CL"], csv["CL"], csv["u_CL"], strict=True):
        # "v ± U", rounded to U's second significant digit (GUM, JCGM 100:2008 §7.2.6).
        shown, expanded = (float(x) for x in cell.split(" ± "))
        last = 10.0 ** -len(cell.split(" ± ")[1].split(".")[1]) if "." in cell else 1.0
        assert abs(shown - float(value)) <= 0.5 * last + 1e-12
        assert abs(expanded - 2 * float(u)) <= 0.5 * last + 1e-12
    # rpm from omega [rad/s]: 1 rpm = 2π/60 rad/s (SI Brochure, 9th ed., table 8, the revolution)
    omega = csv["omega"].astype(float).to_numpy()
    assert np.allclose(table["rpm"], np.round(omega * 60 / (2 * np.pi)))


def test_sweeps_of_the_fixture_campaign(ds):
    # conftest's campaign: 2 configurations × 2 speeds, each swept up then down.
    sweeps = ds.tunnelred.sweeps()
    assert len(sweeps) == 8
    assert {s.leg for s in sweeps} == {"up", "down"}


def test_plot_coefficients_one_panel_each(ds):
    fig = ds.tunnelred.plot_coefficients()
    shown = [ax for ax in fig.axes if ax.get_visible()]
    assert len(shown) == 5  # CL, CD, CM, C_power, L_D
    with pytest.raises(ValueError):
        ds.tunnelred.plot_coefficients(names=("nothing",))


def test_not_results_is_refused():
    with pytest.raises(ValueError, match="run"):
        xr.Dataset({"x": ("t", [1.0])}).tunnelred.table()


def test_campaign_html_is_compact_and_escaped(campaign_dir):
    from tunnelred.inputs.readers import open_campaign

    toml = campaign_dir / "campaign.toml"
    toml.write_text(toml.read_text().replace('"Fixture campaign"', '"<b>Fixture</b> & co"'))
    html = open_campaign(campaign_dir)._repr_html_()
    assert "&lt;b&gt;Fixture&lt;/b&gt; &amp; co" in html and "<table>" in html
