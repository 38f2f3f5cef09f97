"""tailstop annotate: the decision column and the estimate block on an existing log, and that nothing is lost."""
from __future__ import annotations

import datetime as dt
import io
import math
import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from openpyxl.comments import Comment
from openpyxl.worksheet.formula import ArrayFormula
from scipy import stats

import tailstop.workbooks.annotate as annotate_module
from tailstop.workbooks.annotate import AnnotateRefused, annotate, default_output
from tailstop.commands import main
from tailstop.workbooks import cell_check
from tailstop.workbooks.cached_values import save_with_cached_values
from tailstop.workbooks.log_layout import DECISION_HEADER, RulePlan
from tailstop.workbooks.recalc import evaluate_workbook
from test_safe_io import read_parts, write_parts

THRESHOLD, ACCURACY, CONFIDENCE, PILOT = 1500.0, 1.5, 0.95, 10
LOG_SHEET = "Bench log"


def bench_lifetimes(units=220, seed=11):
    """Seeded gamma draws rounded like a bench log (input data only, never a check value)."""
    rng = np.random.default_rng(seed)
    return [float(v) for v in np.round(rng.gamma(2.4, 520.0, size=units), 1)]


def rich_log(path, lifetimes=None):
    """A log with formulas, dates, times, merged cells, comments, odd numbers and three sheets.

    The log sheet is not the first one but is the active one.
    """
    lifetimes = bench_lifetimes() if lifetimes is None else lifetimes
    book = openpyxl.Workbook()
    notes = book.active
    notes.title = "Notes"
    notes["A1"] = "Bench notes"
    notes["A2"] = "  leading spaces & <angle> \"quotes\""
    notes["A3"] = 0.1 + 0.2                      # needs 17 digits: openpyxl alone would write 0.3
    notes["A4"] = 12345678901234567891           # beyond 2**53
    notes["A5"] = True
    notes["A6"] = "#N/A"
    notes["A7"] = dt.time(8, 30)
    notes["A8"] = dt.date(2026, 1, 5)
    notes["A9"] = "line one\nline two"
    notes["B1"] = -0.0
    notes["B2"] = 1e-300
    notes["B3"] = "=A3*2"
    notes.merge_cells("D1:E3")
    notes["D1"] = "merged title"
    log = book.create_sheet(LOG_SHEET)
    log.append(["Unit", "Rig", "Started", "Cycles to leak (kcycles)", "Twice", "Remark"])
    start = dt.datetime(2026, 1, 5, 8, 0)
    for unit, value in enumerate(lifetimes, start=1):
        row = unit + 1
        remark = "seat & spring <replaced>" if unit % 37 == 0 else None
        log.append([unit, f"rig {unit % 3 + 1}", start + dt.timedelta(minutes=7 * unit, seconds=0.25 * unit), value,
                    f"=D{row}*2", remark])
    log["C2"].number_format = "yyyy-mm-dd hh:mm:ss.000"
    log.merge_cells("H1:I2")
    log["H1"] = "Rig A (merged)"
    log["H1"].comment = Comment("set up by the bench team", "bench")
    summary = book.create_sheet("Summary")
    summary["A1"] = "Mean cycles"
    summary["B1"] = f"=AVERAGE('{LOG_SHEET}'!D2:D{len(lifetimes) + 1})"
    summary["A2"] = "Share"
    summary["B2"] = 0.25
    summary["B2"].number_format = "0.0%"
    summary["B4"] = ArrayFormula("B4:B5", f"='{LOG_SHEET}'!D2:D3*2")
    summary["D1"] = dt.timedelta(hours=30, minutes=5)
    summary["D1"].number_format = "[h]:mm:ss"
    book.active = 1
    # openpyxl alone writes 16 digits; the cached-value writer stores these two exactly
    save_with_cached_values(book, path, {("Notes", "A3"): 0.1 + 0.2, ("Notes", "A4"): 12345678901234567891})
    return path


def all_cells(path, data_only=False):
    """Every non-empty cell of every sheet, as openpyxl reads it: {sheet: {coordinate: value}}."""
    book = openpyxl.load_workbook(path, data_only=data_only)
    found = {}
    for sheet in book.worksheets:
        cells = {}
        for row in sheet.iter_rows():
            for cell in row:
                value = cell.value
                if isinstance(value, ArrayFormula):
                    value = ("array", value.ref, value.text)
                if value is not None and value != "":
                    cells[cell.coordinate] = (value, cell.data_type)
        found[sheet.title] = cells
    return found


