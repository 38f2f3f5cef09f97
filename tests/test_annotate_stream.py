"""tailstop annotate on long logs: the book edited as bytes (annotate_stream), checked against the openpyxl path.

The openpyxl path is itself checked against the plain stopping rule and against the reference libraries in
test_annotate.py; here the streamed book must hold exactly what that path writes (every cell, value and
formula, every style of the log sheet, widths, conditional format), keep every other part of the package
byte for byte, and refuse to write when what it wrote does not read back as intended.
"""
from __future__ import annotations

import io
import re
import zipfile
from pathlib import Path

import defusedxml.ElementTree
import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from openpyxl.xml.functions import tostring

import tailstop.workbooks.annotate_stream as annotate_stream
from tailstop.commands.annotate import summary
from tailstop.workbooks.annotate import AnnotateRefused, annotate, default_output
from tailstop.workbooks import sheet_stream
from test_safe_io import read_parts, write_parts
from test_annotate import (CELL_VALUES, LOG_SHEET, PLACED_VALUES, all_cells, bench_lifetimes, mixed_log, plan, rich_log, rule_stop,
                           unit_hours_book)

MAIN = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
# ECMA-376 Part 1, 18.3.1.99 CT_Worksheet: the order of a worksheet's child elements
WORKSHEET_ORDER = ["sheetPr", "dimension", "sheetViews", "sheetFormatPr", "cols", "sheetData", "sheetCalcPr",
                   "sheetProtection", "protectedRanges", "scenarios", "autoFilter", "sortState", "dataConsolidate",
                   "customSheetViews", "mergeCells", "phoneticPr", "conditionalFormatting", "dataValidations",
                   "hyperlinks", "printOptions", "pageMargins", "pageSetup", "headerFooter", "rowBreaks",
                   "colBreaks", "customProperties", "cellWatches", "ignoredErrors", "smartTags", "drawing",
                   "legacyDrawing", "legacyDrawingHF", "picture", "oleObjects", "controls", "webPublishItems",
                   "tableParts", "extLst"]
# ECMA-376 Part 1, 18.8.39 CT_Stylesheet
STYLES_ORDER = ["numFmts", "fonts", "fills", "borders", "cellStyleXfs", "cellXfs", "cellStyles", "dxfs",
                "tableStyles", "colors", "extLst"]


def styles_of(path, title):
    """coordinate -> (font, fill, number format, border, alignment) markup of every cell of a sheet."""
    sheet = openpyxl.load_workbook(path)[title]
    return {cell.coordinate: (tostring(cell.font.to_tree()), tostring(cell.fill.to_tree()), cell.number_format,
                              tostring(cell.border.to_tree()), tostring(cell.alignment.to_tree()))
            for row in sheet.iter_rows() for cell in row if cell.has_style}


def looks_of(path, title):
    sheet = openpyxl.load_workbook(path)[title]
    widths = {key: value.width for key, value in sheet.column_dimensions.items() if value.width}
    formats = [(str(cf.sqref), [(rule.type, rule.operator, rule.formula, tostring(rule.dxf.to_tree()))
                                for rule in cf.rules]) for cf in sheet.conditional_formatting]
    return widths, formats


def sheet_part(path, title):
    with zipfile.ZipFile(path) as archive:
        from tailstop.workbooks.cell_check import worksheet_parts

        return archive.read(worksheet_parts(archive)[title])


def assert_schema_order(xml, order):
    tags = [child.tag.removeprefix(MAIN) for child in defusedxml.ElementTree.fromstring(xml)]
    positions = [order.index(tag) for tag in tags]
    assert positions == sorted(positions), tags


def both_paths(path, folder, column, rule, *, live=False, tag=""):
    """Annotate one log through openpyxl and through the byte editor: (full result, streamed result)."""
    full = annotate(path, column=column, plan=rule, live=live, out=Path(folder) / f"full{tag}.xlsx",
                    streaming=False)
    streamed = annotate(path, column=column, plan=rule, live=live, out=Path(folder) / f"streamed{tag}.xlsx",
                        streaming=True)
    return full, streamed


