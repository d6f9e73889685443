"""The mortality level implied by the experience, table by table, and its effect on the liability.

Each mortality table entry of the basis (``[mortality.<group>.<sex>]``) is judged on the deaths of the
members who use it: the groups with their own entry on their own, the groups that fall back to another
entry (see :mod:`valuation.basis.mortality_entries`) together with it. For each entry:

* A/E by amounts with its interval (normal, variance phi x sum w^2 E, as for the overall line);
* a credibility factor Z = min(1, sqrt(E / n_F)) on the expected deaths E of the lives with a pension at
  risk, n_F the limited-fluctuation standard (:mod:`valuation.experience.credibility`);
* the implied percentage = current percentage x (Z x A/E + (1 - Z) x 1), and its range from the A/E
  interval the same way.

An entry whose members have no pension at risk (actives, whose pension is not yet in payment or
deferred) has no A/E by amounts: it shows none, and its percentage is kept.

The effect on the liability is a full re-valuation of the valuation membership on the basis with each
entry's percentage replaced by its own implied percentage, against the basis as it stands. An entry's
new percentage applies to everyone who uses it, spouses' reversions included.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import polars as pl

from valuation.experience.cells import RateLookup
from valuation.experience.credibility import (
    credibility_factor,
    credibility_weighted,
    full_credibility_standard,
    standard_text,
)
from valuation.experience.result import AE_COLUMNS
from valuation.experience.settings import ExperienceSettings
from valuation.experience.summary import ImpliedSummary, LiabilityEffect, PercentageChange, TableLine

if TYPE_CHECKING:
    from valuation.basis.model import Basis
    from valuation.basis.rules import Sex
    from valuation.vocabulary import Group

#: ``table_key(group, sex)`` -> the entry a member group and sex use, ``"mortality.<entry group>.<sex>"``.
TableKey = Callable[["Group", "Sex"], str]

#: Columns of each table's row (the by-table rows of experience.csv and ``by_table`` of the summary).
BY_TABLE_COLUMNS: tuple[str, ...] = (
    "table",
    "group",
    "sex",
    "members",
    "current_percentage",
    *AE_COLUMNS,
    "expected_lives_at_risk",
    "credibility",
    "implied_percentage",
    "lower",
    "upper",
    "note",
)

#: Member groups in reporting order.
GROUP_ORDER: dict[str, int] = {"pensioner": 0, "dependant": 1, "deferred": 2, "active": 3, "spouse": 4}

#: Table entries in reporting order (the groups' own entries first, the shared default last).
ENTRY_ORDER: dict[str, int] = {**GROUP_ORDER, "default": len(GROUP_ORDER)}

NO_AMOUNTS_NOTE = (
    "no pension at risk (members not yet drawing or entitled to a pension): no A/E by amounts, and the "
    "table percentage is kept"
)


def own_table_key(group: str, sex: str) -> str:
    """The key used when no basis is given: every group and sex is taken to have its own entry."""
    return f"mortality.{group}.{sex}"


def _finite(x: Any) -> float | None:
    return None if x is None or not math.isfinite(float(x)) else float(x)


def _current(lookup: RateLookup, group: str, sex: str) -> float:
    """The table percentage a group and sex use now, as a multiplier (1.0 = 100 %)."""
    return round(float(getattr(lookup(group, sex), "percentage", 1.0)), 12)  # type: ignore[arg-type]


def _row(
    sums: dict[str, Any],
    *,
    table: str,
    group: str,
    sex: str,
    members: list[str],
    current: float | None,
    n_full: float,
) -> TableLine:
    """One table's (or the overall) line: A/E by amounts, credibility and implied percentage."""
    ae = _finite(sums["ae_amounts"])
    lo = _finite(sums["ae_amounts_lower"])
    hi = _finite(sums["ae_amounts_upper"])
    out: TableLine = {
        "table": table,
        "group": group,
        "sex": sex,
        "members": members,
        "current_percentage": None if current is None else round(100.0 * current, 10),
        "exposure_years": float(sums["exposure_years"]),
        "actual_lives": float(sums["actual_lives"]),
        "expected_lives": float(sums["expected_lives"]),
        "ae_lives": _finite(sums["ae_lives"]),
        "ae_lives_lower": _finite(sums["ae_lives_lower"]),
        "ae_lives_upper": _finite(sums["ae_lives_upper"]),
        "actual_amounts": float(sums["actual_amounts"]),
        "expected_amounts": float(sums["expected_amounts"]),
        "ae_amounts": ae,
        "ae_amounts_lower": lo,
        "ae_amounts_upper": hi,
        "expected_lives_at_risk": float(sums["expected_lives_at_risk"]),
        "credibility": None,
        "implied_percentage": None,
        "lower": None,
        "upper": None,
        "note": None,
    }
    if ae is None or not sums["expected_amounts"] > 0:
        out.update({"ae_amounts": None, "ae_amounts_lower": None, "ae_amounts_upper": None, "note": NO_AMOUNTS_NOTE})
        return out
    z = float(credibility_factor(sums["expected_lives_at_risk"], n_full))
    out["credibility"] = z
    if current is not None:
        pct = 100.0 * current
        out["implied_percentage"] = pct * float(credibility_weighted(ae, 1.0, z))
        out["lower"] = None if lo is None else pct * float(credibility_weighted(lo, 1.0, z))
        out["upper"] = None if hi is None else pct * float(credibility_weighted(hi, 1.0, z))
    return out


