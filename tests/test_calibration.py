"""Balance calibration from a file (`[instruments.balance] calibration_file`): the coefficients'
covariance of a synthetic least-squares calibration, read and propagated into the results."""

from __future__ import annotations

import csv
from dataclasses import replace

import numpy as np
import pytest
from scipy.optimize import curve_fit

from tunnelred.inputs.calibration import coefficient_names, read_calibration_text
from tunnelred.inputs.config import load_config

CHANNELS = ["N1", "N2", "N3"]


def synthetic_fit(matrix, sigma=(0.02, 0.05, 0.0005), points=30, seed=7):
    """A calibration by least squares: known loads applied, signals recorded, each load row
    fitted to the signals. Returns the fitted 3 × 3 matrix and the covariance of its nine
    coefficients (row by row): σ_r² (SᵀS)⁻¹ per row, rows independent."""
    rng = np.random.default_rng(seed)
    signals = rng.uniform(-1.0, 1.0, size=(points, 3))  # [V] over the calibrated range
    fitted, blocks = [], []
    for r in range(3):
        loads = signals @ np.asarray(matrix)[r] + rng.normal(0.0, sigma[r], points)
        coef, *_ = np.linalg.lstsq(signals, loads, rcond=None)
        fitted.append(coef)
        blocks.append(sigma[r] ** 2 * np.linalg.inv(signals.T @ signals))
        # Cross-check with scipy's own fit (absolute sigma: σ known, not estimated from the
        # residuals); its Jacobian is numerical, so agreement to 1e-4 of the largest variance.
        popt, pcov = curve_fit(lambda s, a, b, c: s @ np.array([a, b, c]), signals, loads,
                               p0=coef, sigma=np.full(points, sigma[r]),
                               absolute_sigma=True)  # fmt: skip
        assert popt == pytest.approx(coef, rel=1e-6, abs=1e-12)  # its iteration stops at xtol
        scale = float(np.max(np.diag(blocks[-1])))
        assert pcov == pytest.approx(blocks[-1], rel=1e-4, abs=1e-4 * scale)
    covariance = np.zeros((9, 9))
    for r in range(3):
        covariance[3 * r : 3 * r + 3, 3 * r : 3 * r + 3] = blocks[r]
    return np.array(fitted), covariance


def write_csv(path, matrix, covariance=None, order=None):
    names = coefficient_names(CHANNELS, second_order=False)
    values = dict(zip(names, np.asarray(matrix).ravel(), strict=True))
    order = order or names
    with open(path, "w", newline="") as stream:
        w = csv.writer(stream)
        stream.write("# synthetic calibration (test)\n")
        w.writerow(["coefficient", "value", *(order if covariance is not None else [])])
        for name in order:
            i = names.index(name)
            row = [name, repr(float(values[name]))]
            if covariance is not None:
                row += [repr(float(covariance[i, names.index(b)])) for b in order]
            w.writerow(row)


MATRIX = [[8.0, 0.15, -0.3], [-0.2, 24.0, 0.4], [0.002, -0.005, 0.2]]


def test_file_gives_the_fitted_matrix_and_its_covariance(tmp_path):
    fitted, cov = synthetic_fit(MATRIX)
    # The rows in another order than the vector c: the reader puts them in place.
    order = list(reversed(coefficient_names(CHANNELS, second_order=False)))
    write_csv(tmp_path / "cal.csv", fitted, cov, order)
    table, problems = read_calibration_text((tmp_path / "cal.csv").read_bytes(), CHANNELS, "c")
    assert problems == []
    assert np.array(table.matrix) == pytest.approx(fitted, rel=1e-15)
    assert table.second_order is None
    assert np.array(table.covariance) == pytest.approx(cov, rel=1e-15, abs=0)


def test_second_order_terms_and_product_names_in_either_order():
    text = "coefficient,value\n" + "".join(
        f"{load}:{ch},{v}\n" for load, row in zip(("Fx", "Fy", "Mz"), MATRIX, strict=True)
        for ch, v in zip(CHANNELS, row, strict=True)
    ) + "Fy:N2*N1,0.5\nMz:N3*N3,-0.25\n"  # fmt: skip
    table, problems = read_calibration_text(text.encode(), CHANNELS, "c")
    assert problems == [] and table.covariance is None
    second = np.array(table.second_order)  # columns s11, s12, s13, s22, s23, s33
    assert second.shape == (3, 6)
    assert second[1, 1] == 0.5 and second[2, 5] == -0.25 and np.count_nonzero(second) == 2


