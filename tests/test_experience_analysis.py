"""A/E analysis on frames: hand-worked expected deaths, the life-table identity, a simulation check and
the late-reporting allowance. Rates come from the SULT Makeham law (Dickson, Hardy & Waters, Actuarial
Mathematics for Life Contingent Risks, Appendix D) so these tests need no basis file.
"""

from __future__ import annotations

from datetime import date

import numpy as np
import polars as pl
import pytest

from valuation.experience import ExperienceSettings, analyse_records
from valuation.experience.cells import CLOSING_AGE_REASON
from valuation.experience.exposure import explode_exposure
from valuation.mortality.laws import SULT_LAW


class LawRates:
    """q from a Makeham law at integer ages (no improvement); mu = -ln(1 - q) (constant force in the year)."""

    def __init__(self, percentage: float = 1.0) -> None:
        self.percentage = percentage

    def q(self, ages, years):  # noqa: ANN001, ANN201
        ages = np.asarray(ages, dtype=float) + 0 * np.asarray(years)
        return self.percentage * SULT_LAW.qx(ages)

    def mu(self, ages, years):  # noqa: ANN001, ANN201
        return -np.log1p(-self.q(ages, years))


def lookup_for(rates: LawRates):  # noqa: ANN201
    return lambda group, sex: rates


def records(dobs: list[str], pensions: list[float] | None = None, status: str = "pensioner") -> pl.DataFrame:
    n = len(dobs)
    return pl.DataFrame(
        {
            "row": list(range(2, n + 2)),
            "member_id": [f"M{i:05d}" for i in range(n)],
            "status": [status] * n,
            "sex": ["M"] * n,
            "date_of_birth": [date.fromisoformat(d) for d in dobs],
            "pension": pensions if pensions is not None else [1000.0] * n,
        }
    )


def deaths_frame(rows: list[tuple[str, str, float | None]]) -> pl.DataFrame:
    return pl.DataFrame(
        {
            "row": list(range(2, len(rows) + 2)),
            "member_id": [r[0] for r in rows],
            "date_text": [r[1] for r in rows],
            "date": [date.fromisoformat(r[1]) for r in rows],
            "pension_text": [None if r[2] is None else str(r[2]) for r in rows],
            "pension_at_death": [r[2] for r in rows],
        },
        schema_overrides={"pension_at_death": pl.Float64, "pension_text": pl.String},
    )


def exits_frame(rows: list[tuple[str, str]]) -> pl.DataFrame:
    return pl.DataFrame(
        {
            "row": list(range(2, len(rows) + 2)),
            "member_id": [r[0] for r in rows],
            "date_text": [r[1] for r in rows],
            "date": [date.fromisoformat(r[1]) for r in rows],
            "reason": ["transfer"] * len(rows),
        }
    )


PERIOD = {"period_start": date(2021, 3, 31), "period_end": date(2024, 3, 31)}


def test_hand_worked_expected_deaths_central_and_initial() -> None:
    """Expected = sum mu x days/365.25 over the hand-worked cells (Benjamin & Pollard, central exposed to
    risk); initial: the death cell runs to the end of the year of age and q replaces mu."""
    rates = LawRates()
    recs = records(["1955-08-20", "1948-02-29"], [1200.0, 800.0])
    deaths = deaths_frame([("M00000", "2022-11-05", 1500.0)])
    exits = exits_frame([("M00001", "2023-06-30")])
    # cells worked by hand in tests/test_experience_exposure.py
    cells = [(65, 141), (66, 134), (66, 231), (67, 78), (73, 275), (73, 59), (74, 306), (74, 59), (75, 122)]
    w = [1200.0] * 4 + [800.0] * 5
    mu = lambda x: -np.log1p(-SULT_LAW.qx(float(x)))  # noqa: E731
    expected = sum(mu(x) * d / 365.25 for x, d in cells)
    expected_amounts = sum(wi * mu(x) * d / 365.25 for wi, (x, d) in zip(w, cells, strict=True))

    res = analyse_records(recs, deaths, exits, lookup_for(rates), ExperienceSettings(**PERIOD))
    o = res.overall()
    assert o["expected_lives"] == pytest.approx(expected, rel=1e-12)
    assert o["expected_amounts"] == pytest.approx(expected_amounts, rel=1e-12)
    assert o["actual_lives"] == 1.0
    assert o["actual_amounts"] == 1500.0  # pension at death given, so it weights the death
    assert o["exposure_years"] == pytest.approx((584 + 821) / 365.25, rel=1e-12)
    assert o["ae_lives"] == pytest.approx(1.0 / expected, rel=1e-12)

    res_i = analyse_records(
        recs, deaths, exits, lookup_for(rates), ExperienceSettings(**PERIOD, exposure="initial")
    )
    cells_i = [(x, 365 if x == 67 else d) for x, d in cells]  # 78 + 287 days, hand-worked
    expected_i = sum(float(SULT_LAW.qx(float(x))) * d / 365.25 for x, d in cells_i)
    assert res_i.overall()["expected_lives"] == pytest.approx(expected_i, rel=1e-12)
    assert "initial exposed to risk" in res_i.summary["settings"]["exposure_method"]
    assert "central exposed to risk" in res.summary["settings"]["exposure_method"]


