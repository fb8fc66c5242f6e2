"""Propagation of measurement uncertainty through a vectorised run-level model.

A *model* is a function ``model(x) -> y`` from a dict of input arrays to a dict of output arrays.
Every array carries a leading batch axis: an input whose event shape is ``()`` arrives with shape
``(B,)``, one of event shape ``(k,)`` with shape ``(B, k)``; outputs likewise. One call of the model
therefore evaluates ``B`` perturbed copies of a run at once, which is what makes both methods here
cheap:

* :func:`propagate_linear` — the law of propagation of uncertainty of the GUM (JCGM 100:2008 §5),
  sensitivities by central differences, all of them from one batched model call;
* :func:`propagate_monte_carlo` — the propagation of distributions of GUM Supplement 1
  (JCGM 101:2008), Gaussian draws in memory-bounded batches, optionally with its adaptive stopping
  rule (§7.9);
* :func:`compare_linear_mc` — the two side by side, output by output.

The module knows nothing about wind tunnels. The ``uncertainties`` package is used only by
:meth:`LinearResult.ufloats`, to hand run-level results to notebooks as correlated numbers.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = [
    "Input",
    "LinearResult",
    "MonteCarloResult",
    "propagate_linear",
    "propagate_monte_carlo",
    "compare_linear_mc",
]

Model = Callable[[dict[str, np.ndarray]], Mapping[str, np.ndarray]]

#: Label of the budget row that holds the share of the output variance due to input correlations.
CORRELATION_ROW = "(correlations)"

# The columns of a budget table, after its ``output`` column.
_BUDGET_COLUMNS = ("input", "value", "u", "sensitivity", "contribution", "share", "kind")


@dataclass(frozen=True, eq=False)
class Input:
    """One input quantity of a model: its estimate and standard uncertainty.

    Parameters
    ----------
    value : float or 1-D array
        Estimate of the quantity. [unit of the quantity]
    u : float or 1-D array
        Standard uncertainty (k = 1) of ``value``; a scalar is broadcast to the shape of ``value``.
        Zero means the quantity is taken as exact. [unit of the quantity]
    kind : {"A", "B"}
        How ``u`` was evaluated (JCGM 100:2008 §4.2 type A, §4.3 type B); reported in budgets.
    description : str
        Free text for budgets and reports.

    Examples
    --------
    >>> Input(101325.0, 25.0, description="barometer").u
    array(25.)
    """

    value: float | np.ndarray
    u: float | np.ndarray
    kind: str = "B"
    description: str = ""

    def __post_init__(self) -> None:
        value = np.array(self.value, dtype=float)
        if value.ndim > 1:
            raise ValueError(f"Input value must be a scalar or 1-D array; got shape {value.shape}")
        try:
            u = np.array(np.broadcast_to(np.asarray(self.u, dtype=float), value.shape))
        except ValueError:
            raise ValueError(
                f"Input u of shape {np.shape(self.u)} does not match value of shape {value.shape}"
            ) from None
        if not np.all(np.isfinite(u)) or np.any(u < 0):
            raise ValueError(f"Input u must be finite and non-negative; got {u}")
        if self.kind not in ("A", "B"):
            raise ValueError(f'Input kind must be "A" or "B"; got {self.kind!r}')
        value.flags.writeable = False
        u.flags.writeable = False
        object.__setattr__(self, "value", value)
        object.__setattr__(self, "u", u)


@dataclass(frozen=True)
class _Layout:
    """Named arrays laid side by side in one flat vector (inputs or outputs)."""

    shapes: dict[str, tuple[int, ...]]
    index: dict[str, slice]
    labels: tuple[str, ...]

    @classmethod
    def from_shapes(cls, shapes: Mapping[str, tuple[int, ...]]) -> _Layout:
        index: dict[str, slice] = {}
        labels: list[str] = []
        start = 0
        for name, shape in shapes.items():
            size = int(np.prod(shape, dtype=int))
            index[name] = slice(start, start + size)
            labels += [name] if shape == () else [f"{name}[{k}]" for k in range(size)]
            start += size
        return cls(dict(shapes), index, tuple(labels))

    @property
    def size(self) -> int:
        return len(self.labels)

    def split(self, flat: np.ndarray) -> dict[str, np.ndarray]:
        """(B, n) → {name: (B,) or (B, k)}; the event view for one row when ``flat`` is 1-D."""
        lead = flat.shape[:-1]
        return {
            name: flat[..., self.index[name]].reshape(lead + shape)
            for name, shape in self.shapes.items()
        }

    def flat_index(self, ref: str) -> int:
        """Flat position of ``ref``: the name of a scalar, or an element label like ``Cp[3]``."""
        if ref in self.shapes and self.shapes[ref] == ():
            return self.index[ref].start
        try:
            return self.labels.index(ref)
        except ValueError:
            raise KeyError(
                f"{ref!r} is not a scalar here; use a scalar name or an element label like 'Cp[0]'"
            ) from None


def _input_layout(inputs: Mapping[str, Input]) -> tuple[_Layout, np.ndarray, np.ndarray]:
    if not inputs:
        raise ValueError("a model needs at least one input")
    layout = _Layout.from_shapes({name: inp.value.shape for name, inp in inputs.items()})
    x0 = np.concatenate([inputs[name].value.ravel() for name in layout.shapes])
    u = np.concatenate([inputs[name].u.ravel() for name in layout.shapes])
    return layout, x0, u


def _correlation_matrix(
    layout: _Layout, correlation: Mapping[tuple[str, str], float] | None
) -> np.ndarray:
    """Input correlation matrix over the flat inputs.

    A key names two inputs or two element labels (``"Cp[3]"``). Two scalars: one coefficient. A
    scalar and a vector: the coefficient between the scalar and every element. Two vectors of the
    same length: element-wise, r(a[k], b[k]). A vector with itself: every pair of its elements.
    """
    n = layout.size
    R = np.eye(n)
    for (a, b), r in (correlation or {}).items():
        r = float(r)
        if not -1.0 <= r <= 1.0:
            raise ValueError(f"correlation {(a, b)} = {r} lies outside [-1, 1]")
        ia, ib = _element_positions(layout, a), _element_positions(layout, b)
        if a == b:
            if len(ia) < 2:
                raise ValueError(f"correlation key {(a, b)} pairs a scalar with itself")
            block = np.full((len(ia), len(ia)), r)
            np.fill_diagonal(block, 1.0)
            R[np.ix_(ia, ia)] = block
            continue
        if len(ia) == len(ib):
            pairs = zip(ia, ib, strict=True)
        elif len(ia) == 1 or len(ib) == 1:
            pairs = ((i, j) for i in ia for j in ib)
        else:
            raise ValueError(
                f"correlation key {(a, b)}: vectors of lengths {len(ia)} and {len(ib)} cannot pair"
            )
        for i, j in pairs:
            R[i, j] = R[j, i] = r
    # The identity (no coefficients given) needs no check.
    if correlation and n > 1 and np.linalg.eigvalsh(R)[0] < -1e-10:
        raise ValueError("the input correlation coefficients are not a valid correlation matrix")
    return R


def _element_positions(layout: _Layout, ref: str) -> list[int]:
    if ref in layout.index:
        return list(range(layout.index[ref].start, layout.index[ref].stop))
    if ref in layout.labels:
        return [layout.labels.index(ref)]
    raise KeyError(f"correlation names {ref!r}, which is not an input")


def _evaluate(
    model: Model, layout: _Layout, X: np.ndarray, out_layout: _Layout | None = None
) -> tuple[_Layout, np.ndarray]:
    """Call the model on the rows of ``X`` (B, n); return the output layout and outputs (B, m)."""
    B = X.shape[0]
    raw = model(layout.split(X))
    shapes: dict[str, tuple[int, ...]] = {}
    columns = []
    for name, value in raw.items():
        arr = np.asarray(value, dtype=float)
        if arr.ndim not in (1, 2) or arr.shape[0] != B:
            raise ValueError(
                f"model output {name!r} has shape {arr.shape}; expected ({B},) or ({B}, k): "
                "every output needs the leading batch axis of the inputs"
            )
        shapes[name] = arr.shape[1:]
        columns.append(arr.reshape(B, -1))
    if out_layout is None:
        out_layout = _Layout.from_shapes(shapes)
    elif shapes != out_layout.shapes:
        raise ValueError("the model returned different outputs on different calls")
    return out_layout, np.concatenate(columns, axis=1)


def _square_root(R: np.ndarray) -> np.ndarray:
    """A matrix L with L Lᵀ = R, also for a singular R (correlation ±1)."""
    try:
        return np.linalg.cholesky(R)
    except np.linalg.LinAlgError:
        w, V = np.linalg.eigh(R)
        return V * np.sqrt(np.clip(w, 0.0, None))


def _as_event(layout: _Layout, flat: np.ndarray) -> dict[str, np.ndarray]:
    return {name: np.array(v) for name, v in layout.split(flat).items()}


@dataclass
class LinearResult:
    """Result of :func:`propagate_linear`.

    ``values`` and ``u`` map each output name to an array of its event shape (0-d for a scalar).
    ``covariance`` is the full output covariance over the flat outputs, ``index`` maps an output
    name to its slice there and ``output_names`` labels each position (``"Cp[3]"``).
    ``jacobian`` (flat outputs × flat inputs) holds the sensitivity coefficients; a column of an
    input with ``u = 0`` is NaN, since it was not evaluated. ``input_names`` labels the columns.
    """

    values: dict[str, np.ndarray]
    u: dict[str, np.ndarray]
    covariance: np.ndarray
    index: dict[str, slice]
    jacobian: np.ndarray
    input_names: tuple[str, ...]
    output_names: tuple[str, ...]
    input_values: np.ndarray
    input_u: np.ndarray
    input_correlation: np.ndarray
    input_index: dict[str, slice]
    input_kind: tuple[str, ...]

    def _out(self) -> _Layout:
        shapes = {n: np.shape(v) for n, v in self.values.items()}
        return _Layout(shapes, self.index, self.output_names)

    def correlation(self, a: str, b: str) -> float:
        """Correlation coefficient r(a, b) of two scalar outputs (or elements, ``"Cp[3]"``)."""
        layout = self._out()
        i, j = layout.flat_index(a), layout.flat_index(b)
        C = self.covariance
        scale = math.sqrt(C[i, i] * C[j, j])
        # An exact output (no uncertainty) or an undefined one has no correlation.
        return float(C[i, j] / scale) if scale > 0 else math.nan

    def budget(self, output: str, *, group: bool = True) -> pd.DataFrame:
        """Uncertainty budget of one scalar output (or element ``"Cp[3]"``).

        Parameters
        ----------
        output : str
            Name of a scalar output, or the label of one element of a vector output.
        group : bool
            True: one row per input name, a vector input's elements summed (variance contributions
            added; its value, u and sensitivity are then NaN and its contribution is the root sum
            of squares, unsigned). False: one row per element.

        Returns
        -------
        pandas.DataFrame
            Columns ``input, value, u, sensitivity, contribution, share, kind``. ``contribution``
            is sensitivity × u (signed) [unit of the output]; ``share`` is contribution² over the
            output variance, so the shares of uncorrelated inputs sum to 1. When correlated inputs
            act on the output, a last row ``(correlations)`` holds the share of the cross terms
            2 Σ c_i c_j r_ij, so that the column always sums to 1.
        """
        return self.budgets([output], group=group).drop(columns="output")

    def budgets(self, outputs: Sequence[str], *, group: bool = True) -> pd.DataFrame:
        """The budgets of several scalar outputs in one table, built from arrays.

        Parameters
        ----------
        outputs : sequence of str
            Scalar output names or element labels, as for :meth:`budget`.
        group : bool
            As for :meth:`budget`.

        Returns
        -------
        pandas.DataFrame
            Column ``output`` then the columns of :meth:`budget`; each output's rows in the
            order :meth:`budget` gives them.
        """
        layout = self._out()
        acting_u = self.input_u > 0
        if group:
            starts = np.array([sl.start for sl in self.input_index.values()])
            sizes = np.array([sl.stop - sl.start for sl in self.input_index.values()])
            names = list(self.input_index)
            scalar = (sizes == 1) & np.array(
                [self.input_names[i] == n for i, n in zip(starts, names, strict=True)]
            )
            labels = np.array(names, dtype=object)
            kinds = np.array([self.input_kind[i] for i in starts], dtype=object)
            values = np.where(scalar, self.input_values[starts], np.nan)
            us = np.where(scalar, self.input_u[starts], np.nan)
        else:
            labels = np.array(self.input_names, dtype=object)
            kinds = np.array(self.input_kind, dtype=object)
            values, us = self.input_values, self.input_u
        parts: dict[str, list] = {c: [] for c in ("output", *_BUDGET_COLUMNS)}
        for output in outputs:
            o = layout.flat_index(output)
            sens = self.jacobian[o]
            contrib = np.where(acting_u, sens * self.input_u, 0.0)
            var = float(contrib @ self.input_correlation @ contrib)
            with np.errstate(divide="ignore", invalid="ignore"):
                share = contrib**2 / var
            if group:
                # Vector inputs: variance contributions added, the contribution a root sum of
                # squares.
                sum_sq = np.add.reduceat(contrib**2, starts)
                columns = {
                    "sensitivity": np.where(scalar, sens[starts], np.nan),
                    "contribution": np.where(scalar, contrib[starts], np.sqrt(sum_sq)),
                    "share": np.add.reduceat(np.nan_to_num(share, nan=0.0), starts)
                    if var > 0
                    else np.full(len(names), np.nan),
                }
            else:
                columns = {"sensitivity": sens, "contribution": contrib, "share": share}
            columns.update(input=labels, value=values, u=us, kind=kinds)
            acting = contrib != 0
            off = self.input_correlation[np.ix_(acting, acting)] - np.eye(int(acting.sum()))
            rows = len(labels)
            if np.any(off != 0):
                cross = (var - float(np.sum(contrib**2))) / var if var > 0 else np.nan
                extra = {"input": CORRELATION_ROW, "share": cross, "kind": ""}
                columns = {
                    c: np.append(columns[c], extra.get(c, np.nan)).astype(
                        object if c in ("input", "kind") else float
                    )
                    for c in _BUDGET_COLUMNS
                }
                rows += 1
            parts["output"].append(np.full(rows, output, dtype=object))
            for c in _BUDGET_COLUMNS:
                parts[c].append(columns[c])
        table = {c: np.concatenate(v) if v else np.array([]) for c, v in parts.items()}
        return pd.DataFrame(table, columns=["output", *_BUDGET_COLUMNS])

    def ufloats(self, names: Sequence[str]) -> dict[str, object]:
        """Scalar outputs as correlated ``uncertainties`` numbers, for notebooks.

        Parameters
        ----------
        names : sequence of str
            Scalar output names or element labels (``"Cp[3]"``).

        Returns
        -------
        dict
            name → ``uncertainties`` number; their covariance matrix is the propagated one.
        """
        import uncertainties

        layout = self._out()
        idx = [layout.flat_index(n) for n in names]
        flat = np.concatenate([np.ravel(self.values[n]) for n in self.index])
        numbers = uncertainties.correlated_values(
            flat[idx], self.covariance[np.ix_(idx, idx)], tags=list(names)
        )
        return dict(zip(names, numbers, strict=True))


def propagate_linear(
    model: Model,
    inputs: Mapping[str, Input],
    *,
    correlation: Mapping[tuple[str, str], float] | None = None,
    relative_step: float = 1e-6,
    summed_with: Mapping[str, str] | None = None,
) -> LinearResult:
    """Propagate standard uncertainties through a model by the GUM law of propagation.

    Parameters
    ----------
    model : callable
        ``model(x) -> y`` on dicts of arrays with a leading batch axis (module docstring).
    inputs : dict of str to Input
        The input quantities.
    correlation : dict of (str, str) to float, optional
        Correlation coefficients between inputs [-]. A key names two inputs or two element labels
        (``"Cp[3]"``); a scalar with a vector sets r with every element; two vectors of equal
        length pair element-wise; a vector with itself sets every pair of its elements.
    relative_step : float
        Central-difference step as a fraction of each input's standard uncertainty [-].
    summed_with : dict of str to str, optional
        ``{"b": "a"}`` promises that input ``b`` enters the model only through the sum
        ``a + b`` (same shape): ∂y/∂b = ∂y/∂a, so ``b`` takes ``a``'s sensitivity columns and
        is not perturbed itself (elements where ``a`` has ``u = 0`` are perturbed as usual);
        the shared column is differenced with the step of the larger of the two u.

    Returns
    -------
    LinearResult

    Notes
    -----
    JCGM 100:2008 eq. (13) in matrix form (JCGM 102:2011 §6.2.1.3):
    ``V_y = J V_x Jᵀ`` with ``V_x = D R D``, ``D = diag(u(x_i))``, ``R`` the input correlations,
    and ``J_ki = ∂y_k/∂x_i`` at the estimates. The sensitivities are central differences
    ``(y(x + h e_i) − y(x − h e_i)) / (2h)`` with ``h = relative_step · u(x_i)``, divided by the
    step actually represented in floating point. All ``2n + 1`` evaluations (the estimate and
    the ± steps of the ``n`` inputs with ``u > 0``) go to the model as one batch. An input with
    ``u = 0`` contributes nothing to any variance, so it is not perturbed at all, nor is one
    named in ``summed_with``, whose columns are its partner's (a sum has one derivative).

    The result is first order: it is exact for a model linear in its inputs and otherwise valid
    while the model is close to linear over a few standard uncertainties of each input
    (JCGM 100:2008 §5.1.2); :func:`propagate_monte_carlo` checks that assumption.

    References
    ----------
    .. [1] JCGM 100:2008, Evaluation of measurement data — Guide to the expression of uncertainty
       in measurement (GUM), §5.1–5.2.
    .. [2] JCGM 102:2011, Evaluation of measurement data — Supplement 2 to the GUM: extension to
       any number of output quantities, §6.2.

    Examples
    --------
    >>> res = propagate_linear(
    ...     lambda x: {"area": x["a"] * x["b"]},
    ...     {"a": Input(2.0, 0.01), "b": Input(3.0, 0.02)},
    ... )
    >>> round(float(res.u["area"]), 6)  # sqrt((3 * 0.01)**2 + (2 * 0.02)**2)
    0.05
    """
    if not relative_step > 0:
        raise ValueError(f"relative_step must be positive; got {relative_step}")
    layout, x0, u = _input_layout(inputs)
    R = _correlation_matrix(layout, correlation)
    varies = u > 0
    # Elements that take their partner's sensitivity: not evaluated themselves.
    borrowed: list[tuple[np.ndarray, np.ndarray]] = []
    for name, partner in (summed_with or {}).items():
        if name not in layout.index or partner not in layout.index or name == partner:
            raise ValueError(f"summed_with pairs {name!r} with {partner!r}: both must be inputs")
        if layout.shapes[name] != layout.shapes[partner]:
            raise ValueError(f"summed_with pairs {name!r} with {partner!r} of another shape")
        own = np.arange(layout.index[name].start, layout.index[name].stop)
        theirs = np.arange(layout.index[partner].start, layout.index[partner].stop)
        take = varies[own] & varies[theirs]
        borrowed.append((own[take], theirs[take]))
    evaluated = varies.copy()
    # The step of a shared column follows the larger of the two u: less round-off.
    u_step = u.copy()
    for own, theirs in borrowed:
        evaluated[own] = False
        u_step[theirs] = np.maximum(u[theirs], u[own])
    computed = np.flatnonzero(evaluated)
    m = computed.size
    # A step far below the value's last digit would vanish in floating point; 1e-9 of the
    # value keeps the central difference meaningful (its truncation error is still negligible).
    h = np.maximum(relative_step * u_step[computed], 1e-9 * np.abs(x0[computed]))
    X = np.tile(x0, (1 + 2 * m, 1))
    plus = 1 + 2 * np.arange(m)
    X[plus, computed] += h
    X[plus + 1, computed] -= h
    dx = X[plus, computed] - X[plus + 1, computed]
    out, Y = _evaluate(model, layout, X)

    J = np.full((out.size, layout.size), np.nan)
    J[:, computed] = ((Y[plus] - Y[plus + 1]) / dx[:, None]).T
    for own, theirs in borrowed:
        J[:, own] = J[:, theirs]
    active = np.flatnonzero(varies)
    Ja = J[:, active]
    cov_x = u[active, None] * R[np.ix_(active, active)] * u[None, active]
    cov_y = Ja @ cov_x @ Ja.T
    kinds = tuple(
        inputs[name].kind for name, sl in layout.index.items() for _ in range(sl.stop - sl.start)
    )
    return LinearResult(
        values=_as_event(out, Y[0]),
        u=_as_event(out, np.sqrt(np.clip(np.diag(cov_y), 0.0, None))),
        covariance=cov_y,
        index=out.index,
        jacobian=J,
        input_names=layout.labels,
        output_names=out.labels,
        input_values=x0,
        input_u=u,
        input_correlation=R,
        input_index=layout.index,
        input_kind=kinds,
    )


@dataclass
class MonteCarloResult:
    """Result of :func:`propagate_monte_carlo`.

    ``values`` (the mean of the draws), ``u`` (their standard deviation), ``low`` and ``high``
    (the probabilistically symmetric coverage interval for probability ``coverage``) map each
    output name to an array of its event shape. ``covariance`` is the sample covariance over the
    flat outputs (``index``, ``output_names`` as in :class:`LinearResult`). ``draws`` is the number
    of model evaluations used; ``converged`` is None without the adaptive procedure, otherwise
    whether it met its stopping rule within ``max_draws``.
    """

    values: dict[str, np.ndarray]
    u: dict[str, np.ndarray]
    low: dict[str, np.ndarray]
    high: dict[str, np.ndarray]
    coverage: float
    covariance: np.ndarray
    index: dict[str, slice]
    output_names: tuple[str, ...]
    draws: int
    converged: bool | None = None

    def correlation(self, a: str, b: str) -> float:
        """Sample correlation coefficient of two scalar outputs (or elements, ``"Cp[3]"``)."""
        shapes = {n: np.shape(v) for n, v in self.values.items()}
        layout = _Layout(shapes, self.index, self.output_names)
        i, j = layout.flat_index(a), layout.flat_index(b)
        C = self.covariance
        return float(C[i, j] / math.sqrt(C[i, i] * C[j, j]))


def _numerical_tolerance(u: np.ndarray, ndig: int) -> np.ndarray:
    """JCGM 101:2008 §7.9.2: write u = c × 10^l with c of ndig digits; δ = ½ × 10^l."""
    with np.errstate(divide="ignore"):
        ell = np.floor(np.log10(u)) - (ndig - 1)
    return 0.5 * 10.0**ell


def propagate_monte_carlo(
    model: Model,
    inputs: Mapping[str, Input],
    *,
    correlation: Mapping[tuple[str, str], float] | None = None,
    draws: int = 20000,
    seed: int = 0,
    batch: int = 5000,
    coverage: float = 0.95,
    adaptive: bool = False,
    ndig: int = 2,
    max_draws: int = 200_000,
) -> MonteCarloResult:
    """Propagate the input distributions through a model by Monte Carlo (GUM Supplement 1).

    Parameters
    ----------
    model, inputs, correlation
        As for :func:`propagate_linear`; each input is assigned a Gaussian N(value, u²), jointly
        normal with the correlations given (Notes).
    draws : int
        Number of draws M; with ``adaptive`` the size of each sequence [-].
    seed : int
        Seed of the numpy random generator, so that a result can be reproduced.
    batch : int
        Draws passed to the model per call; bounds the memory of one evaluation [-].
    coverage : float
        Coverage probability p of the reported interval [-].
    adaptive : bool
        Apply the adaptive procedure of JCGM 101:2008 §7.9 (Notes).
    ndig : int
        Significant decimal digits of u(y) the adaptive procedure must make stable [-].
    max_draws : int
        Ceiling on the draws of the adaptive procedure [-].

    Returns
    -------
    MonteCarloResult

    Notes
    -----
    Only Gaussian input distributions are drawn: the inputs' joint distribution is the
    multivariate normal N(x, D R Dᵀ) (JCGM 101:2008 §6.4.8), sampled as ``x + D L z`` with
    ``L Lᵀ = R`` (Cholesky, or the symmetric square root for a singular R) and ``z`` standard
    normal. Inputs with ``u = 0`` are held at their value. The estimate is the mean of the model
    values, the standard uncertainty their standard deviation (§7.6), the coverage interval the
    probabilistically symmetric one between the (1 − p)/2 and (1 + p)/2 quantiles (§7.7).

    The adaptive procedure (§7.9.4) runs sequences of ``M = max(draws, ⌈100/(1 − p)⌉)`` draws
    until, for every scalar output with finite non-zero u, twice the standard deviation of the
    sequence means, standard uncertainties and both interval ends is below the numerical
    tolerance δ = ½ × 10^l of u(y) written with ``ndig`` significant digits (§7.9.2); all draws are
    then pooled. The draws of every output are held in memory for the quantiles: 8 bytes × draws ×
    flat outputs.

    References
    ----------
    .. [1] JCGM 101:2008, Evaluation of measurement data — Supplement 1 to the GUM: propagation of
       distributions using a Monte Carlo method, §6.4.8, §7.6–7.9.

    Examples
    --------
    >>> res = propagate_monte_carlo(
    ...     lambda x: {"y": x["a"] + x["b"]},
    ...     {"a": Input(1.0, 0.3), "b": Input(2.0, 0.4)},
    ...     draws=40000,
    ... )
    >>> round(float(res.u["y"]), 1)  # sqrt(0.3**2 + 0.4**2) = 0.5
    0.5
    """
    if not 0.0 < coverage < 1.0:
        raise ValueError(f"coverage must lie in (0, 1); got {coverage}")
    if draws < 2 or batch < 1:
        raise ValueError(f"need draws >= 2 and batch >= 1; got draws={draws}, batch={batch}")
    layout, x0, u = _input_layout(inputs)
    R = _correlation_matrix(layout, correlation)
    active = np.flatnonzero(u > 0)
    L = u[active, None] * _square_root(R[np.ix_(active, active)])
    rng = np.random.default_rng(seed)
    out: _Layout | None = None

    def sequence(size: int) -> np.ndarray:
        nonlocal out
        parts = []
        for start in range(0, size, batch):
            b = min(batch, size - start)
            X = np.tile(x0, (b, 1))
            X[:, active] += rng.standard_normal((b, active.size)) @ L.T
            out, Y = _evaluate(model, layout, X, out)
            parts.append(Y)
        return np.concatenate(parts)

    tail = (1.0 - coverage) / 2.0

    def summary(Y: np.ndarray) -> np.ndarray:
        return np.stack(
            [
                Y.mean(axis=0),
                Y.std(axis=0, ddof=1),
                np.quantile(Y, tail, axis=0),
                np.quantile(Y, 1.0 - tail, axis=0),
            ]
        )

    converged: bool | None = None
    if adaptive:
        M = max(draws, math.ceil(100.0 / (1.0 - coverage)))
        sequences = [sequence(M)]
        stats = [summary(sequences[0])]
        converged = False
        while (len(sequences) + 1) * M <= max_draws:
            sequences.append(sequence(M))
            stats.append(summary(sequences[-1]))
            h = len(stats)
            s = np.std(np.stack(stats), axis=0, ddof=1) / math.sqrt(h)
            u_all = np.concatenate(sequences).std(axis=0, ddof=1)
            judged = np.isfinite(u_all) & (u_all > 0)
            delta = _numerical_tolerance(u_all[judged], ndig)
            if np.all(2.0 * s[:, judged] <= delta):
                converged = True
                break
        Y = np.concatenate(sequences)
    else:
        Y = sequence(draws)

    mean, std, low, high = summary(Y)
    cov = np.atleast_2d(np.cov(Y, rowvar=False))
    return MonteCarloResult(
        values=_as_event(out, mean),
        u=_as_event(out, std),
        low=_as_event(out, low),
        high=_as_event(out, high),
        coverage=coverage,
        covariance=cov,
        index=out.index,
        output_names=out.labels,
        draws=Y.shape[0],
        converged=converged,
    )


def compare_linear_mc(
    lin: LinearResult, mc: MonteCarloResult, *, rtol: float = 0.1
) -> pd.DataFrame:
    """Compare linear and Monte Carlo standard uncertainties, one row per flat output.

    Parameters
    ----------
    lin : LinearResult
    mc : MonteCarloResult
    rtol : float
        Largest accepted relative difference |u_mc/u_lin − 1| [-].

    Returns
    -------
    pandas.DataFrame
        Columns ``output, value_lin, value_mc, u_lin, u_mc, ratio, agree`` with
        ``ratio = u_mc / u_lin`` (1 when both are zero) and ``agree = |ratio − 1| ≤ rtol``.

    Notes
    -----
    JCGM 101:2008 §8 validates the linear method by comparing coverage-interval end points with a
    numerical tolerance; comparing standard uncertainties with a relative tolerance is the
    simpler screening used here: a ratio far from 1 says the model is not linear enough over
    the inputs' uncertainties for the first-order result to be trusted.

    References
    ----------
    .. [1] JCGM 101:2008, Supplement 1 to the GUM, §8 (comparison with the GUM uncertainty
       framework).
    """
    u_lin = np.sqrt(np.clip(np.diag(lin.covariance), 0.0, None))
    u_mc = np.sqrt(np.clip(np.diag(mc.covariance), 0.0, None))
    v_lin = np.concatenate([np.ravel(lin.values[n]) for n in lin.index])
    v_mc = np.concatenate([np.ravel(mc.values[n]) for n in mc.index])
    rows = []
    mc_pos = {label: i for i, label in enumerate(mc.output_names)}
    for i, label in enumerate(lin.output_names):
        if label not in mc_pos:
            continue
        j = mc_pos[label]
        if u_lin[i] == 0 and u_mc[j] == 0:
            ratio = 1.0
        else:
            with np.errstate(divide="ignore", invalid="ignore"):
                ratio = float(u_mc[j] / u_lin[i])
        rows.append(
            {
                "output": label,
                "value_lin": v_lin[i],
                "value_mc": v_mc[j],
                "u_lin": u_lin[i],
                "u_mc": u_mc[j],
                "ratio": ratio,
                "agree": bool(abs(ratio - 1.0) <= rtol),
            }
        )
    return pd.DataFrame(
        rows, columns=["output", "value_lin", "value_mc", "u_lin", "u_mc", "ratio", "agree"]
    )
