"""The one adapter that lets a numpy formula take scalars, ndarrays, pandas Series and DataArrays.

A formula is written once, on plain ndarrays, and wrapped with :func:`arraylike`. The wrapper turns
every Series and DataArray argument into an ndarray (DataArrays are first aligned exactly and
broadcast against each other, so two columns of one stream combine sample by sample), calls the
formula, and gives the result back in the kind of the richest input:

- any DataArray in: a DataArray with that input's dims and coordinates;
- else any Series in: a Series with that input's index;
- else all inputs scalar: a Python float;
- else: an ndarray.

A result whose shape differs from the template's (say, a Series broadcast against a batch of Monte
Carlo draws) cannot carry the template's labels and comes back as an ndarray.

The type hints of the formulas name these kinds once, here: :data:`ArrayLike` for what a formula
takes and gives back, :data:`Values` for the unlabelled part of it (a float, or an ndarray over a
batch of draws), which is what a correction carries between its steps.
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from typing import Any, ParamSpec, TypeAlias, TypeVar

import numpy as np
import pandas as pd
import xarray as xr

__all__ = ["ArrayLike", "Values", "arraylike", "as_array", "like"]

#: An unlabelled value: a float, or an ndarray over samples or a batch of Monte Carlo draws.
Values: TypeAlias = float | np.ndarray

#: The four kinds an :func:`arraylike` formula takes and gives back, the result in the kind of its
#: richest input. (Not numpy.typing.ArrayLike, which is anything numpy can turn into an array.)
ArrayLike: TypeAlias = Values | pd.Series | xr.DataArray

_P = ParamSpec("_P")
_R = TypeVar("_R")


def as_array(x: Any) -> np.ndarray:
    """The values of a scalar, sequence, ndarray, Series or DataArray as a float ndarray.

    Examples
    --------
    >>> as_array(pd.Series([1, 2])).tolist()
    [1.0, 2.0]
    """
    if isinstance(x, xr.DataArray | pd.Series):
        x = x.to_numpy()
    return np.asarray(x, dtype=float)


def like(template: Any, values: Any) -> Any:
    """``values`` in the kind of ``template`` (see the module notes for the rules).

    Examples
    --------
    >>> like(2.0, np.array(3.0))
    3.0
    >>> like(pd.Series([1.0, 2.0], index=[10, 20]), np.array([5.0, 6.0])).index.tolist()
    [10, 20]
    """
    values = np.asarray(values)
    if isinstance(template, xr.DataArray) and values.shape == template.shape:
        return xr.DataArray(values, coords=template.coords, dims=template.dims)
    if isinstance(template, pd.Series) and values.shape == template.shape:
        return pd.Series(values, index=template.index)
    if values.ndim == 0 and np.ndim(template) == 0:
        return values.item()
    return values


def _template(args: list[Any]) -> Any:
    for kind in (xr.DataArray, pd.Series):
        for a in args:
            if isinstance(a, kind):
                return a
    if all(np.ndim(a) == 0 for a in args):
        return 0.0
    return np.empty(0)


def _is_numeric(x: Any) -> bool:
    if isinstance(x, xr.DataArray | pd.Series | np.ndarray | list | tuple):
        return True
    return isinstance(x, int | float | np.number) and not isinstance(x, bool)


def arraylike(func: Callable[_P, _R]) -> Callable[_P, _R]:
    """Decorate a formula written on ndarrays so it accepts and returns the four input kinds.

    Every numeric argument (positional or keyword) takes part; strings, None and other objects pass
    through untouched. A tuple result is restored element by element.

    Examples
    --------
    >>> @arraylike
    ... def double(x):
    ...     return 2 * x
    >>> double(1.5)
    3.0
    >>> double(xr.DataArray([1.0, 2.0], dims="time")).dims
    ('time',)
    """

    # The formula is called on plain ndarrays, one of the kinds its parameters take.
    formula: Callable[..., Any] = func

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        numeric = [a for a in (*args, *kwargs.values()) if _is_numeric(a)]
        arrays = [a for a in numeric if isinstance(a, xr.DataArray)]
        if len(arrays) > 1:
            aligned = xr.broadcast(*xr.align(*arrays, join="exact"))
            dims = aligned[0].dims
            swap = {id(a): b.transpose(*dims) for a, b in zip(arrays, aligned, strict=True)}
            args = tuple(swap.get(id(a), a) for a in args)
            kwargs = {k: swap.get(id(v), v) for k, v in kwargs.items()}
            numeric = [swap.get(id(a), a) for a in numeric]
        template = _template(numeric)
        plain_args = [as_array(a) if _is_numeric(a) else a for a in args]
        plain_kwargs = {k: as_array(v) if _is_numeric(v) else v for k, v in kwargs.items()}
        result = formula(*plain_args, **plain_kwargs)
        if isinstance(result, tuple):
            return tuple(like(template, r) for r in result)
        return like(template, result)

    return wrapper
