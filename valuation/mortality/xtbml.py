"""XTbML files as the public table repositories distribute them: mortality tables and improvement scales.

XTbML is the SOA's XML standard for actuarial tables: root ``XTbML`` -> ``ContentClassification``
(``TableIdentity``, ``TableName``, ``ContentType``, ``TableReference``, ...) -> one or more ``Table``
elements, each with ``MetaData`` (``ScalingFactor``, ``TableDescription`` and one ``AxisDef`` an axis:
``ScaleType``, ``AxisName``, ``MinScaleValue``, ``MaxScaleValue``, ``Increment``) and ``Values`` made of
nested ``Axis`` and ``Y`` elements (``<Axis t="60"><Axis><Y t="1">0.0123</Y>...``). Values are divided
by 10**ScalingFactor (from memory: the scaling factor is the power of ten the stored values were
multiplied by; 0 means the rates as stored).

What a file's tables are is read from their axes (the axis name first, then the scale type):

- one age axis: an ultimate table (or, in an improvement file, improvement rates by age);
- age x duration: a select table; it is paired with the ultimate table of the same file, in file
  order. Standard layout: the ultimate table starts at the first selection age plus the select period
  (select ages 16-80, a 15-year select period, ultimate from 31). An empty cell (``<Y t="20"/>``) means
  the select period of that selection age ends there: from that duration on the ultimate rate at the
  attained age applies, so empty cells must run to the end of their row. A one-value duration axis
  with one level of values ("duration 3 and over") is an ultimate table;
- age x calendar year: a period table (mortality that varies by calendar year) or a two-dimensional
  improvement scale.

Abridged tables (ages in steps of 5 or 10), tables whose axis labels contradict each other, and other
layouts are refused with one message naming the file, the table and what is not supported.

The XML is parsed with the standard library after refusing any DOCTYPE or ENTITY declaration (also in
UTF-16 files), so no entity expansion can happen (the protection defusedxml gives).

References
----------
.. [XTbML] Society of Actuaries, *XTbML: Extensible Table Markup Language* (adopted by ACORD, 2002);
   the layout of the files of the SOA's public mortality and other rate tables repository.
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed., 2013,
   sections 3.7-3.9 (select and ultimate tables) and 2.6 (period rates).
.. [MP2014] Society of Actuaries, *Mortality Improvement Scale MP-2014 Report*, 2014 (improvement rates
   by age and calendar year).
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Literal

import numpy as np

from valuation.errors import TableError
from valuation.mortality.table import MortalityTable

if TYPE_CHECKING:
    from valuation.mortality.improvement import AfterLastYear, ImprovementScale
    from valuation.mortality.readers import Closing

AxisKind = Literal["age", "duration", "year", "other"]

#: Content types whose tables hold improvement rates rather than mortality rates.
IMPROVEMENT_CONTENT = ("projection scale",)

#: Most values an axis may run over (ages, durations or years); a larger range is a broken file.
_MAX_AXIS = 1000

#: Calendar years a year axis may hold [calendar year] (a wider range is not a calendar year).
_YEAR_RANGE = (1700, 2300)


@dataclass(frozen=True)
class XAxis:
    """One ``AxisDef`` of a table: its kind (read from AxisName, then ScaleType) and its range."""

    kind: AxisKind
    scale_type: str
    name: str
    min: int | None
    max: int | None
    increment: int | None

    @property
    def label(self) -> str:
        """The axis as a user reads it in the file (its AxisName, else its ScaleType)."""
        return self.name or self.scale_type or "unnamed axis"


@dataclass(frozen=True)
class XTable:
    """One ``Table`` element as stored: axes, and every value with its coordinates (NaN = empty cell)."""

    number: int  # 1-based position in the file
    description: str
    scaling: int
    axes: tuple[XAxis, ...]
    coords: np.ndarray  # int64, shape (n_values, depth); depth is the nesting depth of the values
    values: np.ndarray  # float64, divided by 10**scaling; NaN where the cell is empty


@dataclass(frozen=True)
class XTbMLFile:
    """A whole XTbML file: its ``ContentClassification`` and its tables."""

    path: Path
    identity: str | None
    name: str
    content_type: str
    provider: str | None
    reference: str | None
    description: str | None
    tables: tuple[XTable, ...]

    @property
    def is_improvement(self) -> bool:
        """True when the content type says the file holds improvement (projection) rates."""
        return self.content_type.strip().lower() in IMPROVEMENT_CONTENT

    def source(self) -> str:
        """Provenance note: file name, table identity and the reference the file gives."""
        out = f"XTbML file {self.path.name}"
        if self.identity:
            out += f", table identity {self.identity}"
        return out

    def table_label(self, t: XTable) -> str:
        """How a message names a table: the file's TableName, and the table's place when there are several."""
        if len(self.tables) == 1:
            return f"table '{self.name}'"
        return f"table {t.number} of {len(self.tables)} ('{t.description or self.name}')"


# --------------------------------------------------------------------------------------------------
# Parsing
# --------------------------------------------------------------------------------------------------


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def _child(elem: ET.Element | None, name: str) -> ET.Element | None:
    if elem is None:
        return None
    return next((c for c in elem if _local(c.tag) == name), None)


def _children(elem: ET.Element, name: str) -> list[ET.Element]:
    return [c for c in elem if _local(c.tag) == name]


def _text(elem: ET.Element | None, name: str) -> str | None:
    c = _child(elem, name)
    if c is None or c.text is None:
        return None
    t = " ".join(c.text.split())
    return t or None


def _whole(s: str | None, what: str, where: str, file: Path) -> int | None:
    if s is None or s == "":
        return None
    try:
        v = float(s)
    except ValueError as exc:
        raise TableError(f"{where}: {what} '{s}' is not a number", file=file) from exc
    if v != int(v):
        raise TableError(f"{where}: {what} '{s}' is not a whole number", file=file)
    return int(v)


def _is_number(s: str) -> bool:
    try:
        return bool(np.isfinite(float(s)))
    except ValueError:
        return False


def _axis_kind(scale_type: str, name: str) -> AxisKind:
    st, nm = scale_type.lower(), name.lower()
    if "dur" in nm or nm.startswith("du") or st == "duration":  # "Duation" occurs in published files
        return "duration"
    if "year" in nm:
        return "year"
    if "age" in nm or st == "age":
        return "age"
    return "other"


def _refuse_dtd(data: bytes, path: Path) -> None:
    text = data
    if data[:2] in (b"\xff\xfe", b"\xfe\xff") or (len(data) > 1 and b"\x00" in data[:4]):
        try:  # a UTF-16 file hides the declaration from a byte search
            text = data.decode("utf-16").encode("utf-8")
        except UnicodeDecodeError:
            text = data.replace(b"\x00", b"")
    upper = text.upper()
    if b"<!DOCTYPE" in upper or b"<!ENTITY" in upper:
        raise TableError(
            "XML with a DOCTYPE or ENTITY declaration is refused, because expanding entities is unsafe",
            file=path, fix="remove the DOCTYPE declaration from the file",
        )


def _parse_table(elem: ET.Element, number: int, count: int, fname: str, path: Path, ns: str = "") -> XTable:
    meta = _child(elem, "MetaData")
    desc = _text(meta, "TableDescription") or ""
    where = f"table '{fname}'" if count == 1 else f"table {number} of {count} ('{desc or fname}')"
    scaling = _whole(_text(meta, "ScalingFactor"), "ScalingFactor", where, path) or 0
    axes = []
    for ad in [] if meta is None else _children(meta, "AxisDef"):
        st, nm = _text(ad, "ScaleType") or "", _text(ad, "AxisName") or ""
        axes.append(XAxis(
            _axis_kind(st, nm), st, nm,
            _whole(_text(ad, "MinScaleValue"), "MinScaleValue", where, path),
            _whole(_text(ad, "MaxScaleValue"), "MaxScaleValue", where, path),
            _whole(_text(ad, "Increment"), "Increment", where, path),
        ))
    if not axes:
        raise TableError(f"{where} has no AxisDef, so its ages cannot be read", file=path,
                         fix="use the file as downloaded; each table describes its axes in MetaData")
    values = _child(elem, "Values")
    if values is None:
        raise TableError(f"{where} has no Values element", file=path)

    coords: list[tuple[int, ...]] = []
    texts: list[str] = []

    def coord(t: str | None, n: int, start: int, step: int) -> int:
        if t is None:
            return start + n * step  # a Y without t: placed from MinScaleValue by Increment
        try:
            return int(t)
        except ValueError:
            return _whole(t, "the t attribute", where, path) or 0

    def walk(node: ET.Element, prefix: tuple[int, ...]) -> None:
        ax = axes[min(len(prefix), len(axes) - 1)]
        ys = node.findall(ns + "Y")
        if ys:
            ts = [y.get("t") for y in ys]
            try:
                cs = [int(t) for t in ts]  # type: ignore[arg-type]
            except (TypeError, ValueError):
                cs = [coord(t, n, ax.min or 0, ax.increment or 1) for n, t in enumerate(ts)]
            coords.extend([prefix + (c,) for c in cs])
            texts.extend([(y.text or "").strip() for y in ys])
        for a in node.findall(ns + "Axis"):
            t = a.get("t")
            walk(a, prefix if t is None else prefix + (coord(t, 0, 0, 1),))

    walk(values, ())
    depth = {len(c) for c in coords}
    if len(depth) > 1:
        raise TableError(f"{where}: its values are nested at different depths", file=path)
    empty = np.array([not s for s in texts], dtype=bool)
    try:
        vals = np.array([s or "nan" for s in texts], dtype=np.float64)
        bad = ~empty & ~np.isfinite(vals)
    except ValueError:  # find the cell that is not a number
        vals = np.zeros(len(texts))
        bad = np.array([bool(s) and not _is_number(s) for s in texts], dtype=bool)
    if bad.any():
        k = int(np.argmax(bad))
        at = ", ".join(f"{a.label} {c}" for a, c in zip(axes, coords[k], strict=False))
        raise TableError(f"{where}: non-numeric value '{texts[k]}' at {at}", file=path,
                         fix="use the file as downloaded, or correct that cell")
    arr = np.asarray(coords, dtype=np.int64).reshape(len(coords), depth.pop() if depth else 0)
    return XTable(number, desc, scaling, tuple(axes), arr, vals / 10.0**scaling)


def read_xtbml(path: str | Path) -> XTbMLFile:
    """Parse an XTbML file into its classification and raw tables (no interpretation yet).

    Raises :class:`TableError` for a DOCTYPE or ENTITY declaration, XML that is not well formed, a root
    other than ``XTbML``, a table without axes or values, or a non-numeric value.

    References
    ----------
    [XTbML].
    """
    p = Path(path)
    if not p.is_file():
        raise TableError("file not found", file=p, fix="check the path in the basis")
    data = p.read_bytes()
    _refuse_dtd(data, p)
    try:
        root = ET.fromstring(data)
    except ET.ParseError as exc:
        raise TableError(f"not well-formed XML ({exc})", file=p,
                         fix="download the file again; it may be cut short") from exc
    if _local(root.tag) != "XTbML":
        raise TableError(f"the root element is '{_local(root.tag)}', expected 'XTbML'", file=p,
                         fix="give an XTbML table file")
    cc = _child(root, "ContentClassification")
    name = _text(cc, "TableName") or p.stem
    ns = root.tag[: root.tag.rfind("}") + 1]  # "{namespace}" or ""
    elems = _children(root, "Table")
    tables = tuple(_parse_table(t, k, len(elems), name, p, ns) for k, t in enumerate(elems, start=1))
    if not tables:
        raise TableError("the file holds no Table element", file=p)
    return XTbMLFile(
        p, _text(cc, "TableIdentity"), name, _text(cc, "ContentType") or "", _text(cc, "ProviderName"),
        _text(cc, "TableReference"), _text(cc, "TableDescription"), tables,
    )


# --------------------------------------------------------------------------------------------------
# Shapes: what each table is
# --------------------------------------------------------------------------------------------------

Shape = Literal["ultimate", "select", "period"]


def _refusal(xf: XTbMLFile, t: XTable, what: str, fix: str | None = None) -> TableError:
    return TableError(f"{xf.table_label(t)} {what}", file=xf.path, fix=fix)


def table_shape(xf: XTbMLFile, t: XTable) -> tuple[Shape, tuple[XAxis, ...]]:
    """What a table is (ultimate by age, select age x duration, or by age x calendar year), with its
    axes in that order (age first). Raises :class:`TableError` for anything else, saying why."""
    for a in t.axes:
        if a.kind == "age" and a.increment not in (None, 1):
            raise _refusal(
                xf, t, f"is abridged: its ages go up in steps of {a.increment} (AxisDef Increment "
                       f"{a.increment}), and a valuation needs a rate at every age",
                fix="use the version of the table with yearly ages, or interpolate the rates to every age "
                    "and save them as a CSV table",
            )
    for a in t.axes:
        if a.kind == "year" and a.scale_type.lower() == "age":
            raise _refusal(
                xf, t, f"has an axis named '{a.name}' whose scale type is Age, so it cannot be told whether "
                       "it holds ages, calendar years or years of birth",
                fix="use a table whose axes are labelled consistently, or convert it to CSV yourself",
            )
    axes = t.axes
    depth = t.coords.shape[1]
    if len(axes) == 2 and depth == 1 and axes[0].kind == "age" and axes[1].kind == "duration" \
            and axes[1].min is not None and axes[1].min == axes[1].max:
        axes = axes[:1]  # "duration N and over": an ultimate table labelled with its duration
    if depth != len(axes):
        raise _refusal(xf, t, f"declares {len(axes)} axes but its values are nested {depth} deep")
    kinds = tuple(a.kind for a in axes)
    if kinds == ("age",):
        return "ultimate", axes
    if len(axes) == 2 and set(kinds) == {"age", "duration"}:
        return "select", axes if kinds[0] == "age" else axes[::-1]
    if len(axes) == 2 and set(kinds) == {"age", "year"}:
        yax = axes[kinds.index("year")]
        lo, hi = yax.min, yax.max
        if lo is None or hi is None or lo < _YEAR_RANGE[0] or hi > _YEAR_RANGE[1]:
            raise _refusal(xf, t, f"has a year axis '{yax.label}' running {lo}..{hi}, which are not "
                                  "calendar years")
        return "period", axes if kinds[0] == "age" else axes[::-1]
    shown = " x ".join(f"'{a.label}' ({a.scale_type or 'no scale type'})" for a in axes)
    raise _refusal(
        xf, t, f"has axes {shown}: supported are age, age x duration (select) and age x calendar year",
    )


def _order(t: XTable, axes: tuple[XAxis, ...]) -> np.ndarray:
    """Coordinates with the columns in ``axes`` order (age first)."""
    if t.coords.shape[1] == 1:
        return t.coords
    return t.coords if axes[0] is t.axes[0] else t.coords[:, ::-1]


def _grid(xf: XTbMLFile, t: XTable, axes: tuple[XAxis, ...]) -> tuple[list[np.ndarray], np.ndarray]:
    """Dense grid of a table over its declared ranges (NaN for empty or absent cells)."""
    coords = _order(t, axes)
    ranges = []
    for i, a in enumerate(axes):
        seen = coords[:, i]
        lo = a.min if a.min is not None else int(seen.min())
        hi = a.max if a.max is not None else int(seen.max())
        if seen.size and (seen.min() < lo or seen.max() > hi):
            bad = int(seen[(seen < lo) | (seen > hi)][0])
            raise _refusal(xf, t, f"has a value where {a.label} {bad} is outside MinScaleValue {lo} .. "
                                  f"MaxScaleValue {hi} of its AxisDef")
        if not 0 < hi - lo + 1 <= _MAX_AXIS:
            raise _refusal(xf, t, f"has an axis '{a.label}' running {lo}..{hi}, which no table of rates spans")
        ranges.append(np.arange(lo, hi + 1, dtype=np.int64))
    shape = tuple(r.size for r in ranges)
    idx = tuple(coords[:, i] - ranges[i][0] for i in range(len(axes)))
    flat = np.ravel_multi_index(idx, shape) if shape else np.zeros(0, dtype=np.int64)
    uniq, counts = np.unique(flat, return_counts=True)
    if (counts > 1).any():
        pos = np.unravel_index(int(uniq[int(np.argmax(counts > 1))]), shape)
        at = ", ".join(f"{a.label} {int(r[k])}" for a, r, k in zip(axes, ranges, pos, strict=True))
        raise _refusal(xf, t, f"has two values at {at}")
    grid = np.full(shape, np.nan)
    grid[idx] = t.values
    return ranges, grid


def _name_tables(xf: XTbMLFile, main: list[XTable]) -> list[str]:
    """Names by which a file's tables are picked: TableName for one table, else each table's description
    (or ``TableName [k]`` where it has none or it repeats)."""
    if len(main) == 1:
        return [xf.name]
    descs = [t.description for t in main]
    return [d if d and descs.count(d) == 1 else f"{xf.name} [{t.number}]" for t, d in zip(main, descs, strict=True)]


# --------------------------------------------------------------------------------------------------
# Mortality tables
# --------------------------------------------------------------------------------------------------


def _close(q: np.ndarray, closing: Closing) -> np.ndarray:
    from valuation.mortality.readers import _close as close

    return close(q, closing)


def _ultimate(xf: XTbMLFile, t: XTable, axes: tuple[XAxis, ...]) -> tuple[int, np.ndarray]:
    (ages,), q = _grid(xf, t, axes)
    if np.isnan(q).any():
        a = int(ages[int(np.argmax(np.isnan(q)))])
        raise _refusal(xf, t, f"has a missing value at age {a}; every age from {ages[0]} to {ages[-1]} needs a rate",
                       fix="use the file as downloaded, or give the missing rate")
    return int(ages[0]), q


#: A select table whose rows are attained ages says so in its description ("values of q[x-t]+t").
_ATTAINED = re.compile(r"q\s*\[\s*x\s*-\s*t\s*\]\s*\+\s*t", re.IGNORECASE)


def _by_selection_age(ages: np.ndarray, grid: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows by attained age x holding q_[x-t]+t at duration t -> rows by selection age x - t.

    Some UK tables (the 92 series) are laid out by attained age, stated in their description as
    "values of q[x-t]+t"; the selection age of the cell (x, t) is x - t.
    """
    n = grid.shape[1]
    sel_ages = np.arange(ages[0] - (n - 1), ages[-1] + 1)
    out = np.full((sel_ages.size, n), np.nan)
    for t in range(n):  # n is the select period (a few years), not a member count
        out[(ages - t) - sel_ages[0], t] = grid[:, t]
    return sel_ages, out


