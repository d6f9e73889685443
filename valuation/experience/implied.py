"""The mortality level implied by the experience and its effect on the liability.

The implied percentage of the base table is the one that would have made A/E by amounts 100 %:
implied = current percentage x A/E amounts, with the A/E interval carried across. The effect on the
liability is measured by re-valuing the valuation membership with every q scaled by A/E amounts
(``q_multiplier``) against the basis as it stands: a full re-valuation, not an approximation.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

from valuation.experience.cells import RateLookup

if TYPE_CHECKING:
    from valuation.basis.mortality_entries import Group
    from valuation.basis.rules import Sex


def _pct(x: float) -> float | None:
    return None if x is None or not math.isfinite(x) else 100.0 * x


def implied_percentages(
    ae_amounts: float,
    lower: float,
    upper: float,
    groups: list[tuple[Group, Sex]],
    lookup: RateLookup,
) -> dict[str, Any]:
    """Implied percentages of the base tables from the overall A/E by amounts.

    Parameters
    ----------
    ae_amounts, lower, upper
        Overall A/E by amounts and its interval [ratio].
    groups
        The (group, sex) pairs present in the data.
    lookup
        ``lookup(group, sex)`` -> the basis's mortality (its ``percentage`` is the current level, a
        multiplier on q, 1.0 = 100 % of the table).

    Returns
    -------
    dict
        ``multiplier`` (= A/E amounts) and its ``multiplier_lower``/``multiplier_upper``;
        ``implied_percentage``, ``lower``, ``upper`` [% of the base table] when every group present uses
        the same current percentage (else None with ``note``); ``by_table``: one entry a (group, sex) with
        ``current_percentage``, ``implied_percentage``, ``lower``, ``upper`` [%].

    References
    ----------
    Common practice: scaling the table percentage by the A/E by amounts (Benjamin & Pollard, *The
    Analysis of Mortality and Other Actuarial Statistics*, 3rd ed., on comparing experience with a
    standard table).
    """
    by_table: list[dict[str, Any]] = []
    for group, sex in groups:
        current = round(float(getattr(lookup(group, sex), "percentage", 1.0)), 12)
        by_table.append(
            {
                "group": group,
                "sex": sex,
                "current_percentage": round(100.0 * current, 10),
                "implied_percentage": _pct(current * ae_amounts),
                "lower": _pct(current * lower),
                "upper": _pct(current * upper),
            }
        )
    currents = {round(t["current_percentage"], 9) for t in by_table}
    out: dict[str, Any] = {
        "multiplier": ae_amounts if math.isfinite(ae_amounts) else None,
        "multiplier_lower": lower if math.isfinite(lower) else None,
        "multiplier_upper": upper if math.isfinite(upper) else None,
        "by_table": by_table,
    }
    if len(currents) == 1 and by_table:
        single = by_table[0]
        out.update(
            implied_percentage=single["implied_percentage"],
            lower=single["lower"],
            upper=single["upper"],
            note=None,
        )
    else:
        out.update(
            implied_percentage=None,
            lower=None,
            upper=None,
            note="current percentages differ by group and sex: see by_table (each scaled by A/E amounts)",
        )
    return out


def liability_effect(
    valuation_members_path: str | Path | None, basis: Any, multiplier: float | None
) -> dict[str, Any]:
    """Liability before and after scaling every q by ``multiplier`` (A/E amounts).

    Parameters
    ----------
    valuation_members_path
        The member file at the valuation date; None skips the calculation (the reason says so).
    basis
        The loaded basis.
    multiplier
        A/E by amounts [ratio]; None (no expected amounts) skips the calculation.

    Returns
    -------
    dict
        ``liability_before``, ``liability_after`` [currency], ``change_pct`` [%], ``reason`` (None when
        calculated, else why not).

    References
    ----------
    Common practice: the effect of a mortality assumption is measured by re-valuing on the changed basis
    (here ``valuation.engine.run.value_members`` with ``q_multiplier``), as for the life expectancy
    sensitivity of IAS 19 para. 145.
    """
    skipped = {"liability_before": None, "liability_after": None, "change_pct": None}
    if valuation_members_path is None:
        return {**skipped, "reason": "no valuation member file given: liability effect not calculated"}
    if multiplier is None or not math.isfinite(multiplier):
        return {
            **skipped,
            "reason": "A/E by amounts is undefined (no expected amounts): liability effect not calculated",
        }
    from valuation.engine.run import value_members  # the engine imports the whole stack: load it only here
    from valuation.members import read_members

    data = read_members(valuation_members_path, basis)
    before = value_members(data, basis, q_multiplier=1.0, sensitivities=False).total_liability
    after = value_members(data, basis, q_multiplier=float(multiplier), sensitivities=False).total_liability
    change = 100.0 * (after / before - 1.0) if before else None
    return {"liability_before": before, "liability_after": after, "change_pct": change, "reason": None}