@pytest.fixture
def log_path(tmp_path):
    return rich_log(tmp_path / "bench.xlsx")


@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_the_streamed_book_holds_what_the_openpyxl_path_writes(log_path, live):
    full, streamed = both_paths(log_path, log_path.parent, "D", plan(), live=live)
    assert streamed.copied_parts is not None and full.copied_parts is None
    assert all_cells(streamed.path) == all_cells(full.path)
    assert all_cells(streamed.path, data_only=True) == all_cells(full.path, data_only=True)
    assert styles_of(streamed.path, LOG_SHEET) == styles_of(full.path, LOG_SHEET)
    assert looks_of(streamed.path, LOG_SHEET) == looks_of(full.path, LOG_SHEET)
    assert (streamed.decision_column, streamed.block) == (full.decision_column, full.block)
    # the decision itself, against the rule written out plainly (METHOD.md §5)
    stop = rule_stop(bench_lifetimes())
    values = openpyxl.load_workbook(streamed.path, data_only=True)[LOG_SHEET]
    assert values.cell(stop + 1, streamed.decision_column).value == "STOP"
    assert values.cell(stop, streamed.decision_column).value == "CONTINUE"
    assert_schema_order(sheet_part(streamed.path, LOG_SHEET), WORKSHEET_ORDER)
    with zipfile.ZipFile(streamed.path) as archive:
        assert_schema_order(archive.read("xl/styles.xml"), STYLES_ORDER)


def test_every_other_part_is_copied_byte_for_byte(log_path):
    streamed = annotate(log_path, column="D", plan=plan(), streaming=True)
    with zipfile.ZipFile(log_path) as before, zipfile.ZipFile(streamed.path) as after:
        assert before.namelist() == after.namelist()
        changed = [name for name in before.namelist() if before.read(name) != after.read(name)]
    assert sorted(changed) == ["xl/styles.xml", "xl/worksheets/sheet2.xml"]
    assert streamed.copied_parts == len(before.namelist()) - 2
    text = summary(streamed)
    assert f"the other {streamed.copied_parts} parts of the book are copied unchanged" in text


def test_content_openpyxl_would_drop_is_kept(log_path):
    # a custom XML part: the openpyxl path refuses (it would drop it); the byte editor keeps it
    parts = read_parts(log_path)
    parts["customXml/item1.xml"] = b'<?xml version="1.0"?><bench xmlns="urn:example:bench">rig 3</bench>'
    path = write_parts(log_path.with_name("custom.xlsx"), parts)
    with pytest.raises(Exception, match="custom XML data"):
        annotate(path, column="D", plan=plan(), streaming=False)
    streamed = annotate(path, column="D", plan=plan(), streaming=True)
    with zipfile.ZipFile(streamed.path) as archive:
        assert archive.read("customXml/item1.xml") == parts["customXml/item1.xml"]


def test_long_logs_stream_by_default_and_short_ones_do_not(log_path, monkeypatch):
    assert annotate(log_path, column="D", plan=plan(), out=log_path.with_name("a.xlsx")).copied_parts is None
    monkeypatch.setattr(annotate_stream, "STREAM_FROM_BYTES", 1000)
    assert annotate(log_path, column="D", plan=plan(), out=log_path.with_name("b.xlsx")).copied_parts is not None


def test_in_place_keeps_a_backup(log_path):
    original = log_path.read_bytes()
    result = annotate(log_path, column="D", plan=plan(), in_place=True, streaming=True)
    assert result.path == log_path.absolute() and result.backup.read_bytes() == original
    assert openpyxl.load_workbook(log_path)[LOG_SHEET].cell(1, result.decision_column).value == "tailstop decision"