def test_life_table_identity_initial_exposure() -> None:
    """DHW ch. 3: l_x lives observed over a whole year of age have E[D_x] = l_x q_x. With initial exposure,
    deaths carry exposure to the end of the year of age, so expected deaths = sum of q over the lives
    whatever the deaths were. The year 2021 has 365 days, so each life's exposure is 365/365.25 years under
    the stated day count; the identity holds to that factor exactly."""
    lx = {61: 40, 70: 25, 85: 10}  # lives aged exactly x on 1 Jan 2021 (born 1 Jan)
    dobs = [f"{2021 - x}-01-01" for x, n in lx.items() for _ in range(n)]
    recs = records(dobs)
    # some of them die during the year: initial exposure must not change
    deaths = deaths_frame(
        [("M00000", "2021-02-10", None), ("M00041", "2021-07-01", None), ("M00070", "2021-12-31", None)]
    )
    settings = ExperienceSettings(
        period_start=date(2020, 12, 31), period_end=date(2021, 12, 31), exposure="initial"
    )
    res = analyse_records(recs, deaths, None, lookup_for(LawRates()), settings)
    l_q = sum(n * float(SULT_LAW.qx(float(x))) for x, n in lx.items())
    assert res.overall()["expected_lives"] == pytest.approx(l_q * 365 / 365.25, rel=1e-12)
    # and by age band: 85-89 holds l_85 q_85
    row = res.table.filter((pl.col("dimension") == "age_band") & (pl.col("group") == "85-89")).row(
        0, named=True
    )
    assert row["expected_lives"] == pytest.approx(10 * float(SULT_LAW.qx(85.0)) * 365 / 365.25, rel=1e-12)
    assert res.overall()["actual_lives"] == 3


def _simulate_death_dates(
    dob: np.ndarray, start: np.datetime64, end: np.datetime64, rates: LawRates, rng: np.random.Generator
) -> np.ndarray:
    """Death dates (NaT for survivors) by inverting the cumulative hazard over the exposure cells."""
    n = dob.size
    x = explode_exposure(dob, np.full(n, start), np.full(n, end))
    mu = rates.mu(x["age"], x["year"])
    h = mu * x["exposure"]
    owner = x["member"]
    first = np.r_[True, owner[1:] != owner[:-1]]
    cum = np.cumsum(h)
    base = np.maximum.accumulate(np.where(first, cum - h, -np.inf))  # hazard before the member's first cell
    cum_m = cum - base
    prev = cum_m - h
    target = rng.exponential(size=n)[owner]
    hit = (cum_m >= target) & (prev < target)
    days_before = np.cumsum(x["days"]) - x["days"]
    days_before = days_before - np.maximum.accumulate(np.where(first, days_before, -1))
    t_days = np.ceil((target - prev) / mu * 365.25).astype(np.int64)
    death = np.full(n, np.datetime64("NaT"), dtype="datetime64[D]")
    death[owner[hit]] = start + days_before[hit] + np.clip(t_days[hit], 1, x["days"][hit])
    return death


