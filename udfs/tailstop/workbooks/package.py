"""Look inside an .xlsx package before openpyxl does.

An .xlsx file is a zip of XML parts. ``inspect_package`` reads every part
once, as a stream, and refuses what could hurt a headless tool or lose a
user's work:

* a file that is not an .xlsx package at all (text, legacy .xls, .xlsb,
  OpenDocument) or a truncated one;
* a zip bomb: too many parts, too many bytes once inflated, or a part that
  inflates more than ``Limits.max_ratio`` times;
* XML with a document type declaration or entity declarations (the
  "billion laughs" entity-expansion attack), refused by defusedxml;
* a sheet whose extent (declared ``<dimension>``, ``<col>`` spans or cell
  references) leaves the spreadsheet grid or exceeds ``Limits.max_sheet_area``,
  which would make a reader iterate or allocate billions of cells.

It also lists what openpyxl would silently drop on save (macros, slicers,
drawn shapes, …) so the caller can refuse to rewrite the book.
"""
from __future__ import annotations

import posixpath
import re
import zipfile
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from xml.sax import SAXParseException
from xml.sax.handler import ContentHandler

import defusedxml
import defusedxml.sax

__all__ = ["WorkbookRefused", "Limits", "Loss", "PackageReport", "inspect_package", "pillow_available"]


class WorkbookRefused(ValueError):
    """A workbook was not opened because it is damaged, hostile or would lose content."""


@dataclass(frozen=True)
class Limits:
    """Bounds on what a workbook may contain before it is opened.

    Parameters
    ----------
    max_parts : int
        Most zip members allowed.
    max_part_bytes : int
        Most bytes one member may inflate to.
    max_total_bytes : int
        Most bytes all members together may inflate to.
    max_ratio : float
        Highest inflate ratio (inflated / compressed size) for a member larger
        than ``ratio_floor_bytes``. Spreadsheet XML compresses 5-20 times;
        deflate bombs reach about 1000.
    ratio_floor_bytes : int
        Members smaller than this are not ratio-checked (they cannot be bombs).
    max_cells : int
        Most cell elements in all sheets together (openpyxl keeps each in memory).
    max_sheet_area : int
        Most cells in the rectangle a sheet spans (rows × columns), declared or used.
    """

    max_parts: int = 10_000
    max_part_bytes: int = 256 * 2**20
    max_total_bytes: int = 512 * 2**20
    max_ratio: float = 200.0
    ratio_floor_bytes: int = 2**20
    max_cells: int = 5_000_000
    max_sheet_area: int = 50_000_000


@dataclass(frozen=True)
class Loss:
    """One kind of content openpyxl would not write back, and where it is."""

    what: str
    where: str

    def __str__(self):
        return f"{self.what} ({self.where})"


@dataclass
class PackageReport:
    """What ``inspect_package`` found.

    Attributes
    ----------
    content_types : dict
        Part name -> content type, for every member of the zip.
    sheet_names : dict
        Worksheet or chartsheet part name -> sheet title.
    losses : list of Loss
        Content a user would miss if openpyxl rewrote the book.
    minor : list of Loss
        Content openpyxl drops that Excel rebuilds or that changes nothing
        a reader sees (calculation chain, printer driver settings, ...).
    """

    content_types: dict = field(default_factory=dict)
    sheet_names: dict = field(default_factory=dict)
    losses: list = field(default_factory=list)
    minor: list = field(default_factory=list)


