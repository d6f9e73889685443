"""The results of one valuation run: the stable contract shared by the engine, the writers and the reports.

``summary`` is exactly what goes to ``summary.json``; the data frames hold the detail behind it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import polars as pl

from valuation.vocabulary import STATUSES

__all__ = ["STATUSES", "ValuationResult"]


@dataclass
class ValuationResult:
    """Everything one valuation run produced.

    Attributes
    ----------
    summary
        The content of ``summary.json``: ``valuation_date`` (ISO text); ``records`` {read, valued, excluded,
        by_status: {status: {read, valued, excluded}}}; ``liability`` {total, by_status {pensioner,
        dependant, deferred, active}, by_sex {M, F}, by_tranche {name: value}}; ``active_measures``
        {projected_obligation, accrued_benefit_obligation, current_service_cost}; ``duration``
        {macaulay, modified, effective}; ``single_equivalent_discount_rate``; ``sensitivities``
        [{name, kind, shift, liability, change_pct}]; ``life_expectancy`` [{sex, age_now, at_age, basis,
        years}]; ``expected_deaths_next_year`` {lives, amounts, by_group [{status, sex, lives, amounts}]};
        ``assumptions`` {discount_rate, inflation, salary_growth, retirement_age, ... in words-ready form};
        ``manifest`` {tool_version, inputs {path: sha256}, basis (as loaded), settings, started_at,
        run_seconds}. Money is [currency], rates are annual effective decimals, durations [years].
    liabilities
        One row a (status, sex, tranche, benefit) cell: columns ``status, sex, tranche, benefit,
        liability``. ``benefit`` is one of ``member_pension, spouse_pension, lump_sum``.
    cashflows
        One row a projection year: ``year`` (1 = the first year after the valuation date), one column a
        status (nominal expected payments in that year), ``total``, ``discount_factor`` (the payment-weighted factor
        of the year's monthly payments, so ``total * discount_factor == discounted_total``) and
        ``discounted_total`` (the rows add up to the liability).
    members
        One row a valued member: ``member_id, status, sex, age, pension, liability, annuity_factor`` and
        the spouse's share ``spouse_liability``.
    sensitivities, life_expectancy, expected_deaths
        The frames behind the summary lists (same columns as the summary entries; expected_deaths one row a
        status x sex with ``lives, amounts``).
    exceptions
        ``file, row, member_id, column, value, reason, severity`` (severity ``excluded`` or ``warning``).
    """

    summary: dict[str, Any]
    liabilities: pl.DataFrame
    cashflows: pl.DataFrame
    members: pl.DataFrame
    sensitivities: pl.DataFrame
    life_expectancy: pl.DataFrame
    expected_deaths: pl.DataFrame
    exceptions: pl.DataFrame
    basis: Any = None
    extra: dict[str, Any] = field(default_factory=dict)

    @property
    def total_liability(self) -> float:
        return float(self.summary["liability"]["total"])

    #: The frames :meth:`to_pandas` converts, in this order.
    FRAMES = ("liabilities", "cashflows", "members", "sensitivities", "life_expectancy", "expected_deaths",
              "exceptions")

    def to_pandas(self) -> dict[str, Any]:
        """Every table of the result as a pandas DataFrame, by name (``liabilities``, ``cashflows``,
        ``members``, ``sensitivities``, ``life_expectancy``, ``expected_deaths``, ``exceptions``).

        ``summary`` is already plain Python (a dict). Needs pandas (``pip install 'valuation[pandas]'``).
        """
        try:
            import pandas  # noqa: F401
        except ImportError:
            raise ImportError("to_pandas needs pandas: pip install 'valuation[pandas]' (or pip install pandas)") from None
        return {name: getattr(self, name).to_pandas() for name in self.FRAMES}