def _select(xf: XTbMLFile, t: XTable, axes: tuple[XAxis, ...], min_age: int,
            ult: np.ndarray) -> tuple[int, np.ndarray]:
    """Select rows for selection ages ``first .. max_age`` (first = min(first selection age, min_age)).

    Rows are selection ages (rows by attained age are turned round first, see :func:`_by_selection_age`).
    A row is read as [empty cells at ages below the table][rates][empty cells to the end]. Empty cells
    at the end mean the select period of that selection age ends there, so the ultimate rate at the
    attained age applies (stated rule, the standard layout). Empty cells at the start of a row are allowed
    only at attained ages below the ultimate table's first age, which the table does not cover; they take
    the row's first rate, as ages below a table's first age take its first rate (stated rule).
    """
    (ages, durs), grid = _grid(xf, t, axes)
    n = durs.size
    if _ATTAINED.search(t.description):
        ages, grid = _by_selection_age(ages, grid)
    max_age = min_age + ult.size - 1
    empty = np.isnan(grid)
    given = ~empty
    k = np.arange(n)[None, :]
    has = given.any(axis=1)
    lead = np.where(has, np.argmax(given, axis=1), n)  # first duration index with a rate
    last = np.where(has, n - 1 - np.argmax(given[:, ::-1], axis=1), -1)  # last duration index with a rate
    gap = empty & (k > lead[:, None]) & (k < last[:, None])
    if gap.any():
        i, j = (int(v) for v in np.unravel_index(int(np.argmax(gap)), gap.shape))
        raise _refusal(
            xf, t, f"has an empty cell at age {ages[i]}, duration {durs[j]} between rates of the same row; "
                   "only the start of a row (ages the table does not cover) and its end (where the select "
                   "period ends) may be empty",
        )
    att = ages[:, None] + k
    early = empty & (k < lead[:, None]) & (att >= min_age) & has[:, None]
    if early.any():
        i, j = (int(v) for v in np.unravel_index(int(np.argmax(early)), early.shape))
        raise _refusal(
            xf, t, f"has an empty cell at age {ages[i]}, duration {durs[j]} before the first rate of its row, "
                   f"at attained age {att[i, j]}, which the ultimate table covers",
        )
    if ages[-1] > max_age:
        raise _refusal(xf, t, f"has selection ages up to {ages[-1]}, beyond the last age {max_age} of the "
                              "ultimate table")
    # Standard layout: a life selected at x reaches the ultimate table at x + (its select period), so
    # the ultimate table must start no later than the first selection age plus the select period.
    period = np.where(has, last + 1, 0)
    needs = ages + period
    if needs.min() < min_age:
        i = int(np.argmin(needs))
        raise _refusal(
            xf, t, f"needs ultimate rates from age {needs[i]} (selection age {ages[i]} with a select period "
                   f"of {period[i]} years), but the ultimate table starts at age {min_age}",
            fix="use the file as downloaded; the ultimate table must start by the first selection age plus "
                "the select period",
        )
    first = min(int(ages[0]), min_age)
    rows = np.arange(first, max_age + 1)
    attained = rows[:, None] + k
    # ultimate q at the attained age; 1 past the closing age (stated rule)
    out = np.where(attained > max_age, 1.0, ult[np.clip(attained - min_age, 0, ult.size - 1)])
    row_first = grid[np.arange(ages.size), np.minimum(lead, n - 1)]
    leading = (k < lead[:, None]) & has[:, None]
    sel = np.where(given, grid, np.where(leading, row_first[:, None], out[ages - first]))
    out[ages - first] = sel
    return first, out


