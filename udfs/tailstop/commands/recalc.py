"""``tailstop recalc``: compute a workbook that uses tailstop formulas, with no spreadsheet program."""
from __future__ import annotations

import sys
from pathlib import Path


def default_output(book: Path) -> Path:
    """BOOK.xlsx -> BOOK-recalc.xlsx beside it."""
    return book.with_name(f"{book.stem}-recalc{book.suffix}")


HELP = "Evaluate the tailstop and ordinary formulas of a workbook and store the results beside them."


def add_arguments(parser):
    parser.add_argument("book", type=Path, help="the .xlsx workbook to compute")
    parser.add_argument("--out", type=Path, help="where to write the result (default: BOOK-recalc.xlsx beside it)")
    parser.add_argument("--in-place", action="store_true", help="replace BOOK itself (a backup is kept)")
    parser.add_argument("--no-backup", action="store_true", help="with --in-place: keep no backup copy")
    parser.add_argument("--force", action="store_true", help="with --in-place: replace BOOK although a "
                                                            "spreadsheet program's lock file says it is open")
    parser.add_argument("--allow-lossy", action="store_true",
                        help="go on even if content the file holds would be lost on saving (it says what)")
    parser.add_argument("--for", dest="spelling", choices=("excel", "libreoffice"),
                        help="write the tailstop formulas as this program stores them: TAIL_PROB (Excel) or "
                             "TAILSTOP.TAIL_PROB (LibreOffice); default: each as written")
    parser.add_argument("--engine", choices=("formulas", "libreoffice"), default="formulas",
                        help="what computes the book: the built-in formula engine (default) or LibreOffice "
                             "with the tailstop extension, in a throwaway profile")
    return run


def run(args):
    from ..workbooks.package import WorkbookRefused
    from ..workbooks.recalc import recalc

    if args.no_backup and not args.in_place:
        raise ValueError("--no-backup goes with --in-place")
    if args.in_place and args.out is not None:
        print("tailstop recalc: give either --out or --in-place, not both", file=sys.stderr)
        return 1
    if args.in_place and not args.force:
        from ..workbooks.safe_io import refuse_if_open

        refuse_if_open(args.book, "recalculate")
    target = args.book if args.in_place else (args.out or default_output(args.book))
    evaluate = None
    if args.engine == "libreoffice":
        from ..extension.engine import evaluate_with_libreoffice as evaluate
    try:
        result = recalc(args.book, target, in_place=args.in_place, backup=not args.no_backup,
                        allow_lossy=args.allow_lossy, evaluate=evaluate, spelling=args.spelling)
    except WorkbookRefused as refusal:
        print(f"tailstop recalc: {refusal}", file=sys.stderr)
        return 1
    print(f"wrote {result.path} ({len(result.values)} formula cells computed)")
    if result.backup:
        print(f"backup of the original: {result.backup}")
    for sheet, cell, value in result.errors[:20]:
        print(f"  {sheet}!{cell}: {value}")
    if len(result.errors) > 20:
        print(f"  ... and {len(result.errors) - 20} more cells with errors")
    _say_single_cell_ranges(result.path)
    return 0


def _say_single_cell_ranges(path):
    import openpyxl

    from ..workbooks.array_hints import single_cell_ranges

    for sheet, cell, name, shape in single_cell_ranges(openpyxl.load_workbook(path)):
        print(f"  {sheet}!{cell}: {name} gives {shape}; typed into one cell it stores only its first value. "
              f"Enter it over {shape} as an array formula (select the cells, type it, Ctrl+Shift+Enter)")