@pytest.mark.parametrize(
    ("edit", "expected"),
    [
        (lambda t: t.replace("Fx:N2,", "Fx:N9,"), "LOAD:TERM"),
        (lambda t: "\n".join(line for line in t.splitlines() if not line.startswith("Mz:N3")),
         "every linear coefficient"),
        (lambda t: t.replace("coefficient,value", "name,value"), "header"),
    ],
)  # fmt: skip
def test_bad_files_are_problems_with_file_and_line(tmp_path, edit, expected):
    write_csv(tmp_path / "cal.csv", MATRIX)
    text = edit((tmp_path / "cal.csv").read_text())
    table, problems = read_calibration_text(text.encode(), CHANNELS, "calibration/cal.csv")
    assert table is None and problems and problems[0].file == "calibration/cal.csv"
    assert any(expected in p.expected for p in problems), problems


def test_covariance_must_be_symmetric_and_positive_semi_definite(tmp_path):
    _, cov = synthetic_fit(MATRIX)
    skew = cov.copy()
    skew[0, 1] *= 2.0
    write_csv(tmp_path / "a.csv", MATRIX, skew)
    _, problems = read_calibration_text((tmp_path / "a.csv").read_bytes(), CHANNELS, "a")
    assert "symmetric" in problems[0].expected
    negative = cov.copy()
    negative[0, 1] = negative[1, 0] = 10 * np.sqrt(cov[0, 0] * cov[1, 1])  # |r| = 10
    write_csv(tmp_path / "b.csv", MATRIX, negative)
    _, problems = read_calibration_text((tmp_path / "b.csv").read_bytes(), CHANNELS, "b")
    assert "positive semi-definite" in problems[0].expected


def _campaign(root, *, covariance):
    """The demo campaign in small, its matrix replaced by calibration/balance.csv."""
    from tunnelred.demo.spec import demo_spec
    from tunnelred.demo.writer import make_campaign

    demo = demo_spec()
    spec = replace(demo, speeds=(9.0,), spin_ratios_up=(0.0, 2.0), spin_ratios_down=(),
                   configurations=demo.configurations[:1], tare_rpms=(2000.0, 4000.0),
                   repeat_point=None, repeat_count=0, faults=(), pressure_speeds=(),
                   data_duration=2.0, wind_off_duration=1.0)  # fmt: skip
    make_campaign(root, spec)
    toml = root / "campaign.toml"
    lines = [
        line
        for line in toml.read_text().splitlines()
        if not line.startswith(("matrix =", "u_matrix_relative ="))
    ]
    at = lines.index("[instruments.balance]") + 1
    lines.insert(at, 'calibration_file = "calibration/balance.csv"')
    toml.write_text("\n".join(lines) + "\n")
    (root / "calibration").mkdir()
    write_csv(root / "calibration" / "balance.csv", spec.matrix, covariance)
    return spec


def test_the_covariance_is_propagated_into_the_results(tmp_path):
    from tunnelred.engine.reduction import reduce_run
    from tunnelred.inputs.readers import open_campaign

    _, cov = synthetic_fit(MATRIX, sigma=(0.05, 0.2, 0.002))
    results = {}
    for name, given in (("with", cov), ("without", None)):
        spec = _campaign(tmp_path / name, covariance=given)
        config, problems = load_config(tmp_path / name / "campaign.toml")
        assert problems == [] and np.array(config.instruments.balance.matrix) == pytest.approx(
            np.array(spec.matrix)
        )
        results[name] = reduce_run(open_campaign(tmp_path / name), "R002")  # the α = 2 run
    with_, without = results["with"], results["without"]
    assert with_.values["CL"] == pytest.approx(without.values["CL"], rel=1e-12)
    # Expected: the loads are F = M ΔS with ΔS the run's net signals (run minus zero minus the
    # interpolated tare); with a linear M, ΔS = M⁻¹ F_net, F_net from the budget's load values.
    budget = without.budgets.set_index(["output", "input"])
    net = np.array([budget.loc[("CL", n), "value"] - budget.loc[("CL", f"{n}_tare"), "value"]
                    for n in ("Fx", "Fy", "Mz")])  # fmt: skip
    delta_s = np.linalg.solve(np.array(spec.matrix), net)
    jacobian = np.kron(np.eye(3), delta_s)  # ∂F_r/∂M_rj = ΔS_j
    load_cov = jacobian @ cov @ jacobian.T
    for output in ("CL", "CD", "CM"):
        g = np.array([budget.loc[(output, n), "sensitivity"] for n in ("Fx", "Fy", "Mz")])
        added = with_.values[f"u_{output}"] ** 2 - without.values[f"u_{output}"] ** 2
        assert added == pytest.approx(g @ load_cov @ g, rel=1e-4), output
        assert added > 0


