"""Tests of tunnelred.physics.uncertainty against published examples and the `uncertainties`
package."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import uncertainties
from uncertainties import umath

from tunnelred.physics.uncertainty import (
    CORRELATION_ROW,
    Input,
    _numerical_tolerance,
    compare_linear_mc,
    propagate_linear,
    propagate_monte_carlo,
)

# --- JCGM 100:2008 Annex H.2: simultaneous measurement of resistance and reactance -------------
# Table H.2: means of five observation sets and their experimental standard deviations of the
# mean; §H.2.3 gives the correlation coefficients of the means. The same figures are quoted by
# the GUM Tree Calculator documentation (example "GUM H2").
H2_INPUTS = {
    "V": Input(4.9990, 0.0032, "A", "voltage amplitude [V]"),
    "I": Input(19.661e-3, 0.0095e-3, "A", "current amplitude [A]"),
    "phi": Input(1.04446, 0.00075, "A", "phase angle [rad]"),
}
H2_CORRELATION = {("V", "I"): -0.36, ("V", "phi"): 0.86, ("I", "phi"): -0.65}


def h2_model(x):
    Z = x["V"] / x["I"]
    return {"R": Z * np.cos(x["phi"]), "X": Z * np.sin(x["phi"]), "Z": Z}


def test_gum_h2_values_and_uncertainties():
    res = propagate_linear(h2_model, H2_INPUTS, correlation=H2_CORRELATION)
    # JCGM 100:2008 Table H.3: R = 127.732 ohm, X = 219.847 ohm, Z = 254.260 ohm; six
    # significant digits printed → rel 1e-5.
    assert float(res.values["R"]) == pytest.approx(127.732, rel=1e-5)
    assert float(res.values["X"]) == pytest.approx(219.847, rel=1e-5)
    assert float(res.values["Z"]) == pytest.approx(254.260, rel=1e-5)
    # Table H.3: u(R) = 0.071, u(X) = 0.295, u(Z) = 0.236 ohm. Two or three significant digits,
    # and the GUM's own arithmetic carries round-off (the GUM Tree Calculator documentation,
    # same inputs, prints u(R) = 0.070): rel 2 %.
    assert float(res.u["R"]) == pytest.approx(0.071, rel=0.02)
    assert float(res.u["X"]) == pytest.approx(0.295, rel=0.02)
    assert float(res.u["Z"]) == pytest.approx(0.236, rel=0.02)


def test_gum_h2_output_correlations():
    res = propagate_linear(h2_model, H2_INPUTS, correlation=H2_CORRELATION)
    # Table H.3 correlation coefficients r(R,X) = -0.588, r(R,Z) = -0.485, r(X,Z) = 0.993
    # (from memory; the GUM Tree Calculator documentation prints -0.59, -0.49, +0.99 for the
    # same inputs). Round-off in the GUM's arithmetic is of order 0.005 → abs 0.01.
    assert res.correlation("R", "X") == pytest.approx(-0.588, abs=0.01)
    assert res.correlation("R", "Z") == pytest.approx(-0.485, abs=0.01)
    assert res.correlation("X", "Z") == pytest.approx(0.993, abs=0.01)
    assert res.correlation("X", "R") == pytest.approx(res.correlation("R", "X"), rel=1e-12)


def _reference_ufloats(inputs, correlation):
    """Independent reference: `uncertainties` numbers with the same correlation matrix."""
    names = list(inputs)
    corr = np.eye(len(names))
    for (a, b), r in correlation.items():
        i, j = names.index(a), names.index(b)
        corr[i, j] = corr[j, i] = r
    values = uncertainties.correlated_values_norm(
        [(float(inputs[n].value), float(inputs[n].u)) for n in names], corr
    )
    return dict(zip(names, values, strict=True))


def test_gum_h2_against_uncertainties_package():
    ref = _reference_ufloats(H2_INPUTS, H2_CORRELATION)
    R = ref["V"] / ref["I"] * umath.cos(ref["phi"])
    X = ref["V"] / ref["I"] * umath.sin(ref["phi"])
    res = propagate_linear(h2_model, H2_INPUTS, correlation=H2_CORRELATION)
    # `uncertainties` differentiates analytically; central differences with h = 1e-6 u have
    # truncation error ~ (h/x)^2 and round-off ~ 1e-10 relative → rel 1e-6 is ample.
    assert float(res.u["R"]) == pytest.approx(R.std_dev, rel=1e-6)
    assert float(res.u["X"]) == pytest.approx(X.std_dev, rel=1e-6)
    r_ref = uncertainties.correlation_matrix([R, X])[0, 1]
    assert res.correlation("R", "X") == pytest.approx(r_ref, rel=1e-6)


# --- a nonlinear model with correlated inputs: balance coefficients sharing rho and U ---------
FORCE_INPUTS = {
    "L": Input(-41.3, 0.35, "A", "lift [N]"),
    "D": Input(12.8, 0.22, "A", "drag [N]"),
    "rho": Input(1.19, 0.004, "B", "air density [kg/m3]"),
    "U": Input(18.2, 0.09, "B", "speed [m/s]"),
    "d": Input(0.110, 0.0002, "B", "diameter [m]"),
    "b": Input(0.800, 0.001, "B", "span [m]"),
}
# U derived from q and rho (U = sqrt(2 q / rho)) is anti-correlated with rho.
FORCE_CORRELATION = {("rho", "U"): -0.45}


def force_model(x):
    qS = 0.5 * x["rho"] * x["U"] ** 2 * x["d"] * x["b"]
    return {"CL": x["L"] / qS, "CD": x["D"] / qS}


def test_coefficients_against_uncertainties_package():
    ref = _reference_ufloats(FORCE_INPUTS, FORCE_CORRELATION)
    qS = 0.5 * ref["rho"] * ref["U"] ** 2 * ref["d"] * ref["b"]
    CL, CD = ref["L"] / qS, ref["D"] / qS
    res = propagate_linear(force_model, FORCE_INPUTS, correlation=FORCE_CORRELATION)
    # Reference library `uncertainties` (analytic first-order propagation); see above → 1e-6.
    assert float(res.values["CL"]) == pytest.approx(CL.nominal_value, rel=1e-12)
    assert float(res.u["CL"]) == pytest.approx(CL.std_dev, rel=1e-6)
    assert float(res.u["CD"]) == pytest.approx(CD.std_dev, rel=1e-6)
    r_ref = uncertainties.correlation_matrix([CL, CD])[0, 1]
    assert res.correlation("CL", "CD") == pytest.approx(r_ref, rel=1e-6)
    # ufloats() must carry the same covariance into notebooks.
    uf = res.ufloats(["CL", "CD"])
    assert uf["CL"].std_dev == pytest.approx(CL.std_dev, rel=1e-6)
    assert uncertainties.correlation_matrix([uf["CL"], uf["CD"]])[0, 1] == pytest.approx(
        r_ref, rel=1e-6
    )
    # CL/CD = L/D exactly: rho, U, d, b cancel (a property of the model, checked by the package).
    ratio = uf["CL"] / uf["CD"]
    assert ratio.std_dev == pytest.approx((ref["L"] / ref["D"]).std_dev, rel=1e-5)


def test_one_batched_model_call_and_zero_u_inputs_skipped():
    calls = []

    def model(x):
        calls.append({k: v.shape for k, v in x.items()})
        return {"y": x["a"] * x["b"] + x["c"].sum(axis=1)}

    inputs = {"a": Input(2.0, 0.1), "b": Input(3.0, 0.0), "c": Input([1.0, 2.0], [0.5, 0.0])}
    res = propagate_linear(model, inputs)
    # Two perturbed inputs (a and c[0]) → 1 + 2*2 rows in a single call.
    assert len(calls) == 1
    assert calls[0] == {"a": (5,), "b": (5,), "c": (5, 2)}
    assert res.input_names == ("a", "b", "c[0]", "c[1]")
    assert np.isnan(res.jacobian[0, 1]) and np.isnan(res.jacobian[0, 3])
    # y is linear in each input: u^2 = (b u_a)^2 + u_c0^2 (JCGM 100:2008 eq. (10)); the only
    # error is round-off eps |y| / (h |dy/dx|) with h = 1e-6 u, below 1e-8 here → rel 1e-6.
    assert float(res.u["y"]) == pytest.approx(np.hypot(3.0 * 0.1, 0.5), rel=1e-6)


# --- budgets ----------------------------------------------------------------------------------
def test_budget_shares_sum_to_one_and_signs():
    res = propagate_linear(force_model, FORCE_INPUTS)
    budget = res.budget("CL")
    assert list(budget.columns) == "input value u sensitivity contribution share kind".split()
    # Independent inputs: u^2(y) = sum c_i^2 u^2(x_i) (JCGM 100:2008 eq. (10)) → shares sum to 1.
    assert budget["share"].sum() == pytest.approx(1.0, rel=1e-12)
    assert CORRELATION_ROW not in set(budget["input"])
    rows = budget.set_index("input")
    # Analytic sensitivities of CL = L / (0.5 rho U^2 d b): dCL/dL = CL/L > 0 for any L;
    # dCL/dU = -2 CL/U, positive here because CL < 0.
    CL = float(res.values["CL"])
    assert rows.loc["L", "sensitivity"] == pytest.approx(CL / -41.3, rel=1e-6)
    assert rows.loc["U", "sensitivity"] == pytest.approx(-2 * CL / 18.2, rel=1e-6)
    assert rows.loc["U", "contribution"] > 0
    assert rows.loc["rho", "contribution"] > 0  # dCL/drho = -CL/rho > 0
    assert rows.loc["L", "contribution"] > 0
    assert rows.loc["rho", "kind"] == "B" and rows.loc["L", "kind"] == "A"
    assert rows.loc["U", "contribution"] == pytest.approx(
        rows.loc["U", "sensitivity"] * 0.09, rel=1e-12
    )


def test_budget_with_correlated_inputs_has_a_correlation_row():
    res = propagate_linear(force_model, FORCE_INPUTS, correlation=FORCE_CORRELATION)
    budget = res.budget("CL")
    assert budget["input"].iloc[-1] == CORRELATION_ROW
    assert budget["share"].sum() == pytest.approx(1.0, rel=1e-12)
    # Both c_rho and c_U are positive and r < 0, so the cross term lowers the variance.
    assert budget["share"].iloc[-1] < 0


def test_vector_input_through_a_linear_functional():
    # A trapezoid-like weighted sum of 12 Cp bins, y = sum w_k Cp_k, plus the plain sum.
    # Analytic: u^2(y) = w^T Sigma w, Sigma = D R D (JCGM 100:2008 eq. (13)); a sum of
    # independent terms has u^2 = sum u_k^2 (eq. (10)). The model is linear, so the only error
    # is central-difference round-off eps |y| / (h |dy/dx|) <= 3e-7 with h = 1e-6 u → rel 1e-6.
    k = 12
    theta = np.linspace(0.0, 2 * np.pi, k, endpoint=False)
    w = np.sin(theta) * (2 * np.pi / k) / 2
    cp = 1 - 4 * np.sin(theta) ** 2
    u = np.linspace(0.01, 0.03, k)

    def model(x):
        return {"sum": x["Cp"].sum(axis=1), "CL": x["Cp"] @ w, "twice": 2 * x["Cp"]}

    res = propagate_linear(model, {"Cp": Input(cp, u, "A")})
    assert float(res.u["sum"]) == pytest.approx(np.sqrt(np.sum(u**2)), rel=1e-6)
    assert float(res.u["CL"]) == pytest.approx(np.sqrt(np.sum((w * u) ** 2)), rel=1e-6)
    assert res.u["twice"] == pytest.approx(2 * u, rel=1e-6)
    assert res.u["twice"].shape == (k,)
    assert res.budget("twice[3]")["share"].sum() == pytest.approx(1.0, rel=1e-12)

    r = 0.3  # every pair of bins correlated (a shared reference pressure)
    res = propagate_linear(model, {"Cp": Input(cp, u, "A")}, correlation={("Cp", "Cp"): r})
    Sigma = np.outer(u, u) * (r + (1 - r) * np.eye(k))
    assert float(res.u["sum"]) == pytest.approx(np.sqrt(np.ones(k) @ Sigma @ np.ones(k)), rel=1e-6)
    grouped = res.budget("sum")
    assert list(grouped["input"]) == ["Cp", CORRELATION_ROW]
    assert grouped["contribution"].iloc[0] == pytest.approx(np.sqrt(np.sum(u**2)), rel=1e-6)
    flat = res.budget("sum", group=False)
    assert len(flat) == k + 1
    assert flat["share"].sum() == pytest.approx(1.0, rel=1e-12)


# --- Monte Carlo ------------------------------------------------------------------------------
def additive(x):
    return {"y": x["X1"] + x["X2"] + x["X3"] + x["X4"]}


ADDITIVE_INPUTS = {f"X{i}": Input(0.0, 1.0) for i in range(1, 5)}


def test_mc_jcgm101_additive_gaussian():
    # JCGM 101:2008 §9.2.2: Y = X1 + X2 + X3 + X4, X_i ~ N(0, 1): y = 0, u(y) = 2.0, 95 %
    # interval [-3.92, 3.92]. Only Gaussian inputs are implemented, so the rectangular case of
    # §9.2.3 is not tested. Sampling standard errors for M = 2e5: u ~ 2/sqrt(2M) = 0.0032,
    # interval ends ~ 0.012, mean ~ 0.0045 → tolerances of about 4 standard errors.
    mc = propagate_monte_carlo(additive, ADDITIVE_INPUTS, draws=200_000, seed=1)
    assert mc.draws == 200_000
    assert float(mc.values["y"]) == pytest.approx(0.0, abs=0.02)
    assert float(mc.u["y"]) == pytest.approx(2.0, abs=0.015)
    assert float(mc.low["y"]) == pytest.approx(-3.92, abs=0.05)
    assert float(mc.high["y"]) == pytest.approx(3.92, abs=0.05)


def test_mc_adaptive_stops_within_numerical_tolerance():
    mc = propagate_monte_carlo(
        additive, ADDITIVE_INPUTS, draws=10_000, adaptive=True, max_draws=1_000_000
    )
    assert mc.converged is True
    assert mc.draws % 10_000 == 0 and mc.draws >= 20_000
    # JCGM 101:2008 §7.9.2: u = 2.0 to ndig = 2 digits has delta = 0.05; the stable result must
    # lie within it of the exact 2.0 of §9.2.2.
    assert float(mc.u["y"]) == pytest.approx(2.0, abs=0.05)
    capped = propagate_monte_carlo(
        additive, ADDITIVE_INPUTS, draws=10_000, adaptive=True, max_draws=20_000
    )
    assert capped.converged is False and capped.draws == 20_000


def test_numerical_tolerance_definition():
    # JCGM 101:2008 §7.9.2, worked by hand: u = 2.0 → c = 20, l = -1, delta = 0.05;
    # u = 0.0357 → c = 36, l = -3, delta = 0.0005; ndig = 1: u = 2.0 → c = 2, l = 0, delta = 0.5.
    assert _numerical_tolerance(np.array([2.0, 0.0357]), 2) == pytest.approx([0.05, 0.0005])
    assert _numerical_tolerance(np.array([2.0]), 1) == pytest.approx([0.5])


def test_mc_batches_bound_memory_and_seed_reproduces():
    sizes = []

    def model(x):
        sizes.append(x["X1"].shape[0])
        return additive(x)

    a = propagate_monte_carlo(model, ADDITIVE_INPUTS, draws=12_000, batch=5_000, seed=7)
    assert sizes == [5_000, 5_000, 2_000]
    b = propagate_monte_carlo(additive, ADDITIVE_INPUTS, draws=12_000, batch=5_000, seed=7)
    assert float(a.u["y"]) == float(b.u["y"])


def test_mc_draws_correlated_inputs():
    r = -0.6
    mc = propagate_monte_carlo(
        lambda x: {"a": x["a"], "b": x["b"]},
        {"a": Input(1.0, 0.2), "b": Input(-3.0, 0.5)},
        correlation={("a", "b"): r},
        draws=100_000,
    )
    # Sample correlation of a bivariate normal: standard error (1 - r^2)/sqrt(M) = 0.002 → 0.01.
    assert mc.correlation("a", "b") == pytest.approx(r, abs=0.01)
    assert float(mc.u["b"]) == pytest.approx(0.5, rel=0.01)  # se 0.5/sqrt(2M) = 0.0011


def test_mc_fully_correlated_inputs_do_not_fail():
    # r = 1 makes the correlation matrix singular (no Cholesky factor); the draws must still be
    # fully correlated, so y = a - b has u = |u_a - u_b| = 0.2 (JCGM 100:2008 §5.2.2 Note 1).
    mc = propagate_monte_carlo(
        lambda x: {"y": x["a"] - x["b"], "a": x["a"], "b": x["b"]},
        {"a": Input(1.0, 0.3), "b": Input(1.0, 0.1)},
        correlation={("a", "b"): 1.0},
        draws=5_000,
    )
    assert mc.correlation("a", "b") == pytest.approx(1.0, abs=1e-9)
    # Sampling standard error of u for M = 5000: 0.2 / sqrt(2M) = 0.002 → abs 0.008.
    assert float(mc.u["y"]) == pytest.approx(0.2, abs=0.008)


def test_linear_and_mc_agree_on_mildly_nonlinear_model():
    lin = propagate_linear(force_model, FORCE_INPUTS, correlation=FORCE_CORRELATION)
    mc = propagate_monte_carlo(force_model, FORCE_INPUTS, correlation=FORCE_CORRELATION)
    table = compare_linear_mc(lin, mc, rtol=0.03)
    # Relative input uncertainties <= 1 %: second-order terms ~ 1e-4 relative; MC standard error
    # of u for M = 2e4 is 1/sqrt(2M) = 0.5 % → rtol 3 % (6 standard errors).
    assert list(table["output"]) == ["CL", "CD"]
    assert table["agree"].all()
    assert table["ratio"].to_numpy() == pytest.approx(1.0, abs=0.03)
    assert lin.correlation("CL", "CD") == pytest.approx(mc.correlation("CL", "CD"), abs=0.03)


def test_comparison_exposes_a_nonlinear_model():
    # JCGM 100:2008 §5.1.2 Note: for y = x^2 at x = 0 the first-order u(y) vanishes, while for
    # X ~ N(0, 1) the variance of X^2 is 2 (chi-square, one degree of freedom).
    model = lambda x: {"y": x["x"] ** 2}  # noqa: E731
    lin = propagate_linear(model, {"x": Input(0.0, 1.0)})
    mc = propagate_monte_carlo(model, {"x": Input(0.0, 1.0)})
    assert float(lin.u["y"]) == pytest.approx(0.0, abs=1e-6)
    assert float(mc.u["y"]) == pytest.approx(np.sqrt(2.0), rel=0.05)
    row = compare_linear_mc(lin, mc).iloc[0]
    assert not row["agree"]


# --- misuse is reported, not silently propagated ----------------------------------------------
def test_output_without_batch_axis_is_rejected():
    with pytest.raises(ValueError, match="leading batch axis"):
        propagate_linear(lambda x: {"y": np.float64(1.0)}, {"a": Input(1.0, 0.1)})


def test_invalid_correlation_is_rejected():
    inputs = {"a": Input(1.0, 0.1), "b": Input(1.0, 0.1), "c": Input(1.0, 0.1)}
    bad = {("a", "b"): 0.9, ("b", "c"): 0.9, ("a", "c"): -0.9}
    with pytest.raises(ValueError, match="not a valid correlation matrix"):
        propagate_linear(lambda x: {"y": x["a"]}, inputs, correlation=bad)
    with pytest.raises(KeyError):
        propagate_linear(lambda x: {"y": x["a"]}, inputs, correlation={("a", "z"): 0.1})


def test_input_validation():
    with pytest.raises(ValueError):
        Input(1.0, -0.1)
    with pytest.raises(ValueError):
        Input([1.0, 2.0], [0.1, 0.2, 0.3])
    with pytest.raises(ValueError):
        Input(1.0, 0.1, kind="C")
    assert Input([1.0, 2.0], 0.1).u == pytest.approx([0.1, 0.1])


def test_summed_with_shares_one_column_and_matches_the_law_of_propagation():
    # y = (a + b)^2 · c per element, b entering only through a + b. JCGM 100:2008 eq. (10) for
    # independent inputs, s = a + b: u^2(y_k) = (2 s_k c)^2 (u_a,k^2 + u_b,k^2) + (s_k^2 u_c)^2.
    # Central differences of this quadratic are exact up to round-off (~1e-9 here) → rel 1e-7.
    calls = []

    def model(x):
        calls.append(x["a"].shape[0])
        s = x["a"] + x["b"]
        return {"y": s**2 * x["c"][:, None], "total": (s**2).sum(axis=1)}

    a, b, c = np.array([1.0, 2.0, 3.0]), np.array([0.5, -0.2, 0.0]), 1.5
    ua, ub, uc = np.array([0.01, 0.0, 0.03]), np.array([0.02, 0.04, 0.0]), 0.05
    inputs = {"a": Input(a, ua), "b": Input(b, ub), "c": Input(c, uc)}
    res = propagate_linear(model, inputs, summed_with={"b": "a"})
    s = a + b
    expected = np.sqrt((2 * s * c) ** 2 * (ua**2 + ub**2) + (s**2 * uc) ** 2)
    assert res.u["y"] == pytest.approx(expected, rel=1e-7)
    # b[0] borrows a[0]'s column; b[1] (a[1] exact) is perturbed itself; b[2] is exact:
    # evaluated: a[0], a[2], b[1], c → 1 + 2·4 rows instead of 1 + 2·5.
    assert calls == [9]
    assert np.array_equal(res.jacobian[:, 3], res.jacobian[:, 0])
    plain = propagate_linear(model, inputs)
    assert res.u["total"] == pytest.approx(plain.u["total"], rel=1e-7)
    with pytest.raises(ValueError, match="both must be inputs"):
        propagate_linear(model, inputs, summed_with={"b": "nope"})
    with pytest.raises(ValueError, match="another shape"):
        propagate_linear(model, inputs, summed_with={"c": "a"})


def test_budgets_of_several_outputs_are_their_budgets_side_by_side():
    # The one-table form must hold exactly what budget() gives output by output (same code path
    # for the numbers; this checks the assembly: order, columns, the correlation row).
    res = propagate_linear(force_model, FORCE_INPUTS, correlation=FORCE_CORRELATION)
    outputs = list(res.values)
    table = res.budgets(outputs)
    assert list(table.columns) == ["output", "input", "value", "u", "sensitivity",
                                   "contribution", "share", "kind"]  # fmt: skip
    for name in outputs:
        one = res.budget(name)
        part = table[table["output"] == name].drop(columns="output").reset_index(drop=True)
        pd.testing.assert_frame_equal(part, one)
    assert res.budget("CL")["input"].iloc[-1] == CORRELATION_ROW
