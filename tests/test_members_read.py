"""Reading member files: CSV / XLSX / Parquet give the same records, header and code mapping, date
formats, fatal file problems, and the demo scheme's files reconciled.

Sources: the column contract and stated filling rules are in valuation/members/data.py; record counts are
checked by the reconciliation identity read = valued + excluded (common practice in valuation data
audits); dates such as 06/05/2002 (day/month/year) are ISO 8601 2002-05-06.
"""

from __future__ import annotations

from datetime import date
from pathlib import Path

import polars as pl
import pytest

from valuation.basis import Basis, load_basis
from valuation.errors import DataError
from valuation.members import read_members, synth_scheme, to_admin_format, write_scheme

ROOT = Path(__file__).resolve().parents[1]
DATA = Path(__file__).parent / "data" / "members"
BASIS = load_basis(DATA / "basis.toml")
DEMO_BASIS = load_basis(ROOT / "assumptions" / "demo_basis.toml")
DEMO = ROOT / "member_data_demo"


def mapped_only(basis: Basis, *headers: str) -> Basis:
    """``basis`` whose [mapping.columns] keeps only the given headers (a file with fewer columns)."""
    columns = {k: v for k, v in basis.mapping.columns.items() if k in headers}
    return basis.model_copy(update={"mapping": basis.mapping.model_copy(update={"columns": columns})})


@pytest.fixture(scope="module")
def scheme() -> pl.DataFrame:
    return synth_scheme(150, seed=11, valuation_date=BASIS.valuation_date)


def test_three_formats_give_identical_records(tmp_path: Path, scheme: pl.DataFrame) -> None:
    frames = []
    for ext in ("csv", "xlsx", "parquet"):
        path = write_scheme(scheme, tmp_path / f"members.{ext}")
        md = read_members(path, BASIS)
        assert md.exceptions.height == 0 and md.valued == scheme.height
        frames.append(md.records)
    assert frames[0].equals(frames[1]) and frames[0].equals(frames[2])


def test_record_columns_and_types(scheme: pl.DataFrame, tmp_path: Path) -> None:
    md = read_members(write_scheme(scheme, tmp_path / "m.csv"), BASIS)
    r = md.records
    assert r.columns == ["row", "member_id", "status", "sex", "date_of_birth", "pension", "pension_pre2005",
                         "pension_post2005", "salary", "service_years", "retirement_age", "spouse_date_of_birth",
                         "spouse_fraction", "guarantee_end", "pension_end_age"]
    assert r.schema["date_of_birth"] == pl.Date and r.schema["pension"] == pl.Float64
    assert r["row"].to_list() == list(range(2, scheme.height + 2))  # header is row 1
    assert r.filter(pl.col("status") == "active")["pension"].max() == 0.0
    assert r["retirement_age"].null_count() == 0 and r["spouse_fraction"].null_count() == 0
    gap = (r["pension_pre2005"] + r["pension_post2005"] - r["pension"]).abs().max()
    assert gap is not None and gap <= 0.01 + 1e-9  # tranches sum to pension within a cent


def test_pension_without_split_goes_to_default_tranche(tmp_path: Path) -> None:
    path = tmp_path / "m.csv"
    path.write_text("member_id,status,sex,date_of_birth,pension\nA1,pensioner,F,1950-01-01,1234.5\n", encoding="utf-8")
    r = read_members(path, BASIS).records.row(0, named=True)
    assert (r["pension_pre2005"], r["pension_post2005"]) == (0.0, 1234.5)  # default_tranche = post2005
    assert r["retirement_age"] == 65.0 and r["spouse_fraction"] == 0.5  # filled from the basis


def test_pension_cell_empty_but_split_given(tmp_path: Path) -> None:
    path = tmp_path / "m.csv"
    path.write_text("member_id,status,sex,date_of_birth,pension_pre2005\nA1,deferred,M,1970-01-01,800\n",
                    encoding="utf-8")
    r = read_members(path, BASIS).records.row(0, named=True)
    assert (r["pension"], r["pension_pre2005"], r["pension_post2005"]) == (800.0, 800.0, 0.0)