# ---------------------------------------------------------------------------
# What openpyxl 3.1 keeps, drops harmlessly, and loses. Every entry here is
# checked against a real openpyxl round trip in tests/test_safe_io.py.
# ---------------------------------------------------------------------------
_SML = "application/vnd.openxmlformats-officedocument.spreadsheetml."
_OFFICE = "application/vnd.openxmlformats-officedocument."
WORKBOOK_TYPES = frozenset({
    _SML + "sheet.main+xml",
    _SML + "template.main+xml",
    "application/vnd.ms-excel.sheet.macroEnabled.main+xml",
    "application/vnd.ms-excel.template.macroEnabled.main+xml",
})
KEPT_TYPES = WORKBOOK_TYPES | {
    _SML + "worksheet+xml",
    _SML + "chartsheet+xml",
    _SML + "sharedStrings+xml",
    _SML + "styles+xml",
    _SML + "comments+xml",
    _SML + "table+xml",
    _SML + "pivotTable+xml",
    _SML + "pivotCacheDefinition+xml",
    _SML + "pivotCacheRecords+xml",
    _SML + "externalLink+xml",
    _OFFICE + "theme+xml",
    _OFFICE + "drawing+xml",
    _OFFICE + "drawingml.chart+xml",
    _OFFICE + "extended-properties+xml",
    _OFFICE + "custom-properties+xml",
    "application/vnd.openxmlformats-package.core-properties+xml",
    "application/vnd.openxmlformats-package.relationships+xml",
    # legacy VML: openpyxl regenerates it from the comments; see _scan_vml
    _OFFICE + "vmlDrawing",
}
MINOR_TYPES = {
    _SML + "calcChain+xml": "calculation chain (Excel rebuilds it)",
    _SML + "printerSettings": "printer driver settings (page setup itself is kept)",
    _SML + "volatileDependencies+xml": "volatile-function cache (Excel rebuilds it)",
}
LOST_TYPES = {
    "application/vnd.ms-office.vbaProject": "VBA macros",
    "application/vnd.ms-office.vbaProjectSignature": "VBA macro signature",
    "application/vnd.ms-excel.attachedToolbars": "custom toolbars",
    "application/vnd.ms-excel.slicer+xml": "slicers",
    "application/vnd.ms-excel.slicerCache+xml": "slicers",
    "application/vnd.ms-excel.timeline+xml": "timelines",
    "application/vnd.ms-excel.timelineCache+xml": "timelines",
    "application/vnd.ms-excel.threadedcomments+xml": "threaded comments (replies)",
    "application/vnd.ms-excel.person+xml": "threaded-comment authors",
    "application/vnd.ms-excel.controlproperties+xml": "form controls",
    "application/vnd.ms-office.activeX+xml": "ActiveX controls",
    "application/vnd.ms-office.activeX": "ActiveX controls",
    "application/vnd.ms-office.chartstyle+xml": "chart style presets",
    "application/vnd.ms-office.chartcolorstyle+xml": "chart colour presets",
    "application/vnd.ms-office.webextension+xml": "Office add-in (web extension) parts",
    "application/vnd.ms-office.webextensiontaskpanes+xml": "Office add-in (web extension) parts",
    "application/vnd.ms-excel.macrosheet+xml": "Excel 4.0 macro sheets",
    "application/vnd.ms-excel.intlmacrosheet+xml": "Excel 4.0 macro sheets",
    _SML + "dialogsheet+xml": "dialog sheets",
    _SML + "sheetMetadata+xml": "dynamic-array and rich-value metadata",
    _SML + "connections+xml": "external data connections",
    _SML + "queryTable+xml": "query tables",
    _SML + "revisionHeaders+xml": "shared-workbook change history",
    _SML + "revisionLog+xml": "shared-workbook change history",
    _SML + "userNames+xml": "shared-workbook change history",
    _SML + "customProperty": "sheet custom properties",
    _OFFICE + "oleObject": "embedded objects",
    _OFFICE + "drawingml.chartshapes+xml": "shapes drawn inside charts",
    _OFFICE + "model+data": "data model (Power Pivot)",
    _OFFICE + "customXmlProperties+xml": "custom XML data",
}
RICH_VALUE_LABEL = "pictures in cells and linked data types"
IMAGE_EXTENSIONS = frozenset({"png", "jpg", "jpeg", "gif", "bmp", "tif", "tiff"})