def test_a_covariance_and_u_matrix_relative_together_are_a_problem(tmp_path):
    _, cov = synthetic_fit(MATRIX)
    _campaign(tmp_path / "c", covariance=cov)
    toml = tmp_path / "c" / "campaign.toml"
    text = toml.read_text()
    toml.write_text(text.replace("[instruments.balance]\n", "[instruments.balance]\n"
                                 "u_matrix_relative = 0.001\n"))  # fmt: skip
    _, problems = load_config(toml)
    assert [p.column for p in problems] == ["instruments.balance.u_matrix_relative"]
    toml.write_text(toml.read_text().replace("u_matrix_relative = 0.001\n", "matrix = [[1.0]]\n"))
    config, problems = load_config(toml)
    assert config is None and "instruments.balance.matrix" in [p.column for p in problems]


@pytest.mark.slow
def test_coverage_of_the_calibration_uncertainty(tmp_path):
    # The claim: about 95 % of calibration errors lie within 2u. Each draw is a whole synthetic
    # calibration: a least-squares fit to new noisy points (its own covariance), used to
    # reduce the same run; the logs were written with the true matrix, so the change from the
    # reduction with the true matrix is the calibration's error alone. 400 draws: a binomial
    # standard deviation of 1.1 %, so 92-98 % is ±2.7 of them.
    from tunnelred.engine.reduction import reduce_run
    from tunnelred.inputs.readers import open_campaign

    spec = _campaign(tmp_path / "c", covariance=None)
    reference = reduce_run(open_campaign(tmp_path / "c"), "R002")
    path = tmp_path / "c" / "calibration" / "balance.csv"
    draws, inside = 400, {"CL": 0, "CD": 0, "CM": 0}
    for seed in range(draws):
        fitted, cov = synthetic_fit(spec.matrix, sigma=(0.05, 0.2, 0.002), seed=1000 + seed)
        write_csv(path, fitted, cov)
        result = reduce_run(open_campaign(tmp_path / "c"), "R002")
        for name in inside:
            error = result.values[name] - reference.values[name]
            u_cal = np.sqrt(result.values[f"u_{name}"] ** 2 - reference.values[f"u_{name}"] ** 2)
            inside[name] += abs(error) <= 2 * u_cal
    for name, count in inside.items():
        assert 0.92 <= count / draws <= 0.98, (name, count / draws)


def test_a_plan_propagates_the_covariance_as_a_run_does(tmp_path):
    # The plan (tunnelred.products.plan) builds the same calibration input from its predicted
    # loads: the variance it adds to u(CL), u(CD), u(CM) is g^T J Sigma J^T g (JCGM 100:2008
    # eq. (13), correlated inputs) with J = dF/dM = the net signals M^-1 F at the plan's nominal
    # loads and g the plan's own sensitivities to the loads, as for a run above.
    from tunnelred.products.plan import plan_test

    _, cov = synthetic_fit(MATRIX, sigma=(0.05, 0.2, 0.002))
    plans = {}
    for name, given in (("with", cov), ("without", None)):
        spec = _campaign(tmp_path / name, covariance=given)
        matrix = tmp_path / f"{name}.csv"
        matrix.write_text("config,speed_set [m/s],spin_ratio,record [s]\nplates,9,2,2\n")
        plans[name] = plan_test(tmp_path / name, matrix)
    with_, without = plans["with"], plans["without"]
    assert "calibration_coefficients" in set(with_.budgets["input"])
    budget = without.budgets.set_index(["output", "input"])
    loads = np.array([budget.loc[("CL", n), "value"] for n in ("Fx", "Fy", "Mz")])
    jacobian = np.kron(np.eye(3), np.linalg.solve(np.array(spec.matrix), loads))
    load_cov = jacobian @ cov @ jacobian.T
    for output in ("CL", "CD", "CM"):
        g = np.array([budget.loc[(output, n), "sensitivity"] for n in ("Fx", "Fy", "Mz")])
        added = with_.table[f"u_{output}"].iloc[0] ** 2 - without.table[f"u_{output}"].iloc[0] ** 2
        assert added == pytest.approx(g @ load_cov @ g, rel=1e-3), output
        assert added > 0
