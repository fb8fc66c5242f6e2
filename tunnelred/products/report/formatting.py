"""How the report prints values: a value with its expanded uncertainty (GUM §7.2.6), plain numbers,
and the blank line left to fill in by hand.
"""

from __future__ import annotations

import math

import numpy as np

from tunnelred.products import plotting

K = plotting.COVERAGE_FACTOR


def format_uncertain(value: float, expanded: float) -> str:
    """A value with its expanded uncertainty, both to the uncertainty's second significant digit.

    Parameters
    ----------
    value : float
        The measured value.
    expanded : float
        Its expanded uncertainty U = k·u (k = 2 in the report); NaN or 0 for none.

    Returns
    -------
    str
        ``"value ± U"``; the value alone with 4 significant digits when U is NaN or 0; ``"–"``
        for a NaN value.

    Notes
    -----
    GUM §7.2.6 asks for an uncertainty of at most two significant digits, and for the value
    rounded to the same decimal place.

    References
    ----------
    .. [1] JCGM 100:2008, *Evaluation of measurement data — Guide to the expression of
       uncertainty in measurement*, §7.2.6.

    Examples
    --------
    >>> format_uncertain(-3.14159, 0.0432)
    '-3.142 ± 0.043'
    >>> format_uncertain(1234.5, 17.0)
    '1234 ± 17'
    """
    if value is None or not np.isfinite(value):
        return "–"
    if expanded is None or not np.isfinite(expanded) or expanded <= 0:
        return number_text(value)
    decimals = max(1 - math.floor(math.log10(abs(expanded))), 0)
    shown = f"{value:.{decimals}f}"
    if float(shown) == 0:
        # A value that rounds to zero is shown without the sign of its unrounded part.
        shown = f"{0.0:.{decimals}f}"
    return f"{shown} ± {expanded:.{decimals}f}"


def number_text(value, digits: int = 4) -> str:
    """A plain number to ``digits`` significant digits ("–" for NaN)."""
    if value is None or (isinstance(value, float) and not np.isfinite(value)):
        return "–"
    value = float(value)
    if value == 0:
        return "0"
    exponent = math.floor(math.log10(abs(value)))
    if exponent >= digits or exponent < -3:
        return f"{value:.{digits - 1}e}"
    return f"{value:.{max(digits - 1 - exponent, 0)}f}"


def fixed(value, decimals: int) -> str:
    return "–" if value is None or not np.isfinite(value) else f"{value:.{decimals}f}"


BLANK = "_" * 28  # a line to fill in by hand, where campaign.toml states nothing


def or_blank(text: str) -> str:
    return text if text else BLANK


RPM = 60.0 / (2.0 * math.pi)  # rpm per rad/s