def plan(**changes):
    settings_ = dict(threshold=THRESHOLD, accuracy=ACCURACY, confidence=CONFIDENCE, pilot=PILOT)
    settings_.update(changes)
    return RulePlan.checked(**settings_)


def rule_stop(lifetimes, threshold=THRESHOLD, accuracy=ACCURACY, confidence=CONFIDENCE, pilot=PILOT):
    """The pass-fail stopping rule of METHOD.md §5 written out plainly: N, or None."""
    # check value: METHOD.md §5 with the regularised p~ = (S + 1/2)/(n + 1); z from scipy.stats.norm
    z = stats.norm.ppf(1 - (1 - confidence) / 2)
    beyond = 0
    for n, value in enumerate(lifetimes, start=1):
        beyond += value > threshold
        if n < pilot or beyond in (0, n):
            continue
        p_tilde = (beyond + 0.5) / (n + 1)
        if n >= (z / math.log(accuracy)) ** 2 / (p_tilde * (1 - p_tilde)):
            return n
    return None


@pytest.fixture
def log_path(tmp_path):
    return rich_log(tmp_path / "bench.xlsx")


# --------------------------------------------------------------------------- what it writes


def test_decision_column_and_block_follow_the_rule_and_the_interval(log_path):
    lifetimes = bench_lifetimes()
    result = annotate(log_path, column="Cycles to leak (kcycles)", plan=plan())
    assert result.path == default_output(log_path) == log_path.with_name("bench-tailstop.xlsx")
    sheet = openpyxl.load_workbook(result.path)[LOG_SHEET]
    stop = rule_stop(lifetimes)
    assert stop is not None
    assert result.decision_column == 7  # G: the first column right of the log free in its rows (F holds remarks)
    assert sheet.cell(1, 7).value == DECISION_HEADER
    decisions = [sheet.cell(row, 7).value for row in range(2, len(lifetimes) + 2)]
    expected = ["PILOT"] * (PILOT - 1) + ["CONTINUE"] * (stop - PILOT) + ["STOP"] + ["PAST STOP"] * (
        len(lifetimes) - stop)
    assert decisions == expected
    block = {sheet.cell(row, 10).value: sheet.cell(row, 11).value for row in range(1, 40)}
    assert block["Units used, N"] == stop
    # the rows used are given as the sheet row they reach, the STOP's, shown "2 to <row>" by the number format
    stop_row = 2 + decisions.index("STOP")
    assert block["Sheet rows used (down to the STOP, or all)"] == stop_row == stop + 1
    label_row = next(row for row in range(1, 40)
                     if sheet.cell(row, 10).value == "Sheet rows used (down to the STOP, or all)")
    assert sheet.cell(label_row, 11).number_format == '"2 to "0'
    # check value: the pass-fail estimate is the share of units beyond the threshold (counted here)
    share = sum(v > THRESHOLD for v in lifetimes[:stop]) / stop
    # tolerance 1e-15: the same k/n in doubles; 1e-14 on the bounds, a few roundings of q
    assert block["Estimate of p = P(life > threshold)"] == pytest.approx(share, rel=1e-15)
    # check value: METHOD.md §2, the fixed-accuracy interval [q/d, q d] and its probability-scale image
    odds = share / (1 - share)
    assert block["Odds p/(1-p)"] == pytest.approx(odds, rel=1e-15)
    assert block["Odds, lower bound (odds/d)"] == pytest.approx(odds / ACCURACY, rel=1e-14)
    assert block["Odds, upper bound (odds*d)"] == pytest.approx(odds * ACCURACY, rel=1e-14)
    assert block["p, lower bound"] == pytest.approx(odds / (ACCURACY + odds), rel=1e-14)
    assert block["p, upper bound"] == pytest.approx(ACCURACY * odds / (1 + ACCURACY * odds), rel=1e-14)
    assert block["Decision after the last row"] == "PAST STOP"
    assert block["Threshold"] == THRESHOLD and block["Method"] == "pass-fail" and block["Pilot (units)"] == PILOT


