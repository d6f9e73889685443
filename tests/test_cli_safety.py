"""The tool in careless hands: it never destroys a user's files, never ends in a traceback, and says why.

Exit codes are the tool's documented contract (README, "Commands"): 0 ok, 1 internal error, 2 usage error,
3 input or output error, 4 more records excluded than the basis allows, 130 interrupted. The CSV rule is
OWASP's advice on CSV injection (owasp.org/www-community/attacks/CSV_Injection): a text cell starting with
``=``, ``+``, ``-``, ``@``, tab or carriage return is prefixed with a single quote.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import polars as pl
import pytest

from valuation.cli import main
from valuation.csvout import formula_safe
from valuation.engine.write import atomic_folder, is_previous_run, remove_stale

ROOT = Path(__file__).resolve().parents[1]
BASIS = ROOT / "assumptions" / "demo_basis.toml"
MEMBERS = ROOT / "member_data_demo" / "members.csv"
DIRTY = ROOT / "member_data_demo" / "members_dirty.csv"
DEMO = ROOT / "member_data_demo"
QUICK = ["--no-sensitivities", "--no-reports", "-q"]


def _small_scheme(tmp_path: Path, rows: int = 40) -> Path:
    """The first ``rows`` demo records, so that runs take a fraction of a second."""
    lines = MEMBERS.read_text(encoding="utf-8").splitlines()
    path = tmp_path / "small.csv"
    path.write_text("\n".join(lines[: rows + 1]) + "\n", encoding="utf-8")
    return path


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def _leftovers(folder: Path) -> list[str]:
    return [p.name for p in folder.iterdir() if ".incomplete-" in p.name or ".replaced-" in p.name
            or p.name.startswith(".")]


# ------------------------------------------------------------------------------------------------------
# Point 2: a user's files are never destroyed
# ------------------------------------------------------------------------------------------------------


def test_folder_of_other_files_is_refused_and_left_alone(tmp_path, capsys):
    small = _small_scheme(tmp_path)
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("my notes")
    before = _snapshot(out)
    assert main(["run", str(BASIS), str(small), "--out", str(out), *QUICK]) == 3
    err = capsys.readouterr().err
    assert "notes.txt" in err and "--out" in err and "Traceback" not in err
    assert _snapshot(out) == before
    # --overwrite does not change that: it replaces only a previous run of the tool's own
    assert main(["run", str(BASIS), str(small), "--out", str(out), "--overwrite", *QUICK]) == 3
    assert _snapshot(out) == before
    assert not _leftovers(tmp_path)


def test_file_at_the_output_path_is_refused(tmp_path, capsys):
    small = _small_scheme(tmp_path)
    out = tmp_path / "report.txt"
    out.write_text("keep me")
    assert main(["run", str(BASIS), str(small), "--out", str(out), "--overwrite", *QUICK]) == 3
    assert "is a file" in capsys.readouterr().err
    assert out.read_text() == "keep me"
    assert not _leftovers(tmp_path)


def test_input_folder_is_refused(tmp_path, capsys):
    small = _small_scheme(tmp_path)
    assert main(["run", str(BASIS), str(small), "--out", str(tmp_path), "--overwrite", *QUICK]) == 3
    err = capsys.readouterr().err
    assert "small.csv" in err
    assert small.exists() and sorted(p.name for p in tmp_path.iterdir()) == ["small.csv"]


def test_previous_run_needs_overwrite_and_is_replaced_whole(tmp_path, capsys):
    small = _small_scheme(tmp_path)
    out = tmp_path / "run"
    assert main(["run", str(BASIS), str(small), "--out", str(out), *QUICK]) == 0
    assert is_previous_run(out)
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["tool"] == "valuation" and "summary.json" in manifest["files"]
    assert main(["run", str(BASIS), str(small), "--out", str(out), *QUICK]) == 3
    assert "--overwrite" in capsys.readouterr().err
    assert main(["run", str(BASIS), str(small), "--out", str(out), "--overwrite", "--no-sensitivities", "-q"]) == 0
    assert (out / "summary.html").exists()
    assert not _leftovers(tmp_path)
    # a file the user adds to a run folder makes it theirs: it is no longer replaced
    (out / "my_comments.txt").write_text("x")
    assert not is_previous_run(out)
    assert main(["run", str(BASIS), str(small), "--out", str(out), "--overwrite", *QUICK]) == 3
    assert (out / "my_comments.txt").read_text() == "x"


def test_empty_folder_is_used(tmp_path):
    small = _small_scheme(tmp_path)
    out = tmp_path / "empty"
    out.mkdir()
    assert main(["run", str(BASIS), str(small), "--out", str(out), *QUICK]) == 0
    assert (out / "summary.json").exists()


def test_default_output_folders_never_collide(tmp_path, monkeypatch, capsys):
    """Two member files with the same name in different folders get two run folders."""
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    first = _small_scheme(tmp_path / "a", 30)
    second = _small_scheme(tmp_path / "b", 20)
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    assert main(["run", str(BASIS), str(first), *QUICK]) == 0
    assert main(["run", str(BASIS), str(second), *QUICK]) == 0
    folders = sorted(p.name for p in (work / "outputs").iterdir())
    assert folders == ["small-2025-03-31", "small-2025-03-31-2"]
    read = [json.loads((work / "outputs" / f / "summary.json").read_text())["records"]["read"] for f in folders]
    assert read == [30, 20]


def test_failed_run_leaves_the_previous_run_and_nothing_else(tmp_path, monkeypatch):
    """A failure while the new run is being written leaves the previous run exactly as it was."""
    small = _small_scheme(tmp_path)
    out = tmp_path / "run"
    assert main(["run", str(BASIS), str(small), "--out", str(out), *QUICK]) == 0
    before = _snapshot(out)

    def broken(*args, **kwargs):
        raise OSError(28, "No space left on device", "cashflows.csv")

    monkeypatch.setattr("valuation.engine.write.write_tables", broken)
    assert main(["run", str(BASIS), str(small), "--out", str(out), "--overwrite", *QUICK]) == 3
    assert _snapshot(out) == before
    assert not _leftovers(tmp_path)


def test_stale_temporary_folder_of_a_killed_run_is_removed(tmp_path):
    """A run killed outright (SIGKILL) leaves `<name>.incomplete-<pid>`; the next run removes it."""
    target = tmp_path / "run"
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    stale = tmp_path / f"run.incomplete-{int(dead.stdout)}"
    stale.mkdir()
    (stale / "WRITING-IN-PROGRESS").touch()
    (stale / "summary.json").write_text("{}")
    theirs = tmp_path / "run.incomplete-notapid"  # not the tool's pattern: left alone
    theirs.mkdir()
    remove_stale(target)
    assert not stale.exists() and theirs.exists()


def test_interrupted_block_leaves_nothing(tmp_path):
    target = tmp_path / "run"
    with pytest.raises(KeyboardInterrupt):
        with atomic_folder(target) as tmp:
            (tmp / "summary.json").write_text("{}")
            raise KeyboardInterrupt
    assert list(tmp_path.iterdir()) == []


def test_batch_that_fails_in_its_second_run_writes_nothing(tmp_path, capsys):
    small = _small_scheme(tmp_path)
    bad = tmp_path / "bad.csv"
    bad.write_text(small.read_text().replace("DOB", "Born", 1))  # the date of birth column is gone
    batch = tmp_path / "batch.toml"
    batch.write_text(
        'out = "out"\n'
        f'[[run]]\nname = "first"\nbasis = "{BASIS.as_posix()}"\nmembers = "small.csv"\nsensitivities = false\n'
        f'[[run]]\nname = "second"\nbasis = "{BASIS.as_posix()}"\nmembers = "bad.csv"\nsensitivities = false\n'
    )
    assert main(["batch", str(batch), "-q"]) == 3
    err = capsys.readouterr().err
    assert "run 'second'" in err and "Traceback" not in err
    assert not (tmp_path / "out").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.csv", "batch.toml", "small.csv"]


def test_batch_replaces_a_previous_batch_only_with_overwrite(tmp_path, capsys):
    _small_scheme(tmp_path)
    batch = tmp_path / "batch.toml"
    batch.write_text(f'out = "out"\n[[run]]\nname = "one"\nbasis = "{BASIS.as_posix()}"\nmembers = "small.csv"\n'
                     "sensitivities = false\n")
    assert main(["batch", str(batch), "-q"]) == 0
    assert is_previous_run(tmp_path / "out")
    assert (tmp_path / "out" / "index.csv").exists() and (tmp_path / "out" / "one" / "summary.json").exists()
    assert main(["batch", str(batch), "-q"]) == 3
    assert main(["batch", str(batch), "-q", "--overwrite"]) == 0


# ------------------------------------------------------------------------------------------------------
# Point 3: no silent changes to the numbers
# ------------------------------------------------------------------------------------------------------


def test_no_record_to_value_fails_with_exit_3(tmp_path, capsys):
    header_only = tmp_path / "header.csv"
    header_only.write_text(MEMBERS.read_text(encoding="utf-8").splitlines()[0] + "\n")
    assert main(["run", str(BASIS), str(header_only), "--out", str(tmp_path / "o"), *QUICK]) == 3
    assert "nothing to value" in capsys.readouterr().err
    assert not (tmp_path / "o").exists()


def test_too_many_exclusions_exit_4_unless_accepted(tmp_path, capsys):
    out = tmp_path / "dirty"
    assert main(["run", str(BASIS), str(DIRTY), "--out", str(out), "--no-sensitivities", "-q"]) == 4
    err = capsys.readouterr().err
    assert "max_excluded_share" in err and "--accept-exclusions" in err
    assert not out.exists()
    assert main(["run", str(BASIS), str(DIRTY), "--out", str(out), "--no-sensitivities", "-q",
                 "--accept-exclusions"]) == 0
    html = (out / "summary.html").read_text(encoding="utf-8")
    notice = html.index('id="data-notice"')
    assert notice < html.index('id="headline"')  # at the top, before the figures
    s = json.loads((out / "summary.json").read_text())
    assert f"{s['records']['excluded']:,} of the {s['records']['read']:,} member records" in html


def test_threshold_is_a_basis_setting(tmp_path):
    """[thresholds] max_excluded_share = 0.6 lets the dirty demo file (half its records excluded) through."""
    import shutil

    folder = tmp_path / "assumptions"
    shutil.copytree(BASIS.parent, folder)  # the basis names its curve files relative to itself
    basis = folder / BASIS.name
    text = basis.read_text(encoding="utf-8")
    basis.write_text(text.replace("[thresholds]", "[thresholds]\nmax_excluded_share = 0.6", 1), encoding="utf-8")
    assert main(["run", str(basis), str(DIRTY), "--out", str(tmp_path / "o"), *QUICK]) == 0
    basis.write_text(text.replace("[thresholds]", "[thresholds]\nmax_excluded_share = 0.4", 1), encoding="utf-8")
    assert main(["run", str(basis), str(DIRTY), "--out", str(tmp_path / "p"), *QUICK]) == 4


def test_ignored_columns_are_reported(tmp_path, capsys):
    small = _small_scheme(tmp_path)
    lines = small.read_text().splitlines()
    extra = tmp_path / "extra.csv"
    extra.write_text("\n".join([lines[0] + ",Payroll Ref"] + [line + ",X1" for line in lines[1:]]) + "\n")
    out = tmp_path / "o"
    assert main(["run", str(BASIS), str(extra), "--out", str(out), "--no-sensitivities"]) == 0
    err = capsys.readouterr().err
    assert "Payroll Ref" in err
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["ignored_columns"] == ["Payroll Ref"]
    assert "Payroll Ref" in (out / "summary.html").read_text(encoding="utf-8")


# ------------------------------------------------------------------------------------------------------
# Point 4: every user error is a message, not a traceback
# ------------------------------------------------------------------------------------------------------

WRONG = [
    (["run", "{basis}", "{members}", "--chunk-size", "0"], 2, "--chunk-size"),
    (["run", "{basis}", "{members}", "--chunk-size", "ten"], 2, "--chunk-size"),
    (["run", "{basis}", "{members}", "--chunk-size", "-5"], 2, "--chunk-size"),
    (["run", "{basis}", "{tmp}/missing.csv"], 2, "missing.csv"),
    (["run", "{tmp}/missing.toml", "{members}"], 2, "missing.toml"),
    (["run", "{basis}", "{tmp}"], 2, "folder"),
    (["run", "{basis}", "{members}", "--deaths", "{deaths}"], 2, "--start-members"),
    (["run", "{basis}", "{members}", "--deaths", "{deaths}", "--start-members", "{start}", "--period-start",
      "31/03/2022", "--period-end", "2025-03-31"], 2, "ISO"),
    (["run", "{basis}", "{members}", "--deaths", "{deaths}", "--start-members", "{start}", "--period-start",
      "2025-03-31", "--period-end", "2022-03-31"], 2, "before"),
    (["run", "{basis}", "{members}", "--confidence", "0.95"], 2, "experience"),
    (["run", "{basis}", "{members}", "--stream", "--deaths", "{deaths}", "--start-members", "{start}",
      "--period-start", "2022-03-31", "--period-end", "2025-03-31"], 2, "--stream"),
    (["run", "{basis}", "{members}", "--bogus"], 2, "--bogus"),
    (["run", "{basis}", "{members}", "--out", ""], 2, "empty path"),
    (["run", "{basis}", "{members}", "--chunk-size", "99999999999999999999"], 2, "--chunk-size"),
    (["run", "{basis}", "{members}", "--encoding", "rot13"], 2, "not a text encoding"),
    (["run", "{basis}", "{members}", "--encoding", "klingon"], 2, "not a known text encoding"),
    (["run", "{basis}", "{members}", "--out", "/proc/valuation-test"], 3, "cannot write"),
    (["check", "{basis}", "{members}", "--exceptions", "{members}", "--overwrite"], 3, "is the input file"),

    (["run", "{members}", "{members}"], 3, "TOML"),
    (["run", "{basis}", "{basis}"], 3, ".toml"),
    (["check", "{basis}", "{members}", "--exceptions", "{tmp}"], 3, "folder"),
    (["check", "{basis}", "{tmp}/x.csv"], 2, "x.csv"),
    (["synth", "--members", "0", "--out", "{tmp}/s.csv"], 2, "--members"),
    (["synth", "--members", "1e3", "--out", "{tmp}/s.csv"], 2, "--members"),
    (["synth", "--members", "10", "--seed", "-1", "--out", "{tmp}/s.csv"], 2, "--seed"),
    (["synth", "--members", "10", "--valuation-date", "2025-02-30", "--out", "{tmp}/s.csv"], 2, "ISO"),
    (["synth", "--members", "10", "--out", "{tmp}/s.txt"], 3, ".parquet"),
    (["batch", "{tmp}/none.toml"], 2, "none.toml"),
    (["batch", "{members}"], 3, "TOML"),
    (["experience", "{basis}", "{start}", "{deaths}", "--period-start", "2022-03-31"], 2, "--period-end"),
    (["experience", "{basis}", "{start}", "{deaths}", "--period-start", "2022-03-31", "--period-end",
      "2025-03-31", "--confidence", "1.5"], 2, "--confidence"),
    (["experience", "{basis}", "{start}", "{deaths}", "--period-start", "2022-03-31", "--period-end",
      "2025-03-31", "--overdispersion", "-1"], 2, "--overdispersion"),
    (["experience", "{basis}", "{start}", "{deaths}", "--period-start", "2022-03-31", "--period-end",
      "2025-03-31", "--late-months", "-2"], 2, "--late-months"),
    (["experience", "{basis}", "{start}", "{deaths}", "--period-start", "2022-03-31", "--period-end",
      "2025-03-31", "--late-uplift", "nan"], 2, "--late-uplift"),
    (["experience", "{basis}", "{start}", "{deaths}", "--start", "2022-03-31", "--end", "2025-03-31",
      "--exposure", "exact"], 2, "--exposure"),
]


@pytest.mark.parametrize(("argv", "code", "named"), WRONG, ids=[" ".join(w[0][:1] + w[0][3:6]) for w in WRONG])
def test_wrong_values_give_a_message_and_the_documented_exit_code(tmp_path, capsys, argv, code, named):
    values = {"basis": str(BASIS), "members": str(MEMBERS), "deaths": str(DEMO / "deaths.csv"),
              "start": str(DEMO / "members_start.csv"), "tmp": str(tmp_path)}
    args = [a.format(**values) for a in argv]
    if args[0] == "run" and "--out" not in args:
        args += ["--out", str(tmp_path / "out")]
    try:
        got = main(args)
    except SystemExit as exc:  # argparse's usage errors
        got = exc.code
    captured = capsys.readouterr()
    assert got == code, captured.err
    assert named in captured.err
    assert "Traceback" not in captured.err + captured.out
    assert not (tmp_path / "out").exists()


def test_unexpected_error_is_a_message_and_a_report_file(tmp_path, capsys, monkeypatch):
    small = _small_scheme(tmp_path)

    def boom(*args, **kwargs):
        raise RuntimeError("something inside broke")

    monkeypatch.setattr("valuation.pipeline.value_members", boom)
    assert main(["run", str(BASIS), str(small), "--out", str(tmp_path / "o"), *QUICK]) == 1
    err = capsys.readouterr().err
    assert "Traceback" not in err and "internal error" in err
    report = Path(err.split("saved in ")[-1].strip())
    assert "something inside broke" in report.read_text()
    report.unlink()
    assert not (tmp_path / "o").exists()


def test_output_piped_into_head_is_quiet(tmp_path):
    """`valuation run ... | head -1`: the reader goes away; the run still completes, quietly, with exit 0."""
    small = _small_scheme(tmp_path)
    out = tmp_path / "o"
    cmd = (f"{sys.executable} -m valuation.cli run {BASIS} {small} --out {out} --no-sensitivities --no-reports "
           "| head -c 1 >/dev/null; echo \"rc=${PIPESTATUS[0]}\"")
    done = subprocess.run(["bash", "-c", cmd], capture_output=True, text=True, timeout=300)
    assert "rc=0" in done.stdout, done.stderr
    assert "Traceback" not in done.stderr and "BrokenPipe" not in done.stderr
    assert (out / "summary.json").exists()


def test_unwritable_output_fails_before_valuing(tmp_path, capsys):
    if os.geteuid() == 0:
        pytest.skip("running as root: permissions do not stop root, so the check cannot be seen here")
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        assert main(["run", str(BASIS), str(MEMBERS), "--out", str(locked / "run"), *QUICK]) == 3
        assert "permission" in capsys.readouterr().err
    finally:
        locked.chmod(0o700)


def test_output_under_a_file_fails_before_valuing(tmp_path, capsys):
    """An output path below a file cannot be created: refused before any work (works as root too)."""
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    assert main(["run", str(BASIS), str(MEMBERS), "--out", str(blocker / "run"), *QUICK]) == 3
    err = capsys.readouterr().err
    assert "afile" in err and "records read" not in err


def test_existing_output_file_is_never_overwritten_without_asking(tmp_path, capsys):
    target = tmp_path / "exceptions.csv"
    target.write_text("mine")
    assert main(["check", str(BASIS), str(DIRTY), "--exceptions", str(target), "-q"]) == 3
    assert target.read_text() == "mine"
    assert main(["check", str(BASIS), str(DIRTY), "--exceptions", str(target), "-q", "--overwrite",
                 "--accept-exclusions"]) == 0
    assert target.read_text() != "mine"
    assert not _leftovers(tmp_path)


# ------------------------------------------------------------------------------------------------------
# Point 5: CSV outputs are formula-safe; Parquet keeps the text
# ------------------------------------------------------------------------------------------------------


def test_formula_safe_follows_owasp():
    """OWASP "CSV Injection": cells starting with = + - @ tab CR get a leading single quote."""
    df = pl.DataFrame({"t": ["=1+1", "+1", "-2", "@SUM(A1)", "\tx", "\rx", "plain", None, "a=b"],
                       "n": [-1.5, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0]})
    out = formula_safe(df)
    assert out["t"].to_list() == ["'=1+1", "'+1", "'-2", "'@SUM(A1)", "'\tx", "'\rx", "plain", None, "a=b"]
    assert out["n"].to_list() == df["n"].to_list()  # numbers stay numbers


def test_member_text_is_formula_safe_in_csv_and_exact_in_parquet(tmp_path):
    small = _small_scheme(tmp_path, 10)
    lines = small.read_text().splitlines()
    evil = '=HYPERLINK("http://example.invalid","click")'
    first = lines[1].split(",", 1)
    lines[1] = f'"{evil.replace(chr(34), chr(34) * 2)}",{first[1]}'
    lines.append(f'"{evil.replace(chr(34), chr(34) * 2)}",{first[1]}')  # a duplicate: an exception row too
    lines[2] = "@evil," + lines[2].split(",", 1)[1]
    bad = tmp_path / "evil.csv"
    bad.write_text("\n".join(lines) + "\n")
    out = tmp_path / "o"
    assert main(["run", str(BASIS), str(bad), "--out", str(out), *QUICK, "--accept-exclusions"]) == 0
    exceptions = pl.read_csv(out / "exceptions.csv", infer_schema=False)
    assert "'" + evil in exceptions["member_id"].to_list()
    assert evil not in exceptions["member_id"].to_list()
    members_csv = pl.read_csv(out / "members.csv", infer_schema=False)
    assert "'@evil" in members_csv["member_id"].to_list()
    members_pq = pl.read_parquet(out / "members.parquet")
    assert "@evil" in members_pq["member_id"].to_list()


# ------------------------------------------------------------------------------------------------------
# Point 7: the trustee summary shows the commonest problems and points to the workbook for the rest
# ------------------------------------------------------------------------------------------------------


def test_html_lists_the_top_reasons_and_points_to_the_workbook():
    from tests.test_reports_fixture import make_result
    from valuation.reports.content import TOP_REASONS
    from valuation.reports.html import render_html

    result = make_result()
    n_kinds = TOP_REASONS + 4
    reasons = [f"problem kind {k:02d}" for k in range(n_kinds) for _ in range(n_kinds - k)]
    result.exceptions = pl.DataFrame({
        "file": "m.csv", "row": list(range(2, 2 + len(reasons))), "member_id": "X", "column": "pension",
        "file_column": "pension", "value": "1", "reason": reasons, "severity": "warning",
    }).cast(result.exceptions.schema).select(result.exceptions.columns)
    html = render_html(result)
    shown = [k for k in range(n_kinds) if f"problem kind {k:02d}" in html]
    assert shown == list(range(TOP_REASONS))  # the commonest first
    assert "and 4 more kinds of problem" in html and "Exceptions sheet" in html


def test_a_users_file_in_a_previous_run_is_named(tmp_path, capsys):
    """The refusal names the file the user added, not the tool's own files."""
    small = _small_scheme(tmp_path)
    out = tmp_path / "run"
    assert main(["run", str(BASIS), str(small), "--out", str(out), *QUICK]) == 0
    (out / "notes.txt").write_text("mine")
    assert main(["run", str(BASIS), str(small), "--out", str(out), "--overwrite", *QUICK]) == 3
    err = capsys.readouterr().err
    assert "(notes.txt)" in err and "summary.json" not in err


