"""Safe opening, atomic saving and column helpers for workbooks.

Hostile files are generated here, in tmp_path; none is committed. Each
hostile open runs in a child process, so that a regression shows up as a
bounded failure (a timeout, a memory figure) rather than a hung or swapped
test run.
"""
from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
import zipfile
from pathlib import Path

import defusedxml
import openpyxl
import pytest
from openpyxl.chart import BarChart, Reference
from openpyxl.comments import Comment
from openpyxl.worksheet.datavalidation import DataValidation
from openpyxl.worksheet.table import Table

from tailstop.workbooks.package import Limits, inspect_package, pillow_available
from tailstop.workbooks.safe_io import (
    WorkbookRefused,
    iter_column_values,
    open_workbook_safely,
    require_defused_openpyxl,
    resolve_column,
    save_workbook_atomically,
    write_file_atomically,
)

MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
REL_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
SHEET = "xl/worksheets/sheet1.xml"
HOSTILE_TIMEOUT = 120  # seconds: a hang guard for the child, not a speed assertion
MEMORY_BOUND = 150 * 2**20  # bytes a refused open may add to the child's peak RSS


# ---------------------------------------------------------------------------
# building packages by hand
# ---------------------------------------------------------------------------
def plain_book(path, rows=((1.5,), (2.5,))):
    """A small ordinary workbook written by openpyxl."""
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Log"
    sheet.append(["Hours"])
    for row in rows:
        sheet.append(list(row))
    book.save(path)
    return path


def read_parts(path):
    with zipfile.ZipFile(path) as archive:
        return {info.filename: archive.read(info) for info in archive.infolist()}


def write_parts(path, parts):
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, data in parts.items():
            archive.writestr(name, data)
    return path


def rels_name(part):
    folder, name = part.rsplit("/", 1) if "/" in part else ("", part)
    return f"{folder}/_rels/{name}.rels" if folder else f"_rels/{name}.rels"


def inject(path, *, add=(), relate=(), edit=None):
    """Add parts (name, content type, bytes), relationships (owner, type, target, id) and edits."""
    parts = read_parts(path)
    overrides = "".join(f'<Override PartName="/{name}" ContentType="{kind}"/>' for name, kind, _ in add if kind)
    parts["[Content_Types].xml"] = parts["[Content_Types].xml"].replace(b"</Types>", overrides.encode() + b"</Types>")
    for name, _, data in add:
        parts[name] = data
    for owner, rel_type, target, rel_id in relate:
        rels = rels_name(owner)
        entry = f'<Relationship Id="{rel_id}" Type="{rel_type}" Target="{target}"/>'.encode()
        existing = parts.get(rels, b'<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships"></Relationships>')
        parts[rels] = existing.replace(b"</Relationships>", entry + b"</Relationships>")
    for name, change in (edit or {}).items():
        parts[name] = change(parts[name])
    return write_parts(path, parts)


def sheet_xml(body, head=""):
    return f'<worksheet xmlns="{MAIN_NS}" xmlns:r="{REL_NS}">{head}<sheetData>{body}</sheetData></worksheet>'.encode()


def replace_sheet(path, xml):
    return inject(path, edit={SHEET: lambda _: xml})


def before_page_margins(fragment):
    """An edit that places a fragment before <pageMargins> in openpyxl's sheet XML."""
    return lambda xml: xml.replace(b"<pageMargins", fragment.encode() + b"<pageMargins", 1)


def after_sheet_data(fragment):
    return lambda xml: xml.replace(b"</sheetData>", b"</sheetData>" + fragment.encode(), 1)


def at_sheet_end(fragment):
    return lambda xml: xml.replace(b"</worksheet>", fragment.encode() + b"</worksheet>", 1)


# ---------------------------------------------------------------------------
# hostile files
# ---------------------------------------------------------------------------
def billion_laughs(path):
    # the classic entity-expansion payload: 10 levels of 10 references
    levels = ['<!ENTITY lol0 "lol">'] + [
        f'<!ENTITY lol{level} "{("&lol%d;" % (level - 1)) * 10}">' for level in range(1, 10)]
    payload = (f'<?xml version="1.0"?><!DOCTYPE worksheet [{"".join(levels)}]>'
               f'<worksheet xmlns="{MAIN_NS}"><sheetData><row r="1"><c r="A1" t="inlineStr">'
               f'<is><t>&lol9;</t></is></c></row></sheetData></worksheet>')
    return replace_sheet(plain_book(path), payload.encode())


