"""Synthetic member data of an invented scheme, vectorised with numpy and reproducible from a seed.

The ages, pensions, salaries and service are drawn from simple distributions of our own choosing so that
the data looks like a mature final-salary scheme; nothing is fitted to any real scheme. With ``dirty > 0``
a share of records is given one problem each (missing or impossible dates, bad numbers, unknown codes,
duplicate ids, ...), to exercise the validation.
"""

from __future__ import annotations

from datetime import date
from pathlib import Path

import numpy as np
import polars as pl

from valuation.basis.mapping import ColumnMapping
from valuation.members.schema import DATE_COLUMNS, tranche_column
from valuation.vocabulary import Status

#: Share of records by status (active, deferred, pensioner, dependant), roughly 950/900/900/250 in 3,000.
#: Share of each status, in the order of the draws (kept, so that the same seed gives the same file).
STATUS_MIX: dict[Status, float] = {"active": 0.317, "deferred": 0.300, "pensioner": 0.300, "dependant": 0.083}
#: Share of dependants who are children with a pension that stops at ``pension_end_age``.
CHILD_SHARE = 0.06
XLSX_LIMIT = 50_000


def _days(years: np.ndarray) -> np.ndarray:
    return np.round(years * 365.25).astype("timedelta64[D]")


def synth_scheme(
    n: int,
    *,
    seed: int,
    valuation_date: date,
    tranches: tuple[str, ...] = ("pre2005", "post2005"),
    dirty: float = 0.0,
    id_prefix: str = "GW",
) -> pl.DataFrame:
    """An invented membership of ``n`` records in our column names.

    Parameters
    ----------
    n : int
        Number of records.
    seed : int
        Seed of ``numpy.random.default_rng``; the same seed gives the same frame.
    valuation_date : date
        Date the ages and guarantees are measured at.
    tranches : tuple of str
        Tranche names; non-actives' pensions are split across ``pension_<name>`` columns, the first
        tranche taking a larger share for older members (earlier service).
    dirty : float
        Share of records given one problem each (0 = clean).
    id_prefix : str
        Member ids are the prefix and a zero-padded number, e.g. ``GW000123``.

    Returns
    -------
    polars.DataFrame
        Typed columns (dates as ``Date``, amounts as ``Float64``) when ``dirty == 0``; every column as
        text when ``dirty > 0`` (bad values cannot be held in typed columns).
    """
    rng = np.random.default_rng(seed)
    val = np.datetime64(valuation_date, "D")
    st = rng.choice(4, size=n, p=list(STATUS_MIX.values()))
    active, deferred, pensioner, dependant = (st == k for k in range(4))
    child = dependant & (rng.random(n) < CHILD_SHARE)
    age = np.select(
        [active, deferred, pensioner, child, dependant],
        [20 + 44.9 * rng.beta(2, 2, n), 28 + 36.9 * rng.beta(2, 1.5, n), 55 + 45 * rng.beta(2, 4, n),
         3 + 18 * rng.random(n), 50 + 50 * rng.beta(3, 2.5, n)],
    )
    male_p = np.select([child, dependant], [0.5, 0.12], 0.55)
    sex = np.where(rng.random(n) < male_p, "M", "F")
    dob = val - _days(age)
    salary = np.where(active, np.round(rng.lognormal(np.log(26_000 + 450 * (age - 20)), 0.3), 2), np.nan)
    service = np.where(active, np.round((age - 18) * rng.uniform(0.05, 1.0, n), 2), np.nan)
    pension = np.select(
        [deferred, pensioner, child, dependant],
        [np.clip(rng.lognormal(np.log(2_500), 0.8, n), 150, 40_000),
         np.clip(rng.lognormal(np.log(7_000), 0.7, n), 300, 55_000),
         np.clip(rng.lognormal(np.log(1_200), 0.3, n), 300, 5_000),
         np.clip(rng.lognormal(np.log(3_500), 0.6, n), 200, 30_000)],
        np.nan,
    ).round(2)
    cols: dict[str, object] = {
        "member_id": None,
        "status": np.asarray(list(STATUS_MIX))[st],
        "sex": sex,
        "date_of_birth": dob,
        "pension": pension,
    }
    share = np.clip((age - 40) / 35 + rng.normal(0, 0.15, n), 0, 1) if len(tranches) > 1 else np.ones(n)
    first = np.round(pension * share, 2)
    rest = len(tranches) - 1
    for k, t in enumerate(tranches):
        cols[tranche_column(t)] = first if k == 0 else np.round((pension - first) / rest, 2)
    if rest > 1:  # put the rounding remainder in the last tranche so the split sums to the pension
        others = sum(np.asarray(cols[tranche_column(t)]) for t in tranches[:-1])
        cols[tranche_column(tranches[-1])] = np.round(pension - others, 2)
    spouse_known = pensioner & (rng.random(n) < 0.25)
    sp_age = np.clip(age + np.where(sex == "M", -3.0, 3.0) + rng.normal(0, 3, n), 35, 105)
    guar = pensioner & (age < 67) & (rng.random(n) < 0.6)
    cols.update(
        salary=salary,
        service_years=service,
        retirement_age=np.where((active | deferred) & (rng.random(n) < 0.03), 60.0, np.nan),
        spouse_date_of_birth=np.where(spouse_known, val - _days(sp_age), np.datetime64("NaT")),
        spouse_fraction=np.where(pensioner & (rng.random(n) < 0.04), 0.6667, np.nan),
        guarantee_end=np.where(guar, val + _days(70 - age), np.datetime64("NaT")),
        pension_end_age=np.where(child, np.where(age < 16, 18.0, 23.0), np.nan),
    )
    width = max(6, len(str(n)))
    df = pl.DataFrame({k: v for k, v in cols.items() if k != "member_id"}, nan_to_null=True)
    df = df.select(
        (pl.lit(id_prefix) + pl.int_range(1, n + 1).cast(pl.String).str.zfill(width)).alias("member_id"),
        pl.all(),
    ).with_columns(pl.col(*DATE_COLUMNS).cast(pl.Date))
    if dirty > 0:
        df = make_dirty(df, rng, dirty, valuation_date, tranches)
    return df