def test_out_dot_in_an_empty_folder_fills_it(tmp_path, monkeypatch):
    small = _small_scheme(tmp_path)
    work = tmp_path / "empty"
    work.mkdir()
    monkeypatch.chdir(work)
    assert main(["run", str(BASIS), str(small), "--out", ".", *QUICK]) == 0
    assert (work / "summary.json").exists() and Path.cwd().samefile(work)


def test_single_output_files_get_ordinary_permissions(tmp_path):
    old = os.umask(0o022)
    try:
        out = tmp_path / "s.csv"
        assert main(["synth", "--members", "20", "--out", str(out), "-q"]) == 0
        assert (out.stat().st_mode & 0o777) == 0o644
    finally:
        os.umask(old)


def test_experience_with_no_exposure_is_an_input_error_and_writes_nothing(tmp_path, capsys):
    """A start membership with no records gives no exposure: exit 3, no folder (it used to crash after the
    folder had been written)."""
    start = tmp_path / "start.csv"
    start.write_text((DEMO / "members_start.csv").read_text(encoding="utf-8").splitlines()[0] + "\n")
    out = tmp_path / "out"
    code = main(["run", str(BASIS), str(MEMBERS), "--out", str(out), "--no-sensitivities", "--no-reports", "-q",
                 "--deaths", str(DEMO / "deaths.csv"), "--start-members", str(start), "--period-start",
                 "2022-03-31", "--period-end", "2025-03-31"])
    err = capsys.readouterr().err
    assert code == 3 and ("no exposure" in err or "no member records" in err) and "Traceback" not in err
    assert not out.exists()


def test_a_failed_run_removes_the_folders_it_made(tmp_path, monkeypatch):
    """Folders the tool made above --out are removed again when writing fails."""
    small = _small_scheme(tmp_path)

    def broken(*args, **kwargs):
        raise OSError(28, "No space left on device", "cashflows.csv")

    monkeypatch.setattr("valuation.engine.write.write_tables", broken)
    out = tmp_path / "new" / "deeper" / "run"
    assert main(["run", str(BASIS), str(small), "--out", str(out), *QUICK]) == 3
    assert not (tmp_path / "new").exists()
