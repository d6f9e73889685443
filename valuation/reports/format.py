"""Number formatting shared by the reports: one place decides how a figure reads, so the HTML summary,
the workbook labels and the tests agree.

Money is [currency] with no symbol (the basis does not name a currency); rates are annual effective
decimals shown as percentages; durations and expectancies are [years].
"""

from __future__ import annotations

import math
from typing import Any

#: Shown where a figure is missing or undefined (None, NaN, inf).
MISSING = "n/a"


def _finite(value: Any) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    try:
        x = float(value)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def money(value: Any) -> str:
    """Whole currency units with thousands separators: 12345678.4 -> ``12,345,678``."""
    x = _finite(value)
    return MISSING if x is None else f"{x:,.0f}"


def millions(value: Any) -> str:
    """Currency in millions to one decimal: 12345678 -> ``12.3 million``."""
    x = _finite(value)
    return MISSING if x is None else f"{x / 1e6:,.1f} million"


def rate(value: Any, places: int = 2) -> str:
    """An annual rate given as a decimal, as a percentage: 0.048 -> ``4.80%``."""
    x = _finite(value)
    return MISSING if x is None else f"{100.0 * x:.{places}f}%"


def percent(value: Any, places: int = 1) -> str:
    """A figure already in percent: -7.46 -> ``-7.5%``."""
    x = _finite(value)
    return MISSING if x is None else f"{x:.{places}f}%"


def signed_percent(value: Any, places: int = 1) -> str:
    """A change already in percent with its sign: 7.46 -> ``+7.5%``."""
    x = _finite(value)
    return MISSING if x is None else f"{x:+.{places}f}%"


def years(value: Any, places: int = 1) -> str:
    """A period in years: 21.345 -> ``21.3 years``."""
    x = _finite(value)
    return MISSING if x is None else f"{x:.{places}f} years"


def number(value: Any, places: int = 0) -> str:
    """A plain count or number with thousands separators."""
    x = _finite(value)
    return MISSING if x is None else f"{x:,.{places}f}"


def ratio(value: Any, places: int = 0) -> str:
    """A ratio given as a decimal (1 = 100 %), as a percentage: 0.934 -> ``93%``."""
    return rate(value, places)
