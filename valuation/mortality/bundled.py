"""Tables shipped with the package, by name, and resolution of a table spec (bundled name or file).

Bundled tables (files in ``mortality/data``, provenance in ``mortality/data/README.md``):

- ``"SULT"``: the Standard Ultimate Life Table rebuilt from its published Makeham law (A = 0.00022,
  B = 2.7e-6, c = 1.124), ages 20 to 120, radix l_20 = 100,000. Closing rule: q_120 = 1 (the law's own
  q_120 is replaced by 1 so that nobody survives past age 120). No base year.
- ``"DEMO_M"`` / ``"DEMO_F"``: illustrative Gompertz-Makeham laws of our own choosing (not fitted to any
  population), ages 0 to 120 with q_120 = 1, base year 2020.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed., CUP, 2013,
   Appendix D (Standard Ultimate Life Table) and section 2.7 (Makeham's law).
"""

from __future__ import annotations

import functools
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from valuation.errors import TableError
from valuation.mortality.laws import DEMO_LAW_FEMALE, DEMO_LAW_MALE, SULT_LAW, Makeham
from valuation.mortality.readers import load_tables
from valuation.mortality.table import MortalityTable

DATA_DIR = Path(__file__).parent / "data"

BUNDLED: tuple[str, ...] = ("SULT", "DEMO_M", "DEMO_F")

#: Base year of the illustrative demo tables [calendar year].
DEMO_BASE_YEAR = 2020

# name -> (file, column, law, min_age, max_age, base year, provenance)
_SPECS: dict[str, tuple[str, str, Makeham, int, int, int | None, str]] = {
    "SULT": ("sult.csv", "SULT", SULT_LAW, 20, 120, None,
             "Standard Ultimate Life Table from its Makeham law A=0.00022, B=2.7e-6, c=1.124 "
             "(Dickson, Hardy & Waters, AMLCR, Appendix D); ages 20-120; closing rule q_120 = 1"),
    "DEMO_M": ("demo.csv", "DEMO_M", DEMO_LAW_MALE, 0, 120, DEMO_BASE_YEAR,
               "Illustrative Gompertz-Makeham law A=0.0005, B=2.1e-5, c=1.1 (not fitted to any population); "
               "ages 0-120; closing rule q_120 = 1; base year 2020"),
    "DEMO_F": ("demo.csv", "DEMO_F", DEMO_LAW_FEMALE, 0, 120, DEMO_BASE_YEAR,
               "Illustrative Gompertz-Makeham law A=0.0003, B=1.9e-5, c=1.1 (not fitted to any population); "
               "ages 0-120; closing rule q_120 = 1; base year 2020"),
}


def law_qx(law: Makeham, min_age: int, max_age: int) -> NDArray[np.float64]:
    """q_x = 1 - exp(-A - B c^x (c - 1) / ln c) at ages ``min_age .. max_age`` [years], closed.

    Closing rule: q at ``max_age`` is set to 1.

    References
    ----------
    [DHW] section 2.7, eq. (2.29) with t = 1.
    """
    q = law.qx(np.arange(min_age, max_age + 1))
    q[-1] = 1.0
    return q


def write_bundled_files(directory: Path = DATA_DIR) -> list[Path]:
    """(Re)write the bundled CSV files from the laws, at full float precision. Returns the paths."""
    files: dict[str, list[str]] = {}
    for name, (fname, *_rest) in _SPECS.items():
        files.setdefault(fname, []).append(name)
    written = []
    for fname, names in files.items():
        lo, hi = _SPECS[names[0]][3], _SPECS[names[0]][4]
        cols = [law_qx(_SPECS[n][2], lo, hi) for n in names]
        lines = ["age," + ",".join(_SPECS[n][1] for n in names)]
        lines += [f"{a}," + ",".join(repr(float(c[k])) for c in cols) for k, a in enumerate(range(lo, hi + 1))]
        path = directory / fname
        path.write_text("\n".join(lines) + "\n", encoding="utf-8")
        written.append(path)
    return written


def bundled_table(name: str) -> MortalityTable:
    """A bundled table by name: one of :data:`BUNDLED` (case-insensitive). Cached; arrays are read-only."""
    key = name.strip().upper()
    if key not in _SPECS:
        raise TableError(f"unknown bundled table '{name}'", column=name, fix=f"use one of {', '.join(BUNDLED)}")
    return _load_bundled(key)


@functools.lru_cache(maxsize=None)
def _load_bundled(key: str) -> MortalityTable:
    fname, column, _law, _lo, _hi, base_year, source = _SPECS[key]
    t = load_tables(DATA_DIR / fname, closing="require")[column]
    return MortalityTable(key, t.min_age, t.qx, base_year=base_year, source=source)


def resolve_table(
    spec: str, base_dir: Path | None = None, name: str | None = None, **kw: Any
) -> MortalityTable:
    """A bundled table by name, or a table read from a file.

    Parameters
    ----------
    spec : str
        A bundled name (:data:`BUNDLED`) or a path to a CSV / XLSX / XTbML file, relative to
        ``base_dir`` when not absolute.
    base_dir : Path, optional
        Directory relative paths are taken from (usually the basis file's directory).
    name : str, optional
        Column (CSV / XLSX) or table (XTbML) to pick from the file.
    **kw
        Passed to :func:`valuation.mortality.readers.load_tables` (``closing``, ``base_year``, ``sheet``).
    """
    from valuation.mortality.readers import load_table

    if spec.strip().upper() in _SPECS and name is None and not kw:
        return bundled_table(spec)
    path = Path(spec)
    if not path.is_absolute() and base_dir is not None:
        path = Path(base_dir) / path
    if not path.is_file():
        raise TableError(
            f"'{spec}' is neither a bundled table nor an existing file", file=path,
            fix=f"use one of {', '.join(BUNDLED)} or a path to a CSV, XLSX or XTbML file",
        )
    return load_table(path, name=name, **kw)
