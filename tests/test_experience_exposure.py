"""Exposure cells for hand-worked members.

Day count (stated in valuation.experience.exposure): the exposed days are those after the entry date up
to and including the end date (death, exit or period end); exposure [years] = days / 365.25; a day is
labelled with the age last birthday and the calendar year it falls in; 29 February birthdays are attained
on 1 March in other years (common practice). Day counts below were worked by hand from a calendar.
"""

from __future__ import annotations

import numpy as np
import pytest

from valuation.experience.exposure import (
    age_last_birthday,
    explode_exposure,
    initial_extension_days,
)


def _d(*s: str) -> np.ndarray:
    return np.array(s, dtype="datetime64[D]")


def _cells(out: dict, member: int) -> list[tuple[int, int, int]]:
    sel = out["member"] == member
    return list(
        zip(out["age"][sel].tolist(), out["year"][sel].tolist(), out["days"][sel].tolist(), strict=True)
    )


def test_hand_worked_exposure_death_exit_and_late_entry() -> None:
    out = explode_exposure(
        dob=_d("1955-08-20", "1948-02-29", "1970-01-01"),
        entry=_d("2021-03-31", "2021-03-31", "2022-12-31"),  # member 2 joins the data late
        end=_d("2022-11-05", "2023-06-30", "2024-03-31"),  # member 0 dies, member 1 exits
    )
    # Member 0, born 20 Aug 1955, died 5 Nov 2022:
    #   1 Apr-19 Aug 2021 age 65: 30+31+30+31+19 = 141; 20 Aug-31 Dec 2021 age 66: 12+30+31+30+31 = 134;
    #   1 Jan-19 Aug 2022 age 66: 31+28+31+30+31+30+31+19 = 231; 20 Aug-5 Nov 2022 age 67: 12+30+31+5 = 78.
    assert _cells(out, 0) == [(65, 2021, 141), (66, 2021, 134), (66, 2022, 231), (67, 2022, 78)]
    # Member 1, born 29 Feb 1948 (birthday 1 Mar in 2021-2023), exits 30 Jun 2023:
    #   1 Apr-31 Dec 2021 age 73: 275; Jan-Feb 2022 age 73: 59; 1 Mar-31 Dec 2022 age 74: 306;
    #   Jan-Feb 2023 age 74: 59; 1 Mar-30 Jun 2023 age 75: 31+30+31+30 = 122.
    assert _cells(out, 1) == [
        (73, 2021, 275),
        (73, 2022, 59),
        (74, 2022, 306),
        (74, 2023, 59),
        (75, 2023, 122),
    ]
    # Member 2, born 1 Jan 1970, observed from 1 Jan 2023 to 31 Mar 2024 (2024 a leap year):
    assert _cells(out, 2) == [(53, 2023, 365), (54, 2024, 31 + 29 + 31)]
    # Totals equal the calendar differences end - entry, and exposure is days / 365.25.
    assert out["days"][out["member"] == 0].sum() == 584
    assert out["days"][out["member"] == 1].sum() == 821
    np.testing.assert_allclose(out["exposure"], out["days"] / 365.25, rtol=1e-12)


def test_initial_extension_fills_the_year_of_age() -> None:
    # Death on 5 Nov 2022 at age 67 (born 20 Aug 1955): the year of age runs to 19 Aug 2023,
    # 6 Nov 2022-19 Aug 2023 = 25+31+31+28+31+30+31+30+31+19 = 287 days, so 78 + 287 = 365 days,
    # the whole year of age 20 Aug 2022-19 Aug 2023 (initial exposed to risk, Benjamin & Pollard).
    assert initial_extension_days(_d("1955-08-20"), _d("2022-11-05")).tolist() == [287]
    # A death on the day before a birthday has no extension.
    assert initial_extension_days(_d("1955-08-20"), _d("2023-08-19")).tolist() == [0]


def test_age_last_birthday_on_and_around_birthdays() -> None:
    dob = _d("1948-02-29", "1948-02-29", "1948-02-29", "1960-07-01", "1960-07-01")
    on = _d("2023-02-28", "2023-03-01", "2024-02-29", "2021-06-30", "2021-07-01")
    assert age_last_birthday(dob, on).tolist() == [74, 75, 76, 60, 61]


def test_no_cells_when_end_not_after_entry() -> None:
    out = explode_exposure(_d("1950-01-01"), _d("2021-03-31"), _d("2021-03-31"))
    assert out["member"].size == 0


def test_exposure_sums_to_observed_days_for_many_members() -> None:
    """The split loses no day: per member, cell days add up to end - entry (a partition identity)."""
    rng = np.random.default_rng(7)
    n = 5000
    dob = np.datetime64("1930-01-01") + rng.integers(0, 25_000, n)
    entry = np.datetime64("2021-03-31") + rng.integers(0, 300, n)
    end = entry + rng.integers(1, 1100, n)
    out = explode_exposure(dob, entry, end)
    totals = np.bincount(out["member"], weights=out["days"], minlength=n)
    assert np.array_equal(totals, (end - entry).astype(float))
    assert np.all(out["days"] > 0)
    # each cell's age is the age last birthday on its first day: never more than the age at the end
    assert np.all(out["age"] <= age_last_birthday(dob[out["member"]], end[out["member"]]))


@pytest.mark.parametrize("n", [1, 3])
def test_single_and_vector_paths_agree(n: int) -> None:
    dob = _d(*(["1955-08-20"] * n))
    out = explode_exposure(dob, _d(*(["2021-03-31"] * n)), _d(*(["2022-11-05"] * n)))
    assert out["days"].tolist() == [141, 134, 231, 78] * n
