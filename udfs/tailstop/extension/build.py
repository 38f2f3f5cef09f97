"""Build ``tailstop.oxt``, the LibreOffice extension, from the formula specs.

Everything LibreOffice needs is derived from ``tailstop.sheet.FORMULAS``: the
type library declares one method per formula (see ``method_signature``),
``formulas.json`` carries every name, summary and argument help text, the
component (``calc_component.py``) serves them to the Function Wizard, and the
formulas run from a copy of the package in ``pythonpath/``. A new formula
therefore needs no work here. No ``CalcAddIns.xcu`` is written: Calc reads an
add-in's texts from the add-in object itself and skips configuration entries
for functions it already knows that way.
"""
from __future__ import annotations

import inspect
import io
import json
import zipfile
from pathlib import Path
from xml.sax.saxutils import quoteattr

from .. import __version__
from ..sheet import FORMULAS
from ..sheet.formula import CATEGORY
from . import typelib

__all__ = ["EXTENSION_NAME", "catalogue", "build_extension", "extension_files", "method_signature"]

EXTENSION_NAME = "tailstop.oxt"
EXTENSION_ID = "tailstop.calc"
COMPONENT_FILE = "tailstop_calc.py"
TYPE_LIBRARY = "tailstop.rdb"
INTERFACE = "tailstop.XFormulas"
IMPLEMENTATION = "tailstop.calc.Formulas"
# Calc stores a formula as SERVICE.FUNCTION in .xlsx, upper-cased: TAILSTOP.TAIL_PROB
SERVICE = "tailstop"
ADDIN_SERVICE = "com.sun.star.sheet.AddIn"
GRID_RESULTS = ("row", "column", "table")
# The layers a formula needs at run time (the workbook tools and the command line stay out).
BUNDLED = ("__init__.py", "core", "sheet")

_PACKAGE = Path(__file__).resolve().parent.parent
_HERE = Path(__file__).resolve().parent


def _optional(function):
    signature = inspect.signature(function.tailstop_body)
    return [name for name, parameter in signature.parameters.items() if parameter.default is not inspect.Parameter.empty]


def catalogue() -> dict:
    """What the component needs to know of every formula, from the specs (written as formulas.json)."""
    entries = []
    for function in FORMULAS.values():
        spec = function.tailstop_spec
        entries.append({
            "name": spec.name,
            "summary": spec.summary,
            "arguments": list(spec.argument_help),
            "help": dict(spec.argument_help),
            "ranges": list(spec.ranges),
            "optional": _optional(function),
            "returns": spec.returns,
        })
    return {"category": CATEGORY, "version": __version__, "interface": INTERFACE, "implementation": IMPLEMENTATION,
            "services": [ADDIN_SERVICE, SERVICE], "grid_results": list(GRID_RESULTS), "formulas": entries}


def method_signature(function) -> typelib.Method:
    """The UNO method of one formula.

    Ranges and required arguments are ``[][]any`` (Calc requires them and
    passes a single value as a 1×1 array); optional arguments are ``any``,
    which Calc lists as optional and passes as ``None`` when left out. Both
    let a formula receive a text where it expects a number and answer with its
    own ``#TAILSTOP!`` message. Array results are ``[][]any``.
    """
    spec = function.tailstop_spec
    optional = set(_optional(function))
    parameters = tuple((name, "any" if name in optional and name not in spec.ranges else "[][]any")
                       for name in spec.argument_help)
    result = "[][]any" if spec.returns in GRID_RESULTS else "any"
    return typelib.Method(spec.name, result, parameters)


def _manifest() -> str:
    entries = [
        ("application/vnd.sun.star.uno-typelibrary;type=RDB", TYPE_LIBRARY),
        ("application/vnd.sun.star.uno-components", "tailstop.components"),
    ]
    lines = "".join(f' <manifest:file-entry manifest:media-type={quoteattr(kind)} manifest:full-path={quoteattr(path)}/>\n'
                    for kind, path in entries)
    return ('<?xml version="1.0" encoding="UTF-8"?>\n'
            '<manifest:manifest xmlns:manifest="http://openoffice.org/2001/manifest">\n' + lines + "</manifest:manifest>\n")


def _components() -> str:
    return ('<?xml version="1.0" encoding="UTF-8"?>\n'
            '<components xmlns="http://openoffice.org/2010/uno-components">\n'
            f' <component loader="com.sun.star.loader.Python" uri="{COMPONENT_FILE}">\n'
            f'  <implementation name="{IMPLEMENTATION}">\n'
            + "".join(f'   <service name="{service}"/>\n' for service in (ADDIN_SERVICE, SERVICE)) +
            '  </implementation>\n'
            ' </component>\n'
            '</components>\n')


def _description(version: str) -> str:
    return ('<?xml version="1.0" encoding="UTF-8"?>\n'
            '<description xmlns="http://openoffice.org/extensions/description/2006"\n'
            '             xmlns:xlink="http://www.w3.org/1999/xlink">\n'
            f' <identifier value="{EXTENSION_ID}"/>\n'
            f' <version value={quoteattr(version)}/>\n'
            ' <display-name><name lang="en">tailstop formulas</name></display-name>\n'
            ' <dependencies>\n'
            '  <OpenOffice.org-minimal-version xmlns:d="http://openoffice.org/extensions/description/2006"'
            ' value="4.0" d:name="OpenOffice.org 4.0"/>\n'
            ' </dependencies>\n'
            '</description>\n')


def _package_files():
    """(path inside pythonpath/tailstop, file) for every bundled source file."""
    for part in BUNDLED:
        source = _PACKAGE / part
        files = [source] if source.is_file() else sorted(source.rglob("*.py"))
        for file in files:
            yield file.relative_to(_PACKAGE).as_posix(), file


def extension_files() -> dict:
    """name inside the .oxt -> bytes."""
    files = {
        "META-INF/manifest.xml": _manifest().encode(),
        "description.xml": _description(__version__).encode(),
        "tailstop.components": _components().encode(),
        TYPE_LIBRARY: typelib.type_library(INTERFACE, [method_signature(function) for function in FORMULAS.values()]),
        COMPONENT_FILE: (_HERE / "calc_component.py").read_bytes(),
        "formulas.json": json.dumps(catalogue(), indent=1, ensure_ascii=False).encode("utf-8"),
    }
    for name, file in _package_files():
        files[f"pythonpath/tailstop/{name}"] = file.read_bytes()
    return files


def build_extension(out_dir) -> Path:
    """Write ``tailstop.oxt`` into ``out_dir`` (created if needed); returns its path."""
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    target = out_dir / EXTENSION_NAME
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, data in extension_files().items():
            info = zipfile.ZipInfo(name, date_time=(2020, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = 0o644 << 16
            archive.writestr(info, data)
    temporary = target.with_name(target.name + ".part")
    temporary.write_bytes(buffer.getvalue())
    temporary.replace(target)
    return target
