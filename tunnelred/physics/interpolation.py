"""The error of linear interpolation between measured points, from their local curvature.

One home for the rule that the spin tares (tunnelred.physics.balance) and the comparison grids
(tunnelred.products.compare.grid) both apply: a straight line between two points misses a smooth
curve by ½ f''(ξ) (x − x₁)(x₂ − x), the remainder of linear interpolation (R. L. Burden and
J. D. Faires, *Numerical Analysis*, Theorem 3.3, from memory), with |f''| estimated from the
points' second divided differences.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

__all__ = ["curvature_at_points"]


def curvature_at_points(x: npt.ArrayLike, y: npt.ArrayLike) -> np.ndarray:
    """|y''| at each inner point from the second divided difference; NaN at the two ends.

    Parameters
    ----------
    x : array_like, shape (n,)
        Strictly increasing abscissae.
    y : array_like, shape (n,) or (n, m)
        Values at ``x`` (m curves side by side along the second axis).

    Returns
    -------
    numpy.ndarray, the shape of ``y``
        y'' ≈ 2 y[x₀, x₁, x₂] = 2 ((y₂ − y₁)/h₂ − (y₁ − y₀)/h₁)/(h₁ + h₂) in absolute value
        (Newton's divided differences, exact for a parabola through the three points); NaN at
        the first and last point, and everywhere when fewer than three points are given.

    References
    ----------
    .. [1] R. L. Burden and J. D. Faires, *Numerical Analysis*, §3.1 Theorem 3.3
       (error of polynomial interpolation) and §3.3 (divided differences), from memory.

    Examples
    --------
    >>> curvature_at_points([0.0, 1.0, 3.0], [0.0, 1.0, 9.0]).tolist()  # y = x²: y'' = 2
    [nan, 2.0, nan]
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    kappa = np.full(y.shape, np.nan)
    if x.size >= 3:
        h = np.diff(x)
        h = h.reshape(h.shape + (1,) * (y.ndim - 1))
        slopes = np.diff(y, axis=0) / h
        kappa[1:-1] = np.abs(2.0 * np.diff(slopes, axis=0) / (h[:-1] + h[1:]))
    return kappa
