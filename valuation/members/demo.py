"""Build the demo scheme's files: current membership, a dirty extract, and three years of history.

``python -m valuation.members.demo OUT_DIR BASIS`` writes, with a fixed seed:

- ``members.csv``: the membership at the basis's valuation date, in the administrator's layout of the
  basis's ``[mapping]`` (so the mapping is exercised);
- ``members_dirty.csv``: a small extract with every record-level problem the validation reports;
- ``members_start.csv``: the membership three years before the valuation date (same layout);
- ``deaths.csv`` (member_id, date_of_death, pension_at_death) and ``exits.csv`` (member_id, exit_date,
  reason) over those three years, ISO dates. Deaths are drawn from the basis's mortality, so
  actual / expected deaths come out close to 1; two death rows are deliberately wrong (an unknown member,
  a date outside the period).

``members.csv`` follows from ``members_start.csv``: survivors who did not leave are aged three years
(pensions increased at 3 % a year, salaries at the basis's salary growth, three more years of service),
actives and deferreds past normal retirement age become pensioners, and new active members join.
"""

from __future__ import annotations

import sys
from datetime import date
from pathlib import Path

import numpy as np
import polars as pl

from valuation.basis import Basis, load_basis
from valuation.members.schema import tranche_column
from valuation.members.synth import synth_scheme, to_admin_format, write_scheme

SEED = 20250331
YEARS = 3
SCRIPT_TEXT = "<script>alert(1)</script>"


def _start_date(val: date) -> date:
    return date(val.year - YEARS, val.month, min(val.day, 28) if val.month == 2 else val.day)


def simulate_history(start: pl.DataFrame, basis: Basis, start_date: date, seed: int) -> tuple[
    pl.DataFrame, pl.DataFrame, np.ndarray
]:
    """Deaths and exits over ``YEARS`` years from ``start`` (our columns, typed).

    Each year every life still present dies with probability q(age, year) of its group and sex from the
    basis (age in whole years at the start of the year), at a uniform time in the year. Exits (leaving
    the scheme other than by death): deferreds transfer out at 2 % a year, and children's pensions stop
    at ``pension_end_age``. Returns deaths, exits and a mask of the records still present at the end.
    """
    rng = np.random.default_rng(seed)
    n = start.height
    s0 = np.datetime64(start_date, "D")
    dob = start["date_of_birth"].to_numpy().astype("datetime64[D]")
    age0 = (s0 - dob).astype(float) / 365.25
    status = start["status"].to_numpy()
    sex = start["sex"].to_numpy()
    present = np.ones(n, dtype=bool)
    death_day = np.full(n, np.datetime64("NaT"), dtype="datetime64[D]")
    exit_day = np.full(n, np.datetime64("NaT"), dtype="datetime64[D]")
    reason = np.full(n, "", dtype=object)
    end_age = start["pension_end_age"].fill_null(np.inf).to_numpy()
    for k in range(YEARS):
        q = np.zeros(n)
        for st in ("active", "deferred", "pensioner", "dependant"):
            for sx in ("M", "F"):
                m = (status == st) & (sex == sx)
                q[m] = basis.mortality(st, sx).q(np.floor(age0[m] + k).astype(int), start_date.year + k)  # type: ignore[arg-type]
        when = s0 + np.round((k + rng.random(n)) * 365.25).astype("timedelta64[D]")
        dies = present & (rng.random(n) < q)
        death_day[dies] = when[dies]
        present &= ~dies
        leaves = present & (status == "deferred") & (rng.random(n) < 0.02)
        ends = present & (age0 + k + 1 >= end_age)
        end_when = dob + np.round(np.where(np.isfinite(end_age), end_age, 0) * 365.25).astype("timedelta64[D]")
        exit_day[leaves] = when[leaves]
        reason[leaves] = "transfer_out"
        exit_day[ends] = end_when[ends]
        reason[ends] = "child_pension_ended"
        present &= ~(leaves | ends)
    grow = (1.03 ** ((death_day - s0).astype(float) / 365.25)).round(6)
    accrued = pl.col("salary").fill_null(0) * pl.col("service_years").fill_null(0) * basis.accrual_rate
    at_death = pl.when(pl.col("status") == "active").then(accrued).otherwise(pl.col("pension"))
    died = ~np.isnat(death_day)
    deaths = start.with_columns(
        date_of_death=pl.Series(death_day).cast(pl.Date),
        pension_at_death=(at_death * pl.Series(np.nan_to_num(grow, nan=1.0))).round(2),
    ).filter(pl.Series(died)).select("member_id", "date_of_death", "pension_at_death")
    left = ~np.isnat(exit_day)
    exits = start.filter(pl.Series(left)).select(
        "member_id", pl.Series("exit_date", exit_day[left]).cast(pl.Date),
        pl.Series("reason", reason[left].astype(str)),
    )
    return deaths.sort("date_of_death"), exits.sort("exit_date"), present


