"""What the reports say, taken from a valuation result: headline figures, assumptions in words, the
basis flattened to key/value rows and the exceptions counted by reason. Shared by the workbook and the
HTML summary so both tell the same story.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

import polars as pl

from valuation.engine.change import AnalysisOfChange
from valuation.engine.summary import Assumptions, JsonValue, RunSummary
from valuation.experience.result import ExperienceResult
from valuation.experience.summary import ImpliedSummary
from valuation.movements.classify import MovementsResult
from valuation.reports import format as fmt
from valuation.vocabulary import STATUSES

#: Plain-words names of the member statuses (the engine's codes are the keys).
STATUS_LABELS: dict[str, str] = {
    "pensioner": "Pensioners",
    "dependant": "Dependants",
    "deferred": "Deferred members",
    "active": "Active members",
}
SEX_LABELS: dict[str, str] = {"M": "Men", "F": "Women"}
#: Age bands with fewer expected deaths than this are left out of the A/E charts [lives].
MIN_EXPECTED = 1.0
#: Top of the A/E charts' axis [%].
AE_AXIS_MAX = 400.0


@dataclass(frozen=True)
class Headline:
    """One headline figure: its key, label, raw value, formatted text, a sentence on its meaning and the
    money unit shown beside it (``""`` for figures that are not money)."""

    key: str
    label: str
    value: float
    text: str
    meaning: str
    unit: str = ""


def headlines(summary: RunSummary) -> list[Headline]:
    """The headline figures of a run, each with one plain sentence on what it means.

    Money figures are whole units (their unit, the basis's currency code, apart); the sentences round
    money as a person would say it (:func:`valuation.reports.format.about_money`).
    """
    liab = summary.liability
    rec = summary.records
    macaulay = summary.duration.macaulay
    sedr = summary.single_equivalent_discount_rate
    act = summary.active_measures
    code = fmt.currency_of(summary)
    unit = code or ""
    if rec.excluded:
        data_words = (f"Of the {fmt.number(rec.read)} records in the member data, {fmt.number(rec.valued)} "
                      f"were valued and {fmt.number(rec.excluded)} were left out because their data could not "
                      "be used (see the data section).")
    else:
        data_words = f"All {fmt.number(rec.read)} records in the member data were valued."
    out = [
        Headline("total_liability", "Total liability", liab.total, fmt.money(liab.total),
                 f"About {fmt.about_money(liab.total, code)}: the amount that, invested today and earning the "
                 "discount rate, would pay every pension and lump sum the members have earned so far, if the "
                 "future turns out as assumed.", unit),
        Headline("duration", "Duration", macaulay, fmt.years(macaulay),
                 "The average time until the payments are made, weighted by their present value; the longer "
                 "it is, the more the liability moves when interest rates change."),
        Headline("sedr", "Single equivalent discount rate", sedr, fmt.rate(sedr),
                 "The one flat interest rate that gives the same liability as the discount rate basis."),
    ]
    if act.projected_obligation:
        projected, accrued = act.projected_obligation, act.accrued_benefit_obligation
        out.append(Headline(
            "active_obligation", "Active members: obligation", projected, fmt.money(projected),
            "The active members' part of the total liability: their pensions for service so far, on salaries "
            "projected to retirement or leaving (projected unit credit).", unit))
        out.append(Headline(
            "accrued_benefit", "Active members: accrued benefits", accrued, fmt.money(accrued),
            f"The same pensions on today's salaries, as if every active member left now; about "
            f"{fmt.about_money(projected - accrued, code)} less, the cost of future pay rises on past service.",
            unit))
        out.append(Headline(
            "service_cost", "Cost of next year's benefits", act.current_service_cost,
            fmt.money(act.current_service_cost),
            "The value of the pension that active members are expected to earn over the coming year.", unit))
    out.append(Headline("members_valued", "Members valued", rec.valued, fmt.number(rec.valued), data_words))
    return out


#: The bundled mortality tables in words (valuation/mortality/data/README.md gives their provenance).
TABLE_WORDS: dict[str, str] = {
    "SULT": "the Standard Ultimate Life Table, a published teaching table (Dickson, Hardy and Waters)",
    "DEMO_M": "an invented table for men, for illustration only (not drawn from any population)",
    "DEMO_F": "an invented table for women, for illustration only (not drawn from any population)",
}
_FREQUENCY = {1: "yearly", 2: "half-yearly", 4: "quarterly", 12: "monthly", 52: "weekly"}
_MONTHS = ("January", "February", "March", "April", "May", "June", "July", "August", "September", "October",
           "November", "December")
_FIRST_INCREASE = {
    "full": "the first increase after a pension starts is paid in full",
    "proportionate": "the first increase after a pension starts is one twelfth of the full increase for each "
                     "month in payment",
    "none": "no increase is paid until a pension has been in payment for a full year",
}


def _rate_words(assumptions: Assumptions, name: Literal["discount", "inflation"]) -> tuple[str, str] | None:
    given = assumptions.rate(name)
    if given is None:
        return None
    value, flat = given
    return fmt.rate(value), ("a single rate for all terms" if flat else "a yield curve, shown here at the 10-year term")


def _table(value: JsonValue) -> Mapping[str, JsonValue]:
    """A table of the basis as loaded (a JSON object), or an empty one where the value is not a table."""
    return value if isinstance(value, dict) else {}


def _number(value: JsonValue) -> float | None:
    """A number of the basis as loaded, or None where the value is not a number."""
    return float(value) if isinstance(value, (int, float)) and not isinstance(value, bool) else None


def _plural(n: float, word: str) -> str:
    return f"{fmt.number(n, 0 if float(n).is_integer() else 1)} {word}{'' if n == 1 else 's'}"


def _spouse_words(a: Assumptions) -> str | None:
    married = a.proportion_married
    if not married or not a.spouse_fraction:
        return None
    who = {"M": "men", "F": "women"}
    parts = " and ".join(f"{fmt.rate(v, 0)} of {who.get(k, k)}" for k, v in married.items())
    gap = a.spouse_age_difference
    if gap > 0:
        ages = f"a husband or male partner is taken to be {_plural(gap, 'year')} older than his wife or partner"
    elif gap < 0:
        ages = f"a wife or female partner is taken to be {_plural(-gap, 'year')} older than her husband or partner"
    else:
        ages = "partners are taken to be the same age"
    return (f"{parts[0].upper()}{parts[1:]} are assumed to leave a spouse or partner, who receives "
            f"{fmt.rate(a.spouse_fraction, 0)} of the member's pension; {ages}.")


def assumption_lines(summary: RunSummary) -> list[tuple[str, str]]:
    """The key assumptions as (name, words) pairs, readable by a trustee."""
    a = summary.assumptions
    manifest = summary.manifest
    lines: list[tuple[str, str]] = []
    disc = _rate_words(a, "discount")
    if disc:
        lines.append(("Discount rate", f"{disc[0]} a year ({disc[1]}): future payments are reduced by this "
                      "rate to give today's value."))
    infl = _rate_words(a, "inflation")
    if infl:
        lines.append(("Price inflation", f"{infl[0]} a year ({infl[1]}): drives pension increases and the "
                      "revaluation of deferred pensions, within their caps."))
    lines.append(("Salary growth", f"{fmt.rate(a.salary_growth)} a year for active members."))
    lines.append(("Retirement age", f"{fmt.number(a.retirement_age)}, unless a member's own retirement age is "
                  "recorded."))
    spouse = _spouse_words(a)
    if spouse:
        lines.append(("Spouses and partners", spouse))
    if a.commutation_proportion:
        factor = _number(manifest.section("commutation").get("factor"))
        cash = (f" for a cash sum of {fmt.number(factor, 0 if factor.is_integer() else 1)} times the pension "
                "given up (the commutation factor)") if factor else " for a cash sum"
        lines.append(("Cash at retirement", f"Members give up {fmt.rate(a.commutation_proportion, 0)} of "
                      f"their pension{cash}."))
    freq = a.payment_frequency
    how = _FREQUENCY.get(freq, f"{freq} times a year")
    words = f"Pensions are paid {how}, in {a.payment_timing}"
    payment = manifest.section("payment")
    day = str(payment.get("increase_date") or "")
    if len(day) == 5 and day[:2].isdigit() and day[3:].isdigit() and 1 <= int(day[:2]) <= 12:
        words += f"; they increase each year on {int(day[3:])} {_MONTHS[int(day[:2]) - 1]}"
        rule = _FIRST_INCREASE.get(str(payment.get("first_increase")))
        if rule:
            words += f", and {rule}"
    lines.append(("Payments", words + "."))
    lines.extend(mortality_lines(summary))
    return lines


def _improvement_words(imp: Mapping[str, JsonValue]) -> str:
    kind = imp.get("kind", "none")
    if kind == "none":
        return "no allowance for future improvements"
    if kind == "constant":
        return f"improving by {fmt.rate(imp.get('rate'))} a year"
    if imp.get("long_term_rate") is not None:
        return f"improving in future, moving to a long-term rate of {fmt.rate(imp.get('long_term_rate'))} a year"
    return "improving in future by the scale in the basis"


_ADJECTIVE = {"M": "male", "F": "female"}
_GROUP_NOUN = {"pensioner": "pensioners", "dependant": "dependants", "deferred": "deferred members",
               "active": "active members", "spouse": "spouses"}


def _mortality_who(group: str, sex: str, entries: Mapping[str, JsonValue]) -> str:
    """Whom a mortality entry covers: ``men``, ``other women`` (the default where some groups have their
    own), ``male pensioners``."""
    if group == "default":
        others = any(sex in _table(v) for g, v in entries.items() if g != "default")
        noun = SEX_LABELS.get(sex, sex).lower()
        return f"other {noun}" if others else noun
    return f"{_ADJECTIVE.get(sex, sex)} {_GROUP_NOUN.get(group, group)}"


def mortality_lines(summary: RunSummary) -> list[tuple[str, str]]:
    """The mortality assumptions, one line a (group, sex) entry of the basis, then what each table is."""
    out = []
    tables: list[str] = []
    entries = summary.manifest.section("mortality")
    for group in sorted(entries, key=lambda g: g == "default"):  # the groups' own tables, then the default
        for sex, entry in _table(entries[group]).items():
            if not isinstance(entry, dict):
                continue
            rating = int(_number(entry.get("age_rating")) or 0)
            if rating:
                older = "older" if rating > 0 else "younger"
                rating_text = f", with ages taken as {_plural(abs(rating), 'year')} {older}"
            else:
                rating_text = ""
            table = str(entry.get("table"))
            name = str(entry.get("table_name") or table)
            if name not in tables:
                tables.append(name)
            out.append((f"Mortality: {_mortality_who(group, sex, entries)}",
                        f"{fmt.rate(entry.get('percentage'), 0)} of table {name}{rating_text}; "
                        f"{_improvement_words(_table(entry.get('improvement')))}."))
    if tables:
        said = [f"{t} is {TABLE_WORDS[t]}" if t in TABLE_WORDS else f"{t} is a table named in the basis" for t in tables]
        out.append(("Mortality tables", "; ".join(said) + ". A percentage above 100% means more deaths than the "
                    "table, so shorter lives."))
    return out


def flatten(obj: Any, prefix: str = "") -> list[tuple[str, Any]]:
    """Nested dicts and lists as (dotted key, scalar value) rows, in their own order.

    Lists of scalars stay one row (written as text, items separated by ", "); lists of dicts or lists are
    indexed ``key[0].name``.
    """
    rows: list[tuple[str, Any]] = []
    if isinstance(obj, dict):
        for k, v in obj.items():
            rows.extend(flatten(v, f"{prefix}.{k}" if prefix else str(k)))
    elif isinstance(obj, (list, tuple)):
        if all(not isinstance(v, (dict, list, tuple)) for v in obj):
            rows.append((prefix, ", ".join("" if v is None else str(v) for v in obj)))
        else:
            for i, v in enumerate(obj):
                rows.extend(flatten(v, f"{prefix}[{i}]"))
    else:
        rows.append((prefix, obj))
    return rows


#: The trustee summary lists at most this many kinds of data problem; the workbook lists them all.
TOP_REASONS = 8


def data_notice(summary: RunSummary) -> str | None:
    """A sentence for the top of both reports when records were left out or columns were not used.

    ``None`` when every record was valued and every column of the member file was used.
    """
    read, excluded = summary.records.read, summary.records.excluded
    ignored = summary.records.ignored_columns
    parts = []
    if excluded:
        share = 100.0 * excluded / read if read else 0.0
        parts.append(f"{excluded:,} of the {read:,} member records ({share:.1f}%) were left out of this "
                     "valuation because of problems in the data, so the liability does not include them. "
                     "The workbook's Exceptions sheet lists each record and its problem.")
    if ignored:
        parts.append(f"The member file has {len(ignored)} column{'s' if len(ignored) > 1 else ''} that the "
                     f"valuation does not use: {', '.join(ignored)}.")
    return " ".join(parts) or None


def exception_reasons(exceptions: pl.DataFrame) -> pl.DataFrame:
    """Exceptions counted by severity and reason: ``severity, reason, records`` (most frequent first)."""
    if exceptions.height == 0 or "reason" not in exceptions.columns:
        return pl.DataFrame(schema={"severity": pl.String, "reason": pl.String, "records": pl.Int64})
    sev = exceptions["severity"] if "severity" in exceptions.columns else pl.Series([""] * exceptions.height)
    return (
        pl.DataFrame({"severity": sev.cast(pl.String), "reason": exceptions["reason"].cast(pl.String)})
        .group_by("severity", "reason").agg(pl.len().cast(pl.Int64).alias("records"))
        .sort(["severity", "records", "reason"], descending=[False, True, False])
    )


def status_rows(summary: RunSummary) -> list[dict[str, str | float]]:
    """Per status: label, records read/valued/excluded and liability [currency]."""
    by_rec = summary.records.by_status
    by_liab = summary.liability.by_status
    rows: list[dict[str, str | float]] = []
    for st in STATUSES:
        rec = by_rec.get(st)
        rows.append({"status": st, "label": STATUS_LABELS[st], "read": rec.read if rec else 0,
                     "valued": rec.valued if rec else 0, "excluded": rec.excluded if rec else 0,
                     "liability": by_liab.get(st, 0.0)})
    return rows


def implied_notes(implied: ImpliedSummary) -> list[str]:
    """Plain sentences on the implied mortality level and the liability effect of an experience analysis
    (none when there is nothing to explain)."""
    out = []
    std = implied.get("credibility_standard")
    if std and implied.get("by_table"):
        n_full = fmt.number(std.get("full_expected_deaths"))
        out.append(
            f"Each mortality table is judged on its own deaths, with a weight for how far they can be trusted "
            f"(credibility): full weight at {n_full} expected deaths, enough for a "
            f"{fmt.rate(std.get('probability'), 0)} chance that the ratio is within "
            f"{fmt.rate(std.get('tolerance'), 0)} of its true value (limited-fluctuation credibility, "
            f"Longley-Cook 1962); below that, the square root of the expected deaths over {n_full}. "
            "The rest of the weight stays with the current percentage."
        )
    if implied.get("implied_percentage") is None and implied.get("by_table"):
        out.append("The current percentages of the tables differ by group and sex, so there is no single implied "
                   "percentage: each table's implied percentage comes from its own deaths.")
    shared = [t for t in implied.get("by_table") or [] if t.get("group") == "default"]
    if shared:
        out.append("Member groups without a table of their own in the basis are judged together on the default "
                   "table they use.")
    none = [table_label(t) for t in implied.get("by_table") or [] if t.get("ae_amounts") is None]
    if none:
        out.append(f"No pension is at risk for {'; '.join(none)}: there is no A/E by pension, and the table "
                   "percentage is kept.")
    reason = implied.get("reason")
    if reason:
        out.append(f"Liability effect not calculated: {_plain_reason(reason)}.")
    return out


_SHORT_GROUP = {"pensioner": "pensioners", "dependant": "dependants", "deferred": "deferred", "active": "actives"}


def table_members(row: Mapping[str, Any]) -> str:
    """Who an experience table row covers, in words: ``Pensioners``, ``Default table: deferred,
    actives``, ``All members``."""
    group = str(row.get("group"))
    if group == "all":
        return "All members"
    if group == "default":
        who = ", ".join(_SHORT_GROUP.get(m, m) for m in row.get("members") or [])
        return f"Default table: {who}" if who else "Default table"
    return STATUS_LABELS.get(group, group.capitalize() + "s")


def table_label(row: Mapping[str, Any]) -> str:
    """:func:`table_members` and the sex: ``Pensioners, men``."""
    if row.get("group") == "all":
        return "All members"
    return f"{table_members(row)}, {SEX_LABELS.get(str(row.get('sex')), str(row.get('sex'))).lower()}"


def _plain_reason(reason: str) -> str:
    """The analysis's reason without its trailing ``: liability effect not calculated``."""
    return reason.split(": liability effect not calculated")[0].strip()


def ae_by_age(experience: ExperienceResult) -> pl.DataFrame:
    """The experience table's age-band rows (empty when no analysis was run)."""
    if experience is None:
        return pl.DataFrame()
    return experience.table.filter(pl.col("dimension") == "age_band")


def chart_bands(bands: pl.DataFrame) -> pl.DataFrame:
    """The age bands worth charting: at least :data:`MIN_EXPECTED` expected deaths (others have intervals
    too wide to read; they stay in the tables)."""
    return bands.filter(pl.col("expected_lives") >= MIN_EXPECTED) if bands.height else bands


#: How the trustees' summary names each movement (a count follows).
MOVEMENT_WORDS: dict[str, str] = {
    "death": "died", "retirement": "retired", "withdrawal": "left service with a deferred pension",
    "reinstated": "rejoined", "transfer_out": "transferred out", "lump_sum_settlement": "took a lump sum instead",
    "other_exit": "left for other reasons", "child_pension_ceased": "children's pensions ended",
    "new_entrant": "joined", "new_dependant": "dependants' pensions started",
}


def movements_words(movements: MovementsResult) -> str:
    """One plain sentence on the membership movements since the previous extract."""
    counts = movements.counts()
    parts = [f"{counts[m]:,} {words}" for m, words in MOVEMENT_WORDS.items() if counts[m]]
    unexplained = counts["unexplained"]
    tail = ("no movement is unexplained" if not unexplained
            else f"{unexplained:,} records changed in ways no movement explains (listed in movements_exceptions.csv)")
    said = ", ".join(parts) if parts else "no member moved"
    return (f"Since {movements.period_start.strftime('%d %B %Y').lstrip('0')}: {said}; {tail}.")


#: Short labels of the analysis of change's lines, for the trustees' chart and table.
CHANGE_LABELS: dict[str, str] = {
    "opening": "Last valuation", "service_cost": "Benefits earned", "interest": "Interest",
    "benefits_paid": "Benefits paid", "experience": "Experience", "demographic": "Demographic assumptions",
    "financial": "Financial assumptions", "other": "Other basis changes", "closing": "This valuation",
}


def change_rows(analysis: AnalysisOfChange) -> list[tuple[str, float]]:
    """The analysis's lines in the trustees' words (the expected closing line left out: it is a subtotal)."""
    return [(CHANGE_LABELS[x.key], x.amount) for x in analysis.lines if x.key in CHANGE_LABELS]


def change_words(analysis: AnalysisOfChange, currency: str | None) -> str:
    """Two plain sentences on what moved the liability most."""
    items = [x for x in analysis.lines if x.key not in ("opening", "expected_closing", "closing")]
    biggest = max(items, key=lambda x: abs(x.amount))
    opening, closing = analysis.amount("opening"), analysis.amount("closing")
    move = "rose" if closing >= opening else "fell"
    return (f"The liability {move} from {fmt.about_money(opening, currency)} at the last valuation to "
            f"{fmt.about_money(closing, currency)} now. The largest single cause was "
            f"{CHANGE_LABELS[biggest.key].lower()} ({'up' if biggest.amount >= 0 else 'down'} "
            f"{fmt.about_money(abs(biggest.amount), currency)}).{experience_words(analysis, currency)}")


#: The experience split's lines in the trustees' words.
EXPERIENCE_WORDS: dict[str, str] = {
    "experience:continuing": "members who stayed in the same status", "experience:death": "members who died",
    "experience:retirement": "members who retired", "experience:withdrawal": "members who left service",
    "experience:reinstated": "members who rejoined", "experience:transfer_out": "members who transferred out",
    "experience:lump_sum_settlement": "members who took a lump sum", "experience:other_exit": "members who left",
    "experience:child_pension_ceased": "children's pensions that ended", "experience:new_entrant": "new members",
    "experience:new_dependant": "new dependants", "experience:unexplained": "unexplained changes in the records",
    "experience:benefits_paid": "benefits paid against expected",
}


def experience_words(analysis: AnalysisOfChange, currency: str | None) -> str:
    """A sentence on the two largest parts of the experience line (empty when it was not split)."""
    parts = sorted((x for x in analysis.experience_split if abs(x.amount) >= 0.5), key=lambda x: -abs(x.amount))[:2]
    if not parts:
        return ""
    said = " and ".join(f"{EXPERIENCE_WORDS[x.key]} ({'up' if x.amount >= 0 else 'down'} "
                        f"{fmt.about_money(abs(x.amount), currency)})" for x in parts)
    return f" Within the experience, the largest parts were {said}."