def test_every_pre_existing_cell_keeps_its_value_and_formula(log_path):
    before_formulas, before_values = all_cells(log_path), all_cells(log_path, data_only=True)
    result = annotate(log_path, column="D", plan=plan())
    after = all_cells(result.path)
    assert list(after) == list(before_formulas)  # same sheets, same order
    for title, cells in before_formulas.items():
        for coordinate, content in cells.items():
            assert after[title].get(coordinate) == content, f"{title}!{coordinate}"
        added = set(after[title]) - set(cells)
        if title != LOG_SHEET:
            assert not added, title
        else:
            columns = {openpyxl.utils.cell.coordinate_from_string(c)[0] for c in added}
            assert columns <= {"G", "J", "K"}  # the block skips I, under the merged H1:I2
    # the values openpyxl reads without formulas (dates, times, numbers) too
    after_values = all_cells(result.path, data_only=True)
    for title, cells in before_values.items():
        for coordinate, content in cells.items():
            if content[1] != "f":
                assert after_values[title][coordinate] == content, f"{title}!{coordinate}"
    notes = openpyxl.load_workbook(result.path)["Notes"]
    # property: values of the other sheets come back as written (0.1 + 0.2 keeps its last bit, a 20-digit
    # integer stays whole)
    assert notes["A3"].value == 0.1 + 0.2 and notes["A4"].value == 12345678901234567891
    assert [r.coord for r in notes.merged_cells.ranges] == ["D1:E3"]
    assert openpyxl.load_workbook(result.path)[LOG_SHEET]["H1"].comment.text == "set up by the bench team"
    assert result.cells_checked == sum(len(cells) for cells in before_formulas.values())


def test_live_mode_writes_formulas_whose_cached_values_the_engine_reproduces(log_path):
    result = annotate(log_path, column="Cycles to leak (kcycles)", plan=plan(), live=True,
                      out=log_path.with_name("live.xlsx"))
    formulas = openpyxl.load_workbook(result.path)[LOG_SHEET]
    cached = openpyxl.load_workbook(result.path, data_only=True)[LOG_SHEET]
    assert formulas["G2"].value == ('=IF(IFERROR(LEN(TRIM(D2)),1)=0,"",'
                                    'STOP_DECISION($D$2:D2,$K$3,$K$6,$K$7,$K$8,$K$4,$K$5,$K$9,$K$10))')
    assert formulas["K3"].value == THRESHOLD  # the settings are plain inputs
    computed = evaluate_workbook(result.path)
    checked = 0
    for row in formulas.iter_rows(min_col=7, max_col=11):
        for cell in row:
            if isinstance(cell.value, str) and cell.value.startswith("="):
                stored = cached[cell.coordinate].value
                engine = computed[(LOG_SHEET.upper(), cell.coordinate)]
                if isinstance(stored, float):
                    # property: the formula engine recomputes the cached values (tolerance 1e-12: its own order of operations)
                    assert engine == pytest.approx(stored, rel=1e-12), cell.coordinate
                else:
                    assert (engine or None) == (stored or None), cell.coordinate
                checked += 1
    assert checked > len(bench_lifetimes())


def test_values_mode_matches_live_mode(log_path):
    values = annotate(log_path, column="D", plan=plan(), out=log_path.with_name("values.xlsx"))
    live = annotate(log_path, column="D", plan=plan(), live=True, out=log_path.with_name("live.xlsx"))
    plain = openpyxl.load_workbook(values.path)[LOG_SHEET]
    cached = openpyxl.load_workbook(live.path, data_only=True)[LOG_SHEET]
    for row in range(2, len(bench_lifetimes()) + 2):
        assert plain.cell(row, 7).value == cached.cell(row, 7).value
    for row in range(11, 21):
        value, stored = plain.cell(row, 11).value, cached.cell(row, 11).value
        # property: values mode writes what live mode caches (rel 1e-15: one rounding at most)
        assert value == (pytest.approx(stored, rel=1e-15) if isinstance(stored, float) else stored), row


def test_gamma_methods_and_check_interval(tmp_path):
    lifetimes = bench_lifetimes(160)
    path = rich_log(tmp_path / "bench.xlsx", lifetimes)
    result = annotate(path, column="D", plan=plan(method="known-shape", shape=2.4, check_every=4))
    sheet = openpyxl.load_workbook(result.path)[LOG_SHEET]
    decisions = [sheet.cell(row, 7).value for row in range(2, len(lifetimes) + 2)]
    stop = decisions.index("STOP") + 1
    assert (stop - PILOT) % 4 == 0  # the rule is consulted at m, m + k, m + 2k, ...
    block = {sheet.cell(row, 10).value: sheet.cell(row, 11).value for row in range(1, 40)}
    # check value: known-shape estimate Q(a, c/s) with s = mean/a, by scipy.stats.gamma
    mean = float(np.mean(lifetimes[:stop]))
    expected = stats.gamma.sf(THRESHOLD, 2.4, scale=mean / 2.4)
    # check value: scipy.stats.gamma.sf (above); tolerance 1e-12, a few roundings apart in the body
    assert block["Estimate of p = P(life > threshold)"] == pytest.approx(expected, rel=1e-12)
    assert block["Shape of the model (known-shape only)"] == 2.4