def roll_forward(start: pl.DataFrame, present: np.ndarray, basis: Basis, n_new: int, seed: int) -> pl.DataFrame:
    """The membership at the valuation date: survivors aged forward plus ``n_new`` new active members."""
    g = 1.03**YEARS
    s = 1.0 + basis.salary_growth
    df = start.filter(pl.Series(present))
    val = np.datetime64(basis.valuation_date, "D")
    age = (val - df["date_of_birth"].to_numpy().astype("datetime64[D]")).astype(float) / 365.25
    retires = pl.Series((age >= basis.retirement_age)) & pl.col("status").is_in(["active", "deferred"])
    accrued = (pl.col("salary") * s**YEARS * (pl.col("service_years") + YEARS) * basis.accrual_rate).round(2)
    tr = [tranche_column(t) for t in basis.tranches]
    df = df.with_columns(retires=retires).with_columns(
        status=pl.when("retires").then(pl.lit("pensioner")).otherwise("status"),
        pension=pl.when(pl.col("retires") & (pl.col("status") == "active")).then(accrued)
        .otherwise((pl.col("pension") * g).round(2)),
        salary=pl.when(pl.col("retires")).then(None).otherwise((pl.col("salary") * s**YEARS).round(2)),
        service_years=pl.when(pl.col("retires")).then(None).otherwise(pl.col("service_years") + YEARS),
    )
    # tranche split of the rolled-forward pension: keep each record's shares (retiring actives: all post)
    share0 = (pl.col(tr[0]) / (pl.col(tr[0]) + pl.col(tr[1]))).fill_null(0.0).fill_nan(0.0)
    df = df.with_columns(
        pl.when(pl.col("pension").is_null()).then(None).otherwise((pl.col("pension") * share0).round(2)).alias(tr[0])
    ).with_columns(
        pl.when(pl.col("pension").is_null()).then(None).otherwise((pl.col("pension") - pl.col(tr[0])).round(2))
        .alias(tr[1])
    ).drop("retires")
    new = synth_scheme(n_new * 4, seed=seed, valuation_date=basis.valuation_date)
    new = new.filter((pl.col("status") == "active") & (pl.col("date_of_birth") > date(1985, 1, 1))).head(n_new)
    last = int(start["member_id"].str.slice(2).cast(pl.Int64).max())  # type: ignore[arg-type]
    new = new.with_columns(
        member_id=pl.lit("GW") + pl.int_range(last + 1, last + 1 + new.height).cast(pl.String).str.zfill(6),
        service_years=(pl.col("service_years") % 3).round(2),
    )
    return pl.concat([df, new])