def implied_percentages(
    by_table: pl.DataFrame,
    overall: dict[str, Any] | None,
    overall_at_risk: float,
    pairs: list[tuple[Group, Sex]],
    lookup: RateLookup,
    table_key: TableKey,
    settings: ExperienceSettings,
) -> ImpliedSummary:
    """Each table's own A/E by amounts, credibility factor and credibility-weighted implied percentage.

    Parameters
    ----------
    by_table
        From :func:`valuation.experience.tables.ae_by_table` (one row an entry key).
    overall
        The overall row of the A/E table (None when there are no cells).
    overall_at_risk
        Expected deaths of all lives with a pension at risk [lives].
    pairs
        The (member group, sex) pairs present in the start membership.
    lookup
        ``lookup(group, sex)`` -> the basis's mortality; its ``percentage`` is the current level.
    table_key
        ``table_key(group, sex)`` -> the entry key the pair uses (``Basis.mortality_key``).
    settings
        Gives the credibility standard (``credibility_probability``, ``credibility_tolerance``).

    Returns
    -------
    dict
        ``credibility_standard`` (``probability``, ``tolerance``, ``full_expected_deaths`` [lives],
        ``text``); ``by_table``: one dict an entry (:data:`BY_TABLE_COLUMNS`; percentages in %, A/E as
        ratios, None where the members have no pension at risk), in the order of :data:`ENTRY_ORDER`
        then men before women; ``overall``: the same for all members
        (implied percentage only when every table has the same current percentage); and, for the
        headline, ``multiplier`` (overall A/E by amounts) with ``multiplier_lower``/``multiplier_upper``,
        ``implied_percentage``, ``lower``, ``upper`` (the overall line's) and ``note``.

    References
    ----------
    Longley-Cook (1962), PCAS 49, and Mahler & Dean, *Credibility* (Foundations of Casualty Actuarial
    Science, ch. 8): limited-fluctuation credibility and the credibility-weighted estimate (from
    memory). Benjamin & Pollard, *The Analysis of Mortality and Other Actuarial Statistics*, 3rd ed.:
    comparing experience with a standard table by A/E. Scaling the table percentage by the weighted
    A/E is common practice.
    """
    p, k = settings.credibility_probability, settings.credibility_tolerance
    n_full = full_credibility_standard(p, k)
    members_of: dict[str, list[str]] = {}
    current_of: dict[str, float] = {}
    for group, sex in pairs:  # a handful of (group, sex) pairs, never one per member
        key = table_key(group, sex)
        members_of.setdefault(key, []).append(group)
        current_of.setdefault(key, _current(lookup, group, sex))
    for key, groups in members_of.items():
        members_of[key] = sorted(groups, key=lambda g: (GROUP_ORDER.get(g, len(GROUP_ORDER)), g))
    rows = []
    ordered = by_table.with_columns(
        pl.col("table").str.split(".").list.get(1).replace_strict(ENTRY_ORDER, default=len(ENTRY_ORDER),
                                                                  return_dtype=pl.Int64).alias("_g"),
        (pl.col("table").str.split(".").list.get(2) != "M").alias("_s"),
    ).sort("_g", "_s", "table")
    for sums in ordered.iter_rows(named=True):  # one row a table entry
        key = sums["table"]
        _, entry_group, sex = key.split(".")
        rows.append(
            _row(
                sums,
                table=key,
                group=entry_group,
                sex=sex,
                members=members_of.get(key, []),
                current=current_of.get(key),
                n_full=n_full,
            )
        )
    currents = {round(100.0 * c, 9) for c in current_of.values()}
    single = next(iter(current_of.values())) if len(currents) == 1 else None
    overall_row = (
        _row(
            {**overall, "expected_lives_at_risk": overall_at_risk},
            table="all",
            group="all",
            sex="all",
            members=sorted({g for g, _ in pairs}, key=lambda g: (GROUP_ORDER.get(g, len(GROUP_ORDER)), g)),
            current=single,
            n_full=n_full,
        )
        if overall is not None
        else None
    )
    o: TableLine | dict[str, None] = overall_row or {}
    return {
        "credibility_standard": {
            "probability": p,
            "tolerance": k,
            "full_expected_deaths": n_full,
            "text": standard_text(p, k),
        },
        "by_table": rows,
        "overall": overall_row,
        "multiplier": o.get("ae_amounts"),
        "multiplier_lower": o.get("ae_amounts_lower"),
        "multiplier_upper": o.get("ae_amounts_upper"),
        "implied_percentage": o.get("implied_percentage"),
        "lower": o.get("lower"),
        "upper": o.get("upper"),
        "note": None
        if single is not None or not rows
        else (
            "current percentages differ by group and sex: each table's implied percentage comes from its "
            "own deaths (see by_table)"
        ),
    }