def test_a_log_that_has_not_stopped_says_so(tmp_path, capsys):
    path = rich_log(tmp_path / "short.xlsx", bench_lifetimes(30))
    code = main(["annotate", str(path), "--column", "D", "--threshold", "1500", "--accuracy", "1.5",
                 "--pilot", "10"])
    out = capsys.readouterr().out
    assert code == 0
    assert "the rule has not stopped after 30 units" in out
    assert "warning: odds within a factor 1.5 at 95 % confidence need about" in out
    sheet = openpyxl.load_workbook(default_output(path))[LOG_SHEET]
    assert sheet["G31"].value == "CONTINUE"


def test_blank_rows_and_survivors(tmp_path):
    lifetimes = bench_lifetimes(200)
    lifetimes[20] = None
    lifetimes[40] = "1500+"  # taken off at the limit without failing: counts as beyond it (pass-fail)
    path = rich_log(tmp_path / "gaps.xlsx", lifetimes)
    result = annotate(path, column="D", plan=plan())
    sheet = openpyxl.load_workbook(result.path)[LOG_SHEET]
    assert sheet["G22"].value is None  # a blank row is not a unit
    values = [v for v in lifetimes if v is not None]
    numbers = [THRESHOLD + 1 if v == "1500+" else v for v in values]
    stop = rule_stop(numbers)
    decisions = [sheet.cell(row, 7).value for row in range(2, len(lifetimes) + 2)]
    assert decisions.index("STOP") == stop  # one blank row above it: rows = units + 1
    assert result.analysis.units_used == stop


@pytest.mark.parametrize("live", [False, True])
def test_suspended_units_in_a_gamma_method_and_the_counts_in_the_block(tmp_path, live):
    lifetimes = bench_lifetimes(160)
    for row in range(3, 160, 7):  # every seventh unit pulled early, at 60 % of its life
        lifetimes[row] = f"{round(0.6 * lifetimes[row], 1)}+"
    path = rich_log(tmp_path / "pulled.xlsx", lifetimes)
    result = annotate(path, column="D", plan=plan(method="known-shape", shape=2.4), live=live,
                      out=tmp_path / "annotated.xlsx")
    sheet = openpyxl.load_workbook(result.path, data_only=True)[LOG_SHEET]
    block = {sheet.cell(row, 10).value: sheet.cell(row, 11).value for row in range(1, 40)}
    used = block["Units used, N"]
    suspended = sum(isinstance(v, str) for v in lifetimes[:used])
    assert block["  of which suspended (marked +)"] == suspended > 0
    assert block["  of which failed"] == used - suspended
    # the block's estimate is the censored known-shape estimate of the units used
    times = [float(str(v).rstrip("+")) for v in lifetimes[:used]]
    flags = [isinstance(v, str) for v in lifetimes[:used]]
    from tailstop.core.methods import estimate_tail
    expected = estimate_tail(times, THRESHOLD, "known-shape", 2.4, survivors=flags).p
    # property: the block shows the censored estimate of the units used (estimate_tail, checked against scipy
    # in tests/test_censored_fits.py); tolerance 1e-12 for the route through the cells
    assert block["Estimate of p = P(life > threshold)"] == pytest.approx(expected, rel=1e-12)
    if live:
        computed = evaluate_workbook(result.path)
        for row in range(11, 25):
            stored = sheet.cell(row, 11).value
            engine = computed.get((LOG_SHEET.upper(), f"K{row}"))
            if isinstance(stored, float):
                # property: the engine recomputes the cached values (tolerance 1e-12, its order of operations)
                assert engine == pytest.approx(stored, rel=1e-12), row


# --------------------------------------------------------------------------- command line and refusals


def run_cli(capsys, *arguments):
    try:
        code = main(["annotate", *map(str, arguments)])
    except SystemExit as leaving:  # argparse ends the program on a usage error
        code = leaving.code
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def test_command_line_prints_a_summary(log_path, capsys):
    code, out, err = run_cli(capsys, log_path, "--column", "Cycles to leak (kcycles)", "--threshold", 1500,
                             "--accuracy", 1.5, "--pilot", 10)
    assert code == 0 and err == ""
    assert f"Annotated 'Bench log'!D2:D{len(bench_lifetimes()) + 1}" in out
    assert "decision: STOP at row" in out
    assert "estimate: P(life > 1500) =" in out
    assert "failed, 0 suspended)" in out
    assert "kept their values and formulas" in out