def _period(xf: XTbMLFile, t: XTable, axes: tuple[XAxis, ...], closing: Closing) -> tuple[int, int, np.ndarray]:
    (ages, years), grid = _grid(xf, t, axes)
    if np.isnan(grid).any():
        i, j = (int(v) for v in np.unravel_index(int(np.argmax(np.isnan(grid))), grid.shape))
        raise _refusal(xf, t, f"has no rate at age {ages[i]} in year {years[j]}; a period table needs a rate "
                              f"at every age {ages[0]}..{ages[-1]} in every year {years[0]}..{years[-1]}")
    cols = np.column_stack([_close(grid[:, j], closing) for j in range(years.size)])
    return int(ages[0]), int(years[0]), cols


def mortality_tables(
    xf: XTbMLFile, *, closing: Closing = "require", base_year: int | None = None, only: str | None = None
) -> dict[str, MortalityTable]:
    """The mortality tables of an XTbML file, validated (see the module docstring for the layouts).

    Parameters
    ----------
    xf : XTbMLFile
        From :func:`read_xtbml`.
    closing : {"require", "set_last_to_one"}
        Closing rule, as :func:`valuation.mortality.readers.load_tables`.
    base_year : int, optional
        Calendar year the rates describe [calendar year]; for a period table, the year whose rates apply
        (default: each calendar year's own rates, see :class:`MortalityTable`).
    only : str, optional
        Build and validate only the table of this name (the others may be of a kind that is refused).

    Returns
    -------
    dict
        Table name -> :class:`MortalityTable`. One table: the file's TableName; several: each table's
        description (see :func:`table_names`).

    References
    ----------
    [XTbML]; [DHW] sections 3.7-3.9 (select and ultimate), 2.6 (period rates).
    """
    from valuation.mortality.readers import validate_table

    if xf.is_improvement:
        raise TableError(
            f"the file holds improvement rates (content type {xf.content_type}), not mortality rates",
            file=xf.path, fix="use it as the improvement of a table: improvement = { kind = \"table\", "
                              f"file = \"{xf.path.name}\" }} in the basis",
        )
    roles = _roles(xf)
    if only is not None and only not in roles:
        raise TableError(f"no table named '{only}'", file=xf.path, column=only,
                         fix=f"use one of {', '.join(roles) or 'no table: none of them can be read'}")
    src = xf.source()
    out: dict[str, MortalityTable] = {}
    for name, role in roles.items():
        if only is not None and name != only:
            continue
        if isinstance(role, TableError):
            raise role
        (mt, max_), sel_pair = role
        if sel_pair is None and _shape(xf, mt) == "period":
            min_age, y0, grid = _period(xf, mt, max_, closing)
            years = np.arange(y0, y0 + grid.shape[1])
            for j, y in enumerate(years):
                validate_table(MortalityTable(f"{name}, year {y}", min_age, grid[:, j]), file=str(xf.path))
            col = grid.shape[1] - 1
            if base_year is not None:
                if not y0 <= base_year <= years[-1]:
                    raise TableError(f"base year {base_year} is outside the years {y0}..{years[-1]} of the "
                                     f"period table '{name}'", file=xf.path,
                                     fix="give a base year within the table's years, or none")
                col = base_year - y0
            out[name] = MortalityTable(name, min_age, grid[:, col], base_year=base_year,
                                       source=f"{src}, {xf.table_label(mt)}", year_qx=grid, first_year=y0)
            continue
        min_age, q = _ultimate(xf, mt, max_)
        q = _close(q, closing)
        sel_first, sel = None, None
        label = xf.table_label(mt)
        if sel_pair is not None:
            st, sax = sel_pair
            sel_first, sel = _select(xf, st, sax, min_age, q)
            label = f"{xf.table_label(st)} with {xf.table_label(mt)}"
        table = MortalityTable(name, min_age, q, base_year=base_year, source=f"{src}, {label}",
                               select_qx=sel, select_min_age=sel_first)
        validate_table(table, file=str(xf.path))
        out[name] = table
    return out