# top-level children of <worksheet> that openpyxl's reader binds (worksheet/_reader.py)
KEPT_SHEET_ELEMENTS = frozenset({
    "sheetPr", "dimension", "sheetViews", "sheetFormatPr", "cols", "sheetData",
    "sheetProtection", "scenarios", "autoFilter", "mergeCells", "conditionalFormatting",
    "dataValidations", "hyperlinks", "printOptions", "pageMargins", "pageSetup",
    "headerFooter", "rowBreaks", "colBreaks", "drawing", "legacyDrawing", "tableParts",
    "extLst",  # judged by the extensions inside, see SHEET_EXTENSIONS
})
MINOR_SHEET_ELEMENTS = {
    "sheetCalcPr": "sheet calculation flag",
    "phoneticPr": "phonetic guide settings",
    "ignoredErrors": "dismissed error-check markers",
    "sortState": "remembered sort order",
    "cellWatches": "watch-window entries",
    "webPublishItems": "publish-to-web settings",
    "smartTags": "smart tags",
}
LOST_SHEET_ELEMENTS = {
    "protectedRanges": "protected ranges",
    "dataConsolidate": "data consolidation setup",
    "customSheetViews": "custom views",
    "customProperties": "sheet custom properties",
    "oleObjects": "embedded objects",
    "controls": "form and ActiveX controls",
    "picture": "sheet background picture",
    "legacyDrawingHF": "header and footer pictures",
}
# worksheet <extLst><ext uri=...>: openpyxl warns and drops every one of them
SHEET_EXTENSIONS = {
    "{78C0D931-6437-407D-A8EE-F0AAD7539E65}": "extended conditional formatting (data bar and icon set details)",
    "{CCE6A557-97BC-4B89-ADB6-D9C93CAAB3DF}": "data validations referring to other sheets",
    "{05C60535-1F16-4FD2-B633-F4F36F0B64E0}": "sparklines",
    "{A8765BA9-456A-4DAB-B4F3-ACF838C121DE}": "slicers",
    "{3A4CF648-6AED-40F4-86FF-DC5316D8AED3}": "slicers",
    "{FC87AEE6-9EDD-4A0A-B7FB-166176984837}": "protected ranges",
    "{F7C9EE02-42E1-4005-9D12-6889AFFD525C}": "Office add-in bindings",
    "{7E03D99C-DC04-49D9-9315-930204A7B6E9}": "timelines",
}
MINOR_SHEET_EXTENSIONS = {"{01252117-D84E-4E92-8308-4BE1C098FCBB}": "dismissed error-check markers"}
DRAWING_SHAPES = frozenset({"sp", "grpSp", "cxnSp", "contentPart"})

GRID_ROWS = 1_048_576
GRID_COLUMNS = 16_384
_CHUNK = 2**20
_CELL_REF = re.compile(r"\$?([A-Za-z]{1,7})\$?([0-9]{1,9})")


def pillow_available():
    """Whether openpyxl can keep images (it reads them only through Pillow)."""
    try:
        import PIL  # noqa: F401
    except ImportError:
        return False
    return True


# ---------------------------------------------------------------------------
# entry point
# ---------------------------------------------------------------------------
def inspect_package(path, limits=Limits()):
    """Check an .xlsx package part by part without building it in memory.

    Parameters
    ----------
    path : str or os.PathLike
        The workbook file.
    limits : Limits
        Size, ratio and extent bounds.

    Returns
    -------
    PackageReport
        Content types, sheet names, and what openpyxl would drop on save.

    Raises
    ------
    WorkbookRefused
        The file is not an .xlsx package, is damaged, exceeds a limit or
        carries XML entity declarations. The message says which and where.
    """
    path = Path(path)
    _check_signature(path)
    with _open_zip(path) as archive:
        members = [info for info in archive.infolist() if not info.is_dir()]
        _check_directory(path, members, limits)
        scanner = _PackageScanner(path, archive, limits)
        return scanner.run(members)