def test_a_changed_cell_stops_the_streamed_write(log_path, monkeypatch):
    real = sheet_stream.extended_rows

    def tampered(region, additions, last_column, **options):
        for piece in real(region, additions, last_column, **options):
            yield piece.replace(b"<v>1100.4</v>", b"<v>1100.5</v>")

    assert b"<v>1100.4</v>" in sheet_part(log_path, LOG_SHEET)
    monkeypatch.setattr(sheet_stream, "extended_rows", tampered)
    with pytest.raises(AnnotateRefused, match=r"'Bench log'!D[0-9]+ was 1100\.4, is now 1100\.5\nNothing was written"):
        annotate(log_path, column="D", plan=plan(), streaming=True)
    assert not default_output(log_path).exists()
    assert not list(log_path.parent.glob("*.partial"))


def test_a_changed_part_stops_the_streamed_write(log_path, monkeypatch):
    real = zipfile.ZipFile.writestr

    def tampered(self, info, data, *args, **kwargs):
        if getattr(info, "filename", info) == "xl/styles.xml":
            data = data.replace(b'<b val="1"/>', b"", 1).replace(b"<b val=\"1\" />", b"", 1)
        return real(self, info, data, *args, **kwargs)

    monkeypatch.setattr(zipfile.ZipFile, "writestr", tampered)
    with pytest.raises(AnnotateRefused, match="Nothing was written"):
        annotate(log_path, column="D", plan=plan(), streaming=True)
    assert not default_output(log_path).exists()