_Pair = tuple[XTable, tuple[XAxis, ...]]
_Role = tuple[_Pair, _Pair | None]


def _shape(xf: XTbMLFile, t: XTable) -> Shape:
    return table_shape(xf, t)[0]


def _roles(xf: XTbMLFile) -> dict[str, _Role | TableError]:
    """Name -> (main table, its select table or None), or the refusal for that name.

    Main tables are the ultimate tables (each select table paired with the ultimate table of the same
    place, in file order) or the period tables. A table whose kind is refused keeps its refusal under its
    name; a file whose tables cannot be paired gives one refusal under its TableName.
    """
    shapes: list[tuple[XTable, Shape | None, tuple[XAxis, ...], TableError | None]] = []
    for t in xf.tables:
        try:
            s, ax = table_shape(xf, t)
            shapes.append((t, s, ax, None))
        except TableError as exc:
            shapes.append((t, None, t.axes, exc))
    ults = [(t, ax) for t, s, ax, _ in shapes if s == "ultimate"]
    sels = [(t, ax) for t, s, ax, _ in shapes if s == "select"]
    pers = [(t, ax) for t, s, ax, _ in shapes if s == "period"]
    bad = [(t, e) for t, _, _, e in shapes if e is not None]
    problem: TableError | None = None
    if sels and len(sels) != len(ults):
        problem = TableError(
            f"{len(sels)} select tables (age x duration) and {len(ults)} ultimate tables: each select table "
            "needs the ultimate table it runs into, one for one in file order", file=xf.path,
        )
    elif pers and (ults or sels):
        problem = TableError("mixes period tables (age x calendar year) with tables by age alone; supported "
                             "is one kind of table a file", file=xf.path)
    if problem is not None:
        return {xf.name: bad[0][1] if bad else problem}
    main: list[tuple[XTable, _Role | TableError]] = []
    if pers:
        main = [(t, ((t, ax), None)) for t, ax in pers]
    else:
        main = [(u[0], (u, sels[k] if sels else None)) for k, u in enumerate(ults)]
    if bad and not sels:  # a refused table stands on its own (with select tables the pairing is unsure)
        main += [(t, e) for t, e in bad]
    elif bad:
        return {xf.name: bad[0][1]}
    main.sort(key=lambda m: m[0].number)
    names = _name_tables(xf, [t for t, _ in main])
    return dict(zip(names, [r for _, r in main], strict=True))


