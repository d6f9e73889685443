"""The Python API as a notebook user meets it: basis first, members as a path or a data frame, pandas out.

The same records given as a file, a polars DataFrame and a pandas DataFrame must value identically (the
same case through every path, common practice in this project's tests); pandas conversion is checked
against pandas itself (the package registry's reference implementation of the data frame).
"""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import polars as pl
import pytest

from valuation import load_basis, value_members, value_scheme, write_run
from valuation.errors import ValuationError
from valuation.members import members_from_frame, read_members

ROOT = Path(__file__).resolve().parents[1]
BASIS = ROOT / "assumptions" / "demo_basis.toml"
MEMBERS = ROOT / "member_data_demo" / "members.csv"


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    lines = MEMBERS.read_text(encoding="utf-8").splitlines()[:61]
    path = tmp_path_factory.mktemp("api") / "small.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def from_file(small):
    return value_scheme(BASIS, small, sensitivities=False)


def test_basis_first_and_the_old_order_is_named(small):
    with pytest.raises(ValuationError) as info:
        value_scheme(small, BASIS)
    assert "basis comes first" in str(info.value)
    basis = load_basis(BASIS)
    with pytest.raises(TypeError, match="basis first"):
        value_members(read_members(small, basis), basis)


def test_polars_and_pandas_frames_value_as_the_file(small, from_file):
    text = pl.read_csv(small, infer_schema=False)
    typed = pl.read_csv(small, try_parse_dates=False)  # numbers typed, dates as the file writes them
    pandas_frame = pd.read_csv(small, dtype=str, keep_default_na=False).replace("", None)
    for members in (text, typed, pandas_frame):
        res = value_scheme(BASIS, members, sensitivities=False)
        assert res.summary.records == from_file.summary.records
        assert res.total_liability == pytest.approx(from_file.total_liability, rel=1e-12)


def test_frame_dates_as_dates(small, from_file):
    """A frame whose date columns are real dates (as a notebook user would have them) values the same."""
    basis = load_basis(BASIS)
    df = pl.read_csv(small, infer_schema=False)
    fmt = basis.mapping.date_format
    df = df.with_columns(pl.col("DOB", "Spouse DOB", "Guarantee End").str.strptime(pl.Date, fmt))
    res = value_scheme(basis, df.to_pandas(), sensitivities=False)
    assert res.total_liability == pytest.approx(from_file.total_liability, rel=1e-12)


def test_frame_input_is_in_the_manifest(small):
    basis = load_basis(BASIS)
    data = members_from_frame(pl.read_csv(small, infer_schema=False), basis, name="members from my notebook")
    res = value_members(basis, data, sensitivities=False)
    inputs = res.summary.manifest.inputs
    assert len(inputs["members from my notebook"]) == 64  # SHA-256 hex digest
    assert data.exceptions.height == 0 or set(data.exceptions["file"]) == {"members from my notebook"}


def test_not_a_frame_is_refused():
    with pytest.raises(TypeError, match="polars or a pandas DataFrame"):
        value_scheme(BASIS, [{"member_id": "A"}])


def test_to_pandas_gives_every_table(from_file):
    frames = from_file.to_pandas()
    assert set(frames) == set(from_file.FRAMES)
    for name, frame in frames.items():
        assert isinstance(frame, pd.DataFrame)
        assert list(frame.columns) == getattr(from_file, name).columns
    assert frames["members"]["liability"].sum() == pytest.approx(from_file.total_liability, rel=1e-12)


def test_write_run_with_reports(from_file, tmp_path):
    out = write_run(from_file, tmp_path / "run", reports=True)
    assert (out / "valuation.xlsx").exists() and (out / "summary.html").exists()
    assert json.loads((out / "summary.json").read_text())["records"]["read"] == 60
    with pytest.raises(ValuationError):
        write_run(from_file, out)  # a previous run is replaced only when asked
    write_run(from_file, out, overwrite=True)
    assert not (out / "valuation.xlsx").exists()  # replaced whole: no report this time