def dirty_extract(basis: Basis, seed: int) -> pl.DataFrame:
    """About 40 records in the administrator's layout, most with one deliberate problem (see README)."""
    clean = to_admin_format(synth_scheme(40, seed=seed, valuation_date=basis.valuation_date), basis.mapping)
    cols = {v: k for k, v in reversed(list(basis.mapping.columns.items()))}
    rows = clean.to_dicts()
    ids = [r[cols["member_id"]] for r in rows]
    edits: list[dict[str, str | None]] = [
        {"member_id": "=1+1"},
        {"member_id": None},
        {"member_id": ids[5]},                         # duplicate of row 7 (both excluded)
        {"status": SCRIPT_TEXT},                        # unknown status code
        {"sex": "9"},                                   # unknown sex code
        {"date_of_birth": None},
        {"date_of_birth": "31/02/1961"},                # impossible date
        {"date_of_birth": "01/01/2030"},                # after the valuation date
        {"date_of_birth": "01/01/1890"},                # older than the table's closing age
        {"status": "P", "pension": "twelve hundred"},   # not a number
        {"status": "P", "pension": "-250.00"},          # negative
        {"status": "P", "pension": "5000.00", "pension_pre2005": "1000.00", "pension_post2005": "3000.00"},
        {"status": "P", "pension": None, "pension_pre2005": None, "pension_post2005": None},
        {"status": "A", "salary": None, "service_years": "12.5"},
        {"status": "A", "salary": "30000", "service_years": None},
        {"status": "P", "spouse_date_of_birth": "01/01/1880"},   # spouse beyond the spouse table
        {"guarantee_end": "99/99/2030"},
        {"status": "P", "pension": "75000.00", "pension_pre2005": None, "pension_post2005": None},  # warning
        {"status": "D", "pension": "40.00", "pension_pre2005": None, "pension_post2005": None},     # warning
        {"status": "P", "date_of_birth": "01/06/1922"},           # aged over 100: warning
        {"retirement_age": "6O"},                                  # letter O, not a number
        {"spouse_fraction": "1.5"},
        {"pension_end_age": "-1"},
        {"salary": "=HYPERLINK(\"x\")", "status": "A", "service_years": "3"},
    ]
    for k, edit in enumerate(edits):
        row = rows[2 + k]
        for ours, value in edit.items():
            row[cols.get(ours, ours)] = value
    out = pl.DataFrame(rows, schema={c: pl.String for c in clean.columns})
    note = ["" for _ in rows]
    note[5] = SCRIPT_TEXT  # the record whose status code is the same text
    return out.with_columns(pl.Series("Note", note))


def build_demo(out_dir: str | Path, basis_path: str | Path, seed: int = SEED) -> list[Path]:
    """Write the demo scheme's five files into ``out_dir``; returns their paths."""
    out = Path(out_dir)
    basis = load_basis(basis_path)
    start_date = _start_date(basis.valuation_date)
    start = synth_scheme(3_000, seed=seed, valuation_date=start_date, tranches=tuple(basis.tranches))
    # keep actives young enough that few pass retirement age in the period (simple roll-forward)
    deaths, exits, present = simulate_history(start, basis, start_date, seed + 1)
    current = roll_forward(start, present, basis, n_new=int(0.04 * start.height), seed=seed + 2)
    bad = pl.DataFrame({
        "member_id": ["GW999999", deaths["member_id"][0]],
        "date_of_death": [date(start_date.year + 1, 6, 30), date(start_date.year - 1, 12, 1)],
        "pension_at_death": [1234.56, 2500.0],
    })
    deaths = pl.concat([deaths, bad])
    paths = [
        write_scheme(to_admin_format(current, basis.mapping), out / "members.csv"),
        write_scheme(dirty_extract(basis, seed + 3), out / "members_dirty.csv"),
        write_scheme(to_admin_format(start, basis.mapping), out / "members_start.csv"),
        write_scheme(deaths, out / "deaths.csv"),
        write_scheme(exits, out / "exits.csv"),
    ]
    return paths


if __name__ == "__main__":  # pragma: no cover
    for p in build_demo(sys.argv[1], sys.argv[2]):
        print(p)