def test_simulated_deaths_give_ae_near_one_and_intervals_cover() -> None:
    """Deaths simulated from the basis itself (inverse cumulative hazard, fixed seed): the mean A/E is
    near 100 % and the 95 % intervals cover the truth (A/E = 1) about 95 % of the time. Exact Garwood
    limits are conservative, so lives coverage sits at or a little above 95 %."""
    rng = np.random.default_rng(20240331)
    rates = LawRates()
    start, end = np.datetime64("2021-03-31"), np.datetime64("2024-03-31")
    n, schemes = 2000, 80
    cover_l = cover_a = 0
    ae_l, ae_a, sd_poisson = [], [], []
    for _ in range(schemes):
        dob = np.datetime64("1931-01-01") + rng.integers(0, 365 * 30, n)
        pensions = np.round(rng.lognormal(8.5, 0.6, n), 2)
        death = _simulate_death_dates(dob, start, end, rates, rng)
        ids = pl.Series("member_id", [f"M{i:05d}" for i in range(n)])
        recs = pl.DataFrame(
            {
                "row": np.arange(2, n + 2),
                "member_id": ids,
                "status": ["pensioner"] * n,
                "sex": ["M"] * n,
                "date_of_birth": dob,
                "pension": pensions,
            }
        )
        dead = np.flatnonzero(~np.isnat(death))
        deaths = pl.DataFrame(
            {
                "row": np.arange(2, dead.size + 2),
                "member_id": ids.gather(dead),
                "date_text": death[dead].astype(str),
                "date": death[dead],
                "pension_text": [None] * dead.size,
                "pension_at_death": np.full(dead.size, np.nan),
            },
            schema_overrides={"pension_text": pl.String},
        ).with_columns(pl.lit(None, pl.Float64).alias("pension_at_death"))
        o = analyse_records(recs, deaths, None, lookup_for(rates), ExperienceSettings(**PERIOD)).overall()
        ae_l.append(o["ae_lives"])
        sd_poisson.append(1.0 / np.sqrt(o["expected_lives"]))  # sd of A/E when A ~ Poisson(E)
        ae_a.append(o["ae_amounts"])
        cover_l += o["ae_lives_lower"] <= 1.0 <= o["ae_lives_upper"]
        cover_a += o["ae_amounts_lower"] <= 1.0 <= o["ae_amounts_upper"]
    # about 2000 x 3 x 0.03 = 180 deaths a scheme, so sd(A/E) ~ 0.075 and sd(mean of 80) ~ 0.008
    assert np.mean(ae_l) == pytest.approx(1.0, abs=0.03)
    assert np.mean(ae_a) == pytest.approx(1.0, abs=0.04)
    # the scatter of A/E across schemes matches the Poisson model the intervals assume (the sample sd of
    # 80 values is itself uncertain by about 8 %)
    assert np.std(ae_l) == pytest.approx(np.mean(sd_poisson), rel=0.2)
    # binomial sd of a coverage over 80 schemes ~ 0.025
    assert 0.90 <= cover_l / schemes <= 1.0
    assert 0.88 <= cover_a / schemes <= 0.995


def test_late_reporting_uplift_applies_to_final_months_only() -> None:
    recs = records(["1950-05-05", "1950-05-05", "1950-05-05"], [100.0, 200.0, 400.0])
    deaths = deaths_frame(
        [("M00000", "2022-06-01", None), ("M00001", "2024-01-15", None), ("M00002", "2023-12-31", None)]
    )
    settings = ExperienceSettings(**PERIOD, late_months=3, late_uplift=0.10)
    res = analyse_records(recs, deaths, None, lookup_for(LawRates()), settings)
    o = res.overall()
    # 31 Mar 2024 less 3 months = 31 Dec 2023; deaths after it (15 Jan 2024) count 1.1, others 1.
    assert o["actual_lives"] == pytest.approx(1 + 1.1 + 1, rel=1e-12)
    assert o["actual_amounts"] == pytest.approx(100 + 1.1 * 200 + 400, rel=1e-12)
    assert "final 3 months" in res.summary["settings"]["late_reporting"]
    assert "10.0%" in res.summary["settings"]["late_reporting"]
    none = analyse_records(recs, deaths, None, lookup_for(LawRates()), ExperienceSettings(**PERIOD))
    assert none.summary["settings"]["late_reporting"].startswith("none")


def test_table_dimensions_reconcile_to_overall() -> None:
    """Each dimension partitions the cells, so its groups add up to the overall totals."""
    rng = np.random.default_rng(3)
    dob = np.datetime64("1935-01-01") + rng.integers(0, 365 * 40, 400)
    recs = records([str(d) for d in dob], np.round(rng.lognormal(8, 1, 400), 2).tolist()).with_columns(
        pl.Series("sex", rng.choice(["M", "F"], 400)),
        pl.Series("status", rng.choice(["pensioner", "deferred"], 400)),
    )
    deaths = deaths_frame([(f"M{i:05d}", "2023-02-02", None) for i in range(0, 400, 9)])
    res = analyse_records(recs, deaths, None, lookup_for(LawRates()), ExperienceSettings(**PERIOD))
    total = res.table.filter(pl.col("dimension") == "overall")
    for dim in ("sex", "status", "age_band", "pension_band", "calendar_year"):
        part = res.table.filter(pl.col("dimension") == dim)
        for col in ("exposure_years", "actual_lives", "expected_lives", "actual_amounts", "expected_amounts"):
            assert part[col].sum() == pytest.approx(total[col][0], rel=1e-10), (dim, col)
    assert set(res.table["dimension"].unique()) == {
        "overall",
        "sex",
        "status",
        "age_band",
        "pension_band",
        "calendar_year",
    }
    assert res.table.filter(pl.col("dimension") == "calendar_year")["group"].to_list() == [
        "2021",
        "2022",
        "2023",
        "2024",
    ]


