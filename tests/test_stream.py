"""Streaming valuation agrees with the in-memory path, chunk boundaries and all.

Reference: the in-memory path ``value_members(basis, read_members(path, basis))``, whose numbers are
checked against published references elsewhere (test_engine_reference.py: Dickson, Hardy & Waters,
*Actuarial Mathematics for Life Contingent Risks*, 2nd ed., SULT examples; test_members_*.py: the stated
validation rules). Streaming only changes how records are read, so every summary number must agree to
rounding (1e-9 relative: sums taken in a different order) and every exception must be identical,
including the row numbers (header = row 1) and the duplicate-id reasons, which need the whole file.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import polars as pl
import pytest
from polars.testing import assert_frame_equal

from valuation.basis import load_basis
from valuation.engine.results import ValuationResult
from valuation.engine.run import value_members
from valuation.engine.stream import value_file_streaming
from valuation.errors import DataError
from valuation.members import read_members, synth_scheme, to_admin_format, write_scheme
from valuation.members.readers import iter_text_frames, read_text_frame

ROOT = Path(__file__).resolve().parents[1]
BASIS = load_basis(ROOT / "assumptions" / "demo_basis.toml")
REL = 1e-9
CHUNK = 700
#: Row indices (0-based records) that receive copies of other ids, each in a different chunk of CHUNK rows.
THREE_COPIES = (10, 1500, 2500)          # file rows 12, 1502, 2502
TWELVE_COPIES = tuple(range(120, 3000, 240))  # 12 copies spread over every chunk


def _scheme(n: int, seed: int) -> pl.DataFrame:
    """Dirty synthetic scheme (5 % of records with one problem each) plus duplicated ids across chunks."""
    df = synth_scheme(n, seed=seed, valuation_date=BASIS.valuation_date, dirty=0.05)
    ids = df["member_id"].to_list()
    for positions in (THREE_COPIES, TWELVE_COPIES):
        keep = [p for p in positions if p < n]
        for p in keep[1:]:
            ids[p] = ids[keep[0]]
    return df.with_columns(pl.Series("member_id", ids, dtype=pl.String))


@pytest.fixture(scope="module")
def scheme() -> pl.DataFrame:
    return _scheme(3000, seed=606)


def _numbers(tree: Any, prefix: str = "") -> dict[str, float]:
    """Every number of a summary, keyed by its path (strings and the run manifest left out)."""
    out: dict[str, float] = {}
    if isinstance(tree, dict):
        for k, v in tree.items():
            if k != "manifest":
                out |= _numbers(v, f"{prefix}/{k}")
    elif isinstance(tree, list):
        for i, v in enumerate(tree):
            out |= _numbers(v, f"{prefix}[{i}]")
    elif isinstance(tree, int | float) and not isinstance(tree, bool):
        out[prefix] = float(tree)
    return out


def _assert_same(stream: ValuationResult, memory: ValuationResult) -> None:
    a, b = _numbers(stream.summary.to_json()), _numbers(memory.summary.to_json())
    assert a.keys() == b.keys()
    for key, ref in b.items():
        assert a[key] == pytest.approx(ref, rel=REL, abs=1e-6) or (math.isnan(ref) and math.isnan(a[key])), key
    assert stream.summary.records == memory.summary.records
    for name in ("liabilities", "cashflows", "sensitivities", "expected_deaths", "life_expectancy"):
        assert_frame_equal(getattr(stream, name), getattr(memory, name), check_exact=False, rel_tol=REL, abs_tol=1e-6)
    assert_frame_equal(stream.exceptions, memory.exceptions)  # same rows, reasons and values, same order


@pytest.mark.parametrize("ext", ["csv", "parquet"])
def test_streaming_matches_in_memory(ext: str, scheme: pl.DataFrame, tmp_path: Path) -> None:
    # CSV in the administrator's layout (mapped headers, codes, day/month/year dates); Parquet in ours.
    frame = to_admin_format(scheme, BASIS.mapping) if ext == "csv" else scheme
    path = write_scheme(frame, tmp_path / f"members.{ext}")
    memory = value_members(BASIS, read_members(path, BASIS), sensitivities=False)
    out = tmp_path / "members_out.parquet"
    stream = value_file_streaming(BASIS, path, chunk_rows=CHUNK, member_results_path=out, sensitivities=False)
    _assert_same(stream, memory)
    records = stream.summary.records
    assert records.read == scheme.height == records.valued + records.excluded
    assert records.excluded > 0
    # the per-member rows went to the Parquet file, not to memory
    assert stream.members.height == 0 and stream.extra["members_path"] == str(out)
    per_member = pl.read_parquet(out)
    assert per_member["member_id"].to_list() == memory.members["member_id"].to_list()
    assert_frame_equal(per_member, memory.members, check_exact=False, rel_tol=REL)


def test_duplicates_in_different_chunks_are_all_excluded(scheme: pl.DataFrame, tmp_path: Path) -> None:
    path = write_scheme(scheme, tmp_path / "members.parquet")
    stream = value_file_streaming(BASIS, path, chunk_rows=CHUNK, sensitivities=False)
    reason = "member_id appears more than once; every copy is excluded: ask the administrator which record is right"
    dup = stream.exceptions.filter(pl.col("reason") == reason)
    three = dup.filter(pl.col("member_id") == scheme["member_id"][THREE_COPIES[0]])
    assert three["row"].to_list() == [p + 2 for p in THREE_COPIES]  # header = row 1
    assert set(three["value"]) == {"3 copies: rows 12, 1502, 2502"}
    twelve = dup.filter(pl.col("member_id") == scheme["member_id"][TWELVE_COPIES[0]])
    first_ten = ", ".join(str(p + 2) for p in TWELVE_COPIES[:10])
    assert twelve.height == 12
    assert set(twelve["value"]) == {f"12 copies: rows {first_ten}, ..."}
    assert stream.extra["members_path"] is None and stream.members.height == 0


def test_streaming_sensitivities_match(tmp_path: Path) -> None:
    path = write_scheme(_scheme(500, seed=7), tmp_path / "members.parquet")
    memory = value_members(BASIS, read_members(path, BASIS), sensitivities=True)
    stream = value_file_streaming(BASIS, path, chunk_rows=150, sensitivities=True)
    assert stream.sensitivities.height == len(BASIS.sensitivities) > 0
    _assert_same(stream, memory)


def test_xlsx_falls_back_to_whole_file_read(tmp_path: Path) -> None:
    path = write_scheme(_scheme(200, seed=8), tmp_path / "members.xlsx")
    memory = value_members(BASIS, read_members(path, BASIS), sensitivities=False)
    stream = value_file_streaming(BASIS, path, chunk_rows=64, sensitivities=False,
                                  member_results_path=tmp_path / "out.parquet")
    _assert_same(stream, memory)
    assert pl.read_parquet(tmp_path / "out.parquet").height == memory.members.height


def test_progress_reports_every_chunk(tmp_path: Path) -> None:
    path = write_scheme(synth_scheme(450, seed=9, valuation_date=BASIS.valuation_date), tmp_path / "m.parquet")
    calls: list[tuple[str, int, int]] = []
    value_file_streaming(BASIS, path, chunk_rows=100, sensitivities=False,
                         progress=lambda stage, done, total: calls.append((stage, done, total)))
    valuing = [c for c in calls if c[0] == "valuing"]
    assert valuing == [("valuing", k, 5) for k in range(6)]  # 450 clean records in chunks of 100
    assert calls[0] == ("checking ids", 0, 1)


@pytest.mark.parametrize("ext", ["csv", "parquet"])
@pytest.mark.parametrize("size", [1, 7, 23, 100])
def test_chunks_rebuild_the_whole_file(ext: str, size: int, tmp_path: Path) -> None:
    """Chunks of ``size`` rows, put back together, are exactly the whole-file text frame."""
    path = write_scheme(_scheme(23, seed=10), tmp_path / f"m.{ext}")
    chunks = list(iter_text_frames(path, size))
    assert [c.height for c in chunks[:-1]] == [size] * (len(chunks) - 1) and 0 < chunks[-1].height <= size
    assert_frame_equal(pl.concat(chunks), read_text_frame(path))


def test_header_only_file_and_fatal_errors_match(tmp_path: Path) -> None:
    empty = tmp_path / "empty.csv"
    empty.write_text(",".join(BASIS.mapping.columns) + "\n", encoding="utf-8")  # every mapped header, no record
    res = value_file_streaming(BASIS, empty, sensitivities=False)
    assert res.summary.records.read == 0 and res.summary.liability.total == 0.0
    broken = tmp_path / "broken.csv"
    broken.write_text("member_id,status,sex\nA1,P,1\n", encoding="utf-8")
    with pytest.raises(DataError) as whole:
        read_members(broken, BASIS)
    with pytest.raises(DataError) as streamed:
        value_file_streaming(BASIS, broken, sensitivities=False)
    assert str(streamed.value) == str(whole.value)
    assert "header 'DOB' (mapped to date_of_birth under [mapping.columns] in the basis) is not in the file" in str(
        streamed.value)
    mapped = tmp_path / "mapped.csv"
    mapped.write_text("ref no,STATUS,Gender\nA1,P,1\n", encoding="utf-8")
    with pytest.raises(DataError) as whole:
        read_members(mapped, BASIS)
    with pytest.raises(DataError) as streamed:
        value_file_streaming(BASIS, mapped, sensitivities=False)
    assert str(streamed.value) == str(whole.value)
    assert "header 'DOB' (mapped to date_of_birth under [mapping.columns] in the basis) is not in the file" in str(
        streamed.value)


def test_streamed_exceptions_name_the_header_as_written(tmp_path: Path) -> None:
    """Headers spelt unlike the basis's mapping (case, spaces) are named as written in every chunk."""
    frame = to_admin_format(_scheme(300, seed=12), BASIS.mapping).rename({"DOB": "dob", "Pension pa": " PENSION PA"})
    path = write_scheme(frame, tmp_path / "members.csv")
    memory = read_members(path, BASIS).exceptions
    stream = value_file_streaming(BASIS, path, chunk_rows=64, sensitivities=False).exceptions
    assert_frame_equal(stream, memory)
    dob = stream.filter(pl.col("column") == "date_of_birth")
    assert dob.height > 0 and set(dob["file_column"]) == {"dob"}
    assert dob["reason"].str.starts_with("column 'dob': ").all()
    assert set(stream.filter(pl.col("column") == "pension")["file_column"]) == {" PENSION PA"}