def test_the_first_bad_cell_is_named_by_its_address(tmp_path, capsys):
    lifetimes = bench_lifetimes(60)
    lifetimes[15] = "n/a"
    path = rich_log(tmp_path / "bad.xlsx", lifetimes)
    code, out, err = run_cli(capsys, path, "--column", "D", "--threshold", 1500, "--accuracy", 1.5, "--pilot", 10)
    assert code == 1 and out == ""
    assert err.strip() == "tailstop annotate: 'Bench log'!D17 holds text 'n/a'"
    assert not default_output(path).exists()


@pytest.mark.parametrize("value, reason", [
    (dt.datetime(2026, 1, 5), "holds a date or time, not a number of hours or cycles"),
    (0, "holds 0; lifetimes must be > 0"),
])
def test_cells_the_method_cannot_use(tmp_path, capsys, value, reason):
    lifetimes = bench_lifetimes(40)
    lifetimes[5] = value
    path = rich_log(tmp_path / "bad.xlsx", lifetimes)
    code, _, err = run_cli(capsys, path, "--column", "D", "--threshold", 1500, "--accuracy", 1.5, "--pilot", 10)
    assert code == 1
    assert err.startswith(f"tailstop annotate: 'Bench log'!D7 {reason}")
    assert "Traceback" not in err


@pytest.mark.parametrize("arguments, message", [
    (["--column", "Z"], "column Z of sheet 'Bench log' is empty: no log to annotate"),
    (["--column", "Lifetime"], "no column 'Lifetime'"),
    (["--column", "D", "--sheet", "Log"], "has no sheet 'Log'; its sheets are 'Notes', 'Bench log', 'Summary'"),
    (["--column", "A", "--sheet", "Notes"], "Notes!A5 holds TRUE, not a number"),
    (["--column", "D", "--method", "known-shape"], "known-shape needs the gamma shape (--shape)"),
    (["--column", "D", "--confidence", "95"], "for 95 % enter 0.95"),
    (["--column", "D", "--no-backup"], "--no-backup applies to --in-place only"),
    (["--column", "D", "--out", "x.csv"], "give a name ending in .xlsx"),
])
def test_bad_requests_are_refused_with_a_message(log_path, capsys, arguments, message):
    base = ["--threshold", 1500, "--accuracy", 1.5, "--pilot", 10]
    code, out, err = run_cli(capsys, log_path, *base, *arguments)
    assert code == 1 and out == ""
    assert message in err
    assert "Traceback" not in err


def test_a_numeric_first_row_is_not_taken_for_a_header(tmp_path, capsys):
    book = openpyxl.Workbook()
    for value in bench_lifetimes(30):
        book.active.append([value])
    book.save(tmp_path / "noheader.xlsx")
    code, _, err = run_cli(capsys, tmp_path / "noheader.xlsx", "--column", "A", "--threshold", 1500,
                           "--accuracy", 1.5, "--pilot", 10)
    assert code == 1 and "the row above the log must hold the column's header" in err


def test_never_overwrites_and_in_place_keeps_a_backup(log_path, capsys):
    arguments = [log_path, "--column", "D", "--threshold", 1500, "--accuracy", 1.5, "--pilot", 10]
    assert run_cli(capsys, *arguments)[0] == 0
    first = default_output(log_path).read_bytes()
    code, _, err = run_cli(capsys, *arguments)
    assert code == 1 and "exists; choose another name with --out" in err
    assert default_output(log_path).read_bytes() == first
    original = log_path.read_bytes()
    code, out, _ = run_cli(capsys, *arguments, "--in-place")
    assert code == 0 and "backup of the original" in out
    assert log_path.with_name("bench.backup.xlsx").read_bytes() == original
    assert openpyxl.load_workbook(log_path)[LOG_SHEET]["G1"].value == DECISION_HEADER


def test_in_place_without_backup(log_path, capsys):
    code, _, _ = run_cli(capsys, log_path, "--column", "D", "--threshold", 1500, "--accuracy", 1.5, "--pilot", 10,
                         "--in-place", "--no-backup")
    assert code == 0
    assert not log_path.with_name("bench.backup.xlsx").exists()


def with_macros(path):
    """The book with a VBA project part added, which openpyxl would drop on save."""
    data = read_parts(path)
    types = data["[Content_Types].xml"].decode()
    data["[Content_Types].xml"] = types.replace(
        "</Types>", '<Override PartName="/xl/vbaProject.bin" ContentType="application/vnd.ms-office.vbaProject"/>'
        "</Types>").encode()
    data["xl/vbaProject.bin"] = b"\xd0\xcf\x11\xe0not really a macro project"
    return write_parts(path, data)


