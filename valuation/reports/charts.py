"""Inline SVG charts for the HTML summary, drawn with matplotlib (Agg backend).

Charts are drawn from numbers and from our own labels only (status names, years, age bands rebuilt
from their numbers, the basis's currency code once checked to be three capital letters), never from other
text in the member data or the basis, so the SVG can be placed in the page as it is. Text stays text in
the SVG (``svg.fonttype = "none"``) so it is searchable and small.

Each chart is an image to assistive technology (``role="img"``) with a text alternative that says what it
shows, figures included: ``aria-label`` and, for browsers and readers that use them, ``<title>`` and
``<desc>`` (WAI-ARIA Graphics Module, role ``graphics-document``/``img``; WCAG 2.1 success criterion 1.1.1
Non-text Content).
"""

from __future__ import annotations

import io
import re
from typing import TYPE_CHECKING, Any

import numpy as np
import polars as pl
from markupsafe import escape
from matplotlib import rc_context
from matplotlib.collections import PolyCollection
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, MaxNLocator

if TYPE_CHECKING:
    from matplotlib.typing import RcKeyType

from valuation.reports import format as fmt
from valuation.reports.content import AE_AXIS_MAX, STATUS_LABELS, chart_bands
from valuation.vocabulary import STATUSES

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
_CODE = re.compile(r"[A-Z]{3}")


def _code(currency: str | None) -> str | None:
    """The currency code if it is one (three capital letters), else None: only such text reaches a chart."""
    return currency if currency and _CODE.fullmatch(currency) else None


def _unit(currency: str | None) -> str:
    return f" [{_code(currency)}]" if _code(currency) else ""


def _thousands(x: float, _pos: int) -> str:
    """Axis ticks: ``25m``, ``2.5m``, ``750,000``."""
    if abs(x) >= 1e6:
        text = f"{x / 1e6:,.1f}"
        return (text[:-2] if text.endswith(".0") else text) + "m"
    return f"{x:,.0f}"


def to_svg(fig: Figure, prefix: str, alt: str = "") -> str:
    """The figure as an inline ``<svg>`` element: no XML prolog or metadata, width set by CSS, every id
    prefixed with ``prefix`` so several charts can share one page, and ``alt`` (what the chart shows, in
    words) as its accessible name and description."""
    buf = io.StringIO()
    fig.savefig(buf, format="svg", bbox_inches="tight", metadata={"Date": None, "Creator": None})
    svg = buf.getvalue()
    svg = svg[svg.index("<svg"):]
    svg = re.sub(r"<metadata>.*?</metadata>", "", svg, flags=re.S)
    svg = re.sub(r'\bid="', f'id="{prefix}-', svg)
    svg = re.sub(r'(url\(#|href="#)', rf"\g<1>{prefix}-", svg)
    words = str(escape(alt))
    opening = (rf'\1 class="chart" role="img" aria-label="{words}" aria-describedby="{prefix}-desc"'
               if alt else r'\1 class="chart" role="img"')
    svg = re.sub(r'(<svg[^>]*?) width="[^"]*" height="[^"]*"', opening, svg, count=1)
    if alt:
        head = svg.index(">", svg.index("<svg")) + 1
        svg = f'{svg[:head]}\n<title>{words}</title><desc id="{prefix}-desc">{words}</desc>{svg[head:]}'
    return svg


def liability_by_group(by_status: dict[str, float], currency: str | None = None) -> str:
    """Horizontal bars of the liability of each member group [currency]."""
    keys = [s for s in STATUSES if by_status.get(s)]
    values = np.array([float(by_status[s]) for s in keys])
    total = float(values.sum()) or 1.0
    code = _code(currency)
    alt = "Bar chart of the liability of each member group: " + "; ".join(
        f"{STATUS_LABELS[s]} {fmt.about_money(v, code)} ({100.0 * v / total:.0f}%)" for s, v in zip(keys, values,
                                                                                                 strict=True)) + "."
    with rc_context(_RC):
        fig = Figure(figsize=(4.8, 0.36 * max(len(keys), 1) + 0.8))
        ax = fig.subplots()
        ax.barh([STATUS_LABELS[s] for s in keys], values, color=[PALETTE[s] for s in keys])
        ax.invert_yaxis()
        ax.xaxis.set_major_locator(MaxNLocator(nbins=5))
        ax.xaxis.set_major_formatter(FuncFormatter(_thousands))
        ax.set_xlabel(f"Liability{_unit(code)}")
        ax.grid(axis="x", color=GRID, linewidth=0.8)
        ax.set_axisbelow(True)
        return to_svg(fig, "by-group", alt if keys else "Bar chart of the liability of each member group: none.")


