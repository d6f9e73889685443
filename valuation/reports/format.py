"""Number formatting shared by the reports and the command line: one place decides how a figure reads, so
the HTML summary, the workbook, the command line's headline and the tests agree.

Money is in the basis's currency, named by its ISO 4217 code (``currency = "GBP"`` in the basis) and never
by a symbol: a code reads the same in every locale and font. A basis without ``currency`` gives amounts
with no currency named. Rates are annual effective decimals shown as percentages; durations and
expectancies are [years].

For the command line's headline: ``format_money(summary.liability.total, currency_of(summary))``
gives ``GBP 358,032,135`` (or ``358,032,135`` when the basis names no currency).
"""

from __future__ import annotations

import math
from typing import Any

from valuation.engine.summary import RunSummary

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


def currency_of(summary: RunSummary) -> str | None:
    """The ISO 4217 code of a run's amounts (the basis's ``currency``), or None when the basis names none."""
    return summary.currency


def money_unit(code: str | None, per_year: bool = False) -> str:
    """The unit of an amount: ``GBP``, ``GBP p.a.``; without a currency ``""`` or ``p.a.``."""
    return " ".join(part for part in (code or "", "p.a." if per_year else "") if part)


def money_label(label: str, code: str | None, per_year: bool = False) -> str:
    """A label with its money unit in brackets: ``Total liability [GBP]``, ``Pension [GBP p.a.]``;
    without a currency the label alone (``Pension [p.a.]`` for a yearly amount)."""
    unit = money_unit(code, per_year)
    return f"{label} [{unit}]" if unit else label


def format_money(value: Any, code: str | None = None) -> str:
    """An amount in whole units with its currency code: ``GBP 358,032,135``; ``358,032,135`` without one."""
    text = money(value)
    return f"{code} {text}" if code and text != MISSING else text


def about_money(value: Any, code: str | None = None) -> str:
    """An amount rounded as a person would say it, to three significant figures: ``GBP 24.6m``,
    ``GBP 358m``, ``GBP 1.25bn``, ``GBP 905,000``; whole units below 1,000; no trailing zeros after the
    point (``GBP 10m``, not ``GBP 10.0m``)."""
    x = _finite(value)
    if x is None:
        return MISSING
    sign, x = ("-" if x < 0 else ""), abs(x)
    text = f"{x:,.0f}"
    if x >= 1000.0:
        digits = math.floor(math.log10(x))
        rounded = round(x, 2 - digits)  # three significant figures
        for scale, suffix in ((1e9, "bn"), (1e6, "m")):
            if rounded >= scale:
                shown = rounded / scale
                text = f"{shown:,.{max(0, 2 - math.floor(math.log10(shown)))}f}"
                text = (text.rstrip("0").rstrip(".") if "." in text else text) + suffix
                break
        else:
            text = f"{rounded:,.0f}"
    text = sign + text
    return f"{code} {text}" if code else text


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