def test_mapping_headers_codes_and_date_format(tmp_path: Path) -> None:
    path = tmp_path / "adm.csv"
    path.write_text(
        " ref no ,STATUS,Gender,DOB,Pension PA,Spouse DOB,note\n"
        "GW1,P,2,06/05/1950,1200.00,01/12/1948,hello\n"
        "GW2,x,1,1975-01-31,300,,\n"
        "GW3,pensioner,M,31/01/1960,100,,\n",
        encoding="utf-8",
    )
    md = read_members(path, mapped_only(DEMO_BASIS, "Ref No", "Status", "Gender", "DOB", "Pension pa",
                                        "Spouse DOB"))
    r = md.records
    assert r["status"].to_list() == ["pensioner", "dependant", "pensioner"]  # codes ignore case; ours accepted
    assert r["sex"].to_list() == ["F", "M", "M"]
    assert r["date_of_birth"].to_list() == [date(1950, 5, 6), date(1975, 1, 31), date(1960, 1, 31)]
    assert r["spouse_date_of_birth"][0] == date(1948, 12, 1)
    assert md.ignored_columns == ["note"]


def test_exceptions_name_the_header_as_written(tmp_path: Path) -> None:
    """A mapped or differently spelt header is named as written; our own spelling gives no prefix."""
    path = tmp_path / "adm.csv"
    path.write_text("Ref No,status,Gender, dob ,Pension PA,Pensionable Salary,Notes\n"
                    "GW1,P,2,31/02/1960,1200,,x\n", encoding="utf-8")
    basis = mapped_only(DEMO_BASIS, "Ref No", "Status", "Gender", "DOB", "Pension pa", "Pensionable Salary")
    md = read_members(path, basis)
    assert md.ignored_columns == ["Notes"]
    hit = md.exceptions.filter(pl.col("row").is_not_null()).row(0, named=True)
    assert (hit["column"], hit["file_column"], hit["value"]) == ("date_of_birth", " dob ", "31/02/1960")
    assert hit["reason"] == ("column ' dob ': not a valid date (expected a date as %d/%m/%Y or ISO YYYY-MM-DD)")
    path.write_text("Ref No,status,Gender,DOB\nGW1,Q,2,01/01/1960\n", encoding="utf-8")
    basis = mapped_only(DEMO_BASIS, "Ref No", "Status", "Gender", "DOB")
    hit = read_members(path, basis).exceptions.row(0, named=True)
    assert (hit["column"], hit["file_column"]) == ("status", "status")
    assert hit["reason"].startswith("unknown status code")  # same spelling as ours: reason unchanged
    out = tmp_path / "exceptions.csv"
    read_members(path, basis).exceptions.write_csv(out)
    assert pl.read_csv(out, infer_schema=False).columns == [
        "file", "row", "member_id", "column", "file_column", "value", "reason", "severity"]


def test_missing_column_lists_the_headers_as_written(tmp_path: Path) -> None:
    path = tmp_path / "adm.csv"
    path.write_text("REF NO,Status ,Gender,Date Born\nGW1,P,2,01/01/1960\n", encoding="utf-8")
    with pytest.raises(DataError) as info:
        read_members(path, mapped_only(DEMO_BASIS, "Ref No", "Status", "Gender"))
    msg = str(info.value)
    assert "required column(s) date_of_birth not found" in msg
    assert "headers in the file: 'REF NO', 'Status ', 'Gender', 'Date Born';" in msg
    assert "'Gender' -> sex" in msg  # the basis's mapping is listed too
    (tmp_path / "tr.csv").write_text("member_id,status,sex,date_of_birth,Pension_GMP\n", encoding="utf-8")
    with pytest.raises(DataError, match=r"column 'Pension_GMP' \(read as pension_gmp\) names a tranche"):
        read_members(tmp_path / "tr.csv", BASIS)


def test_round_trip_through_the_administrators_layout(tmp_path: Path, scheme: pl.DataFrame) -> None:
    ours = read_members(write_scheme(scheme, tmp_path / "ours.csv"), DEMO_BASIS).records
    theirs = read_members(write_scheme(to_admin_format(scheme, DEMO_BASIS.mapping), tmp_path / "adm.csv"),
                          DEMO_BASIS).records
    assert ours.equals(theirs)