def by_table_frame(implied: ImpliedSummary) -> pl.DataFrame:
    """``implied["by_table"]`` as a frame (:data:`BY_TABLE_COLUMNS`, members joined by ", ")."""
    schema: dict[str, Any] = dict.fromkeys(BY_TABLE_COLUMNS, pl.Float64)
    schema.update(table=pl.String, group=pl.String, sex=pl.String, members=pl.String, note=pl.String)
    rows = [r | {"members": ", ".join(r.get("members") or [])} for r in implied.get("by_table") or []]
    return pl.DataFrame([{c: r.get(c) for c in BY_TABLE_COLUMNS} for r in rows], schema=schema)


def revalued_basis(basis: Basis, by_table: list[TableLine]) -> tuple[Basis, dict[str, PercentageChange]]:
    """The basis with each analysed entry's percentage replaced by its implied percentage.

    Returns the new basis and the changes made, ``{"mortality.<group>.<sex>": {"from": %, "to": %}}``;
    entries with no implied percentage (no pension at risk) and entries no member of the start data
    uses are left as they are.
    """
    entries: dict[str, dict[str, Any]] = {g: {s: e for s, e in by_sex.items()} for g, by_sex in basis.mortality_entries.items()}
    changes: dict[str, PercentageChange] = {}
    for row in by_table:
        implied = row.get("implied_percentage")
        _, group, sex = str(row["table"]).split(".")
        if implied is None or sex not in entries.get(group, {}):
            continue
        entry = entries[group][sex]
        entries[group][sex] = entry.model_copy(update={"percentage": implied / 100.0})
        changes[row["table"]] = {"from": round(100.0 * entry.percentage, 10), "to": float(implied)}
    return basis.model_copy(update={"mortality_entries": entries}), changes


@dataclass(frozen=True)
class ValuedScheme:
    """What the experience analysis needs of the valuation at the period end, without reading or valuing
    anything itself: the liability, and a way to value the same records on another basis.

    Attributes
    ----------
    liability : float
        The valuation's liability [currency], on the basis as given.
    revalue : callable
        ``revalue(basis) -> float``: the liability [currency] of the same records on ``basis`` (the
        pipeline values the records it has already read; no file is read again).
    """

    liability: float
    revalue: Callable[[Basis], float]


def liability_effect(
    valued: ValuedScheme | None, basis: Basis | None, by_table: list[TableLine]
) -> LiabilityEffect:
    """Liability on the basis as it stands, and with each table at its own implied percentage.

    Parameters
    ----------
    valued
        The valuation at the period end (its liability and a way to re-value); None skips the
        calculation (the reason says so).
    basis
        The loaded basis.
    by_table
        ``implied["by_table"]`` from :func:`implied_percentages`, keyed by the basis's entries.

    Returns
    -------
    dict
        ``liability_before``, ``liability_after`` [currency], ``change_pct`` [%], ``basis_changes``
        (each entry's percentage from and to [%]), ``reason`` (None when calculated, else why not).

    References
    ----------
    Common practice: the effect of a mortality assumption is measured by re-valuing on the changed basis
    (``valued.revalue`` on the basis with the new percentages), as for the life
    expectancy sensitivity of IAS 19 para. 145.
    """
    skipped: LiabilityEffect = {"liability_before": None, "liability_after": None, "change_pct": None,
                                "basis_changes": {}, "reason": None}
    if valued is None or basis is None:
        return {**skipped, "reason": "no valuation member file given: liability effect not calculated"}
    changed, changes = revalued_basis(basis, by_table)
    if not changes:
        return {
            **skipped,
            "reason": "no mortality table has pension amounts at risk, so none has an implied percentage: "
            "liability effect not calculated",
        }
    before = valued.liability
    after = valued.revalue(changed)
    change = 100.0 * (after / before - 1.0) if before else None
    return {
        "liability_before": before,
        "liability_after": after,
        "change_pct": change,
        "basis_changes": changes,
        "reason": None,
    }

