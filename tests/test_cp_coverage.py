"""u(Cp) per bin is a claim: binned Cp within 2u of the truth about 95 % of the time (k = 2).

The study is benchmarks/coverage_cp.py: campaigns from tunnelred.demo's independent forward model
(fault-free, rotating taps with 4 ms tubing known to ±0.05 ms, spin ratios 0.5 to 3, about
1000 rad/s at alpha = 3), each with its own draw of every systematic error from the uncertainty
campaign.toml declares (SynthSpec.systematic_errors: tap azimuths and delays, encoder, scanner
ports, pitot, air, tachometer, geometry, balance), hidden from the reduction. Issue 15 measured
0.86, 0.77, 0.61 and 0.53 at alpha = 0.5, 1, 2, 3 before the azimuth entered each bin; the same
study on the code before this change gives 0.996, 0.922, 0.656, 0.552 with 3 taps and drops a
good tap in 70 % of the runs at alpha = 3 (20 campaigns, docs/methods.md).

The quick test is four campaigns (deterministic seeds), so its fractions are coarse: bins of one
draw share its errors and move together. It asserts what that resolution can tell: every alpha
well above the old coverage, and no good tap dropped. The full study (measured 0.96 to 0.99 at
every alpha with 3 and 16 taps, docs/methods.md) is marked slow.
"""

from __future__ import annotations

import importlib.util
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from tunnelred.demo.spec import Fault
from tunnelred.demo.writer import make_campaign
from tunnelred.engine.reduction import reduce_run
from tunnelred.inputs.readers import open_campaign

_BENCHMARKS = Path(__file__).resolve().parents[1] / "benchmarks"
sys.path.insert(0, str(_BENCHMARKS))  # coverage_cp builds on coverage_study beside it
_PATH = _BENCHMARKS / "coverage_cp.py"
_SPEC = importlib.util.spec_from_file_location("coverage_cp", _PATH)
coverage_cp = importlib.util.module_from_spec(_SPEC)
sys.modules.setdefault("coverage_cp", coverage_cp)  # its dataclasses look their module up
_SPEC.loader.exec_module(coverage_cp)


@pytest.fixture(scope="module")
def quick(tmp_path_factory):
    root = tmp_path_factory.mktemp("cov")
    rows = []
    for seed in range(4):
        rows += coverage_cp.campaign_errors(seed, 3, 2.0, root / f"c{seed}")
    return coverage_cp.coverage_table(rows).set_index("alpha")


def test_cp_bins_are_covered_at_every_spin_ratio(quick):
    # Without the azimuth in each bin the same study covers 0.66 and 0.55 at alpha 2 and 3
    # (module docstring); 4 draws of correlated bins resolve the fraction to about ±0.1.
    assert (quick["Cp bins"] >= 0.85).all(), quick
    assert (quick["Cp bins"] <= 1.0).all()


def test_pressure_forces_come_from_the_same_model(quick):
    # CL_p and CD_p integrate the very bins whose u is covered: 16 runs of 4 draws.
    assert quick["CL_p"].mean() >= 0.8 and quick["CD_p"].mean() >= 0.8, quick


def test_no_good_tap_is_dropped_at_fast_spin(quick):
    # Issue 15: 13 % of such runs lost a good tap at alpha >= 2 before the test knew the phase.
    assert (quick["dead_tap flagged"] == 0.0).all(), quick


@pytest.mark.parametrize("n_taps", [3, 16])
def test_a_dead_tap_is_still_found_at_fast_spin(tmp_path, n_taps):
    # The demo's dead tap (it flat-lines at its revolution-average pressure, its tubing leaking
    # into the model's cavity) planted at alpha = 3, 1000 rad/s; the other runs stay clean.
    spec = coverage_cp.study_spec(1, n_taps, 2.0)
    label = spec.configurations[0].label
    spec = replace(spec, faults=(Fault("dead_tap", label, 10.0, 3.0, 1),))
    truth = make_campaign(tmp_path / "c", spec).set_index("run")
    campaign = open_campaign(tmp_path / "c")
    dead = {}
    for run in truth.index[truth["has_pressure"].astype(bool)]:
        dead[run] = reduce_run(campaign, run).values["dead_taps"]
    planted = truth.index[truth["planted_fault"] == "dead_tap"]
    assert len(planted) == 1
    assert dead.pop(planted[0]) == "tap02"  # tap index 1
    assert set(dead.values()) == {""}, dead


@pytest.mark.slow
def test_cp_coverage_full_study():
    table = coverage_cp.run_study(campaigns=40, taps=(3, 16), seconds=4.0)
    # 40 draws per alpha and tap count: the fraction of correlated bins resolves to ±0.03.
    assert np.all((table["Cp bins"] >= 0.93) & (table["Cp bins"] <= 0.99)), table
    assert np.all(table["dead_tap flagged"] <= 0.01), table