def _payments_alt(cashflows: pl.DataFrame, code: str | None) -> str:
    if not cashflows.height or "total" not in cashflows.columns:
        return "Column chart of the expected payments in each year after the valuation date: none are expected."
    total = cashflows["total"].fill_null(0.0).to_numpy().astype(float)
    years = cashflows["year"].to_numpy()
    peak = int(total.argmax())
    paying = np.nonzero(total > 0)[0]
    last = int(years[paying[-1]]) if paying.size else int(years[-1])
    groups = [STATUS_LABELS[s].lower() for s in STATUSES
              if s in cashflows.columns and cashflows[s].fill_null(0.0).to_numpy().any()]
    return (f"Column chart of the expected payments in each year after the valuation date, stacked by member "
            f"group ({', '.join(groups)}): about {fmt.about_money(total[0], code)} in year {int(years[0])}, "
            f"rising to a peak of about {fmt.about_money(total[peak], code)} in year {int(years[peak])}, then "
            f"falling to the last payments in year {last}.")


def _columns(x: np.ndarray, bottom: np.ndarray, height: np.ndarray, colour: str, label: str) -> PolyCollection:
    """Columns 0.85 wide at ``x`` from ``bottom`` up by ``height``, drawn as one artist (one ``bar`` call
    makes an artist a column, which is slow for a century of years)."""
    left, right, top = x - 0.425, x + 0.425, bottom + height
    verts = np.stack([np.stack([left, bottom], 1), np.stack([left, top], 1), np.stack([right, top], 1),
                      np.stack([right, bottom], 1)], axis=1)
    return PolyCollection(list(verts), facecolors=colour, edgecolors="none", label=label)


def payments_profile(cashflows: pl.DataFrame, currency: str | None = None) -> str:
    """Stacked columns of the expected payments by year [currency], one colour a member group."""
    years = cashflows["year"].to_numpy() if cashflows.height else np.array([1])
    code = _code(currency)
    with rc_context(_RC):
        fig = Figure(figsize=(8.0, 3.0))
        ax = fig.subplots()
        bottom = np.zeros(len(years))
        for s in STATUSES:
            if s not in cashflows.columns or not cashflows.height:
                continue
            v = cashflows[s].fill_null(0.0).to_numpy().astype(float)
            if not v.any():
                continue
            ax.add_collection(_columns(years, bottom, v, PALETTE[s], STATUS_LABELS[s]))
            bottom += v
        ax.autoscale_view()
        ax.yaxis.set_major_formatter(FuncFormatter(_thousands))
        ax.set_xlabel("Year after the valuation date")
        ax.set_ylabel(f"Expected payments{_unit(code)}")
        ax.grid(axis="y", color=GRID, linewidth=0.8)
        ax.set_axisbelow(True)
        if ax.get_legend_handles_labels()[0]:
            ax.legend(frameon=False, ncol=4, loc="lower left", bbox_to_anchor=(0.0, 1.0))
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
        return to_svg(fig, "payments", _payments_alt(cashflows, code))


def band_labels(groups: list[str]) -> list[str]:
    """Age-band labels rebuilt from their numbers (``"60-64"``); anything else becomes ``band n``."""
    out = []
    for i, g in enumerate(groups, start=1):
        m = _BAND.match(str(g))
        out.append(f"{int(m.group(1))}-{int(m.group(2))}" if m else f"band {i}")
    return out


def ae_axis(bands: pl.DataFrame) -> tuple[float, bool]:
    """The top of the A/E chart's axis [%] (5 % above the highest upper limit, at least 126 %, at most
    :data:`AE_AXIS_MAX`) and whether any charted interval runs past it."""
    bands = chart_bands(bands)
    hi = (bands["ae_lives_upper"].fill_null(float("nan")).to_numpy().astype(float) * 100.0 if bands.height
          else np.array([]))
    hi = hi[np.isfinite(hi)]
    top = float(min(max(float(hi.max()) if hi.size else 0.0, 120.0) * 1.05, AE_AXIS_MAX))
    return top, bool((hi > top).any())


