"""What the command line and the formulas say when something is wrong: plain words, never a raw exception."""
from __future__ import annotations

import shutil

import pytest

from tailstop.commands import main
from tailstop.sheet import GAMMA_FIT_PVALUE, GAMMA_FIT_SCALE, PLAN_SUMMARY_FROM_P
from test_annotate import bench_lifetimes, rich_log

RULE = ["--column", "D", "--threshold", "1500", "--accuracy", "1.5", "--pilot", "10"]


def run(capsys, *arguments):
    code = main([str(argument) for argument in arguments])
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err and "Errno" not in captured.err, captured.err
    return code, captured.out, captured.err


def test_a_csv_log_is_to_be_saved_as_xlsx_first(tmp_path, capsys):
    log = tmp_path / "log.csv"
    log.write_text("unit,hours\n1,1200\n2,1800\n")
    for verb in (["annotate", log, *RULE], ["recalc", log]):
        code, out, err = run(capsys, *verb)
        assert code == 1 and out == ""
        assert "log.csv: a CSV text file; tailstop reads .xlsx workbooks: open it in a spreadsheet program and " \
               "save it as an .xlsx workbook first" in err
        assert ".xlsx name" not in err


@pytest.mark.parametrize("suffix, kind", [(".xls", "an .xls workbook (the format before 2007)"), (".ods", "a .ods file")])
def test_a_workbook_of_another_kind_is_named_by_its_kind(tmp_path, capsys, suffix, kind):
    log = rich_log(tmp_path / "bench.xlsx", bench_lifetimes(40))
    renamed = tmp_path / f"bench{suffix}"
    shutil.copy(log, renamed)  # an .xlsx package under another name: the reader would blame its own format rules
    for verb in (["annotate", renamed, *RULE], ["recalc", renamed]):
        code, _, err = run(capsys, *verb)
        assert code == 1 and f"bench{suffix}: {kind}; tailstop reads .xlsx workbooks" in err
        assert "openpyxl" not in err and "xlrd" not in err


def test_an_output_folder_that_does_not_exist(tmp_path, capsys):
    log = rich_log(tmp_path / "bench.xlsx", bench_lifetimes(40))
    for target in (tmp_path / "missing" / "new.xlsx", log / "new.xlsx"):  # no such folder; a file, not a folder
        code, _, err = run(capsys, "annotate", log, *RULE, "--out", target)
        assert code == 1 and f"the folder {target.parent} does not exist" in err
        assert ".partial" not in err
        code, _, err = run(capsys, "recalc", log, "--out", target)
        assert code == 1 and f"the folder {target.parent} does not exist" in err
    assert sorted(path.name for path in tmp_path.iterdir()) == ["bench.xlsx"]


def test_demo_into_a_file(tmp_path, capsys):
    target = tmp_path / "notes.txt"
    target.write_text("keep me")
    code, out, err = run(capsys, "demo", "--out", target)
    assert code == 1 and f"{target} is a file; --out names the folder" in err
    assert target.read_text() == "keep me"


def test_lifetimes_too_large_to_add_up():
    column = [[1e308], [2e307], [1e306], [9e307]]
    for formula in (GAMMA_FIT_PVALUE, GAMMA_FIT_SCALE):
        assert formula(column) == ("#TAILSTOP! observations: the lifetimes are too large to add up (the largest is "
                                   "1e+308); enter them in a larger unit, e.g. thousands of hours")


def test_a_plan_beyond_any_test_is_not_printed_digit_by_digit(capsys):
    import re

    # pass-fail n* = (z / log d)^2 / (p (1 - p)) is about 2.34e291 at p = 1e-290 (METHOD.md §4, by hand)
    text = PLAN_SUMMARY_FROM_P(1e-290, 1.5, 0.95, 10)
    assert text.startswith("#TAILSTOP!") and "2.34e+291" in text
    assert not re.search(r"[0-9][0-9,]{20,}", text)  # no number written out digit by digit
    # pass-fail n* at p = exp(-100) (exponential, METHOD.md §3, by hand): 23.37 / 3.72e-44 = 6.28e44
    code, out, err = run(capsys, "plan", "--threshold", 100, "--shape", 1, "--scale", 1, "--accuracy", 1.5)
    assert "6.28e+44 units" in out + err
    assert not re.search(r"[0-9][0-9,]{20,}", out + err)
    # p = exp(-20): pass-fail n* = 23.37 / 2.061e-9 = 1.134e10 units, within a test but beyond the 30 s bound of
    # the exact computation: refused in words, the other methods still answer
    code, out, err = run(capsys, "plan", "--threshold", 20, "--shape", 1, "--scale", 1, "--accuracy", 1.5,
                         "--method", "pass-fail")
    assert code == 0 and "pass-fail: not computed — this plan needs about 11,336,49" in out


@pytest.mark.parametrize("lock", ["~$bench.xlsx", ".~lock.bench.xlsx#"])  # Excel's and LibreOffice's lock files
@pytest.mark.parametrize("streaming", [False, True])
def test_in_place_refuses_a_book_a_spreadsheet_program_holds_open(tmp_path, capsys, monkeypatch, lock, streaming):
    import tailstop.workbooks.annotate_stream as annotate_stream

    monkeypatch.setattr(annotate_stream, "STREAM_FROM_BYTES", 1 if streaming else 2**40)
    log = rich_log(tmp_path / "bench.xlsx", bench_lifetimes(60))
    (tmp_path / lock).write_text("user,host")
    before = log.read_bytes()
    code, out, err = run(capsys, "annotate", log, *RULE, "--in-place")
    assert code == 1 and out == ""
    assert f"bench.xlsx is open in a spreadsheet program (its lock file {lock} is beside it)" in err
    assert "--force" in err and log.read_bytes() == before
    code, out, err = run(capsys, "recalc", log, "--in-place")
    assert code == 1 and lock in err and log.read_bytes() == before
    code, out, _ = run(capsys, "annotate", log, *RULE, "--in-place", "--force")
    assert code == 0 and log.read_bytes() != before
    assert ("edited as a stream" in out) == streaming