def test_content_openpyxl_would_drop_is_refused_unless_allowed(log_path, capsys):
    with_macros(log_path)
    arguments = [log_path, "--column", "D", "--threshold", 1500, "--accuracy", 1.5, "--pilot", 10]
    code, _, err = run_cli(capsys, *arguments)
    assert code == 1
    assert "would lose" in err and "VBA macros" in err and "--allow-lossy" in err
    assert not default_output(log_path).exists()
    code, out, _ = run_cli(capsys, *arguments, "--allow-lossy")
    assert code == 0 and "given up (--allow-lossy): VBA macros" in out


def hide_value_under_merge(path):
    """Put a value into a cell covered by a merged range, as LibreOffice can keep one."""
    data = read_parts(path)
    part = "xl/worksheets/sheet1.xml"  # the Notes sheet, merged D1:E3
    xml = data[part].decode()
    assert '<c r="D1"' in xml
    xml = xml.replace("</row>", '<c r="E2" t="inlineStr"><is><t>hidden note</t></is></c></row>', 2)
    xml = xml.replace('<c r="E2" t="inlineStr"><is><t>hidden note</t></is></c></row>', "</row>", 1)
    data[part] = xml.encode()
    return write_parts(path, data)


def test_a_value_hidden_under_a_merged_range_is_not_dropped_silently(log_path, capsys):
    hide_value_under_merge(log_path)
    assert openpyxl.load_workbook(log_path, read_only=True)["Notes"]["E2"].value == "hidden note"
    arguments = [log_path, "--column", "D", "--threshold", 1500, "--accuracy", 1.5, "--pilot", 10]
    code, _, err = run_cli(capsys, *arguments)
    assert code == 1 and "Notes!E2 holds 'hidden note'" in err and "--allow-lossy" in err
    code, out, _ = run_cli(capsys, *arguments, "--allow-lossy")
    assert code == 0 and "values hidden under merged ranges" in out


def test_a_changed_cell_stops_the_write(log_path, monkeypatch):
    # a writer that changed one pre-existing cell: the check must catch it and write nothing
    original = annotate_module._package_bytes

    def corrupting(book, cached):
        data = original(book, cached)
        with zipfile.ZipFile(io.BytesIO(data)) as archive:
            parts = {info.filename: archive.read(info) for info in archive.infolist()}
        name = cell_check.worksheet_parts(zipfile.ZipFile(io.BytesIO(data)))[LOG_SHEET]
        parts[name] = parts[name].replace(b'<c r="D5" t="n"><v>', b'<c r="D5" t="n"><v>1', 1)
        output = io.BytesIO()
        with zipfile.ZipFile(output, "w") as archive:
            for part, content in parts.items():
                archive.writestr(part, content)
        return output.getvalue()

    monkeypatch.setattr(annotate_module, "_package_bytes", corrupting)
    with pytest.raises(AnnotateRefused, match=r"'Bench log'!D5 was .*, is now .*\nNothing was written"):
        annotate(log_path, column="D", plan=plan())
    assert not default_output(log_path).exists()


def test_a_dropped_cell_stops_the_write(log_path, monkeypatch):
    original = annotate_module._package_bytes

    def dropping(book, cached):
        del book["Summary"]["A2"]
        return original(book, cached)

    monkeypatch.setattr(annotate_module, "_package_bytes", dropping)
    with pytest.raises(AnnotateRefused, match="Summary!A2 was 'Share', is now empty"):
        annotate(log_path, column="D", plan=plan())


# --------------------------------------------------------------------------- the cell reader behind the check


