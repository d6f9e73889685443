"""The valuation run: value a scheme on a basis, with sensitivities, and assemble the results.

Here the records are valued; :mod:`valuation.pipeline` chains reading, valuing and writing, and its
``value_scheme(basis, members)`` is the one call a notebook user needs. A run returns a
:class:`~valuation.engine.results.ValuationResult` with polars data frames.

References
----------
IAS 19 *Employee Benefits*: paras 67-69 (projected unit credit), 83 (discount rate), 145 (sensitivities),
147 (maturity profile and weighted average duration).
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import numpy as np
import polars as pl

from valuation.basis.model import Basis
from valuation.discounting import (
    RateCurve,
    effective_duration,
    macaulay_duration,
    modified_duration,
    present_value,
    single_equivalent_rate,
)
from valuation.engine.benefits import RULES, SALARY_RULES, liability_column, salary_dependent
from valuation.engine.project import AGE_COLUMN, Projection, Valuer, with_ages
from valuation.engine.results import ValuationResult
from valuation.engine.scenario import (
    BASE,
    Scenario,
    cohort_expectancy_at,
    period_expectancy_at,
    scenarios_from_basis,
)
from valuation.manifest import file_sha256
from valuation.members.data import MemberData
from valuation.version import __version__
from valuation.vocabulary import SEXES, STATUSES

#: Members are valued in chunks of this many records, which keeps memory flat for any scheme size.
DEFAULT_CHUNK = 1_000_000
#: Shift of the discount curve for the effective duration [per annum].
EFFECTIVE_SHIFT = 0.001

Progress = Callable[[str, int, int], None]


def _chunks(records: pl.DataFrame, size: int) -> Iterable[pl.DataFrame]:
    for off in range(0, records.height, size):
        yield records.slice(off, size)


def project_records(
    records: pl.DataFrame, basis: Basis, scenario: Scenario = BASE, *, base_multiplier: float = 1.0,
    chunk_size: int = DEFAULT_CHUNK,
) -> Projection:
    """Value ``records`` under one scenario, chunk by chunk, and join the per-member values."""
    valuer = Valuer(basis, scenario, base_multiplier)
    parts = [valuer.value(chunk) for chunk in _chunks(records, chunk_size)]
    if not parts:
        return valuer.value(records)
    return parts[0] if len(parts) == 1 else Projection.join(parts)


def _month_times(months: int) -> np.ndarray:
    return np.arange(months) / 12.0


def discounted_total(cash: np.ndarray, curve: RateCurve) -> float:
    """Present value [currency] of expected payments by month (index = months after the valuation date)."""
    return float(present_value(cash, _month_times(len(cash)), curve))


def cashflow_measures(cash: np.ndarray, curve: RateCurve) -> dict[str, float]:
    """PV, Macaulay, modified and effective duration and the single equivalent rate of monthly cash flows.

    References
    ----------
    The functions of :mod:`valuation.discounting`: Macaulay duration sum t v(t) CF_t / sum v(t) CF_t on
    the curve; modified = Macaulay duration at the single equivalent rate i, divided by 1 + i (equal to
    Macaulay / (1 + i) on a flat curve); effective = (PV(-h) - PV(+h)) / (2 h PV) [DHW 2013, section
    14.4; Kellison ch. 11].
    """
    t = _month_times(len(cash))
    nz = cash != 0
    t, cf = t[nz], cash[nz]
    pv = float(present_value(cf, t, curve))
    if not pv:
        return {"present_value": pv, "macaulay": 0.0, "modified": 0.0, "effective": 0.0,
                "single_equivalent_discount_rate": float("nan")}
    sedr = float(single_equivalent_rate(cf, t, curve))
    return {
        "present_value": pv,
        "macaulay": float(macaulay_duration(cf, t, curve)),
        "modified": float(modified_duration(cf, t, sedr)),
        "effective": float(effective_duration(cf, t, curve, EFFECTIVE_SHIFT)),
        "single_equivalent_discount_rate": sedr,
    }


def _yearly(cash: np.ndarray, curve: RateCurve) -> pl.DataFrame:
    """Expected payments by projection year: nominal by status and in total, the year's discount factor and
    the discounted total.

    The payments sit on the monthly grid, so a year's discounted total is the sum of its monthly payments
    each discounted to the valuation date. ``discount_factor`` is that sum divided by the year's nominal
    total (the payment-weighted factor of the year's months), so that on every row
    total x discount_factor = discounted_total, and the discounted totals add up to the liability. A year
    with no payments shows the mid-year factor.

    References
    ----------
    PV = sum_t v^t CF_t [DHW 2013, section 2.2]; IAS 19 para 147(c) (maturity profile of the obligation).
    """
    months = cash.shape[1]
    n_years = months // 12
    by_year = cash[:, : n_years * 12].reshape(len(STATUSES), n_years, 12).sum(axis=2)
    v = curve.discount_factors(_month_times(months))[: n_years * 12]
    disc_total = (cash[:, : n_years * 12].sum(axis=0) * v).reshape(n_years, 12).sum(axis=1)
    total = by_year.sum(axis=0)
    last = int(np.flatnonzero(total > 1e-9).max()) + 1 if np.any(total > 1e-9) else 1
    total, disc_total = total[:last], disc_total[:last]
    mid_year = curve.discount_factors(np.arange(last) + 0.5)
    factor = np.divide(disc_total, total, out=mid_year.copy(), where=total > 0)
    data: dict[str, Any] = {"year": np.arange(1, last + 1)}
    for i, st in enumerate(STATUSES):
        data[st] = by_year[i, :last]
    data["total"] = total
    data["discount_factor"] = factor
    data["discounted_total"] = disc_total
    return pl.DataFrame(data)


def _group_code(records: pl.DataFrame) -> np.ndarray:
    """Status x sex cell of each record: status index * 2 + sex index (STATUSES, SEXES order)."""
    st = records["status"].replace_strict({s: i for i, s in enumerate(STATUSES)}, return_dtype=pl.Int64)
    sx = records["sex"].replace_strict({s: i for i, s in enumerate(SEXES)}, return_dtype=pl.Int64)
    return (st * len(SEXES) + sx).to_numpy()


N_CELLS = len(STATUSES) * len(SEXES)


def _cell_sums(code: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Sum of values by status x sex cell: deterministic (sequential) sums, so runs repeat to the bit."""
    return np.bincount(code, weights=values, minlength=N_CELLS)[:N_CELLS]


def _cells_frame(benefit_sums: dict[tuple[str, str], np.ndarray]) -> pl.DataFrame:
    """Frame of liability by (status, sex, tranche, benefit) from arrays of cell sums."""
    rows = []
    for c in range(N_CELLS):
        for (tranche, benefit), sums in benefit_sums.items():
            rows.append({"status": STATUSES[c // 2], "sex": SEXES[c % 2], "tranche": tranche,
                         "benefit": benefit, "liability": float(sums[c])})
    return pl.DataFrame(rows, schema={"status": pl.Utf8, "sex": pl.Utf8, "tranche": pl.Utf8,
                                      "benefit": pl.Utf8, "liability": pl.Float64})


def _by(frame: pl.DataFrame, col: str, keys: Iterable[str]) -> dict[str, float]:
    """Sum of ``liability`` by the values of ``col``, added in the frame's (fixed) row order."""
    out = {k: 0.0 for k in keys}
    for key, value in zip(frame[col].to_list(), frame["liability"].to_list(), strict=True):
        if key in out:
            out[key] += value
    return out


def _assumptions_summary(basis: Basis) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for name, fn in (("discount", basis.discount_curve), ("inflation", basis.inflation_curve)):
        curve = fn()
        out[f"{name}_rate_flat" if curve.is_flat else f"{name}_curve_10y"] = float(curve.spot(np.array([10.0]))[0])
    out.update({
        "salary_growth": float(basis.salary_growth),
        "retirement_age": float(basis.retirement_age),
        "payment_frequency": int(basis.payment.frequency),
        "payment_timing": str(basis.payment.timing),
        "proportion_married": {k: float(v) for k, v in basis.spouse.proportion_married.items()},
        "spouse_age_difference": float(basis.spouse.age_difference),
        "spouse_fraction": float(basis.spouse.fraction),
        "commutation_proportion": float(basis.commutation.proportion),
        "fractional_age": str(basis.fractional_age),
        "age_convention": str(basis.age_convention),
    })
    return out


def life_expectancies(basis: Basis) -> pl.DataFrame:
    """Cohort expectancy at 65 for members aged 65 and 45 now, and period expectancy at 65, by sex.

    Uses the pensioner mortality of each sex (common practice for disclosures).
    """
    year = basis.valuation_date.year
    rows = []
    for sex in SEXES:
        mb = basis.mortality("pensioner", sex)
        for age_now in (65, 45):
            rows.append({"sex": sex, "age_now": age_now, "at_age": 65, "basis": "cohort",
                         "years": cohort_expectancy_at(mb, year, age_now, 65.0, basis.fractional_age)})
        rows.append({"sex": sex, "age_now": 65, "at_age": 65, "basis": "period",
                     "years": period_expectancy_at(mb, year, 65.0, basis.fractional_age)})
    return pl.DataFrame(rows)


class RunAccumulator:
    """Values a scheme chunk by chunk and assembles the results at the end.

    Every chunk is valued under the base scenario and each sensitivity scenario (valuers are built once);
    only sums by cell, the monthly cash flows and the per-member rows are kept, so memory grows with the
    per-member table alone, and not even that when a ``member_sink`` takes the rows away (streaming).
    """

    def __init__(
        self,
        basis: Basis,
        *,
        q_multiplier: float = 1.0,
        sensitivities: bool = True,
        member_sink: Callable[[pl.DataFrame], None] | None = None,
        on_step: Callable[[str], None] | None = None,
    ) -> None:
        self.basis = basis
        self.on_step = on_step
        self.q_multiplier = q_multiplier
        self.sensitivities = sensitivities
        self.scenarios = scenarios_from_basis(basis, basis.valuation_date.year) if sensitivities else []
        self.base = Valuer(basis, BASE, q_multiplier)
        # scenarios that keep mortality share the base's survival (worked out once a chunk)
        self.no_growth = Valuer(basis, Scenario(no_salary_growth=True), q_multiplier, survival_of=self.base,
                                deaths_next_year=False)
        # discount-rate scenarios come from the cash flows; the others are valued again
        self.valuers = {sc.name: Valuer(basis, sc, q_multiplier, survival_of=self.base, deaths_next_year=False)
                        for sc in self.scenarios if sc.kind != "discount_rate"}
        self.member_sink = member_sink
        self.cash: np.ndarray | None = None
        self.cell_sums: dict[tuple[str, str], np.ndarray] = {}
        self.death_lives = np.zeros(N_CELLS)
        self.death_amounts = np.zeros(N_CELLS)
        self.members: list[pl.DataFrame] = []
        self.scenario_totals = {name: 0.0 for name in self.valuers}
        self.total = 0.0
        self.active_total = 0.0
        self.abo = 0.0
        self.service_cost = 0.0
        self.lumps = 0.0
        self.tranches = list(basis.tranches)

    def add(self, records: pl.DataFrame) -> None:
        """Value one chunk of valid member records (the frame ``read_members`` returns)."""
        basis = self.basis
        records = with_ages(records, basis)
        # ages, survival rows, amounts and keys are worked out once and shared by every scenario
        prepared = self.base.prepare(records)
        proj = self.base.value(prepared)
        self._step("valuing")
        liability = proj.liability
        self.total += float(liability.sum())
        for _, lump in proj.lumps.items():
            self.lumps += float(lump.sum())
        self.cash = proj.cashflow if self.cash is None else self.cash + proj.cashflow
        active = salary_dependent(records["status"])
        if active.any():
            act = records.filter(pl.Series(active))
            self.active_total += float(liability[active].sum())
            self.abo += self.no_growth.total(prepared, SALARY_RULES)
            self._step("accrued-benefit measure")
            # current service cost: the value of the benefits the coming year of service earns. Pensions
            # (and the cash commuted from them) grow with service or with the accrued pension; the
            # death-in-service lump sum is attributed straight-line to the date of death (project.py).
            pension_benefit = (sum(v.sum(axis=1) for v in proj.pensions.values()) + proj.earned_with_pension)[active]
            if basis.benefit_design == "career_average":
                accrued = proj.amount_now[active]
                next_unit = float(basis.accrual_rate) * act["salary"].to_numpy().astype(float) * (
                    1.0 + basis.salary_growth) ** 0.5
            else:
                accrued = act["service_years"].to_numpy().astype(float)
                next_unit = np.ones(act.height)
            per_unit = np.divide(pension_benefit, accrued, out=np.zeros(act.height), where=accrued > 0)
            self.service_cost += float((per_unit * next_unit + proj.lump_next_year[active]).sum())
        for sc in self.scenarios:
            if sc.name not in self.valuers:
                continue
            if sc.kind == "salary_growth":
                # salary growth changes actives' benefits only: re-value them, keep the rest
                part = self.valuers[sc.name].total(prepared, SALARY_RULES) if active.any() else 0.0
                self.scenario_totals[sc.name] += float(liability[~active].sum() + part)
            elif not sc.changes_mortality:
                # the same survival: pensions in payment follow from the base's expected payments per unit
                # of the increase index; the other members are valued again
                valuer = self.valuers[sc.name]
                others = [r for r in RULES if r not in proj.indexed_rules]
                self.scenario_totals[sc.name] += valuer.total(prepared, others) + valuer.indexed_value(proj)
            else:
                self.scenario_totals[sc.name] += self.valuers[sc.name].total(prepared)
            self._step(f"sensitivity: {sc.name}")
        code = _group_code(records)
        for key, values in proj.cells():
            self.cell_sums[key] = self.cell_sums.get(key, np.zeros(N_CELLS)) + _cell_sums(code, values)
        self.death_lives += _cell_sums(code, proj.q_next)
        # by amounts: each life weighted by the pension on its record (in payment, deferred, or accrued for
        # a career-average active), the same weight the experience analysis counts actual deaths with
        pension = records["pension"].fill_null(0.0).to_numpy().astype(float)
        self.death_amounts += _cell_sums(code, proj.q_next * pension)
        ages = records[AGE_COLUMN].to_numpy()
        members = pl.DataFrame({
            "member_id": records["member_id"], "status": records["status"], "sex": records["sex"],
            "age": ages, "pension": proj.amount_now, "liability": liability,
            **{liability_column(b): v for b, v in proj.benefit_values()},
            "annuity_factor": proj.annuity_factor, "q_next_year": proj.q_next,
        })
        if self.member_sink is not None:
            self.member_sink(members)
        else:
            self.members.append(members)

    @property
    def steps_per_chunk(self) -> int:
        """Progress steps one chunk reports (base, accrued-benefit measure, each re-valued sensitivity)."""
        return 2 + len(self.valuers)

    def _step(self, label: str) -> None:
        if self.on_step is not None:
            self.on_step(label)

    def finish(
        self,
        *,
        read: int,
        valued: int,
        excluded: int,
        counts: pl.DataFrame,
        exceptions: pl.DataFrame,
        inputs: dict[str, str],
        started: datetime,
        run_seconds: float,
        settings: dict[str, Any],
        ignored_columns: list[str] | None = None,
    ) -> ValuationResult:
        """Assemble the results once every chunk has been added.

        ``ignored_columns`` are the member file's headers that are neither ours nor mapped (listed in
        ``records`` and the manifest, never silently dropped).
        """
        basis = self.basis
        curve = basis.discount_curve()
        cash = self.cash if self.cash is not None else np.zeros((len(STATUSES), 12))
        cash_total = cash.sum(axis=0)
        total = self.total
        sens_rows = []
        for sc in self.scenarios:
            if sc.kind == "discount_rate":
                # Expected nominal cash flows do not depend on the discount rate, so the re-valued
                # liability is exactly the PV of the base cash flows on the shifted curve.
                value = discounted_total(cash_total, curve.shifted(sc.discount_shift))
            else:
                value = self.scenario_totals[sc.name]
            sens_rows.append({"name": sc.name, "kind": sc.kind, "shift": sc.shift, "liability": value,
                              "change_pct": 100.0 * (value / total - 1.0) if total else 0.0})
        sens = pl.DataFrame(sens_rows, schema={"name": pl.Utf8, "kind": pl.Utf8, "shift": pl.Float64,
                                               "liability": pl.Float64, "change_pct": pl.Float64})
        measures = cashflow_measures(cash_total, curve) if total else {
            "present_value": 0.0, "macaulay": 0.0, "modified": 0.0, "effective": 0.0,
            "single_equivalent_discount_rate": float("nan")}
        cashflows = _yearly(cash, curve)
        cells = _cells_frame(self.cell_sums)
        le = life_expectancies(basis)
        deaths = pl.DataFrame({"status": [STATUSES[c // 2] for c in range(N_CELLS)],
                               "sex": [SEXES[c % 2] for c in range(N_CELLS)],
                               "lives": self.death_lives, "amounts": self.death_amounts})
        members = pl.concat(self.members) if self.members else pl.DataFrame()
        by_status_counts = {
            r["status"]: {"read": int(r["read"]), "valued": int(r["valued"]), "excluded": int(r["excluded"])}
            for r in counts.iter_rows(named=True) if r["status"] in STATUSES
        }
        summary: dict[str, Any] = {
            "valuation_date": basis.valuation_date.isoformat(),
            "basis_name": basis.name,
            "records": {"read": int(read), "valued": int(valued), "excluded": int(excluded),
                        "by_status": by_status_counts, "ignored_columns": list(ignored_columns or [])},
            "liability": {
                "total": total,
                "by_status": _by(cells, "status", STATUSES),
                "by_sex": _by(cells, "sex", SEXES),
                "by_tranche": _by(cells.filter(pl.col("tranche") != "all"), "tranche", self.tranches)
                | {"lump_sums": self.lumps},
            },
            "active_measures": {"projected_obligation": self.active_total,
                                "accrued_benefit_obligation": self.abo, "current_service_cost": self.service_cost},
            "duration": {k: measures[k] for k in ("macaulay", "modified", "effective")},
            "single_equivalent_discount_rate": measures["single_equivalent_discount_rate"],
            "cashflow_present_value": measures["present_value"],
            "sensitivities": sens.to_dicts(),
            "life_expectancy": le.to_dicts(),
            "expected_deaths_next_year": {
                "lives": float(deaths["lives"].sum()), "amounts": float(deaths["amounts"].sum()),
                "by_group": deaths.to_dicts(),
            },
            "assumptions": _assumptions_summary(basis),
            "manifest": {
                "tool_version": __version__,
                "inputs": inputs,
                "basis": basis.as_dict(),
                "settings": settings,
                "ignored_columns": list(ignored_columns or []),
                "started_at": started.isoformat(timespec="seconds"),
                "run_seconds": round(run_seconds, 3),
            },
        }
        return ValuationResult(
            summary=summary, liabilities=cells, cashflows=cashflows, members=members, sensitivities=sens,
            life_expectancy=le, expected_deaths=deaths, exceptions=exceptions, basis=basis, monthly=cash,
        )


def input_hashes(paths: Iterable[str | Path | None]) -> dict[str, str]:
    """SHA-256 of every input file, keyed by its path (relative to the working folder when inside it)."""
    out = {}
    for p in paths:
        if p is None:
            continue
        path = Path(p)
        try:
            key = str(path.resolve().relative_to(Path.cwd().resolve()))
        except ValueError:
            key = str(path)
        out[key] = file_sha256(path)
    return out


def _member_inputs(member_data: MemberData) -> dict[str, str]:
    """The member records' entry in the manifest: the file's SHA-256, or the data frame's."""
    digest = getattr(member_data, "digest", None)
    if digest is not None:
        return {str(member_data.path): digest}
    return input_hashes([member_data.path])


def value_members(
    basis: Basis,
    member_data: MemberData,
    *,
    q_multiplier: float = 1.0,
    sensitivities: bool = True,
    chunk_size: int = DEFAULT_CHUNK,
    progress: Progress | None = None,
    input_files: Iterable[str | Path] = (),
) -> ValuationResult:
    """Value the records of ``member_data`` (from ``read_members``) on ``basis`` (from ``load_basis``).

    ``q_multiplier`` scales every mortality rate (used by the experience analysis to re-value at an
    implied percentage of the table). Returns the full results; nothing is written.
    """
    if not isinstance(basis, Basis) and isinstance(member_data, Basis):
        raise TypeError("value_members takes the basis first: value_members(basis, member_data)")
    started = datetime.now(timezone.utc)
    t0 = time.perf_counter()
    records: pl.DataFrame = member_data.records
    n_chunks = max(1, -(-records.height // chunk_size))
    done = [0]
    total_steps = [n_chunks * 2]

    def step(label: str) -> None:
        done[0] += 1
        if progress:
            progress(label, done[0], total_steps[0])

    acc = RunAccumulator(basis, q_multiplier=q_multiplier, sensitivities=sensitivities, on_step=step)
    total_steps[0] = n_chunks * acc.steps_per_chunk
    if progress:
        progress("valuing", 0, total_steps[0])
    for chunk in _chunks(records, chunk_size):
        acc.add(chunk)
    return acc.finish(
        read=member_data.read, valued=member_data.valued, excluded=member_data.excluded,
        counts=member_data.counts_by_status(), exceptions=member_data.exceptions,
        inputs=_member_inputs(member_data) | input_hashes([basis.source_path, *input_files]), started=started,
        run_seconds=time.perf_counter() - t0,
        settings={"sensitivities": sensitivities, "q_multiplier": q_multiplier, "chunk_size": chunk_size},
        ignored_columns=list(getattr(member_data, "ignored_columns", []) or []),
    )
