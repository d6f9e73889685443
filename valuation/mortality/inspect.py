"""Look at a table file before valuing with it: what it holds, a few values, and a small chart.

:func:`describe_tables` lists the tables of a CSV, XLSX or XTbML file: for XTbML the table identity,
name, content type, provider and reference the file gives, and for each table its kind (ultimate,
select and ultimate, by age and calendar year, improvement rates), ages, years, select period, scaling
factor, whether it closes (q = 1 at its last age), a few values and the basis lines that use it; or, for
a table that cannot be used, why. :func:`table_chart` draws a table's rates by age to a PNG file.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from valuation.errors import TableError
from valuation.mortality.readers import (
    CSV_SUFFIXES,
    XLSX_SUFFIXES,
    XTBML_SUFFIXES,
    Closing,
    _close,
    load_table,
    read_grid,
    validate_table,
)
from valuation.mortality.table import MortalityTable

if TYPE_CHECKING:
    from matplotlib.axes import Axes

    from valuation.mortality.improvement import ImprovementScale
    from valuation.mortality.xtbml import XTbMLFile

#: Ages shown in a description, where inside the table [years].
SHOWN_AGES = (20, 30, 40, 50, 60, 65, 70, 80, 90, 100, 110)


def _fmt(v: float) -> str:
    return f"{v:.6g}"


def _ages(lo: int, hi: int) -> list[int]:
    return sorted({lo, hi, *(a for a in SHOWN_AGES if lo < a < hi)})


def _three_years(years: np.ndarray) -> list[int]:
    return sorted({int(years[0]), int(years[years.size // 2]), int(years[-1])})


def _closing(t: MortalityTable, open_reason: str | None) -> str:
    if open_reason is not None:
        return f"does not close: {open_reason}"
    return f"closes at age {t.max_age} (q = 1" + (" in every year)" if t.year_qx is not None else ")")


def _describe_mortality(
    t: MortalityTable, open_reason: str | None, published: tuple[int, int] | None = None
) -> list[str]:
    """Kind, ages, years, select period, closing and a few values of a table; ``open_reason`` says why it
    does not close (it was read with its last age made the closing age, so its rates can be shown);
    ``published`` the selection ages the file gives select rates for."""
    top = t.max_age - 1  # values are shown below the closing age
    if t.year_qx is not None and t.years is not None:
        cols = _three_years(t.years)
        out = [f"mortality by age and calendar year (a period table): ages {t.min_age}-{t.max_age}, "
               f"years {t.years[0]}-{t.years[-1]}", _closing(t, open_reason),
               "q by age (rows) in the years " + ", ".join(str(c) for c in cols)]
        for a in _ages(t.min_age, top):
            out.append(f"  {a:>3}  " + "  ".join(_fmt(v) for v in t.q_in_year(np.full(len(cols), a), cols)))
        return out
    if t.select_qx is not None:
        n = t.select_period
        lo, hi = published or (int(t.select_min_age if t.select_min_age is not None else t.min_age), top)
        durs = sorted({0, 1, n - 1, n})
        out = [f"select and ultimate: selection ages {lo}-{hi}, select period {n} years, ultimate ages "
               f"{t.min_age}-{t.max_age}", _closing(t, open_reason),
               "q_[x]+d by selection age x (rows) at durations d = " + ", ".join(str(d) for d in durs)
               + f" (d = {n}: the ultimate q at age x + {n})"]
        for a in _ages(lo, hi):
            out.append(f"  {a:>3}  " + "  ".join(_fmt(v) for v in t.q_select(np.full(len(durs), a), durs)))
        return out
    ages = _ages(t.min_age, top)
    return [f"ultimate by age: ages {t.min_age}-{t.max_age}", _closing(t, open_reason),
            "q: " + ", ".join(f"{a} {_fmt(v)}" for a, v in zip(ages, t.q(ages), strict=True))]


def _read_open(load: Callable[[Closing], MortalityTable]) -> tuple[MortalityTable, str | None]:
    """A table as it stands, or, when it only lacks a closing age, with its last age made the closing age
    and the reason it does not close (so that a user still sees its rates)."""
    try:
        return load("require"), None
    except TableError as first:
        table = load("set_last_to_one")  # raises for any other problem
        return table, first.reason


def _describe_scale(s: ImprovementScale) -> list[str]:
    from valuation.mortality.improvement import AgeImprovement, TwoDimensionalScale

    if isinstance(s, TwoDimensionalScale):
        cols = _three_years(s.years)
        out = [f"improvement rates by age and calendar year: ages {s.min_age}-{s.max_age}, years "
               f"{s.years[0]}-{s.years[-1]}", "rates by age (rows) in the years " + ", ".join(str(c) for c in cols)]
        for a in _ages(s.min_age, s.max_age):
            out.append(f"  {a:>3}  " + "  ".join(_fmt(v) for v in s.rates(np.full(len(cols), a), cols)))
        return out
    assert isinstance(s, AgeImprovement)
    lo, hi = int(s.ages[0]), int(s.ages[-1])
    ages = _ages(lo, hi)
    return [f"improvement rates by age, the same every year: ages {lo}-{hi}",
            "rates: " + ", ".join(f"{a} {_fmt(v)}" for a, v in zip(ages, s.rates(ages, 0), strict=True))]


def _xtbml_header(xf: XTbMLFile) -> list[str]:
    out = [f"{xf.path.name}: XTbML" + (f", table identity {xf.identity}" if xf.identity else ""),
           f"name: {xf.name}"]
    for label, value in (("content type", xf.content_type), ("provider", xf.provider),
                         ("reference", xf.reference)):
        if value:
            out.append(f"{label}: {value}")
    scal = sorted({t.scaling for t in xf.tables})
    out.append("scaling factor: " + ", ".join(str(s) for s in scal)
               + (" (rates as stored)" if scal == [0] else " (stored values are divided by 10 to that power)"))
    return out


def _use(t: MortalityTable, open_reason: str | None, file: str, name: str | None) -> list[str]:
    """The basis lines of a mortality entry that uses the table."""
    if open_reason is not None:
        return ["not as it stands: a basis needs a closing age (q = 1 at the table's last age)"]
    out = [f'table = "{file}"'] + ([f'table_name = "{name}"'] if name is not None else [])
    if t.years is not None:
        out.append(f"# without base_year each calendar year uses its own rates, and years after {t.years[-1]} "
                   "the improvement; base_year = <a year of the table> uses that year's rates")
    return out


def _published_selection_ages(xf: XTbMLFile, name: str) -> tuple[int, int] | None:
    """First and last selection age for which the file gives select rates (None for other tables)."""
    from valuation.mortality.xtbml import _roles

    role = _roles(xf).get(name)
    if role is None or isinstance(role, TableError) or role[1] is None:
        return None
    age_axis = role[1][1][0]
    if age_axis.min is None or age_axis.max is None:
        return None
    return int(age_axis.min), int(age_axis.max)


def _describe_xtbml(path: Path, name: str | None) -> list[str]:
    from valuation.mortality.xtbml import improvement_scale, mortality_tables, read_xtbml, table_names

    xf = read_xtbml(path)
    out = _xtbml_header(xf)
    names = table_names(xf)
    if name is not None and name not in names:
        raise TableError(f"no table named '{name}'", file=path, fix=f"use one of {', '.join(names)}")
    several = len(names) > 1
    out.append(f"{len(names)} table{'s' if several else ''}" + (f", showing '{name}'" if name else ""))
    for k, n in enumerate(names, start=1):
        if name is not None and n != name:
            continue
        out += ["", f"{k}. '{n}'"]
        try:
            if xf.is_improvement:
                lines = _describe_scale(improvement_scale(xf, n if several else None))
                use = [f'improvement = {{ kind = "table", file = "{path.name}"'
                       + (f', table_name = "{n}" }}' if several else " }")]
            else:
                def load(c: Closing, n: str = n) -> MortalityTable:
                    return mortality_tables(xf, closing=c, only=n)[n]

                t, why = _read_open(load)
                lines = _describe_mortality(t, why, _published_selection_ages(xf, n))
                use = _use(t, why, path.name, n if several else None)
            out += [f"   {line}" for line in lines] + ["   in a basis:"] + [f"     {u}" for u in use]
        except TableError as exc:
            out.append(f"   cannot be used: {exc.reason}" + (f" ({exc.fix})" if exc.fix else ""))
    return out


def _describe_grid(p: Path, name: str | None) -> list[str]:
    grid = read_grid(p, key="age")
    if name is not None and name not in grid.columns:
        raise TableError(f"no table named '{name}'", file=p, column=name, fix=f"use one of {', '.join(grid.columns)}")
    kind = "XLSX" if p.suffix.lower() in XLSX_SUFFIXES else "CSV"
    several = len(grid.columns) > 1
    out = [f"{p.name}: {kind}, {len(grid.columns)} table{'s' if several else ''} (a column each), ages "
           f"{grid.keys[0]}-{grid.keys[-1]}"]
    for k, col in enumerate(grid.columns, start=1):
        if name is not None and col != name:
            continue

        def load(c: Closing, q: np.ndarray = grid.values[:, k - 1], col: str = col) -> MortalityTable:
            t = MortalityTable(col, int(grid.keys[0]), _close(q, c), source=f"{kind} file {p.name}")
            validate_table(t, file=str(p), first_row=grid.first_row)
            return t

        out += ["", f"{k}. '{col}'"]
        try:
            t, why = _read_open(load)
            out += [f"   {line}" for line in _describe_mortality(t, why)] + ["   in a basis:"]
            out += [f"     {u}" for u in _use(t, why, p.name, col if several else None)]
        except TableError as exc:
            out.append(f"   cannot be used: {exc.reason}")
    return out


def describe_tables(path: str | Path, name: str | None = None) -> str:
    """A plain-text description of the tables in a CSV, XLSX or XTbML file.

    Parameters
    ----------
    path : str or Path
        The table file.
    name : str, optional
        Describe only this table (a column of a CSV / XLSX file, or a table of an XTbML file).

    Returns
    -------
    str
        Lines for a terminal: the file's identity, name, content type, provider, reference and scaling
        factor (XTbML); then for each table its kind, ages, years, select period, whether it closes, a few
        values and the basis lines that use it; for a table that cannot be used, why.

    Raises
    ------
    TableError
        When the file cannot be read at all, or ``name`` is not one of its tables.
    """
    p = Path(path)
    if not p.is_file():
        raise TableError("file not found", file=p, fix="check the path")
    suffix = p.suffix.lower()
    if suffix in XTBML_SUFFIXES:
        return "\n".join(_describe_xtbml(p, name))
    if suffix not in CSV_SUFFIXES + XLSX_SUFFIXES:
        raise TableError(f"unknown table format '{suffix}'", file=p, fix="give a .csv, .xlsx or XTbML (.xml) file")
    return "\n".join(_describe_grid(p, name))


def table_chart(path: str | Path, table: str | None, out_png: str | Path) -> Path:
    """Draw a table's rates by age to a small PNG chart (q on a log scale; improvement rates in %).

    Ultimate tables: q by age. Select tables: durations 0, 1 and the last select duration by attained age,
    and the ultimate rates. Period tables: q by age in the first, a middle and the last calendar year.
    Improvement scales: rates by age (in the first, a middle and the last year for a scale by year). A table
    without a closing age is drawn to its last age all the same.

    Parameters
    ----------
    path : str or Path
        CSV, XLSX or XTbML table file.
    table : str or None
        Table name in a file with several (as :func:`describe_tables` lists them).
    out_png : str or Path
        The PNG file to write (its folder must exist).

    Returns
    -------
    Path
        ``out_png``.
    """
    from matplotlib.figure import Figure

    p, out = Path(path), Path(out_png)
    fig = Figure(figsize=(6.4, 4.0), dpi=100)
    ax = fig.subplots()
    scale, published = None, None
    if p.suffix.lower() in XTBML_SUFFIXES:
        from valuation.mortality.xtbml import improvement_scale, read_xtbml

        xf = read_xtbml(p)
        if xf.is_improvement:
            scale = improvement_scale(xf, table)
            title = table or xf.name
        else:
            published = _published_selection_ages(xf, table or xf.name)
    if scale is not None:
        _plot_scale(ax, scale)
    else:
        t = load_table(p, table, closing="set_last_to_one")
        _plot_table(ax, t, published)
        title = t.name
    ax.set_title(title if len(title) <= 70 else title[:67] + "...", fontsize=10)
    ax.set_xlabel("age")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=8)
    fig.tight_layout()
    fig.savefig(out, format="png")
    return out


def _plot_table(ax: Axes, t: MortalityTable, published: tuple[int, int] | None) -> None:
    ages = t.ages[:-1]  # the closing age (q = 1) is left out of the picture
    if t.year_qx is not None and t.years is not None:
        for yr in _three_years(t.years):
            ax.plot(ages, t.q_in_year(ages, yr), label=str(yr))
    elif t.select_qx is not None:
        lo, hi = published or (int(t.select_min_age if t.select_min_age is not None else t.min_age), t.max_age)
        sel = np.arange(lo, hi + 1)
        for d in sorted({0, 1, t.select_period - 1}):
            keep = sel + d < t.max_age
            ax.plot(sel[keep] + d, t.q_select(sel[keep], d), label=f"select, duration {d}", lw=1)
        ax.plot(ages, t.q(ages), label="ultimate", color="black", lw=1.5)
    else:
        ax.plot(ages, t.q(ages), label="q")
    ax.set_yscale("log")
    ax.set_ylabel("q (log scale)")


def _plot_scale(ax: Axes, s: ImprovementScale) -> None:
    from valuation.mortality.improvement import AgeImprovement, TwoDimensionalScale

    if isinstance(s, TwoDimensionalScale):
        ages = np.arange(s.min_age, s.max_age + 1)
        for yr in _three_years(s.years):
            ax.plot(ages, 100 * s.rates(ages, yr), label=str(yr))
    else:
        assert isinstance(s, AgeImprovement)
        ax.plot(s.ages, 100 * s.rate_values, label="every year")
    ax.axhline(0.0, color="black", lw=0.8)
    ax.set_ylabel("improvement rate [% a year]")