CELL_VALUES = st.one_of(
    st.integers(min_value=-(2**70), max_value=2**70),
    # beyond 1e308, openpyxl's 16-digit text of a float can read back as infinity (a value no spreadsheet holds)
    st.floats(allow_nan=False, allow_infinity=False, min_value=-1e308, max_value=1e308),
    st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")), max_size=12),
    st.text(alphabet=" \t\n&<>\"'ab", max_size=8),
    st.booleans(),
    st.datetimes(min_value=dt.datetime(1900, 3, 1), max_value=dt.datetime(9999, 1, 1)).map(
        lambda d: d.replace(microsecond=d.microsecond // 1000 * 1000)),
    st.sampled_from(["#N/A", "#DIV/0!", "=A1*2", "=SUM(A1:A3)&\"<x>\"", "=TAIL_PROB(1,2,3)"]),
)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(CELL_VALUES, min_size=1, max_size=30))
def test_the_fast_reader_reads_what_openpyxl_reads(values):
    # reference: openpyxl's own sheet parser on the same bytes
    book = openpyxl.Workbook()
    sheet = book.active
    for index, value in enumerate(values):
        sheet.cell(index // 5 + 1, index % 5 + 2, value)
    buffer = io.BytesIO()
    book.save(buffer)
    titles, fast_cells, fast = cell_check.cells_of_package(buffer.getvalue())
    with zipfile.ZipFile(io.BytesIO(buffer.getvalue())) as archive:
        package = cell_check._read_package(archive)
        xml = archive.read(package.worksheet_parts[sheet.title])
    exact = cell_check._parsed_sheet_cells(xml, package)
    assert fast == [sheet.title]
    assert fast_cells[sheet.title] == exact
    assert cell_check.package_holds(buffer.getvalue(), titles, {sheet.title: exact})


def test_the_check_sees_a_cell_written_twice_or_missing(log_path):
    book = openpyxl.load_workbook(log_path)
    buffer = io.BytesIO()
    book.save(buffer)
    titles, cells, _ = cell_check.cells_of_package(buffer.getvalue())
    assert cell_check.package_holds(buffer.getvalue(), titles, cells)
    fewer = {title: dict(found) for title, found in cells.items()}
    fewer["Summary"].pop(next(iter(fewer["Summary"])))
    assert not cell_check.package_holds(buffer.getvalue(), titles, fewer)
    changed = {title: dict(found) for title, found in cells.items()}
    key = cell_check.cell_key(5, 4)
    changed[LOG_SHEET][key] = changed[LOG_SHEET][key] + 0.1
    assert not cell_check.package_holds(buffer.getvalue(), titles, changed)
    assert [str(d) for d in cell_check.differences(changed, cells)] == [
        # property: the refusal names the cell, its old and its new value (a change of 0.1 made here)
        f"'{LOG_SHEET}'!D5 was {cells[LOG_SHEET][key] + 0.1!r}, is now {cells[LOG_SHEET][key]!r}"]


def test_numbers_openpyxl_would_round_are_listed():
    assert cell_check.rounds_on_save(0.1 + 0.2)
    assert not cell_check.rounds_on_save(824.1)
    assert cell_check.rounds_on_save(12345678901234567891)
    assert not cell_check.rounds_on_save(2**40)
    # check value: the float nearest 0.1 + 0.2 needs 17 significant digits (IEEE 754 double, from memory)
    assert float("%.16g" % (0.1 + 0.2)) != 0.1 + 0.2 == float(repr(0.1 + 0.2))


def test_a_long_log_goes_through_the_row_markup(tmp_path):
    # rows below the estimate block get their decision appended to openpyxl's row markup
    lifetimes = bench_lifetimes(400, seed=5)
    path = rich_log(tmp_path / "long.xlsx", lifetimes)
    result = annotate(path, column="D", plan=plan(), out=tmp_path / "long-values.xlsx")
    live = annotate(path, column="D", plan=plan(), live=True, out=tmp_path / "long-live.xlsx")
    values = openpyxl.load_workbook(result.path)[LOG_SHEET]
    formulas = openpyxl.load_workbook(live.path)[LOG_SHEET]
    cached = openpyxl.load_workbook(live.path, data_only=True)[LOG_SHEET]
    stop = rule_stop(lifetimes)
    assert values.cell(stop + 1, 7).value == "STOP" and values.cell(401, 7).value == "PAST STOP"
    assert formulas["G401"].value == ('=IF(IFERROR(LEN(TRIM(D401)),1)=0,"",'
                                      'STOP_DECISION($D$2:D401,$K$3,$K$6,$K$7,$K$8,$K$4,$K$5,$K$9,$K$10))')
    assert cached["G401"].value == "PAST STOP" and cached.cell(stop + 1, 7).value == "STOP"
    assert Path(result.path).stat().st_size > 0


def test_usage_errors_and_missing_files_exit_with_1(tmp_path, capsys):
    code, _, err = run_cli(capsys, tmp_path / "log.xlsx")
    assert code == 1 and "the following arguments are required: --column, --threshold, --accuracy, --pilot" in err
    code, _, err = run_cli(capsys, tmp_path / "log.xlsx", "--column", "B", "--threshold", 1500, "--accuracy", 1.5,
                           "--pilot", 10)
    assert code == 1 and "log.xlsx" in err and "Traceback" not in err


def unit_hours_book(units, seed):
    """A workbook whose sheet 'Log' holds unit numbers and seeded bench lifetimes: (book, sheet)."""
    book = openpyxl.Workbook()
    log = book.active
    log.title = "Log"
    log.append(["Unit", "Hours"])
    for unit, value in enumerate(bench_lifetimes(units, seed=seed), start=1):
        log.append([unit, value])
    return book, log


FORMATTED_BLANK = "formatted blank"  # a placed cell that holds a fill, a border and a number format, no value
PLACED_VALUES = st.one_of(CELL_VALUES, st.just(FORMATTED_BLANK))
BLANK_FILL = openpyxl.styles.PatternFill("solid", fgColor="DDEBF7")


def mixed_log(path, placed):
    """A 60-unit log on sheet 'Log' with ``placed`` (row, column, value, on the other sheet?) cells around it."""
    book, log = unit_hours_book(60, 3)
    other = book.create_sheet("Other")
    for row, column, value, elsewhere in placed:
        cell = (other if elsewhere else log).cell(row + 1, column)
        if value is FORMATTED_BLANK:
            thin = openpyxl.styles.Side(style="thin")
            cell.value = None
            cell.fill, cell.border, cell.number_format = BLANK_FILL, openpyxl.styles.Border(bottom=thin), "0.0"
        else:
            cell.value = value
    book.save(path)
    return path


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.integers(1, 70), st.integers(3, 8), PLACED_VALUES, st.booleans()), max_size=25))
def test_annotate_keeps_whatever_else_the_book_holds(placed):
    # property: any mix of values and formulas beside the log and on another sheet comes through unchanged
    import tempfile

    with tempfile.TemporaryDirectory() as folder:
        path = mixed_log(Path(folder) / "mixed.xlsx", placed)
        log = openpyxl.load_workbook(path)["Log"]
        before = all_cells(path)
        result = annotate(path, column="Hours", plan=plan(threshold=1200))
        after = all_cells(result.path)
        for title, cells in before.items():
            assert {c: after[title].get(c) for c in cells} == cells, title
        added = {openpyxl.utils.cell.coordinate_to_tuple(c) for c in after["Log"] if c not in before["Log"]}
        # cells with a value or a formula are never written over; a formatted blank only in the decision column
        taken = {key for key, cell in log._cells.items() if cell.value not in (None, "")}
        assert not added & taken
        # the decisions go into the first column right of the log (B) with no value or formula in rows 1..61
        log_rows = range(1, result.log.last_row + 1)
        free = next(column for column in range(3, 100) if not any((row, column) in taken for row in log_rows))
        assert result.decision_column == free
        block = openpyxl.utils.cell.range_boundaries(result.block)
        assert {column for _, column in added} <= {free, block[0], block[2]}
        assert not added & {key for key in log._cells if key[1] != free}  # the block over no cell at all
        assert set(after["Other"]) == set(before["Other"])
        # every formatted blank keeps its format, with a decision written into it or not
        written = openpyxl.load_workbook(result.path)["Log"]
        for (row, column), cell in log._cells.items():
            if cell.value is None and cell.has_style:
                assert written.cell(row, column).fill == BLANK_FILL, (row, column)
                assert written.cell(row, column).number_format == "0.0", (row, column)
        assert result.formats_kept == sum(1 for (row, column), cell in log._cells.items() if column == free
                                          and cell.value is None and cell.has_style and row <= result.log.last_row)