def excel_like_book(path, lifetimes, *, prefixed=False):
    """A log written as raw markup in the way Excel lays it out (shared strings, spans, row attributes of
    the x14ac extension, a styled empty cell, a self-closing row, shared formulas, a merge, page margins).

    Markup conventions as Excel 2016 writes them (common practice, from memory); the values are invented.
    """
    ns = 'xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"'
    root = (f'<worksheet {ns} xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships" '
            'xmlns:mc="http://schemas.openxmlformats.org/markup-compatibility/2006" mc:Ignorable="x14ac" '
            'xmlns:x14ac="http://schemas.microsoft.com/office/spreadsheetml/2009/9/ac">')
    rows = ['<row r="1" spans="1:3" x14ac:dyDescent="0.25"><c r="A1" t="s"><v>0</v></c><c r="B1" t="s"><v>1</v>'
            '</c><c r="C1" t="s"><v>2</v></c></row>']
    for index, value in enumerate(lifetimes):
        row = index + 2
        if row == 6:
            rows.append(f'<row r="{row}" spans="1:3" x14ac:dyDescent="0.25"/>')  # a blank log row
            continue
        formula = (f'<f t="shared" ref="C2:C{len(lifetimes) + 1}" si="0">B2*2</f>' if row == 2
                   else '<f t="shared" si="0"/>')
        rows.append(f'<row r="{row}" spans="1:3" x14ac:dyDescent="0.25"><c r="A{row}"><v>{index + 1}</v></c>'
                    f'<c r="B{row}" s="1"><v>{value!r}</v></c><c r="C{row}">{formula}<v>{2 * value!r}</v></c></row>')
    rows.append(f'<row r="{len(lifetimes) + 3}"><c r="B{len(lifetimes) + 3}" s="1"/></row>')  # styled, empty
    sheet = (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n{root}<dimension ref="A1:C'
             f'{len(lifetimes) + 3}"/><sheetViews><sheetView tabSelected="1" workbookViewId="0"/></sheetViews>'
             '<sheetFormatPr defaultRowHeight="15" x14ac:dyDescent="0.25"/><cols><col min="1" max="1" width="9.5"'
             ' customWidth="1"/></cols><sheetData>' + "".join(rows) + '</sheetData><mergeCells count="1">'
             '<mergeCell ref="A1:A1"/></mergeCells><pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" '
             'header="0.3" footer="0.3"/></worksheet>')
    if prefixed:
        sheet = re.sub(r"<(/?)(?!\?)(?!x14ac|mc)([A-Za-z]+)", r"<\1x:\2", sheet).replace(f"x:worksheet {ns}",
                                                                                       'x:worksheet xmlns:x="http://schemas.openxmlformats.org/spreadsheetml/2006/main"')
    strings = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<sst xmlns="http://schemas.openxmlformats.'
               'org/spreadsheetml/2006/main" count="3" uniqueCount="3"><si><t>Unit</t></si><si><t>Hours to '
               'failure</t></si><si><t>Twice</t></si></sst>')
    styles = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<styleSheet xmlns="http://schemas.'
              'openxmlformats.org/spreadsheetml/2006/main" xmlns:mc="http://schemas.openxmlformats.org/markup-'
              'compatibility/2006" mc:Ignorable="x14ac" xmlns:x14ac="http://schemas.microsoft.com/office/'
              'spreadsheetml/2009/9/ac"><fonts count="1" x14ac:knownFonts="1"><font><sz val="11"/><color '
              'theme="1"/><name val="Calibri"/><family val="2"/><scheme val="minor"/></font></fonts><fills '
              'count="2"><fill><patternFill patternType="none"/></fill><fill><patternFill patternType="gray125"/>'
              '</fill></fills><borders count="1"><border><left/><right/><top/><bottom/><diagonal/></border>'
              '</borders><cellStyleXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0"/>'
              '</cellStyleXfs><cellXfs count="2"><xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/>'
              '<xf numFmtId="2" fontId="0" fillId="0" borderId="0" xfId="0" applyNumberFormat="1"/></cellXfs>'
              '<cellStyles count="1"><cellStyle name="Normal" xfId="0" builtinId="0"/></cellStyles><dxfs '
              'count="0"/><tableStyles count="0" defaultTableStyle="TableStyleMedium2" defaultPivotStyle='
              '"PivotStyleLight16"/></styleSheet>')
    workbook = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<workbook xmlns="http://schemas.'
                'openxmlformats.org/spreadsheetml/2006/main" xmlns:r="http://schemas.openxmlformats.org/'
                'officeDocument/2006/relationships"><bookViews><workbookView activeTab="0"/></bookViews><sheets>'
                '<sheet name="Hours" sheetId="1" r:id="rId1"/></sheets></workbook>')
    rels = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns="http://schemas.'
            'openxmlformats.org/package/2006/relationships"><Relationship Id="rId3" Type="http://schemas.'
            'openxmlformats.org/officeDocument/2006/relationships/sharedStrings" Target="sharedStrings.xml"/>'
            '<Relationship Id="rId2" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/'
            'styles" Target="styles.xml"/><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/'
            'officeDocument/2006/relationships/worksheet" Target="worksheets/sheet1.xml"/></Relationships>')
    types = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Types xmlns="http://schemas.openxmlformats'
             '.org/package/2006/content-types"><Default Extension="rels" ContentType="application/vnd.openxml'
             'formats-package.relationships+xml"/><Default Extension="xml" ContentType="application/xml"/>'
             '<Override PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-officedocument.'
             'spreadsheetml.sheet.main+xml"/><Override PartName="/xl/worksheets/sheet1.xml" ContentType='
             '"application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/><Override PartName='
             '"/xl/styles.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.styles+'
             'xml"/><Override PartName="/xl/sharedStrings.xml" ContentType="application/vnd.openxmlformats-'
             'officedocument.spreadsheetml.sharedStrings+xml"/></Types>')
    package = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns="http://schemas.'
               'openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.'
               'openxmlformats.org/officeDocument/2006/relationships/officeDocument" Target="xl/workbook.xml"/>'
               '</Relationships>')
    return write_parts(path, {"[Content_Types].xml": types, "_rels/.rels": package, "xl/workbook.xml": workbook,
                              "xl/_rels/workbook.xml.rels": rels, "xl/styles.xml": styles,
                              "xl/sharedStrings.xml": strings, "xl/worksheets/sheet1.xml": sheet})


