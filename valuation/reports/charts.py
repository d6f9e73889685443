"""Inline SVG charts for the HTML summary, drawn with matplotlib (Agg backend).

Charts are drawn from numbers and from our own labels only (status names, years, age bands rebuilt
from their numbers), never from text in the member data or the basis, so the SVG can be placed in the
page as it is. Text stays text in the SVG (``svg.fonttype = "none"``) so it is searchable and small.
"""

from __future__ import annotations

import io
import re
from typing import TYPE_CHECKING, Any

import numpy as np
import polars as pl
from matplotlib import rc_context
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, MaxNLocator

if TYPE_CHECKING:
    from matplotlib.typing import RcKeyType

from valuation.engine.results import STATUSES
from valuation.reports.content import AE_AXIS_MAX, STATUS_LABELS, chart_bands

#: Colours, one a status, in reporting order; then the accent and the grid colour.
PALETTE: dict[str, str] = {
    "pensioner": "#2f5d62", "dependant": "#8e7dbe", "deferred": "#c9a66b", "active": "#5e8b7e",
}
ACCENT = "#b5543c"
GRID = "#d9dfdc"
INK = "#2b2b2b"

_RC: dict[RcKeyType, Any] = {
    "svg.fonttype": "none", "svg.hashsalt": "valuation-report", "font.family": "sans-serif",
    "font.size": 10, "axes.edgecolor": GRID, "axes.labelcolor": INK, "xtick.color": INK, "ytick.color": INK,
    "axes.spines.top": False, "axes.spines.right": False,
}
_BAND = re.compile(r"^\s*(\d{1,3})\s*-\s*(\d{1,3})\s*$")


def _thousands(x: float, _pos: int) -> str:
    return f"{x / 1e6:,.1f}m" if abs(x) >= 1e6 else f"{x:,.0f}"


def to_svg(fig: Figure, prefix: str) -> str:
    """The figure as an inline ``<svg>`` element: no XML prolog or metadata, width set by CSS, and every
    id prefixed with ``prefix`` so several charts can share one page."""
    buf = io.StringIO()
    fig.savefig(buf, format="svg", bbox_inches="tight", metadata={"Date": None, "Creator": None})
    svg = buf.getvalue()
    svg = svg[svg.index("<svg"):]
    svg = re.sub(r"<metadata>.*?</metadata>", "", svg, flags=re.S)
    svg = re.sub(r'\bid="', f'id="{prefix}-', svg)
    svg = re.sub(r'(url\(#|href="#)', rf"\g<1>{prefix}-", svg)
    return re.sub(r'(<svg[^>]*?) width="[^"]*" height="[^"]*"', r'\1 class="chart" role="img"', svg, count=1)


def liability_by_group(by_status: dict[str, float]) -> str:
    """Horizontal bars of the liability [currency] of each member group."""
    keys = [s for s in STATUSES if by_status.get(s)]
    values = np.array([float(by_status[s]) for s in keys])
    with rc_context(_RC):
        fig = Figure(figsize=(7.0, 0.55 * max(len(keys), 1) + 1.0))
        ax = fig.subplots()
        ax.barh([STATUS_LABELS[s] for s in keys], values, color=[PALETTE[s] for s in keys])
        ax.invert_yaxis()
        ax.xaxis.set_major_formatter(FuncFormatter(_thousands))
        ax.set_xlabel("Liability [currency]")
        ax.grid(axis="x", color=GRID, linewidth=0.8)
        ax.set_axisbelow(True)
        return to_svg(fig, "by-group")


def payments_profile(cashflows: pl.DataFrame) -> str:
    """Stacked columns of the expected payments [currency] by year, one colour a member group."""
    years = cashflows["year"].to_numpy() if cashflows.height else np.array([1])
    with rc_context(_RC):
        fig = Figure(figsize=(8.0, 3.4))
        ax = fig.subplots()
        bottom = np.zeros(len(years))
        for s in STATUSES:
            if s not in cashflows.columns or not cashflows.height:
                continue
            v = cashflows[s].fill_null(0.0).to_numpy().astype(float)
            if not v.any():
                continue
            ax.bar(years, v, bottom=bottom, width=0.85, color=PALETTE[s], label=STATUS_LABELS[s])
            bottom += v
        ax.yaxis.set_major_formatter(FuncFormatter(_thousands))
        ax.set_xlabel("Year after the valuation date")
        ax.set_ylabel("Expected payments [currency]")
        ax.grid(axis="y", color=GRID, linewidth=0.8)
        ax.set_axisbelow(True)
        if ax.get_legend_handles_labels()[0]:
            ax.legend(frameon=False, ncol=4, loc="lower left", bbox_to_anchor=(0.0, 1.0))
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
        return to_svg(fig, "payments")


def band_labels(groups: list[str]) -> list[str]:
    """Age-band labels rebuilt from their numbers (``"60-64"``); anything else becomes ``band n``."""
    out = []
    for i, g in enumerate(groups, start=1):
        m = _BAND.match(str(g))
        out.append(f"{int(m.group(1))}-{int(m.group(2))}" if m else f"band {i}")
    return out


def ae_by_age(bands: pl.DataFrame) -> str:
    """A/E by lives for each age band with its interval as an error bar, against the 100 % line.

    Only bands from :func:`chart_bands` are drawn; the axis stops at :data:`AE_AXIS_MAX` [%].
    """
    bands = chart_bands(bands)
    labels = band_labels(bands["group"].to_list())
    ae = bands["ae_lives"].fill_null(float("nan")).to_numpy().astype(float)
    lo = bands["ae_lives_lower"].fill_null(float("nan")).to_numpy().astype(float)
    hi = bands["ae_lives_upper"].fill_null(float("nan")).to_numpy().astype(float)
    x = np.arange(len(labels))
    with rc_context(_RC):
        fig = Figure(figsize=(8.0, 3.4))
        ax = fig.subplots()
        ax.axhline(100.0, color=ACCENT, linewidth=1.2, linestyle="--", label="Expected (100%)")
        err = np.vstack([np.clip(ae - lo, 0, None), np.clip(hi - ae, 0, None)]) * 100.0
        ax.errorbar(x, ae * 100.0, yerr=err, fmt="o", color=PALETTE["pensioner"], ecolor="#7a9a95",
                    elinewidth=2, capsize=4, label="Actual / expected (lives), with interval")
        ax.set_xticks(x, labels)
        ax.set_xlim(-0.6, len(labels) - 0.4)
        ax.set_xlabel("Age band [years]")
        ax.set_ylabel("A/E [%]")
        ax.grid(axis="y", color=GRID, linewidth=0.8)
        ax.set_axisbelow(True)
        top = np.nanmax(np.append(hi[np.isfinite(hi)] * 100.0, 120.0))
        ax.set_ylim(0.0, min(top * 1.05, AE_AXIS_MAX))
        ax.legend(frameon=False, ncol=2, loc="lower left", bbox_to_anchor=(0.0, 1.0))
        return to_svg(fig, "ae-age")
