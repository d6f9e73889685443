"""The results of one valuation run: the stable contract shared by the engine, the writers and the reports.

``summary`` is a :class:`~valuation.engine.summary.RunSummary`: its ``to_json()`` is exactly what goes to
``summary.json``; the data frames hold the detail behind it.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, ClassVar

import numpy as np
import numpy.typing as npt
import polars as pl

from valuation.basis.model import Basis
from valuation.engine.summary import RunSummary
from valuation.vocabulary import STATUSES

if TYPE_CHECKING:
    import pandas

__all__ = ["STATUSES", "RunSummary", "ValuationResult"]


@dataclass(init=False)
class ValuationResult:
    """Everything one valuation run produced.

    Attributes
    ----------
    summary
        The headline results, typed (:class:`~valuation.engine.summary.RunSummary`); ``summary.to_json()``
        is the content of ``summary.json``: ``valuation_date`` (ISO text); ``basis_name``; ``records``
        {read, valued, excluded, by_status: {status: {read, valued, excluded}}, ignored_columns};
        ``liability`` {total, by_status {pensioner, dependant, deferred, active}, by_sex {M, F},
        by_tranche {name: value, lump_sums}}; ``active_measures`` {projected_obligation,
        accrued_benefit_obligation, current_service_cost}; ``duration`` {macaulay, modified, effective};
        ``single_equivalent_discount_rate``; ``cashflow_present_value``; ``sensitivities`` [{name, kind,
        shift, liability, change_pct}]; ``life_expectancy`` [{sex, age_now, at_age, basis, years}];
        ``expected_deaths_next_year`` {lives, amounts, by_group [{status, sex, lives, amounts}]};
        ``assumptions`` {discount_rate_flat or discount_curve_10y, inflation_..., salary_growth,
        retirement_age, ... in words-ready form}; ``manifest`` {tool_version, inputs {path: sha256}, basis
        (as loaded), settings, ignored_columns, started_at, run_seconds}. Money is [currency], rates are
        annual effective decimals, durations [years]. Given as a dictionary (the engine's), it is read
        with :meth:`RunSummary.from_json`, which checks every key.
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

    summary: RunSummary
    liabilities: pl.DataFrame
    cashflows: pl.DataFrame
    members: pl.DataFrame
    sensitivities: pl.DataFrame
    life_expectancy: pl.DataFrame
    expected_deaths: pl.DataFrame
    exceptions: pl.DataFrame
    basis: Basis | None = None
    extra: dict[str, str | None] = field(default_factory=dict)
    #: expected nominal payments by status (STATUSES order) and month after the valuation date, (S, M)
    #: [currency]: the monthly grid behind ``cashflows`` (not written; the roll-forward starts from it)
    monthly: npt.NDArray[np.float64] | None = None

    def __init__(
        self, *, summary: RunSummary | Mapping[str, object], liabilities: pl.DataFrame, cashflows: pl.DataFrame,
        members: pl.DataFrame, sensitivities: pl.DataFrame, life_expectancy: pl.DataFrame,
        expected_deaths: pl.DataFrame, exceptions: pl.DataFrame, basis: Basis | None = None,
        extra: dict[str, str | None] | None = None, monthly: npt.NDArray[np.float64] | None = None,
    ) -> None:
        # The engine hands its summary over as a dictionary (summary.json's shape): it is read into the
        # typed summary here, at the boundary, so nothing past the engine reads it by string keys.
        self.summary = summary if isinstance(summary, RunSummary) else RunSummary.from_json(summary)
        self.liabilities = liabilities
        self.cashflows = cashflows
        self.members = members
        self.sensitivities = sensitivities
        self.life_expectancy = life_expectancy
        self.expected_deaths = expected_deaths
        self.exceptions = exceptions
        self.basis = basis
        self.extra = dict(extra or {})
        self.monthly = monthly

    @property
    def total_liability(self) -> float:
        """The total liability [currency]."""
        return self.summary.liability.total

    #: The frames :meth:`to_pandas` converts, in this order.
    FRAMES: ClassVar[tuple[str, ...]] = ("liabilities", "cashflows", "members", "sensitivities", "life_expectancy",
                                         "expected_deaths", "exceptions")

    def to_pandas(self) -> dict[str, pandas.DataFrame]:
        """Every table of the result as a pandas DataFrame, by name (``liabilities``, ``cashflows``,
        ``members``, ``sensitivities``, ``life_expectancy``, ``expected_deaths``, ``exceptions``).

        ``summary`` is a typed object; ``summary.to_json()`` gives it as plain Python (a dict). Needs
        pandas (``pip install 'valuation[pandas]'``).
        """
        try:
            import pandas  # noqa: F401
        except ImportError:
            raise ImportError("to_pandas needs pandas: pip install 'valuation[pandas]' (or pip install pandas)") from None
        return {name: getattr(self, name).to_pandas() for name in self.FRAMES}