@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_markup_as_excel_writes_it(tmp_path, live):
    lifetimes = bench_lifetimes(60, seed=7)
    path = excel_like_book(tmp_path / "excel.xlsx", lifetimes)
    full, streamed = both_paths(path, tmp_path, "Hours to failure", plan(threshold=1200), live=live)
    assert all_cells(streamed.path) == all_cells(full.path)
    # stored values: tailstop's cells agree; the user's formulas keep the values Excel stored, which the
    # openpyxl path cannot keep (openpyxl writes formulas without their values)
    original, shown = all_cells(path, data_only=True)["Hours"], all_cells(streamed.path, data_only=True)["Hours"]
    assert {c: v for c, v in shown.items() if c in original} == original and "C10" in original
    added = set(shown) - set(original)
    assert added == set(all_cells(full.path, data_only=True)["Hours"]) - set(original)
    assert {c: shown[c] for c in added} == {c: all_cells(full.path, data_only=True)["Hours"][c] for c in added}
    assert styles_of(streamed.path, "Hours") == styles_of(full.path, "Hours")
    assert looks_of(streamed.path, "Hours") == looks_of(full.path, "Hours")
    xml = sheet_part(streamed.path, "Hours")
    assert_schema_order(xml, WORKSHEET_ORDER)
    # the user's rows keep their own markup: shared formulas, row attributes of the extension namespace
    assert b'<f t="shared" ref="C2:C61" si="0">B2*2</f>' in xml and xml.count(b'x14ac:dyDescent="0.25"') == sheet_part(path, "Hours").count(b'x14ac:dyDescent="0.25"') == 62
    rows = [int(number) for number in re.findall(rb'<row r="([0-9]+)"', xml)]
    assert rows == sorted(set(rows))
    assert re.search(rb'<row r="2" spans="1:[0-9]+"', xml).group(0) == b'<row r="2" spans="1:%d"' % (
        streamed.decision_column + 3)
    with zipfile.ZipFile(streamed.path) as archive:
        styles = archive.read("xl/styles.xml")
    assert_schema_order(styles, STYLES_ORDER)
    assert b'mc:Ignorable="x14ac"' in styles and b'x14ac:knownFonts="1"' in styles


def test_markup_it_does_not_edit_goes_through_openpyxl(tmp_path):
    path = excel_like_book(tmp_path / "prefixed.xlsx", bench_lifetimes(40, seed=2), prefixed=True)
    assert b"<x:row " in sheet_part(path, "Hours")
    with pytest.raises(AnnotateRefused, match="cannot be edited as a stream: the worksheet does not use the default"):
        annotate(path, column="B", plan=plan(threshold=1200), streaming=True)
    result = annotate(path, column="B", plan=plan(threshold=1200), streaming=None)
    assert result.copied_parts is None and openpyxl.load_workbook(result.path)["Hours"].max_row >= 41


def test_rows_the_log_lacks_are_inserted_in_order(tmp_path):
    # a short log with gaps: the live decision cells of the blank rows and the block below the log need rows
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Log"
    sheet.append(["Hours"])
    lifetimes = bench_lifetimes(14, seed=4)
    for index, value in enumerate(lifetimes):
        if index not in (3, 4, 9):
            sheet.cell(index + 2, 1, value)
    book.save(tmp_path / "gaps.xlsx")
    for live in (False, True):
        full, streamed = both_paths(tmp_path / "gaps.xlsx", tmp_path, "A", plan(threshold=1200, pilot=5), live=live,
                                    tag=f"-{live}")
        assert all_cells(streamed.path) == all_cells(full.path)
        rows = [int(number) for number in re.findall(rb'<row r="([0-9]+)"', sheet_part(streamed.path, "Log"))]
        # in order, and the rows openpyxl writes (a row with no cell at all has no element in either)
        assert rows == sorted(set(rows))
        assert rows == [int(n) for n in re.findall(rb'<row r="([0-9]+)"', sheet_part(full.path, "Log"))]


@settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.integers(1, 70), st.integers(3, 8), PLACED_VALUES, st.booleans()), max_size=25))
def test_streaming_keeps_whatever_else_the_book_holds(placed):
    # property: any mix of values and formulas beside the log comes through the byte editor as through openpyxl
    import tempfile

    with tempfile.TemporaryDirectory() as folder:
        path = mixed_log(Path(folder) / "mixed.xlsx", placed)
        full, streamed = both_paths(path, folder, "Hours", plan(threshold=1200))
        assert all_cells(streamed.path) == all_cells(full.path)
        assert streamed.decision_column == full.decision_column
        assert styles_of(streamed.path, "Log") == styles_of(full.path, "Log")
        assert streamed.formats_kept == full.formats_kept


def test_the_style_sheet_edit_appends_and_counts():
    # a style sheet without numFmts and dxfs: both are created at their place, counts follow the children
    xml = (b'<styleSheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><fonts count="1"><font/>'
           b'</fonts><fills count="2"><fill/><fill/></fills><borders count="1"><border/></borders><cellXfs count="1">'
           b'<xf numFmtId="0" fontId="0" fillId="0" borderId="0"/></cellXfs></styleSheet>')
    from openpyxl.styles.numbers import BUILTIN_FORMATS_REVERSE

    edit = sheet_stream.StylesEdit(xml, BUILTIN_FORMATS_REVERSE)
    first = edit.cell_format(b"<font><b val=\"1\"/></font>", None, "0.0000")
    again = edit.cell_format(b"<font><b val=\"1\"/></font>", None, "0.0000")
    second = edit.cell_format(None, b"<fill><patternFill patternType=\"solid\"/></fill>", "0")
    dxf = edit.differential_format(b"<dxf><font><b val=\"1\"/></font></dxf>")
    result = edit.result()
    assert (first, again, second, dxf) == (1, 1, 2, 0)
    root = defusedxml.ElementTree.fromstring(result)
    assert [child.tag.removeprefix(MAIN) for child in root] == ["numFmts", "fonts", "fills", "borders", "cellXfs",
                                                                 "dxfs"]
    for child in root:
        assert int(child.get("count")) == len(child), child.tag
    # check value: custom number formats start at id 164 (ECMA-376 Part 1, 18.8.30); "0" is built-in id 1
    assert root.find(f"{MAIN}numFmts/{MAIN}numFmt").get("numFmtId") == "164"
    xfs = root.findall(f"{MAIN}cellXfs/{MAIN}xf")
    assert [xf.get("numFmtId") for xf in xfs] == ["0", "164", "1"]
    assert [xf.get("fontId") for xf in xfs] == ["0", "1", "0"] and [xf.get("fillId") for xf in xfs] == ["0", "0", "2"]


def test_slices_align_on_row_numbers():
    # the old region holds the even rows; the new one also rows inserted between them
    def row(number):
        return b'<row r="%d"><c r="A%d"><v>%d</v></c></row>' % (number, number, number)

    old = b"".join(row(number) for number in range(2, 801, 2))
    new = b"".join(row(number) for number in range(1, 802))
    sheet = sheet_stream.split_sheet(b'<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
                                     b"<sheetData>" + old + b"</sheetData></worksheet>")
    # the new rows arrive in pieces of an awkward length, as from a decompressing stream
    pieces = [new[at: at + 777] for at in range(0, len(new), 777)]
    pairs = list(sheet_stream.aligned_slices(sheet, iter(pieces), size=1000))
    assert len(pairs) > 5
    assert b"".join(old_piece for old_piece, _, _, _ in pairs) == old
    assert b"".join(new_piece for _, new_piece, _, _ in pairs) == new
    for old_piece, new_piece, low, high in pairs:
        rows = [int(n) for n in re.findall(rb'<row r="([0-9]+)"', new_piece)]
        assert all(low <= number and (high is None or number < high) for number in rows)


