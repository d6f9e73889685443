"""A straightforward per-member valuation of pensioners with a known spouse, to time the engine against.

One member at a time, one month at a time: the member's and the spouse's survival are updated step by
step (l at fractional ages under the uniform distribution of deaths between integer ages), and each
monthly step adds the payment due then, discounted: the member's pension while alive (certain during a
guarantee), and the spouse's pension after the member's death (and after the guarantee) while the spouse
is alive. This is how the valuation would be written without keys, compiled kernels or arrays of
members; it is plain Python over the months of each member.

Quantities that depend on time alone (discount factors, the increase index of each tranche on the monthly
grid) and the cohort mortality rows are worked out once, as the engine does (they are not per-member
work). ``benchmarks/bench_valuation.py`` times this loop on a sample of members in the same run as the
engine; ``tests/test_per_member_loop.py`` checks that the two agree.

References
----------
Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013): eq. (5.12)
(annuity as a sum of discounted survival probabilities), section 3.3 (uniform distribution of deaths
between integer ages, l_{x+s} = l_x (1 - s q_x)), section 5.6 (guaranteed annuities), section 9.5
(reversionary annuity to a spouse on independent lives, paid while tp_y (1 - tp_x)).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import date
from typing import Any

import numpy as np

from valuation.engine.benefits.pensioner import PensionInPayment
from valuation.engine.context import MAX_AGE
from valuation.engine.project import Valuer
from valuation.survival import age_at
from valuation.vocabulary import GROUP_OF_STATUS, SEXES, tranche_column

#: The members the loop values: pensioners (with a known spouse).
STATUS = PensionInPayment.status


@dataclass
class LoopBasis:
    """What the loop takes from the basis: time-only grids and the cohort mortality rows."""

    valuation_date: date
    age_convention: str
    frequency: int
    advance: bool
    months: int
    v: list[float]  # discount factor at each grid month
    increase: list[list[float]]  # increase index per tranche at each grid month
    tranches: list[str]
    spouse_fraction: float
    valuer: Valuer  # gives each life's cohort row of q (by group, sex and cohort)

    @classmethod
    def from_basis(cls, basis: Any) -> LoopBasis:
        valuer = Valuer(basis)
        if basis.fractional_age != "udd":
            raise ValueError("the per-member loop assumes a uniform distribution of deaths between ages")
        return cls(
            valuation_date=basis.valuation_date, age_convention=str(basis.age_convention),
            frequency=int(basis.payment.frequency), advance=basis.payment.timing == "advance",
            months=valuer.ctx.months, v=valuer.ctx.v.tolist(), increase=valuer.increase.tolist(),
            tranches=list(basis.tranches), spouse_fraction=float(basis.spouse.fraction), valuer=valuer,
        )

    def q_row(self, group: str, sex: str, age: float) -> list[float]:
        """q at integer ages 0..MAX_AGE for the cohort of a life of ``age`` now (q = 1 at the last age)."""
        valuer = self.valuer
        row = valuer.bc.rows(group, np.array([sex]), np.array([age]))[0]  # type: ignore[arg-type]
        return [float(q) for q in valuer.mrows.q_rows[row]]

    def age(self, dob: date) -> float:
        at = np.datetime64(self.valuation_date, "D")
        return float(age_at(np.array([dob], dtype="datetime64[D]"), at, self.age_convention)[0])  # type: ignore[arg-type]


def _lx(q: list[float]) -> list[float]:
    """l at integer ages 0, 1, ... on a cohort q row, l_0 = 1."""
    out = [1.0]
    for qj in q[:-1]:
        out.append(out[-1] * (1.0 - qj))
    return out


def _l_udd(lx: list[float], q: list[float], age: float) -> float:
    """l at a fractional age, uniform deaths within each year of age: l_{j+s} = l_j (1 - s q_j)."""
    j = min(int(math.floor(max(age, 0.0))), len(q) - 1)
    s = min(max(age, 0.0) - j, 1.0)
    return lx[j] * (1.0 - s * q[j])


def value_pensioner_with_spouse(lb: LoopBasis, member: dict[str, Any]) -> float:
    """Present value [currency] of a pensioner's pension and the known spouse's reversionary pension.

    ``member``: ``sex``, ``date_of_birth``, ``spouse_date_of_birth``, ``pension_<tranche>`` for each
    tranche, optionally ``spouse_fraction`` and ``guarantee_end``. Payments fall on the monthly grid
    (rounded to the month, as the engine does); increases follow each tranche's index.

    References
    ----------
    [DHW] eq. (5.12), sections 3.3, 5.6 and 9.5 (see the module's references).
    """
    sex = member["sex"]
    x0 = lb.age(member["date_of_birth"])
    y0 = min(max(lb.age(member["spouse_date_of_birth"]), 0.0), MAX_AGE + 0.999)
    qx = lb.q_row(GROUP_OF_STATUS[STATUS], sex, x0)
    qy = lb.q_row("spouse", SEXES[1] if sex == SEXES[0] else SEXES[0], y0)
    pensions = [float(member.get(tranche_column(t)) or 0.0) for t in lb.tranches]
    frac = member.get("spouse_fraction")
    frac = lb.spouse_fraction if frac is None or (isinstance(frac, float) and math.isnan(frac)) else float(frac)
    guarantee = 0
    g_end = member.get("guarantee_end")
    if g_end is not None:
        years = (g_end - lb.valuation_date).days / 365.25
        guarantee = min(max(round(years * 12.0), 0), lb.months - 1)
    step = 12 // lb.frequency
    offset = 0 if lb.advance else step
    end_x = min(math.ceil((MAX_AGE + 1 - x0) * 12.0), lb.months)
    end_y = min(math.ceil((MAX_AGE + 1 - y0) * 12.0), lb.months)

    lx, ly = _lx(qx), _lx(qy)
    value = 0.0
    lx_prev, ly_prev = _l_udd(lx, qx, x0), _l_udd(ly, qy, y0)
    px, py = 1.0, 1.0  # survival of the member and of the spouse from now to month tau
    for tau in range(lb.months):
        if tau > 0:  # one month on: update each survival by the month's ratio of l
            lx_now = _l_udd(lx, qx, x0 + tau / 12.0)
            ly_now = _l_udd(ly, qy, y0 + tau / 12.0)
            px = px * lx_now / lx_prev if lx_prev > 0.0 else 0.0
            py = py * ly_now / ly_prev if ly_prev > 0.0 else 0.0
            lx_prev, ly_prev = lx_now, ly_now
        if tau < offset or (tau - offset) % step:
            continue
        amount = sum(p * lb.increase[j][tau] / lb.increase[j][0] for j, p in enumerate(pensions)) / lb.frequency
        if tau < end_x:
            value += amount * (1.0 if tau < guarantee else px) * lb.v[tau]
        if tau < end_y and tau >= guarantee:
            value += frac * amount * py * (1.0 - px) * lb.v[tau]
        if tau >= end_x and tau >= end_y:
            break
    return value


def time_per_member(basis: Any, path: Any, sample: int) -> float:
    """Seconds a member the loop takes on ``sample`` pensioners with a known spouse from the member file
    at ``path`` (the first ones in the file; reading the file and setting up are not timed)."""
    import time

    import polars as pl

    from valuation.members import read_members

    records = read_members(path, basis).records
    pick = records.filter((pl.col("status") == STATUS) & pl.col("spouse_date_of_birth").is_not_null())
    rows = list(pick.head(sample).iter_rows(named=True))
    if not rows:
        raise ValueError("no pensioner with a known spouse in the member file to time the loop on")
    lb = LoopBasis.from_basis(basis)
    start = time.perf_counter()
    for row in rows:
        value_pensioner_with_spouse(lb, row)
    return (time.perf_counter() - start) / len(rows)


__all__ = ["LoopBasis", "time_per_member", "value_pensioner_with_spouse"]