def test_fatal_file_problems(tmp_path: Path) -> None:
    with pytest.raises(DataError, match="member data file not found"):
        read_members(tmp_path / "missing.csv", BASIS)
    (tmp_path / "m.json").write_text("{}", encoding="utf-8")
    with pytest.raises(DataError, match=r"unknown file type '\.json'.*\.csv, \.xlsx or \.parquet"):
        read_members(tmp_path / "m.json", BASIS)
    (tmp_path / "bad.parquet").write_bytes(b"not parquet at all")
    with pytest.raises(DataError, match="cannot be read as a Parquet file"):
        read_members(tmp_path / "bad.parquet", BASIS)
    (tmp_path / "nodob.csv").write_text("member_id,status,sex\nA,active,M\n", encoding="utf-8")
    with pytest.raises(DataError) as info:
        read_members(tmp_path / "nodob.csv", BASIS)
    msg = str(info.value)
    assert "nodob.csv" in msg and "column 'date_of_birth'" in msg and "[mapping.columns]" in msg
    (tmp_path / "tr.csv").write_text("member_id,status,sex,date_of_birth,pension_gmp\n", encoding="utf-8")
    with pytest.raises(DataError, match="column 'pension_gmp'.*declared: pre2005, post2005"):
        read_members(tmp_path / "tr.csv", BASIS)
    (tmp_path / "dup.csv").write_text("Member_ID,member_id ,status,sex,date_of_birth\n", encoding="utf-8")
    with pytest.raises(DataError, match="both give column 'member_id'"):
        read_members(tmp_path / "dup.csv", BASIS)


def test_demo_members_file_is_clean_and_covers_every_status() -> None:
    md = read_members(DEMO / "members.csv", DEMO_BASIS)
    assert md.exceptions.filter(pl.col("severity") == "excluded").height == 0
    counts = dict(md.counts_by_status().select("status", "read").iter_rows())
    assert {"active", "deferred", "pensioner", "dependant"} <= set(counts)
    assert counts["total"] == md.read == md.valued
    assert md.records.filter(pl.col("pension_end_age").is_not_null()).height > 0  # children
    assert md.records["spouse_date_of_birth"].null_count() < md.read
    assert md.records["guarantee_end"].null_count() < md.read


def test_demo_dirty_file_reconciles_by_status() -> None:
    md = read_members(DEMO / "members_dirty.csv", DEMO_BASIS)
    assert md.read == md.valued + md.excluded
    c = md.counts_by_status()
    body = c.filter(pl.col("status") != "total")
    assert (body["read"] == body["valued"] + body["excluded"]).all()
    assert c.filter(pl.col("status") == "total").row(0)[1:] == (md.read, md.valued, md.excluded)
    excluded_rows = md.exceptions.filter(pl.col("severity") == "excluded")["row"].n_unique()
    assert md.excluded == excluded_rows
    assert {"excluded", "warning"} == set(md.exceptions["severity"])
    assert "=1+1" in md.records["member_id"].to_list()
    assert "<script>alert(1)</script>" in md.exceptions["value"].to_list()
    assert md.exceptions["row"].is_sorted()
    text = md.reconciliation_text()
    assert text.splitlines()[0] == f"records read {md.read} = valued {md.valued} + excluded {md.excluded}"
    assert "(unknown status)" in text


def test_demo_history_files() -> None:
    # the start membership is as at the period start, three years before the valuation date
    start = read_members(DEMO / "members_start.csv",
                         DEMO_BASIS.model_copy(update={"valuation_date": date(2022, 3, 31)}))
    assert start.excluded == 0
    deaths = pl.read_csv(DEMO / "deaths.csv", try_parse_dates=True)
    exits = pl.read_csv(DEMO / "exits.csv", try_parse_dates=True)
    assert deaths.columns == ["member_id", "date_of_death", "pension_at_death"]
    assert exits.columns == ["member_id", "exit_date", "reason"]
    ids = set(start.records["member_id"])
    assert "GW999999" in set(deaths["member_id"]) and "GW999999" not in ids  # deliberate bad row
    assert (deaths["date_of_death"] < date(2022, 3, 31)).sum() == 1  # deliberate row before the period
    assert set(exits["member_id"]) <= ids