def zip_bomb(path):
    """A part of 600 MiB of zeros that deflates to well under 1 MiB."""
    plain_book(path)
    with zipfile.ZipFile(path, "a", zipfile.ZIP_DEFLATED) as archive:
        with archive.open("xl/media/padding.bin", "w", force_zip64=True) as member:
            block = bytes(2**20)
            for _ in range(600):
                member.write(block)
    return path


def lying_size_bomb(path):
    """A 40 MiB part whose zip headers claim 1000 bytes, so a size check alone would pass it."""
    plain_book(path)
    with zipfile.ZipFile(path, "a", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("xl/media/padding.bin", bytes(40 * 2**20))
    data = bytearray(Path(path).read_bytes())
    true_size = (40 * 2**20).to_bytes(4, "little")
    assert data.count(true_size) == 2  # local header and central directory entry
    Path(path).write_bytes(bytes(data).replace(true_size, (1000).to_bytes(4, "little")))
    return path


def million_columns(path):
    # column BDWGM is column 1,000,000 (beyond the grid of 16,384)
    return replace_sheet(plain_book(path), sheet_xml('<row r="1"><c r="A1"><v>1</v></c></row>',
                                                     head='<dimension ref="A1:BDWGM1"/>'))


def full_grid_dimension(path):
    return replace_sheet(plain_book(path), sheet_xml('<row r="1"><c r="A1"><v>1</v></c></row>',
                                                     head='<dimension ref="A1:XFD1048576"/>'))


def huge_column_span(path):
    return replace_sheet(plain_book(path), sheet_xml('<row r="1"><c r="A1"><v>1</v></c></row>',
                                                     head='<cols><col min="1" max="1000000000" width="9"/></cols>'))


def truncated(path):
    plain_book(path)
    data = Path(path).read_bytes()
    Path(path).write_bytes(data[: len(data) // 2])
    return path


def text_named_xlsx(path):
    Path(path).write_text("unit,hours\n1,250\n2,310\n")
    return path


HOSTILE = {
    "billion laughs": (billion_laughs, "entity"),
    "zip bomb": (zip_bomb, "zip bomb"),
    "lying zip sizes": (lying_size_bomb, "damaged"),
    "million columns": (million_columns, "beyond the spreadsheet grid"),
    "full-grid dimension": (full_grid_dimension, "more than the limit"),
    "huge column span": (huge_column_span, "beyond the spreadsheet grid"),
    "truncated": (truncated, "truncated"),
    "text named .xlsx": (text_named_xlsx, "text file"),
}

CHILD = textwrap.dedent("""
    import json, sys
    from tailstop.workbooks.safe_io import WorkbookRefused, open_workbook_safely

    def status(field):
        # VmHWM is this process image's own peak; getrusage's ru_maxrss may carry the
        # peak of the (large) test process that forked this one across exec
        with open("/proc/self/status") as lines:
            line = next(line for line in lines if line.startswith(field + ":"))
        return int(line.split()[1]) * 1024

    before = status("VmRSS")
    try:
        open_workbook_safely(sys.argv[1])
        message = None
    except WorkbookRefused as refusal:
        message = str(refusal)
    peak = status("VmHWM")
    print(json.dumps({"refused": message, "growth": peak - before}))
""")


# the same, through annotate's byte editor for long logs (it inspects with larger part and cell limits)
STREAM_CHILD = CHILD.replace(
    "from tailstop.workbooks.safe_io import WorkbookRefused, open_workbook_safely",
    "from tailstop.workbooks.annotate import AnnotateRefused, annotate\n"
    "from tailstop.workbooks.log_layout import RulePlan\n"
    "from tailstop.workbooks.safe_io import WorkbookRefused").replace(
    "open_workbook_safely(sys.argv[1])",
    "annotate(sys.argv[1], column='A', plan=RulePlan.checked(1.0, 1.5, 0.95, 2), streaming=True)").replace(
    "except WorkbookRefused as refusal:", "except (WorkbookRefused, AnnotateRefused) as refusal:")


def open_in_child(path, script=CHILD):
    """Open a workbook in a fresh interpreter; returns (refusal message or None, peak RSS growth)."""
    done = subprocess.run([sys.executable, "-c", script, str(path)], capture_output=True, text=True,
                          timeout=HOSTILE_TIMEOUT, check=True)
    result = json.loads(done.stdout.strip().splitlines()[-1])
    return result["refused"], result["growth"]


@pytest.mark.parametrize("case", sorted(HOSTILE))
def test_hostile_file_is_refused_with_bounded_memory(tmp_path, case):
    # common practice (OWASP XML/zip-bomb guidance), no published check value
    build, expected = HOSTILE[case]
    path = build(tmp_path / "hostile.xlsx")
    message, growth = open_in_child(path)
    assert message is not None, f"{case} was opened"
    assert expected in message
    assert growth < MEMORY_BOUND, f"{case}: refusing took {growth / 2**20:.0f} MiB"


@pytest.mark.parametrize("case", sorted(HOSTILE))
def test_hostile_file_is_refused_by_the_streaming_annotate_too(tmp_path, case):
    # common practice (OWASP XML/zip-bomb guidance), no published check value
    build, expected = HOSTILE[case]
    path = build(tmp_path / "hostile.xlsx")
    assert "open_workbook_safely" not in STREAM_CHILD
    message, growth = open_in_child(path, STREAM_CHILD)
    assert message is not None, f"{case} was annotated"
    assert expected in message
    assert growth < MEMORY_BOUND, f"{case}: refusing took {growth / 2**20:.0f} MiB"
    assert not list(tmp_path.glob("*-tailstop.xlsx"))


def test_ordinary_book_opens_in_child_with_the_same_bound(tmp_path):
    # the measurement itself must see an ordinary open as small and successful
    message, growth = open_in_child(plain_book(tmp_path / "plain.xlsx"))
    assert message is None
    assert growth < MEMORY_BOUND


def test_legacy_binary_and_empty_files_are_named(tmp_path):
    legacy = tmp_path / "old.xlsx"
    legacy.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(504))
    empty = tmp_path / "empty.xlsx"
    empty.write_bytes(b"")
    with pytest.raises(WorkbookRefused, match="legacy .xls"):
        open_workbook_safely(legacy)
    with pytest.raises(WorkbookRefused, match="empty"):
        open_workbook_safely(empty)


def test_zip_that_is_not_a_spreadsheet(tmp_path):
    path = write_parts(tmp_path / "photos.xlsx", {"a.txt": b"hello"})
    with pytest.raises(WorkbookRefused, match="not an .xlsx package"):
        open_workbook_safely(path)


def test_ratio_limit_applies_to_large_parts_only(tmp_path):
    # 4 MiB of zeros inflates about 1000 times: refused; the same ratio on a tiny part is harmless
    path = plain_book(tmp_path / "ratio.xlsx")
    with zipfile.ZipFile(path, "a", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("xl/media/padding.bin", bytes(4 * 2**20))
    with pytest.raises(WorkbookRefused, match="inflates .* times"):
        inspect_package(path)
    inspect_package(path, Limits(ratio_floor_bytes=8 * 2**20))


def test_cell_count_limit(tmp_path):
    path = plain_book(tmp_path / "cells.xlsx", rows=[(value,) for value in range(50)])
    with pytest.raises(WorkbookRefused, match="more than 20 cells"):
        inspect_package(path, Limits(max_cells=20))


def test_openpyxl_itself_parses_through_defusedxml(tmp_path):
    # without our pre-check, openpyxl must still refuse the entity payload
    require_defused_openpyxl()
    path = billion_laughs(tmp_path / "laughs.xlsx")
    with pytest.raises(ValueError) as caught:
        openpyxl.load_workbook(path)
    causes = []
    error = caught.value
    while error is not None:
        causes.append(error)
        error = error.__cause__ or error.__context__
    assert any(isinstance(cause, defusedxml.EntitiesForbidden) for cause in causes)


def test_unprotected_openpyxl_is_detected():
    code = ("from tailstop.workbooks.safe_io import require_defused_openpyxl\n"
            "try:\n    require_defused_openpyxl()\nexcept RuntimeError as e:\n    print('refused', e)\n")
    environment = dict(os.environ, OPENPYXL_DEFUSEDXML="False")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=environment,
                          timeout=HOSTILE_TIMEOUT, check=True)
    assert done.stdout.startswith("refused")


# ---------------------------------------------------------------------------
# content openpyxl drops on save — each case is checked against a real round trip
# ---------------------------------------------------------------------------
SHAPE = ('<twoCellAnchor><from><col>5</col><colOff>0</colOff><row>1</row><rowOff>0</rowOff></from>'
         '<to><col>8</col><colOff>0</colOff><row>6</row><rowOff>0</rowOff></to>'
         '<sp macro="" textlink=""><nvSpPr><cNvPr id="7" name="Note box"/><cNvSpPr/></nvSpPr>'
         '<spPr/></sp><clientData/></twoCellAnchor>')
VML_CHECKBOX = (b'<xml xmlns:v="urn:schemas-microsoft-com:vml" xmlns:x="urn:schemas-microsoft-com:office:excel">'
                b'<v:shape id="_x0000_s1025" type="#_x0000_t201"><x:ClientData ObjectType="Checkbox">'
                b'<x:Anchor>1, 0, 1, 0, 3, 0, 2, 0</x:Anchor><br></x:ClientData></v:shape></xml>')
SPARKLINES = ('<extLst><ext uri="{05C60535-1F16-4fd2-B633-F4F36F0B64E0}" '
              'xmlns:x14="http://schemas.microsoft.com/office/spreadsheetml/2009/9/main">'
              '<x14:sparklineGroups/></ext></extLst>')


def chart_book(path):
    book = openpyxl.Workbook()
    sheet = book.active
    for value in range(1, 5):
        sheet.append([value, value * value])
    chart = BarChart()
    chart.add_data(Reference(sheet, min_col=2, min_row=1, max_row=4))
    sheet.add_chart(chart, "D2")
    book.save(path)
    return path


def with_vba(path):
    return inject(plain_book(path), add=[("xl/vbaProject.bin", "application/vnd.ms-office.vbaProject", b"\0" * 64)],
                  relate=[("xl/workbook.xml", "http://schemas.microsoft.com/office/2006/relationships/vbaProject",
                           "vbaProject.bin", "rId90")])


def with_slicer(path):
    xml = b'<slicers xmlns="http://schemas.microsoft.com/office/spreadsheetml/2009/9/main"/>'
    return inject(plain_book(path), add=[("xl/slicers/slicer1.xml", "application/vnd.ms-excel.slicer+xml", xml)],
                  relate=[(SHEET, "http://schemas.microsoft.com/office/2007/relationships/slicer",
                           "../slicers/slicer1.xml", "rId90")])


def with_threaded_comments(path):
    xml = b'<ThreadedComments xmlns="http://schemas.microsoft.com/office/spreadsheetml/2018/threadedcomments"/>'
    return inject(plain_book(path), add=[("xl/threadedComments/threadedComment1.xml",
                                          "application/vnd.ms-excel.threadedcomments+xml", xml)],
                  relate=[(SHEET, "http://schemas.microsoft.com/office/2017/10/relationships/threadedComment",
                           "../threadedComments/threadedComment1.xml", "rId90")])


def with_custom_xml(path):
    return inject(plain_book(path), add=[("customXml/item1.xml", None, b"<inspection><lot>7</lot></inspection>")],
                  relate=[("xl/workbook.xml", REL_NS + "/customXml", "../customXml/item1.xml", "rId90")])


def with_dynamic_array(path):
    metadata = (f'<metadata xmlns="{MAIN_NS}"><cellMetadata count="1"><bk><rc t="1" v="0"/></bk>'
                '</cellMetadata></metadata>').encode()
    cell = '<c r="C2" cm="1"><f t="array" ref="C2:C3">A2:A3*2</f><v>3</v></c>'
    return inject(plain_book(path),
                  add=[("xl/metadata.xml", "application/vnd.openxmlformats-officedocument.spreadsheetml.sheetMetadata+xml",
                        metadata)],
                  relate=[("xl/workbook.xml", REL_NS + "/sheetMetadata", "metadata.xml", "rId90")],
                  edit={SHEET: lambda xml: xml.replace(b"</row></sheetData>", cell.encode() + b"</row></sheetData>")})


def with_connections(path):
    xml = f'<connections xmlns="{MAIN_NS}"><connection id="1" name="bench" type="1" refreshedVersion="6"/></connections>'
    return inject(plain_book(path), add=[("xl/connections.xml",
                                          "application/vnd.openxmlformats-officedocument.spreadsheetml.connections+xml",
                                          xml.encode())],
                  relate=[("xl/workbook.xml", REL_NS + "/connections", "connections.xml", "rId90")])


def with_sparklines(path):
    return inject(plain_book(path), edit={SHEET: at_sheet_end(SPARKLINES)})


def with_custom_views(path):
    views = '<customSheetViews><customSheetView guid="{3F2504E0-4F89-11D3-9A0C-0305E82C3301}"/></customSheetViews>'
    return inject(plain_book(path), edit={SHEET: after_sheet_data(views)})


def with_shape(path):
    return inject(chart_book(path),
                  edit={"xl/drawings/drawing1.xml": lambda xml: xml.replace(b"</wsDr>", SHAPE.encode() + b"</wsDr>")})


def with_chart_style(path):
    style = b'<cs:chartStyle xmlns:cs="http://schemas.microsoft.com/office/drawing/2012/chartStyle" id="201"/>'
    return inject(chart_book(path), add=[("xl/charts/style1.xml", "application/vnd.ms-office.chartstyle+xml", style)],
                  relate=[("xl/charts/chart1.xml", "http://schemas.microsoft.com/office/2011/relationships/chartStyle",
                           "style1.xml", "rId90")])


def with_checkbox(path):
    return inject(plain_book(path), add=[("xl/drawings/vmlDrawing1.vml", None, VML_CHECKBOX)],
                  relate=[(SHEET, REL_NS + "/vmlDrawing", "../drawings/vmlDrawing1.vml", "rId90")],
                  edit={"[Content_Types].xml": lambda xml: xml.replace(
                      b"</Types>", b'<Default Extension="vml" ContentType="application/vnd.openxmlformats-'
                                   b'officedocument.vmlDrawing"/></Types>'),
                        SHEET: at_sheet_end(f'<legacyDrawing xmlns:r="{REL_NS}" r:id="rId90"/>')})


def with_image(path):
    png = bytes.fromhex("89504e470d0a1a0a0000000d4948445200000001000000010806000000"
                        "1f15c4890000000d49444154789c6360000002000154a24f5d0000000049454e44ae426082")
    drawing = (b'<xdr:wsDr xmlns:xdr="http://schemas.openxmlformats.org/drawingml/2006/spreadsheetDrawing" '
               b'xmlns:a="http://schemas.openxmlformats.org/drawingml/2006/main" xmlns:r="' + REL_NS.encode() + b'">'
               b'<xdr:oneCellAnchor><xdr:from><xdr:col>3</xdr:col><xdr:colOff>0</xdr:colOff><xdr:row>1</xdr:row>'
               b'<xdr:rowOff>0</xdr:rowOff></xdr:from><xdr:ext cx="9525" cy="9525"/><xdr:pic><xdr:nvPicPr>'
               b'<xdr:cNvPr id="2" name="Rig photo"/><xdr:cNvPicPr/></xdr:nvPicPr><xdr:blipFill>'
               b'<a:blip r:embed="rId1"/><a:stretch><a:fillRect/></a:stretch></xdr:blipFill><xdr:spPr>'
               b'<a:prstGeom prst="rect"><a:avLst/></a:prstGeom></xdr:spPr></xdr:pic><xdr:clientData/>'
               b'</xdr:oneCellAnchor></xdr:wsDr>')
    return inject(plain_book(path),
                  add=[("xl/drawings/drawing1.xml", "application/vnd.openxmlformats-officedocument.drawing+xml", drawing),
                       ("xl/media/image1.png", "image/png", png)],
                  relate=[(SHEET, REL_NS + "/drawing", "../drawings/drawing1.xml", "rId90"),
                          ("xl/drawings/drawing1.xml", REL_NS + "/image", "../media/image1.png", "rId1")],
                  edit={SHEET: at_sheet_end(f'<drawing xmlns:r="{REL_NS}" r:id="rId90"/>')})


def part_gone(name):
    return lambda parts: name not in parts


def text_gone(text):
    return lambda parts: not any(text.encode() in data for data in parts.values())


# case: (builder, words in the refusal, check on the parts openpyxl writes back)
LOSSY = {
    "vba": (with_vba, "VBA macros", part_gone("xl/vbaProject.bin")),
    "slicer": (with_slicer, "slicers", part_gone("xl/slicers/slicer1.xml")),
    "threaded comments": (with_threaded_comments, "threaded comments",
                          part_gone("xl/threadedComments/threadedComment1.xml")),
    "custom xml": (with_custom_xml, "custom XML data", part_gone("customXml/item1.xml")),
    "dynamic array": (with_dynamic_array, "dynamic-array", lambda parts: b'cm="1"' not in parts[SHEET]),
    "connections": (with_connections, "external data connections", part_gone("xl/connections.xml")),
    "sparklines": (with_sparklines, "sparklines", text_gone("sparklineGroups")),
    "custom views": (with_custom_views, "custom views", text_gone("customSheetView")),
    "shape": (with_shape, "drawn shapes", text_gone("Note box")),
    "chart style": (with_chart_style, "chart style presets", part_gone("xl/charts/style1.xml")),
    "checkbox": (with_checkbox, "form controls (Checkbox)", text_gone('ObjectType="Checkbox"')),
}
if not pillow_available():
    LOSSY["image"] = (with_image, "images", part_gone("xl/media/image1.png"))


def round_trip(path, tmp_path):
    """The parts openpyxl writes after loading and saving ``path``."""
    out = tmp_path / "round-trip.xlsx"
    openpyxl.load_workbook(path).save(out)
    return read_parts(out)


@pytest.mark.filterwarnings("ignore:.*extension is not supported:UserWarning")
@pytest.mark.parametrize("case", sorted(LOSSY))
def test_content_openpyxl_drops_is_refused(tmp_path, case):
    # check: the loss itself is observed on a real openpyxl round trip, not assumed
    build, words, lost = LOSSY[case]
    path = build(tmp_path / "book.xlsx")
    assert lost(round_trip(path, tmp_path)), f"openpyxl now keeps the {case}; update package.py"
    with pytest.raises(WorkbookRefused) as refusal:
        open_workbook_safely(path)
    assert words in str(refusal.value)
    assert "would lose" in str(refusal.value)
    assert open_workbook_safely(path, allow_lossy=True).sheetnames
    assert open_workbook_safely(path, read_only=True).sheetnames


@pytest.mark.skipif(not pillow_available(), reason="without Pillow openpyxl drops images (a LOSSY case)")
def test_images_are_kept_when_pillow_is_installed(tmp_path):
    path = with_image(tmp_path / "book.xlsx")
    assert inspect_package(path).losses == []
    assert any(name.startswith("xl/media/") for name in round_trip(path, tmp_path))


@pytest.mark.filterwarnings("ignore:.*extension is not supported:UserWarning")
def test_refusal_names_the_sheet(tmp_path):
    path = with_sparklines(tmp_path / "book.xlsx")
    with pytest.raises(WorkbookRefused, match="sparklines: sheet 'Log'"):
        open_workbook_safely(path)


def rich_book(path):
    """A book with what openpyxl keeps: chart, comment, table, validation, formatting, names, link."""
    chart_book(path)
    book = openpyxl.load_workbook(path)
    sheet = book.active
    sheet["A1"], sheet["B1"] = "unit", "hours"  # table headings must be text
    sheet["A1"].comment = Comment("first unit from the spare rig", "bench")
    sheet.add_table(Table(displayName="Bench", ref="A1:B4"))
    validation = DataValidation(type="decimal", operator="greaterThan", formula1="0")
    validation.add("B2:B4")
    sheet.add_data_validation(validation)
    sheet.conditional_formatting.add("B2:B4", openpyxl.formatting.rule.CellIsRule(operator="greaterThan",
                                                                                   formula=["5"]))
    book.defined_names["hours"] = openpyxl.workbook.defined_name.DefinedName("hours", attr_text="Sheet!$B$2:$B$4")
    sheet["C1"].hyperlink = "https://example.org/bench"
    book.save(path)
    return path


def test_content_openpyxl_keeps_is_not_refused(tmp_path):
    path = rich_book(tmp_path / "rich.xlsx")
    report = inspect_package(path)
    assert report.losses == []
    parts = round_trip(path, tmp_path)
    assert {"xl/charts/chart1.xml", "xl/tables/table1.xml", "xl/comments/comment1.xml"} <= set(parts)
    assert b"dataValidation" in parts[SHEET] and b"conditionalFormatting" in parts[SHEET]


def test_calculation_chain_is_minor(tmp_path):
    chain = f'<calcChain xmlns="{MAIN_NS}"><c r="A2" i="1"/></calcChain>'.encode()
    path = inject(plain_book(tmp_path / "chain.xlsx"),
                  add=[("xl/calcChain.xml", "application/vnd.openxmlformats-officedocument.spreadsheetml.calcChain+xml",
                        chain)],
                  relate=[("xl/workbook.xml", REL_NS + "/calcChain", "calcChain.xml", "rId90")])
    assert "xl/calcChain.xml" not in round_trip(path, tmp_path)  # openpyxl drops it; Excel rebuilds it
    report = inspect_package(path)
    assert report.losses == []
    assert [loss.where for loss in report.minor] == ["xl/calcChain.xml"]
    open_workbook_safely(path)


# ---------------------------------------------------------------------------
# atomic saving
# ---------------------------------------------------------------------------
def test_save_writes_new_file_and_refuses_existing(tmp_path):
    book = openpyxl.load_workbook(plain_book(tmp_path / "source.xlsx"))
    target = tmp_path / "copy.xlsx"
    result = save_workbook_atomically(book, target)
    assert result.path == target and result.backup is None
    # property: the value written (1.5, plain_book) is read back
    assert openpyxl.load_workbook(target).active["A2"].value == 1.5
    before = target.read_bytes()
    book.active["A2"] = 99
    with pytest.raises(FileExistsError):
        save_workbook_atomically(book, target)
    assert target.read_bytes() == before
    assert sorted(path.name for path in tmp_path.iterdir()) == ["copy.xlsx", "source.xlsx"]


def test_in_place_save_keeps_a_backup(tmp_path):
    source = plain_book(tmp_path / "log.xlsx")
    original = source.read_bytes()
    book = openpyxl.load_workbook(source)
    book.active["A2"] = 7
    first = save_workbook_atomically(book, source, in_place=True)
    second = save_workbook_atomically(book, source, in_place=True)
    assert first.backup.name == "log.backup.xlsx" and first.backup.read_bytes() == original
    assert second.backup.name == "log.backup-2.xlsx"
    assert openpyxl.load_workbook(source).active["A2"].value == 7


def test_in_place_save_without_backup(tmp_path):
    source = plain_book(tmp_path / "log.xlsx")
    result = save_workbook_atomically(openpyxl.load_workbook(source), source, in_place=True, backup=False)
    assert result.backup is None
    assert [path.name for path in tmp_path.iterdir()] == ["log.xlsx"]


def test_failed_write_leaves_nothing(tmp_path):
    source = plain_book(tmp_path / "log.xlsx")
    original = source.read_bytes()

    def broken(handle):
        handle.write(b"PK partial")
        raise OSError("disk full")

    with pytest.raises(OSError, match="disk full"):
        write_file_atomically(source, broken, in_place=True)
    assert source.read_bytes() == original
    assert [path.name for path in tmp_path.iterdir()] == ["log.xlsx"]


def test_saved_file_gets_ordinary_permissions(tmp_path):
    source = plain_book(tmp_path / "log.xlsx")
    source.chmod(0o640)
    save_workbook_atomically(openpyxl.load_workbook(source), source, in_place=True)
    assert source.stat().st_mode & 0o777 == 0o640


def test_workbook_suffix_is_required(tmp_path):
    with pytest.raises(ValueError, match="must end in"):
        save_workbook_atomically(openpyxl.Workbook(), tmp_path / "log.csv")


SLOW_SAVE = textwrap.dedent("""
    import sys
    import openpyxl
    from tailstop.workbooks.safe_io import save_workbook_atomically
    book = openpyxl.Workbook()
    sheet = book.active
    for row in range(1, 300_001):
        sheet.append([row, row * 0.5, "unit", row % 7])
    print("saving", flush=True)
    save_workbook_atomically(book, sys.argv[1], in_place=True)
    print("saved", flush=True)
""")


def test_killed_save_leaves_the_original_intact(tmp_path):
    target = plain_book(tmp_path / "log.xlsx")
    original = target.read_bytes()
    child = subprocess.Popen([sys.executable, "-c", SLOW_SAVE, str(target)], stdout=subprocess.PIPE, text=True)
    try:
        assert child.stdout.readline().strip() == "saving"
        partial = wait_for_partial_file(tmp_path, child)
        child.send_signal(signal.SIGKILL)
        child.wait(timeout=30)
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
    assert partial.stat().st_size > 0, "the child was killed before it wrote anything"
    assert target.read_bytes() == original
    assert not (tmp_path / "log.backup.xlsx").exists()
    # property: the value written (1.5, plain_book) is read back
    assert openpyxl.load_workbook(target).active["A2"].value == 1.5


def wait_for_partial_file(folder, child, deadline=120.0):
    """Return the temporary file once the child has written into it (a hang guard, not a timing)."""
    stop = time.monotonic() + deadline
    while time.monotonic() < stop:
        assert child.poll() is None, "the save finished before it could be interrupted"
        partials = [path for path in folder.glob(".log.*.partial") if path.stat().st_size > 0]
        if partials:
            return partials[0]
        time.sleep(0.01)
    raise AssertionError("no temporary file appeared")


# ---------------------------------------------------------------------------
# columns
# ---------------------------------------------------------------------------
@pytest.fixture
def headed_book(tmp_path):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(["Unit", " Hours to failure ", "AB", "Rig"])
    rows = [[1, 410.5, "x", "north"], [2, None, "y", "north"], [3, 388.0, "z", None]]
    for row in rows:
        sheet.append(row)
    path = tmp_path / "headed.xlsx"
    book.save(path)
    return path, rows


@pytest.mark.parametrize("read_only", [False, True])
def test_resolve_column(headed_book, read_only):
    sheet = open_workbook_safely(headed_book[0], read_only=read_only).active
    assert resolve_column(sheet, "hours to failure") == 2
    assert resolve_column(sheet, "b") == 2
    assert resolve_column(sheet, 4) == 4
    assert resolve_column(sheet, "Z") == 26
    with pytest.raises(ValueError, match="also the letter"):
        resolve_column(sheet, "AB")  # header of column C and letter of column 28
    with pytest.raises(ValueError, match="no column 'weight'"):
        resolve_column(sheet, "weight")
    with pytest.raises(ValueError, match="1 to 16384"):
        resolve_column(sheet, 0)


def test_duplicate_header_is_ambiguous(tmp_path):
    book = openpyxl.Workbook()
    book.active.append(["hours", "rig", "Hours"])
    with pytest.raises(ValueError, match="columns A, C"):
        resolve_column(book.active, "HOURS")


@pytest.mark.parametrize("read_only", [False, True])
def test_iter_column_values(headed_book, read_only):
    path, rows = headed_book
    sheet = open_workbook_safely(path, read_only=read_only).active
    assert list(iter_column_values(sheet, 2)) == [row[1] for row in rows]
    assert list(iter_column_values(sheet, 4, first_row=3)) == [row[3] for row in rows[1:]]
    assert list(iter_column_values(sheet, 1, first_row=1, last_row=2)) == ["Unit", 1]
