"""The trustees' summary: one self-contained HTML file (inline CSS and SVG, no external links).

Rendered with jinja2 with autoescaping on: every value from the member data or the basis is escaped.
Only the charts are marked safe, and they are drawn by :mod:`valuation.reports.charts` from numbers and
our own labels.
"""

from __future__ import annotations

from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING, Any

import jinja2
import polars as pl
from markupsafe import Markup

from valuation.engine.results import ValuationResult
from valuation.reports import charts, content
from valuation.reports import format as fmt

if TYPE_CHECKING:
    from valuation.experience.result import ExperienceResult

TEMPLATES = Path(__file__).with_name("templates")
_PERSON = {"M": "A man", "F": "A woman"}


def _environment() -> jinja2.Environment:
    env = jinja2.Environment(loader=jinja2.FileSystemLoader(TEMPLATES), autoescape=True,
                             undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    env.filters.update(money=fmt.money, rate=fmt.rate, percent=fmt.percent, signed=fmt.signed_percent,
                       years=fmt.years, number=fmt.number, ratio=fmt.ratio)
    return env


def _payments_words(cf: pl.DataFrame) -> str:
    if cf.height == 0 or "total" not in cf.columns:
        return "No payments are expected."
    total = cf["total"].to_numpy()
    peak = int(total.argmax())
    first10 = float(total[:10].sum())
    return (f"Payments are expected to be highest in year {int(cf['year'][peak])}, at about "
            f"{fmt.money(total[peak])}, and to run for {cf.height} years in all; "
            f"{fmt.money(first10)} is expected to be paid in the first ten years.")


def _life_rows(le: pl.DataFrame) -> list[dict[str, Any]]:
    rows = []
    for r in le.iter_rows(named=True):
        who = _PERSON.get(r["sex"], str(r["sex"]))
        if r.get("basis") == "period":
            what = f"{who} aged {r['at_age']}, on this year's rates (period)"
        else:
            what = f"{who} aged {r['age_now']} today, from age {r['at_age']} (cohort)"
        rows.append({"who": what, "years": r["years"]})
    return rows


def _experience(experience: ExperienceResult | None) -> dict[str, Any] | None:
    if experience is None:
        return None
    bands = content.ae_by_age(experience)
    overall = experience.table.filter(pl.col("dimension") == "overall")
    settings = experience.settings
    implied = experience.implied or {}
    return {
        "overall": overall.row(0, named=True) if overall.height else None,
        "bands": bands.to_dicts(),
        "chart": Markup(charts.ae_by_age(bands)) if content.chart_bands(bands).height else None,
        "min_expected": content.MIN_EXPECTED,
        "implied": implied,
        "notes": content.implied_notes(implied),
        "by_table": [t | {"group_label": content.table_members(t),
                          "sex_label": content.SEX_LABELS.get(t["sex"], "All")}
                     for t in [*(implied.get("by_table") or []),
                               *([implied["overall"]] if implied.get("overall") else [])]],
        "period": f"{settings.period_start.isoformat()} to {settings.period_end.isoformat()}",
        "confidence": settings.confidence,
    }


def build_context(result: ValuationResult, experience: ExperienceResult | None = None) -> dict[str, Any]:
    """Everything the template shows, as plain values (text is escaped by the template)."""
    s = result.summary
    by_status = content.status_rows(s)
    total = float(s["liability"]["total"]) or 1.0
    for row in by_status:
        row["share"] = 100.0 * float(row["liability"]) / total
    manifest = s.get("manifest") or {}
    reasons = content.exception_reasons(result.exceptions)
    return {
        "s": s,
        "headlines": content.headlines(s),
        "by_status": by_status,
        "group_chart": Markup(charts.liability_by_group(s["liability"]["by_status"])),
        "payments_chart": Markup(charts.payments_profile(result.cashflows)),
        "payments_words": _payments_words(result.cashflows),
        "assumptions": content.assumption_lines(s),
        "sensitivities": result.sensitivities.to_dicts(),
        "life": _life_rows(result.life_expectancy),
        "experience": _experience(experience),
        "reasons": reasons.head(content.TOP_REASONS).to_dicts(),
        "more_reasons": max(0, reasons.height - content.TOP_REASONS),
        "data_notice": content.data_notice(s),
        "tool_version": manifest.get("tool_version", ""),
        "generated": manifest.get("started_at") or datetime.now(timezone.utc).isoformat(timespec="seconds"),
    }


def render_html(result: ValuationResult, experience: ExperienceResult | None = None) -> str:
    """The summary page as text."""
    return _environment().get_template("summary.html.j2").render(**build_context(result, experience))


def write_html(result: ValuationResult, path: Path, experience: ExperienceResult | None = None) -> Path:
    """Write the trustees' HTML summary to ``path`` and return the path.

    Parameters
    ----------
    result
        The valuation run's results.
    path
        Target .html file; its folder is created when missing.
    experience
        An experience analysis to include (optional).

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(render_html(result, experience), encoding="utf-8")
    return path