def test_a_number_openpyxl_cannot_write_back_is_refused_by_the_check(tmp_path):
    # openpyxl writes 1.7976931348623155e308 as "1.797693134862316e+308", which reads back as infinity,
    # and writes infinity as an empty cell: the check must refuse rather than lose the cell
    book = openpyxl.Workbook()
    book.active.append(["Hours"])
    for value in bench_lifetimes(30):
        book.active.append([value])
    book.active["C5"] = 1.7976931348623155e308
    book.save(tmp_path / "huge.xlsx")
    with pytest.raises(AnnotateRefused, match=r"Sheet!C5 was inf, is now empty\nNothing was written"):
        annotate(tmp_path / "huge.xlsx", column="A", plan=plan())
    assert not default_output(tmp_path / "huge.xlsx").exists()


def test_a_log_with_no_unit_beyond_the_threshold_says_so_in_words(tmp_path, capsys):
    lifetimes = [round(100.0 + 37.0 * unit, 1) for unit in range(30)]  # all below 1500
    path = rich_log(tmp_path / "early.xlsx", lifetimes)
    code, out, err = run_cli(capsys, path, "--column", "D", "--threshold", 1500, "--accuracy", 1.5, "--pilot", 10)
    assert code == 0 and err == ""
    line, = [line for line in out.splitlines() if line.startswith("  estimate:")]
    # pass-fail: no unit of 30 beyond 1500, so the share is 0 (counted by hand) and no interval exists
    assert line.startswith("  estimate: P(life > 1500) = 0, odds 0; no bounds yet: no unit exceeded the threshold")
    assert "#TAILSTOP!" not in out and " .. -" not in out
