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
    from valuation.engine.change import AnalysisOfChange
    from valuation.experience.result import ExperienceResult
    from valuation.experience.summary import TableLine
    from valuation.movements.classify import MovementsResult

TEMPLATES = Path(__file__).with_name("templates")


def _environment() -> jinja2.Environment:
    env = jinja2.Environment(loader=jinja2.FileSystemLoader(TEMPLATES), autoescape=True,
                             undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    env.filters.update(money=fmt.money, rate=fmt.rate, percent=fmt.percent, signed=fmt.signed_percent,
                       years=fmt.years, number=fmt.number, ratio=fmt.ratio)
    return env


def _payments_words(cf: pl.DataFrame, code: str | None) -> str:
    if cf.height == 0 or "total" not in cf.columns:
        return "No payments are expected."
    total = cf["total"].to_numpy()
    peak = int(total.argmax())
    first10 = float(total[:10].sum())
    return (f"Payments are expected to be highest in year {int(cf['year'][peak])}, at about "
            f"{fmt.about_money(total[peak], code)}, and to run for {cf.height} years in all; about "
            f"{fmt.about_money(first10, code)} is expected to be paid in the first ten years.")


#: The life-expectancy table's rows: (basis, age now) -> words.
_LIFE_ROWS = {("cohort", 65): "Aged 65 now (cohort)", ("cohort", 45): "Aged 45 now, from age 65 (cohort)",
              ("period", 65): "Aged 65, on this year's rates (period)"}


def _life_table(le: pl.DataFrame) -> dict[str, Any]:
    """Life expectancies as a table of (who) x (sex): one row a basis and age now, one column a sex."""
    sexes = [s for s in ("M", "F") if le.height and s in le["sex"].to_list()]
    rows: dict[tuple[str, int, int], dict[str, float]] = {}
    for r in le.iter_rows(named=True):
        rows.setdefault((str(r["basis"]), int(r["age_now"]), int(r["at_age"])), {})[r["sex"]] = r["years"]
    out = []
    for (basis, age_now, at_age), by_sex in rows.items():
        who = _LIFE_ROWS.get((basis, age_now)) if at_age == 65 else None
        if who is None:
            who = (f"Aged {age_now} now, from age {at_age} (cohort)" if basis == "cohort"
                   else f"Aged {at_age}, on this year's rates (period)")
        out.append({"who": who, "years": [by_sex.get(s) for s in sexes]})
    return {"sexes": [content.SEX_LABELS.get(s, s) for s in sexes], "rows": out}


def _experience(experience: ExperienceResult | None, code: str | None) -> dict[str, Any] | None:
    if experience is None:
        return None
    bands = content.ae_by_age(experience)
    overall = experience.table.filter(pl.col("dimension") == "overall")
    settings = experience.settings
    implied = experience.implied
    lines: list[TableLine] = [*implied.get("by_table", []), *([o] if (o := implied.get("overall")) else [])]
    charted = content.chart_bands(bands)
    return {
        "overall": overall.row(0, named=True) if overall.height else None,
        "bands": bands.to_dicts(),
        "chart": Markup(charts.ae_by_age(bands)) if charted.height else None,
        "past_axis": charts.ae_axis(bands)[1] if charted.height else False,
        "min_expected": content.MIN_EXPECTED,
        "implied": implied,
        "notes": content.implied_notes(implied),
        "amounts_unit": f" (pensions in {code} a year)" if code else "",
        "by_table": [{**t, "group_label": content.table_members(t), "sex_label": content.SEX_LABELS.get(t["sex"], "All")}
                     for t in lines],
        "period": f"{settings.period_start.isoformat()} to {settings.period_end.isoformat()}",
        "confidence": settings.confidence,
    }


def build_context(result: ValuationResult, experience: ExperienceResult | None = None,
                  movements: MovementsResult | None = None, analysis: AnalysisOfChange | None = None) -> dict[str, Any]:
    """Everything the template shows, as plain values (text is escaped by the template)."""
    s = result.summary
    code = fmt.currency_of(s)
    by_status = content.status_rows(s)
    total = s.liability.total or 1.0
    for row in by_status:
        row["share"] = 100.0 * float(row["liability"]) / total
    reasons = content.exception_reasons(result.exceptions)
    return {
        "s": s,
        "currency_words": f"Amounts in {code}" if code else "The basis names no currency",
        "unit_words": f", {code}" if code else "",
        "money_head": lambda label, per_year=False: fmt.money_label(label, code, per_year),
        "headlines": content.headlines(s),
        "by_status": by_status,
        "group_chart": Markup(charts.liability_by_group({k: v for k, v in s.liability.by_status.items()}, code)),
        "payments_chart": Markup(charts.payments_profile(result.cashflows, code)),
        "payments_words": _payments_words(result.cashflows, code),
        "assumptions": content.assumption_lines(s),
        "sensitivities": result.sensitivities.to_dicts(),
        "life": _life_table(result.life_expectancy),
        "experience": _experience(experience, code),
        "movements": content.movements_words(movements) if movements is not None else None,
        "change": None if analysis is None else {
            "rows": content.change_rows(analysis), "words": content.change_words(analysis, code),
            "chart": Markup(charts.change_waterfall(content.change_rows(analysis), code))},
        "reasons": reasons.head(content.TOP_REASONS).to_dicts(),
        "more_reasons": max(0, reasons.height - content.TOP_REASONS),
        "data_notice": content.data_notice(s),
        "tool_version": s.manifest.tool_version,
        "generated": s.manifest.started_at or datetime.now(timezone.utc).isoformat(timespec="seconds"),
    }


def render_html(result: ValuationResult, experience: ExperienceResult | None = None,
                movements: MovementsResult | None = None, analysis: AnalysisOfChange | None = None) -> str:
    """The summary page as text."""
    env = _environment()
    code = fmt.currency_of(result.summary)
    env.filters["about"] = lambda value: fmt.about_money(value, code)
    return env.get_template("summary.html.j2").render(**build_context(result, experience, movements, analysis))


def write_html(result: ValuationResult, path: Path, experience: ExperienceResult | None = None,
               movements: MovementsResult | None = None, analysis: AnalysisOfChange | None = None) -> Path:
    """Write the trustees' HTML summary to ``path`` and return the path.

    Parameters
    ----------
    result
        The valuation run's results.
    path
        Target .html file; its folder is created when missing.
    experience
        An experience analysis to include (optional).
    movements
        The membership movements over the experience period, said in one sentence (optional).
    analysis
        The analysis of change from the previous valuation: a chart, a table and two sentences (optional).

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(render_html(result, experience, movements, analysis), encoding="utf-8")
    return path