def ae_by_age(bands: pl.DataFrame) -> str:
    """A/E by lives for each age band with its interval as an error bar, against the 100 % line.

    Only bands from :func:`chart_bands` are drawn; the axis stops at :data:`AE_AXIS_MAX` [%] at most. An
    interval (or a ratio) that runs past the top of the axis is not clipped silently: its bar ends in an
    arrow at the top edge, labelled with the interval's upper limit.
    """
    bands = chart_bands(bands)
    labels = band_labels(bands["group"].to_list())
    ae = bands["ae_lives"].fill_null(float("nan")).to_numpy().astype(float) * 100.0
    lo = bands["ae_lives_lower"].fill_null(float("nan")).to_numpy().astype(float) * 100.0
    hi = bands["ae_lives_upper"].fill_null(float("nan")).to_numpy().astype(float) * 100.0
    x = np.arange(len(labels))
    top, _ = ae_axis(bands)
    past = np.isfinite(hi) & (hi > top)
    with rc_context(_RC):
        fig = Figure(figsize=(8.0, 3.0))
        ax = fig.subplots()
        ax.axhline(100.0, color=ACCENT, linewidth=1.2, linestyle="--", label="Expected (100%)")
        shown = np.minimum(ae, top)
        err = np.vstack([np.clip(shown - lo, 0, None), np.clip(np.minimum(hi, top) - shown, 0, None)])
        ax.errorbar(x, shown, yerr=err, fmt="o", color=PALETTE["pensioner"], ecolor="#7a9a95",
                    elinewidth=2, capsize=4, label="Actual / expected (lives), with interval")
        if past.any():
            ax.plot(x[past], np.full(past.sum(), top), linestyle="none", marker="^", markersize=9,
                    color=ACCENT, clip_on=False, zorder=5, label="Interval runs past the top (upper limit shown)")
            for xi, h in zip(x[past], hi[past], strict=True):
                ax.annotate(f"{h:.0f}%", (xi, top), xytext=(7, -4), textcoords="offset points", fontsize=8,
                            color=INK, ha="left", va="top", annotation_clip=False)
        ax.set_xticks(x, labels)
        ax.set_xlim(-0.6, len(labels) - 0.4)
        ax.set_xlabel("Age band [years]")
        ax.set_ylabel("A/E [%]")
        ax.grid(axis="y", color=GRID, linewidth=0.8)
        ax.set_axisbelow(True)
        ax.set_ylim(0.0, top)
        ax.legend(frameon=False, ncol=3, loc="lower left", bbox_to_anchor=(0.0, 1.0), fontsize=8.5)
        return to_svg(fig, "ae-age", _ae_alt(labels, ae, lo, hi, past, top))


def _ae_alt(labels: list[str], ae: np.ndarray, lo: np.ndarray, hi: np.ndarray, past: np.ndarray,
            top: float) -> str:
    def pct(v: float) -> str:
        return f"{v:.0f}%" if np.isfinite(v) else "n/a"

    parts = [f"{g} {pct(a)} ({pct(lo_)} to {pct(h)}{', past the top of the axis' if p else ''})"
             for g, a, lo_, h, p in zip(labels, ae, lo, hi, past, strict=True)]
    return (f"Chart of actual deaths as a percentage of expected deaths (lives) for each age band, with its "
            f"interval, against the expected 100% line; the axis runs to {top:.0f}%. " + "; ".join(parts) + ".")


def change_waterfall(lines: list[tuple[str, float]], currency: str | None = None) -> str:
    """Waterfall of the analysis of change [currency]: the opening and closing liability as columns from
    zero, each item between them as a step up (accent) or down (grid colour) from where the last one ended.
    ``lines`` are (our own label, amount), opening first and closing last."""
    code = _code(currency)
    labels = [label for label, _ in lines]
    amounts = np.array([float(a) for _, a in lines])
    starts = np.zeros(len(lines))
    level = amounts[0]
    for i in range(1, len(lines) - 1):
        starts[i] = level
        level += amounts[i]
    heights = amounts.copy()
    colours = [PALETTE["pensioner"]] + [ACCENT if a >= 0 else "#8a9a94" for a in amounts[1:-1]] + [PALETTE["pensioner"]]
    alt = ("Waterfall chart of the change in the liability: " + "; ".join(
        f"{label} {'' if i in (0, len(lines) - 1) else ('up ' if a >= 0 else 'down ')}"
        f"{fmt.about_money(abs(a) if 0 < i < len(lines) - 1 else a, code)}"
        for i, (label, a) in enumerate(lines)) + ".")
    with rc_context(_RC):
        fig = Figure(figsize=(8.0, 2.8))
        ax = fig.subplots()
        x = np.arange(len(lines))
        ax.bar(x, heights, bottom=starts, color=colours, width=0.7)
        ax.set_xticks(x, labels, rotation=20, ha="right", fontsize=8)
        ax.yaxis.set_major_formatter(FuncFormatter(_thousands))
        ax.set_ylabel(f"Liability{_unit(code)}")
        ax.grid(axis="y", color=GRID, linewidth=0.8)
        ax.set_axisbelow(True)
        fig.subplots_adjust(bottom=0.38)
        return to_svg(fig, "change", alt)