@pytest.mark.parametrize("chunk", [1, 7, 4096])
def test_a_written_sheet_is_read_back_in_pieces(chunk):
    # the closing </sheetData> may be cut anywhere between two reads of the inflating stream
    rows = b"".join(b'<row r="%d"><c r="A%d"><v>%d</v></c></row>' % (n, n, n) for n in range(1, 60))
    head = b'<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>'
    tail = b'</sheetData><pageMargins left="0.7"/></worksheet>'
    streamed = sheet_stream.StreamedSheet(io.BytesIO(head + rows + tail), chunk=chunk)
    assert b"".join(streamed.rows()) == rows
    assert (streamed.head, streamed.tail) == (head, tail)
    with pytest.raises(sheet_stream.NotStreamable, match="comments"):
        list(sheet_stream.StreamedSheet(io.BytesIO(head + rows + b"<!-- x -->" + tail), chunk=chunk).rows())


@pytest.mark.parametrize("streaming", [False, True], ids=["openpyxl", "streamed"])
def test_a_damaged_cell_is_refused_with_a_message(tmp_path, capsys, monkeypatch, streaming):
    # a shared-string index beyond the table: both readers fail on it; the command says so, no traceback
    path = excel_like_book(tmp_path / "excel.xlsx", bench_lifetimes(30, seed=1))
    parts = read_parts(path)
    sheet = parts["xl/worksheets/sheet1.xml"]
    parts["xl/worksheets/sheet1.xml"] = sheet.replace(b'<c r="C1" t="s"><v>2</v>', b'<c r="C1" t="s"><v>99</v>')
    damaged = write_parts(tmp_path / "damaged.xlsx", parts)
    monkeypatch.setattr(annotate_stream, "STREAM_FROM_BYTES", 1 if streaming else 2**40)
    from tailstop.commands import main

    code = main(["annotate", str(damaged), "--column", "B", "--threshold", "1200", "--accuracy", "1.5",
                 "--pilot", "10"])
    err = capsys.readouterr().err
    assert code == 1 and "Traceback" not in err and "IndexError: list index out of range" in err
    assert ("sheet 'Hours': cells of rows 1-" in err) == streaming
    assert not default_output(damaged).exists()


def test_existing_formats_validations_links_and_widths_stay_in_their_place(tmp_path):
    from openpyxl.formatting.rule import CellIsRule
    from openpyxl.styles import PatternFill
    from openpyxl.worksheet.datavalidation import DataValidation

    book, sheet = unit_hours_book(80, 6)
    sheet.conditional_formatting.add("B2:B81", CellIsRule(operator="lessThan", formula=["100"],
                                                          fill=PatternFill("solid", fgColor="FFC7CE")))
    check = DataValidation(type="decimal", operator="greaterThan", formula1="0")
    sheet.add_data_validation(check)
    check.add("B2:B81")
    sheet["A1"].hyperlink = "https://example.org/bench-procedure"
    sheet.column_dimensions.group("E", "Z", hidden=False)  # a <col> entry spanning the block's columns
    sheet.column_dimensions["E"].width = 11
    book.save(tmp_path / "formatted.xlsx")
    full, streamed = both_paths(tmp_path / "formatted.xlsx", tmp_path, "B", plan(threshold=1200))
    assert all_cells(streamed.path) == all_cells(full.path)
    assert styles_of(streamed.path, "Log") == styles_of(full.path, "Log")
    widths, formats = looks_of(streamed.path, "Log")
    assert (widths, sorted(formats)) == (looks_of(full.path, "Log")[0], sorted(looks_of(full.path, "Log")[1]))
    assert len(formats) == 2
    xml = sheet_part(streamed.path, "Log")
    assert_schema_order(xml, WORKSHEET_ORDER)
    loaded = openpyxl.load_workbook(streamed.path)["Log"]
    assert loaded["A1"].hyperlink.target == "https://example.org/bench-procedure"
    assert [str(v.sqref) for v in loaded.data_validations.dataValidation] == ["B2:B81"]
    # the user's format keeps its highlight; ours points at the differential format appended after it
    priorities = [int(p) for p in re.findall(rb'priority="([0-9]+)"', xml)]
    dxf_ids = [int(p) for p in re.findall(rb'dxfId="([0-9]+)"', xml)]
    assert len(set(priorities)) == 2 and dxf_ids == [0, 1]