def make_dirty(
    df: pl.DataFrame, rng: np.random.Generator, share: float, valuation_date: date, tranches: tuple[str, ...]
) -> pl.DataFrame:
    """Give a ``share`` of records one problem each; returns every column as text."""
    n = df.height
    tr = [tranche_column(t) for t in tranches]
    future = (np.datetime64(valuation_date, "D") + 400).astype(str)
    # kind -> column -> replacement (None = empty cell); "__prev_id__" copies the previous row's id.
    edits: list[dict[str, str | None]] = [
        {"date_of_birth": None},
        {"date_of_birth": "1970-02-31"},
        {"date_of_birth": future},
        {"date_of_birth": "1890-01-01"},
        {"pension": "abc"},
        {"pension": "-100"},
        {"status": "Z"},
        {"sex": "X"},
        {"member_id": "__prev_id__"},
        {"pension": "123456.78", **{c: "1.00" for c in tr}},
        {"status": "pensioner", "pension": None} | {c: None for c in tr},
        {"status": "active", "salary": None, "service_years": "10"},
        {"spouse_date_of_birth": "1880-01-01"},
        {"guarantee_end": "not a date"},
        {"member_id": "=1+1"},
        {"pension": "250000", "status": "pensioner"} | {c: None for c in tr},
        {"pension": "5.00", "status": "deferred"} | {c: None for c in tr},
        {"member_id": None},
        {"salary": "n/a"},
        {"retirement_age": "200"},
    ]
    kind = np.where(rng.random(n) < share, rng.integers(0, len(edits), n), -1)
    out = df.with_columns(pl.all().cast(pl.String), _kind=pl.Series(kind))
    prev = pl.col("member_id").shift(1).fill_null(pl.col("member_id"))
    for k, edit in enumerate(edits):
        hit = pl.col("_kind") == k
        out = out.with_columns(
            pl.when(hit).then(prev if v == "__prev_id__" else pl.lit(v, dtype=pl.String)).otherwise(pl.col(c)).alias(c)
            for c, v in edit.items()
        )
    return out.drop("_kind")


def to_admin_format(df: pl.DataFrame, mapping: ColumnMapping) -> pl.DataFrame:
    """Our columns written the administrator's way: reverse of a basis ``[mapping]``.

    Headers, status and sex codes go back to the first code that maps to each of ours; dates are written
    with ``mapping.date_format``. Returns text columns.
    """
    def first_key(table: dict[str, str]) -> dict[str, str]:
        out: dict[str, str] = {}
        for theirs, ours in table.items():
            out.setdefault(ours, theirs)
        return out

    headers, status, sex = (first_key(t) for t in (mapping.columns, mapping.status_codes, mapping.sex_codes))
    fmt = mapping.date_format or "%Y-%m-%d"
    exprs = []
    for c in df.columns:
        e = pl.col(c)
        if df.schema[c] == pl.Date:
            e = e.dt.strftime(fmt)
        elif c == "status" and status:
            e = e.replace(status)
        elif c == "sex" and sex:
            e = e.replace(sex)
        exprs.append(e.cast(pl.String).alias(headers.get(c, c)))
    return df.select(exprs)


def write_scheme(df: pl.DataFrame, path: str | Path) -> Path:
    """Write member data to ``.csv``, ``.parquet`` or ``.xlsx`` (XLSX only up to 50,000 rows).

    Text cells stay text in XLSX: a value such as ``=1+1`` is written as a string, never as a formula.
    """
    p = Path(path)
    ext = p.suffix.lower()
    if ext == ".csv":
        df.write_csv(p)
    elif ext == ".parquet":
        df.write_parquet(p)
    elif ext == ".xlsx":
        if df.height > XLSX_LIMIT:
            raise ValueError(f"{df.height:,} rows is too many for XLSX here (limit {XLSX_LIMIT:,}); use .parquet")
        _write_xlsx(df, p)
    else:
        raise ValueError(f"unknown extension '{p.suffix}' (use .csv, .parquet or .xlsx)")
    return p


def _write_xlsx(df: pl.DataFrame, path: Path) -> None:
    from openpyxl import Workbook
    from openpyxl.cell import WriteOnlyCell

    wb = Workbook(write_only=True)
    ws = wb.create_sheet("members")
    ws.append(df.columns)
    for row in df.iter_rows():
        cells = []
        for v in row:
            cell = WriteOnlyCell(ws, value=v)
            if isinstance(v, str):
                cell.data_type = "s"  # never a formula
            cells.append(cell)
        ws.append(cells)
    wb.save(path)