def table_names(xf: XTbMLFile) -> list[str]:
    """The names by which :func:`mortality_tables` (or an improvement's ``table_name``) picks tables."""
    if xf.is_improvement:
        return _name_tables(xf, list(xf.tables))
    return list(_roles(xf))


# --------------------------------------------------------------------------------------------------
# Improvement scales
# --------------------------------------------------------------------------------------------------


def improvement_scale(
    xf: XTbMLFile,
    name: str | None = None,
    *,
    after_last_year: AfterLastYear = "hold_last",
    long_term_rate: float = 0.0,
    rules_given: bool = False,
) -> ImprovementScale:
    """An improvement scale from an XTbML file: rates by age, or by age x calendar year.

    One age axis gives :class:`~valuation.mortality.improvement.AgeImprovement` (the same rates every
    year); age x calendar year gives :class:`~valuation.mortality.improvement.TwoDimensionalScale` with
    ``after_last_year`` and ``long_term_rate`` as for a CSV scale. ``name`` picks a table in a file with
    several (names as :func:`mortality_tables`). ``rules_given`` says that the caller set
    ``after_last_year`` or ``long_term_rate``, which a scale by age alone cannot use.

    References
    ----------
    [MP2014] (improvement rates by age and calendar year); [XTbML].
    """
    from valuation.mortality.improvement import AgeImprovement, TwoDimensionalScale

    if not xf.is_improvement and "mortality" in xf.content_type.lower():
        raise TableError(
            f"the file holds mortality rates (content type {xf.content_type}), not improvement rates",
            file=xf.path, fix="give it as the table of a mortality entry, and an improvement scale file here",
        )
    names = _name_tables(xf, list(xf.tables))
    if name is None and len(xf.tables) > 1:
        raise TableError(f"holds {len(xf.tables)} tables; say which one", file=xf.path,
                         fix=f"give a table_name in the improvement: one of {', '.join(names)}")
    if name is not None and name not in names:
        raise TableError(f"no table named '{name}'", file=xf.path,
                         fix=f"give a table_name in the improvement: one of {', '.join(names)}")
    t = xf.tables[0 if name is None else names.index(name)]
    shape, axes = table_shape(xf, t)
    ranges, grid = _grid(xf, t, axes)
    if np.isnan(grid).any():
        pos = np.unravel_index(int(np.argmax(np.isnan(grid))), grid.shape)
        at = ", ".join(f"{a.label} {int(r[k])}" for a, r, k in zip(axes, ranges, pos, strict=True))
        raise _refusal(xf, t, f"has no improvement rate at {at}")
    bad = (grid <= -1.0) | (grid >= 1.0)
    if bad.any():
        pos = np.unravel_index(int(np.argmax(bad)), grid.shape)
        at = ", ".join(f"{a.label} {int(r[k])}" for a, r, k in zip(axes, ranges, pos, strict=True))
        raise _refusal(xf, t, f"has improvement rate {grid[pos]:g} at {at}, not strictly between -1 and 1")
    if shape == "ultimate":
        if rules_given:
            raise _refusal(xf, t, "holds improvement rates by age only, the same in every year, so "
                                  "after_last_year and long_term_rate do not apply",
                           fix="remove after_last_year and long_term_rate from the improvement")
        return AgeImprovement(ranges[0], grid)
    if shape == "period":
        return TwoDimensionalScale(int(ranges[0][0]), ranges[1], grid, after_last_year, long_term_rate)
    raise _refusal(xf, t, "is a select table (age x duration), not an improvement scale",
                   fix="give a scale by age, or by age and calendar year")