def test_validate_frame_takes_the_headers_explicitly(tmp_path: Path) -> None:
    """Without headers ``validate_frame`` names our columns; headers passed to it are named as written; a
    count mismatch fails."""
    from valuation.members.data import validate_frame
    from valuation.members.readers import map_headers

    basis = mapped_only(DEMO_BASIS, "Ref No", "Status", "Gender", "DOB")
    raw = pl.DataFrame({"Ref No": ["A1"], "Status": ["Q"], "Gender": ["1"], "DOB": ["01/01/1960"]})
    mapped = map_headers(raw, basis.mapping, tmp_path / "m.csv")
    assert validate_frame(mapped, basis, tmp_path / "m.csv").exceptions["file_column"].to_list() == ["status"]
    given = ["Ref No", "Code", "Gender", "DOB"]
    hit = validate_frame(mapped, basis, tmp_path / "m.csv", headers=given).exceptions.row(0, named=True)
    assert (hit["column"], hit["file_column"]) == ("status", "Code") and hit["reason"].startswith("column 'Code': ")
    with pytest.raises(ValueError, match="3 headers given for a frame of 4 columns"):
        validate_frame(mapped, basis, tmp_path / "m.csv", headers=given[:3])


def test_mapped_header_missing_from_the_file_is_an_input_error(tmp_path: Path) -> None:
    """A header named in [mapping.columns] that the file spells otherwise would silently drop its column (and
    change the liability): it is an input error naming the header, the file and the closest headers."""
    frame = to_admin_format(synth_scheme(20, seed=5, valuation_date=DEMO_BASIS.valuation_date), DEMO_BASIS.mapping)
    path = write_scheme(frame.rename({"Spouse DOB": "Spouse D.O.B."}), tmp_path / "adm.csv")
    with pytest.raises(DataError) as info:
        read_members(path, DEMO_BASIS)
    e = info.value
    assert (e.file, e.row, e.column) == (str(path), 1, "Spouse DOB")
    assert e.reason == ("header 'Spouse DOB' (mapped to spouse_date_of_birth under [mapping.columns] in the basis) "
                        "is not in the file (closest headers in the file: 'Spouse D.O.B.', 'Spouse Fraction')")
    assert e.fix == ("correct the header 'Spouse DOB' under [mapping.columns] in the basis to the file's "
                     "spelling, or remove that line if the file has no such column")
    assert str(e).count("(fix:") == 1
    # a file that gives the column under our own name instead is read as it is
    ours = write_scheme(frame.rename({"Spouse DOB": "spouse_date_of_birth"}), tmp_path / "ours.csv")
    assert read_members(ours, DEMO_BASIS).records["spouse_date_of_birth"].null_count() < 20
    # no close header: the file's headers are listed
    path = write_scheme(frame.drop("NRA"), tmp_path / "no_nra.csv")
    with pytest.raises(DataError, match=r"'NRA' .*\(no header in the file is close; headers in the file: 'Ref No'"):
        read_members(path, DEMO_BASIS)


def test_ignored_columns_are_listed_once_as_warnings(tmp_path: Path) -> None:
    """Columns neither ours nor mapped: one warning row each (no row number), no record excluded."""
    frame = synth_scheme(40, seed=2, valuation_date=BASIS.valuation_date).with_columns(
        pl.lit("x").alias("Notes"), pl.lit("").alias("Branch"))
    path = write_scheme(frame, tmp_path / "m.csv")
    md = read_members(path, BASIS)
    assert md.ignored_columns == ["Notes", "Branch"]
    ignored = md.exceptions.filter(pl.col("row").is_null())
    assert ignored.select("column", "file_column", "value", "severity").rows() == [
        ("Notes", "Notes", None, "warning"), ("Branch", "Branch", None, "warning")]
    assert set(ignored["reason"]) == {
        "column not used by the valuation (not one of ours and not mapped in the basis)"}
    assert md.excluded == 0 and md.valued == md.read == 40
