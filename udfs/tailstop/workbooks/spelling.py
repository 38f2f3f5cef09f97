"""The two spellings of a tailstop formula in a saved book, and the rewriting between them.

Excel with the xlwings add-in stores a formula under its own name
(``TAIL_PROB(...)``; ``_xludf.TAIL_PROB`` where Excel marks it as user defined).
LibreOffice Calc stores an add-in function in ``.xlsx`` only under its
programmatic name, the add-in's service name before the function's,
``TAILSTOP.TAIL_PROB(...)``, and shows ``#NAME?`` for the short one; each program
shows ``#NAME?`` for the other's spelling. The headless tools read both; this
module rewrites a book's formulas for the program that will open it next.
"""
from __future__ import annotations

import importlib
import re

from openpyxl.worksheet.formula import ArrayFormula

__all__ = ["TARGETS", "LIBREOFFICE_PREFIX", "respell", "respell_book", "formula_names"]

TARGETS = ("excel", "libreoffice")
LIBREOFFICE_PREFIX = "TAILSTOP."
_PREFIXES = r"(?:_xludf\.)?(?:TAILSTOP\.)?"


def formula_names():
    """The names of every registered tailstop formula."""
    return tuple(importlib.import_module("tailstop.sheet").FORMULAS)


def _pattern():
    names = "|".join(sorted(map(re.escape, formula_names()), key=len, reverse=True))
    # a whole function name (not the end of another name), directly called
    return re.compile(rf"(?<![\w.]){_PREFIXES}(?P<name>{names})(?=\s*\()", re.IGNORECASE)


def respell(formula: str, target: str) -> str:
    """``formula`` (text starting with ``=``) with every tailstop call spelt for ``target``.

    Text inside string literals is left alone.
    """
    if target not in TARGETS:
        raise ValueError(f"target must be one of {', '.join(TARGETS)} (got {target!r})")
    pattern = _pattern()
    prefix = LIBREOFFICE_PREFIX if target == "libreoffice" else ""
    parts = formula.split('"')
    for index in range(0, len(parts), 2):  # even parts lie outside "..." (a doubled "" splits evenly)
        parts[index] = pattern.sub(lambda match: prefix + match["name"].upper(), parts[index])
    return '"'.join(parts)


def _formula_cells(book):
    for sheet in book.worksheets:
        for cell in list(sheet._cells.values()):  # existing cells only (a sparse sheet stays cheap)
            if isinstance(cell.value, ArrayFormula) or cell.data_type == "f":
                yield cell


def _text(cell):
    return cell.value.text if isinstance(cell.value, ArrayFormula) else cell.value


def respell_book(book, target) -> int:
    """Rewrite every formula of an openpyxl book for ``target``; returns how many cells changed."""
    changed = 0
    for cell in _formula_cells(book):
        text = _text(cell)
        if not isinstance(text, str):
            continue
        new = respell(text, target)
        if new == text:
            continue
        if isinstance(cell.value, ArrayFormula):
            cell.value = ArrayFormula(cell.value.ref, new)
        else:
            cell.value = new
        changed += 1
    return changed