# ---------------------------------------------------------------------------
# file signature and zip directory
# ---------------------------------------------------------------------------
def _check_signature(path):
    if not path.is_file():
        raise WorkbookRefused(f"{path}: no such file")
    problem = _name_problem(path)
    if problem:
        raise WorkbookRefused(f"{path.name}: {problem}")
    with path.open("rb") as handle:
        head = handle.read(512)
    if not head:
        raise WorkbookRefused(f"{path.name}: the file is empty")
    if head.startswith(b"PK\x03\x04") or head.startswith(b"PK\x05\x06"):
        return
    if head.startswith(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"):
        raise WorkbookRefused(
            f"{path.name}: this is a legacy .xls workbook or a password-protected one, "
            "not an .xlsx package; open it in a spreadsheet program and save it as .xlsx "
            "without a password")
    raise WorkbookRefused(f"{path.name}: not an .xlsx workbook ({_describe_bytes(head)})")


# what openpyxl opens; every other name is a file of another kind, whatever its bytes
READABLE_SUFFIXES = (".xlsx", ".xlsm", ".xltx", ".xltm")
_TEXT_SUFFIXES = (".csv", ".tsv", ".txt", ".prn")
_SAVE_AS = "open it in a spreadsheet program and save it as an .xlsx workbook first"


def _name_problem(path):
    """Why a file of this name is not read (its kind told by the name), or None."""
    suffix = path.suffix.lower()
    if suffix in READABLE_SUFFIXES:
        return None
    if suffix in _TEXT_SUFFIXES:
        return f"a {suffix[1:].upper()} text file; tailstop reads .xlsx workbooks: {_SAVE_AS}"
    if suffix == ".xls":
        return f"an .xls workbook (the format before 2007); tailstop reads .xlsx workbooks: {_SAVE_AS}"
    if suffix:
        return f"a {suffix} file; tailstop reads .xlsx workbooks: {_SAVE_AS}"
    return f"a file without a name ending; tailstop reads .xlsx workbooks: {_SAVE_AS}, named NAME.xlsx"


def _describe_bytes(head):
    text = head.decode("utf-8", errors="replace")
    if text.count("\ufffd") > 4:  # a few allow for a character cut at the 512-byte mark
        return "its first bytes are neither a zip package nor text"
    if text.lstrip().startswith("<"):
        return "it is an XML or HTML text file with an .xlsx name"
    if "," in text or ";" in text or "\t" in text:
        return "it is a text file, probably CSV, with an .xlsx name; import it and save as .xlsx"
    return "it is a plain text file with an .xlsx name"


def _open_zip(path):
    try:
        return zipfile.ZipFile(path)
    except zipfile.BadZipFile:
        raise WorkbookRefused(
            f"{path.name}: the zip package is truncated or damaged (its directory is missing); "
            "was the copy or download interrupted?") from None
    except (OSError, ValueError) as error:
        raise WorkbookRefused(f"{path.name}: cannot read the zip package ({error})") from None


def _check_directory(path, members, limits):
    if len(members) > limits.max_parts:
        raise WorkbookRefused(f"{path.name}: {len(members)} parts, more than the limit of {limits.max_parts}")
    names = [info.filename for info in members]
    if len(set(names)) != len(names):
        raise WorkbookRefused(f"{path.name}: the zip package lists a part twice (damaged or tampered)")
    total = 0
    for info in members:
        _check_member_size(path, info, limits)
        total += info.file_size
    if total > limits.max_total_bytes:
        raise WorkbookRefused(
            f"{path.name}: the parts inflate to {total:,} bytes, more than the limit of "
            f"{limits.max_total_bytes:,} (zip bomb?)")


def _check_member_size(path, info, limits):
    if info.flag_bits & 0x1:
        raise WorkbookRefused(f"{path.name}: part {info.filename} is encrypted")
    if info.file_size > limits.max_part_bytes:
        raise WorkbookRefused(
            f"{path.name}: part {info.filename} inflates to {info.file_size:,} bytes, more than the "
            f"limit of {limits.max_part_bytes:,} (zip bomb?)")
    ratio = info.file_size / max(info.compress_size, 1)
    if info.file_size > limits.ratio_floor_bytes and ratio > limits.max_ratio:
        raise WorkbookRefused(
            f"{path.name}: part {info.filename} inflates {ratio:,.0f} times, more than the limit of "
            f"{limits.max_ratio:g} (zip bomb?)")


# ---------------------------------------------------------------------------
# streaming every part
# ---------------------------------------------------------------------------
class _PackageScanner:
    """Streams each part once: counts inflated bytes, parses XML defused, collects findings."""

    def __init__(self, path, archive, limits):
        self.path = path
        self.archive = archive
        self.limits = limits
        self.report = PackageReport()
        self.cells = 0
        self.relationships = {}   # part name -> {rel id: target part}
        self.workbook_sheets = []  # (title, rel id)
        self.sheet_scans = {}      # part name -> _WorksheetHandler

    def run(self, members):
        by_name = {info.filename: info for info in members}
        content_types = self._read_content_types(by_name)
        for info in members:
            self.report.content_types[info.filename] = _content_type(info.filename, content_types)
        self._require_workbook()
        for info in members:
            self._scan_member(info)
        self._name_sheets()
        self._collect_sheet_findings()
        return self.report

    def _read_content_types(self, by_name):
        info = by_name.get("[Content_Types].xml")
        if info is None:
            raise WorkbookRefused(f"{self.path.name}: a zip file but not an .xlsx package "
                                  "(no [Content_Types].xml part)")
        handler = _ContentTypesHandler()
        self._parse(info, handler)
        return handler

    def _require_workbook(self):
        found = [name for name, kind in self.report.content_types.items() if kind in WORKBOOK_TYPES]
        if found:
            return
        names = set(self.report.content_types)
        if "xl/workbook.bin" in names:
            raise WorkbookRefused(f"{self.path.name}: a binary .xlsb workbook; save it as .xlsx")
        if "mimetype" in names or "content.xml" in names:
            raise WorkbookRefused(f"{self.path.name}: an OpenDocument spreadsheet; save it as .xlsx")
        raise WorkbookRefused(f"{self.path.name}: a zip package without a spreadsheet workbook part")

    def _scan_member(self, info):
        name = info.filename
        if name == "[Content_Types].xml":
            return
        kind = self.report.content_types[name]
        self._classify(name, kind)
        if kind == _OFFICE + "vmlDrawing" or name.lower().endswith(".vml"):
            self._scan_vml(info)
        elif _is_xml(name, kind):
            self._parse(info, self._handler_for(name, kind))
        else:
            self._stream(info, lambda chunk: None)

    def _handler_for(self, name, kind):
        if kind == _SML + "worksheet+xml":
            handler = _WorksheetHandler(self, name)
            self.sheet_scans[name] = handler
            return handler
        if name.endswith(".rels"):
            return _RelationshipsHandler(self, name)
        if kind in WORKBOOK_TYPES:
            return _WorkbookHandler(self)
        if kind == _OFFICE + "drawing+xml":
            return _DrawingHandler(self, name)
        if kind == _OFFICE + "drawingml.chart+xml":
            return _ChartHandler(self, name)
        return ContentHandler()

    def _classify(self, name, kind):
        if kind is None:
            self.minor(f"file not declared in the package ({name})", name)
        elif name.startswith("customXml/"):
            self.loss("custom XML data", name)
        elif kind in KEPT_TYPES:
            return
        elif kind.startswith("image/"):
            self._classify_image(name)
        elif kind in MINOR_TYPES:
            self.minor(MINOR_TYPES[kind], name)
        elif kind in LOST_TYPES:
            self.loss(LOST_TYPES[kind], name)
        elif "richvalue" in kind.lower() or kind.startswith("application/vnd.ms-excel.rd"):
            self.loss(RICH_VALUE_LABEL, name)
        else:
            self.loss(f"content openpyxl does not support ({kind})", name)

    def _classify_image(self, name):
        if name.startswith("docProps/"):
            self.minor("file preview thumbnail", name)
        elif not pillow_available():
            self.loss("images (openpyxl keeps images only when Pillow is installed)", name)
        elif name.rsplit(".", 1)[-1].lower() not in IMAGE_EXTENSIONS:
            self.loss("images in a format openpyxl cannot re-save", name)

    def loss(self, what, where):
        self.report.losses.append(Loss(what, where))

    def minor(self, what, where):
        self.report.minor.append(Loss(what, where))

    def count_cell(self, where):
        self.cells += 1
        if self.cells > self.limits.max_cells:
            raise WorkbookRefused(
                f"{self.path.name}: more than {self.limits.max_cells:,} cells ({where}); "
                "split the log or raise the limit")

    # -- streaming -----------------------------------------------------------
    def _stream(self, info, consume):
        """Feed a part to ``consume`` in chunks.

        zipfile stops inflating at the declared size and then checks the CRC,
        so a part whose headers understate its size ends in a CRC error here.
        """
        try:
            with self.archive.open(info) as stream:
                while chunk := stream.read(_CHUNK):
                    consume(chunk)
        except (zipfile.BadZipFile, zlib.error, EOFError, NotImplementedError, RuntimeError) as error:
            raise WorkbookRefused(
                f"{self.path.name}: part {info.filename} is damaged or truncated ({error})") from None

    def _parse(self, info, handler):
        parser = defusedxml.sax.make_parser()
        parser.forbid_dtd = True
        parser.setContentHandler(handler)
        try:
            self._stream(info, parser.feed)
            parser.close()
        except defusedxml.DefusedXmlException as error:
            raise WorkbookRefused(
                f"{self.path.name}: part {info.filename} declares a DTD or XML entities "
                f"({type(error).__name__}); refused as an entity-expansion attack") from None
        except SAXParseException as error:
            raise WorkbookRefused(
                f"{self.path.name}: part {info.filename} is not well-formed XML ({error.getMessage()} "
                f"at line {error.getLineNumber()})") from None

    def _scan_vml(self, info):
        """Legacy VML is often not well-formed XML: scan its text for controls and entities."""
        tail = b""
        kinds = set()

        def consume(chunk):
            nonlocal tail
            text = tail + chunk
            if b"<!ENTITY" in text or b"<!DOCTYPE" in text:
                raise WorkbookRefused(f"{self.path.name}: part {info.filename} declares XML entities; "
                                      "refused as an entity-expansion attack")
            kinds.update(re.findall(rb'ObjectType="(\w+)"', text))
            tail = text[-64:]

        self._stream(info, consume)
        controls = sorted(kind.decode() for kind in kinds if kind != b"Note")
        if controls:
            self.loss(f"form controls ({', '.join(controls)})", info.filename)
        if b"Note" in kinds:
            self.minor("comment box sizes, positions and formatting (comment texts are kept)",
                       info.filename)

    # -- cross-part findings -------------------------------------------------
    def _name_sheets(self):
        workbook = next(name for name, kind in self.report.content_types.items() if kind in WORKBOOK_TYPES)
        targets = self.relationships.get(workbook, {})
        for title, rel_id in self.workbook_sheets:
            if rel_id in targets:
                self.report.sheet_names[targets[rel_id]] = title

    def _collect_sheet_findings(self):
        for name, scan in self.sheet_scans.items():
            place = f"sheet '{self.report.sheet_names.get(name, name)}'"
            for what in scan.losses:
                self.loss(what, place)
            for what in scan.minor:
                self.minor(what, place)


def _content_type(name, content_types):
    return content_types.overrides.get("/" + name.lstrip("/"),
                                       content_types.defaults.get(name.rsplit(".", 1)[-1].lower()))


def _is_xml(name, kind):
    return name.endswith((".xml", ".rels")) or (kind or "").endswith("xml")


def _local(qualified):
    """Element name without its namespace prefix (parts use prefixes freely)."""
    return qualified.rpartition(":")[2]


def column_number(letters):
    """1-based column number of column letters ('A' -> 1, 'XFD' -> 16384)."""
    number = 0
    for letter in letters.upper():
        number = number * 26 + ord(letter) - 64
    return number


# ---------------------------------------------------------------------------
# SAX handlers, one per kind of part
# ---------------------------------------------------------------------------
class _ContentTypesHandler(ContentHandler):
    def __init__(self):
        super().__init__()
        self.defaults = {}
        self.overrides = {}

    def startElement(self, name, attributes):
        kind = attributes.get("ContentType")
        if _local(name) == "Default":
            self.defaults[(attributes.get("Extension") or "").lower()] = kind
        elif _local(name) == "Override":
            self.overrides[attributes.get("PartName")] = kind


class _RelationshipsHandler(ContentHandler):
    """Records rel id -> target part for the part these relationships belong to."""

    def __init__(self, scanner, rels_name):
        super().__init__()
        folder, rels_file = posixpath.split(rels_name)
        self.source = posixpath.join(posixpath.dirname(folder), rels_file[: -len(".rels")])
        self.base = posixpath.dirname(self.source)
        self.targets = scanner.relationships.setdefault(self.source, {})

    def startElement(self, name, attributes):
        if _local(name) != "Relationship" or attributes.get("TargetMode") == "External":
            return
        target = attributes.get("Target") or ""
        if target.startswith("/"):
            part = target.lstrip("/")
        else:
            part = posixpath.normpath(posixpath.join(self.base, target))
        self.targets[attributes.get("Id")] = part


class _WorkbookHandler(ContentHandler):
    def __init__(self, scanner):
        super().__init__()
        self.scanner = scanner

    def startElement(self, name, attributes):
        if _local(name) == "sheet":
            rel_id = next((value for key, value in attributes.items() if _local(key) == "id"), None)
            self.scanner.workbook_sheets.append((attributes.get("name"), rel_id))


class _WorksheetHandler(ContentHandler):
    """Tracks the sheet's extent, top-level elements, extensions and cell metadata."""

    def __init__(self, scanner, part):
        super().__init__()
        self.scanner = scanner
        self.part = part
        self.depth = 0
        self.max_row = 0
        self.max_column = 0
        self.columns = {}  # column letters -> number, for the few distinct columns of a sheet
        self.losses = set()
        self.minor = set()
        self.in_extensions = False

    def startElement(self, name, attributes):
        self.depth += 1
        local = _local(name)
        if local == "c":
            self._cell(attributes)
        elif local == "row":
            self._check_grid(int(attributes.get("r") or 1), 1)
        elif self.depth == 2:
            self._top_level(local, attributes)
        elif local == "col":
            self._check_grid(1, int(attributes.get("max") or attributes.get("min") or 1))
        elif self.in_extensions and self.depth == 3 and local == "ext":
            self._extension((attributes.get("uri") or "").upper())

    def endElement(self, name):
        if self.depth == 2:
            self.in_extensions = False
        self.depth -= 1

    def _top_level(self, local, attributes):
        if local == "dimension":
            self._dimension(attributes.get("ref") or "A1")
        elif local == "extLst":
            self.in_extensions = True
        elif local in MINOR_SHEET_ELEMENTS:
            self.minor.add(MINOR_SHEET_ELEMENTS[local])
        elif local in LOST_SHEET_ELEMENTS:
            self.losses.add(LOST_SHEET_ELEMENTS[local])
        elif local not in KEPT_SHEET_ELEMENTS:
            self.losses.add(f"sheet element <{local}> that openpyxl does not read")

    def _extension(self, uri):
        if uri in MINOR_SHEET_EXTENSIONS:
            self.minor.add(MINOR_SHEET_EXTENSIONS[uri])
        else:
            self.losses.add(SHEET_EXTENSIONS.get(uri, f"worksheet extension data {uri}"))

    def _cell(self, attributes):
        self.scanner.count_cell(self.part)
        reference = attributes.get("r")
        if reference:
            row, column = self._reference(reference)
            if row > self.max_row or column > self.max_column:  # inside the rectangle: checked already
                self._extend(row, column)
        if attributes.get("cm"):
            self.losses.add("dynamic-array formulas (they would become fixed-size array formulas)")
        if attributes.get("vm"):
            self.losses.add(RICH_VALUE_LABEL)

    def _dimension(self, ref):
        corners = [self._reference(corner) for corner in ref.split(":")]
        self._extend(max(row for row, _ in corners), max(column for _, column in corners))

    def _reference(self, reference):
        match = _CELL_REF.fullmatch(reference)
        if not match:
            raise WorkbookRefused(f"{self.scanner.path.name}: {self.part} has an invalid cell reference "
                                  f"{reference[:20]!r}")
        letters = match.group(1)
        column = self.columns.get(letters)
        if column is None:
            column = self.columns[letters] = column_number(letters)
        return int(match.group(2)), column

    def _check_grid(self, row, column):
        if row > GRID_ROWS or column > GRID_COLUMNS:
            raise WorkbookRefused(
                f"{self.scanner.path.name}: {self.part} reaches row {row:,}, column {column:,}, beyond "
                f"the spreadsheet grid of {GRID_ROWS:,} rows × {GRID_COLUMNS:,} columns")

    def _extend(self, row, column):
        """Grow the used rectangle (cells and declared dimension; row and column formats do not count)."""
        self._check_grid(row, column)
        self.max_row = max(self.max_row, row)
        self.max_column = max(self.max_column, column)
        area = self.max_row * self.max_column
        if area > self.scanner.limits.max_sheet_area:
            raise WorkbookRefused(
                f"{self.scanner.path.name}: {self.part} spans {self.max_row:,} rows × {self.max_column:,} "
                f"columns ({area:,} cells), more than the limit of {self.scanner.limits.max_sheet_area:,}; "
                "delete stray cells or formatting far from the data")


class _DrawingHandler(ContentHandler):
    """Counts drawn objects by kind: openpyxl keeps charts and (with Pillow) pictures only."""

    def __init__(self, scanner, part):
        super().__init__()
        self.scanner = scanner
        self.part = part
        self.depth = 0
        self.shapes = 0
        self.alternate = 0

    def startElement(self, name, attributes):
        self.depth += 1
        local = _local(name)
        if self.depth in (2, 3) and local == "AlternateContent":
            self.alternate += 1
        elif self.depth == 3 and local in DRAWING_SHAPES:
            self.shapes += 1

    def endElement(self, name):
        self.depth -= 1

    def endDocument(self):
        if self.shapes:
            self.scanner.loss(f"drawn shapes, text boxes or connectors ({self.shapes})", self.part)
        if self.alternate:
            self.scanner.loss(f"drawing objects in Office-extension markup such as slicer or "
                              f"control placeholders ({self.alternate})", self.part)


class _ChartHandler(ContentHandler):
    """openpyxl rebuilds charts from its own model and drops their extension data."""

    def __init__(self, scanner, part):
        super().__init__()
        self.scanner = scanner
        self.part = part
        self.extensions = 0

    def startElement(self, name, attributes):
        if _local(name) in ("extLst", "AlternateContent"):
            self.extensions += 1

    def endDocument(self):
        if self.extensions:
            self.scanner.loss("newer chart formatting stored as chart extension data", self.part)