class ClosingAt100(LawRates):
    """SULT law q, with q = 1 from age 100 (a table closing at 100)."""

    def q(self, ages, years):  # noqa: ANN001, ANN201
        q = super().q(ages, years)
        return np.where(np.asarray(ages) >= 100, 1.0, q)

    def mu(self, ages, years):  # noqa: ANN001, ANN201
        with np.errstate(divide="ignore"):
            return -np.log1p(-self.q(ages, years))


def test_cells_at_the_closing_age_are_left_out_with_a_warning() -> None:
    """mu = -ln(1 - q) is infinite where q = 1 (the closing age), so that exposure cannot carry expected
    deaths: it is left out and listed, never silently dropped."""
    recs = records(["1922-01-01", "1950-01-01"])  # the first turns 100 on 1 Jan 2022
    deaths = deaths_frame([("M00000", "2022-06-01", None)])
    res = analyse_records(
        recs,
        deaths,
        None,
        lookup_for(ClosingAt100()),
        ExperienceSettings(**PERIOD),
        files={"members": "s.csv"},
    )
    warn = res.exceptions.filter(pl.col("severity") == "warning").to_dicts()
    assert len(warn) == 1 and warn[0]["member_id"] == "M00000" and warn[0]["file"] == "s.csv"
    # the reason is the same for every member (a template); the member's figures are in the value:
    # 1 Jan-1 Jun 2022 = 31+28+31+30+31+1 = 152 days at age 100, with the one death
    assert warn[0]["reason"] == CLOSING_AGE_REASON
    assert warn[0]["value"] == (
        f"age 100 (pensioner M table); {round(152 / 365.25, 3)} years of exposure and 1 deaths left out"
    )
    assert (warn[0]["column"], warn[0]["file_column"]) == ("date_of_birth", "date_of_birth")
    counts = res.summary["records"]["deaths"]
    assert counts["counted"] == 1 and counts["in_cells"] == 0 and counts["left_out_at_closing_age"] == 1
    assert np.isfinite(res.overall()["expected_lives"])


@pytest.mark.parametrize(
    ("kwargs", "text"),
    [
        (
            {"period_end": date(2021, 3, 31)},
            "experience setting period_end (--period-end on the command line) is 2021-03-31: it must be a "
            "date after the period start 2021-03-31",
        ),
        ({"exposure": "mid"}, "experience setting exposure (--exposure on the command line) is mid: it must "
         "be central or initial"),
        ({"confidence": 95}, "confidence (--confidence on the command line) is 95: it must be a number "
         "strictly between 0 and 1 (fix: give 0.95 for 95 %)"),
        ({"late_uplift": -0.1}, "late_uplift (--late-uplift on the command line) is -0.1: it must be a "
         "proportion, 0 or more"),
        ({"pension_band_edges": (5000.0, 1000.0)}, "pension_band_edges is 5000, 1000: it must be increasing "
         "amounts above 0"),
    ],
)
def test_settings_errors_name_the_setting(kwargs: dict, text: str) -> None:
    """Messages name the setting and its command-line option, show the value as written (no Python
    repr) and give the fix once."""
    from valuation.errors import BasisError

    with pytest.raises(BasisError) as info:
        ExperienceSettings(**{**PERIOD, **kwargs})
    assert text in str(info.value)
    assert info.value.column == next(iter(kwargs))
    assert "datetime" not in str(info.value) and str(info.value).count("(fix:") == 1


def test_pension_band_labels_with_given_edges() -> None:
    from valuation.experience.tables import pension_band_labels

    labels, order = pension_band_labels(
        pl.Series([0.0, 500.0, 1000.0, 4999.99, 5000.0, None]), (1000.0, 5000.0)
    )
    assert labels.to_list() == [
        "nil",
        "under 1,000",
        "1,000 to 5,000",
        "1,000 to 5,000",
        "5,000 and over",
        "nil",
    ]
    assert list(order) == ["nil", "under 1,000", "1,000 to 5,000", "5,000 and over"]