@pytest.mark.parametrize("after", [
    b'<pageMargins left="0.7"/>',
    b'<tableParts count="1"><tablePart r:id="rId2"/></tableParts>',
    # form controls as Excel wraps them in a markup-compatibility block (from memory)
    b'<mc:AlternateContent xmlns:mc="http://schemas.openxmlformats.org/markup-compatibility/2006"><mc:Choice '
    b'Requires="x14"><controls><control shapeId="1025" r:id="rId3"/></controls></mc:Choice></mc:AlternateContent>',
])
def test_the_new_conditional_format_goes_before_what_follows_formats(after):
    # ECMA-376 Part 1, CT_Worksheet: conditionalFormatting after mergeCells, before dataValidations and the rest
    tail = b'</sheetData><mergeCells count="1"><mergeCell ref="A1:B1"/></mergeCells>' + after + b"</worksheet>"
    edited = sheet_stream.edit_tail(tail, b"<conditionalFormatting/>")
    assert edited == tail.replace(after, b"<conditionalFormatting/>" + after)


@settings(max_examples=200, deadline=None)
@given(st.sets(st.integers(1, 60)), st.sets(st.integers(1, 60)), st.integers(1, 60), st.integers(0, 12))
def test_cells_released_from_the_occupancy_are_free_and_no_others(taken, released, first, length):
    # property: after release, a column holds exactly the rows taken and not released (plain set arithmetic)
    from tailstop.workbooks.log_layout import Occupancy

    occupancy = Occupancy.from_keys([(row, 3) for row in taken] + [(row, 4) for row in taken])
    occupancy.release(3, sorted(released))
    last = first + length
    left = [row for row in sorted(taken - released) if first <= row <= last]
    assert occupancy.first_taken(3, first, last) == (left[0] if left else None)
    kept = [row for row in sorted(taken) if first <= row <= last]
    assert occupancy.first_taken(4, first, last) == (kept[0] if kept else None)  # another column untouched


def test_a_user_cell_taken_out_with_an_earlier_run_stops_the_write(log_path, monkeypatch):
    # the earlier run's cells are taken out of their rows; taking one of the user's too must be refused
    annotate(log_path, column="D", plan=plan(), in_place=True, backup=False, streaming=True)
    real = sheet_stream._without_cells

    def greedy(content, row, columns, formats=None):
        return real(content, row, {*columns, 4}, formats)  # also the lifetime in column D

    monkeypatch.setattr(sheet_stream, "_without_cells", greedy)
    before = log_path.read_bytes()
    with pytest.raises(AnnotateRefused, match=r"'Bench log'!D[0-9]+ was [0-9.]+, is now empty\n.*Nothing was written"):
        annotate(log_path, column="D", plan=plan(), in_place=True, backup=False, streaming=True)
    assert log_path.read_bytes() == before


def test_an_earlier_run_left_in_a_row_stops_the_write(log_path, monkeypatch):
    # the other way round: an earlier decision not taken out meets the new one; the stream gives up before writing
    annotate(log_path, column="D", plan=plan(), in_place=True, backup=False, streaming=True)
    monkeypatch.setattr(sheet_stream, "_without_cells", lambda content, row, columns, formats=None: content)
    before = log_path.read_bytes()
    with pytest.raises(AnnotateRefused, match="cannot be edited as a stream: a new cell in column"):
        annotate(log_path, column="D", plan=plan(), in_place=True, backup=False, streaming=True)
    assert log_path.read_bytes() == before
