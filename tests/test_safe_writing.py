"""Safe writing: a new name is never clobbered, and a written file that is not what was checked is refused.

The race and the damage are made on purpose: another program creates the
target while the book is being written; a writer puts other bytes on disk
than the ones that were checked. Nothing here relies on tailstop's own
comparison of the result: the bytes on disk are read back by the test.
"""
from __future__ import annotations

import io
import zipfile

import pytest

import tailstop.workbooks.annotate as annotate_module
import tailstop.workbooks.annotate_stream as stream_module
from styled_books import LOG_HEADER, styled_log
from tailstop.commands import main
from tailstop.workbooks.annotate import AnnotateRefused, annotate, default_output
from tailstop.workbooks.log_layout import RulePlan
from tailstop.workbooks.safe_io import write_file_atomically

OTHER_PROGRAM = b"written meanwhile by another program"


def leftovers(folder):
    """Temporary files a writer left behind (anything but the named workbooks)."""
    return sorted(path.name for path in folder.iterdir() if path.name.startswith("."))


def test_a_target_created_while_writing_is_never_replaced(tmp_path):
    target = tmp_path / "new.xlsx"

    def write(handle):
        target.write_bytes(OTHER_PROGRAM)  # the target appears after the existence check
        handle.write(b"tailstop's book")

    with pytest.raises(FileExistsError):
        write_file_atomically(target, write)
    assert target.read_bytes() == OTHER_PROGRAM
    assert leftovers(tmp_path) == []


def test_a_target_created_while_checking_is_never_replaced(tmp_path):
    target = tmp_path / "new.xlsx"

    def check(path):
        target.write_bytes(OTHER_PROGRAM)

    with pytest.raises(FileExistsError):
        write_file_atomically(target, lambda handle: handle.write(b"book"), check=check)
    assert target.read_bytes() == OTHER_PROGRAM
    assert leftovers(tmp_path) == []


def test_a_failing_check_moves_nothing_into_place(tmp_path):
    target = tmp_path / "new.xlsx"
    seen = []

    def check(path):
        seen.append(path.read_bytes())
        raise ValueError("the written book is not what was meant")

    with pytest.raises(ValueError, match="not what was meant"):
        write_file_atomically(target, lambda handle: handle.write(b"complete book"), check=check)
    assert seen == [b"complete book"]  # the check sees the whole file, flushed, before anything moves
    assert not target.exists() and leftovers(tmp_path) == []
    # in place: the original stays, and no backup is made for a write that did not happen
    target.write_bytes(b"original")
    with pytest.raises(ValueError):
        write_file_atomically(target, lambda handle: handle.write(b"new"), in_place=True, check=check)
    assert target.read_bytes() == b"original"
    assert sorted(path.name for path in tmp_path.iterdir()) == ["new.xlsx"]


def plan():
    # a bench plan of our own (common practice: pass-fail, 90 % confidence, pilot 10)
    return RulePlan.checked(threshold=900, accuracy=3.0, confidence=0.9, pilot=10)


def damaged(data):
    """The package with one lifetime of the log sheet changed in the sheet XML (1 digit)."""
    source = zipfile.ZipFile(io.BytesIO(data))
    output = io.BytesIO()
    changed = False
    with zipfile.ZipFile(output, "w", zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            part = source.read(info)
            if info.filename == "xl/worksheets/sheet1.xml" and not changed:
                start = part.index(b'r="C3"')
                value = part.index(b"<v>", start) + 3
                part = part[:value] + (b"1" if part[value:value + 1] != b"1" else b"2") + part[value + 1:]
                changed = True
            target.writestr(info, part)
    assert changed
    return output.getvalue()


def corrupting_writer(real):
    """A stand-in for write_file_atomically whose writer puts a damaged copy of the book on disk."""

    def write_file(target, write, **options):
        def damaging(handle):
            buffer = io.BytesIO()
            write(buffer)
            handle.write(damaged(buffer.getvalue()))

        return real(target, damaging, **options)

    return write_file


@pytest.mark.parametrize("module, streaming", [(annotate_module, False), (stream_module, True)],
                         ids=["openpyxl", "stream"])
def test_a_book_written_wrong_is_refused(tmp_path, monkeypatch, module, streaming):
    source = styled_log(tmp_path / "log.xlsx")
    monkeypatch.setattr(module, "write_file_atomically", corrupting_writer(module.write_file_atomically))
    with pytest.raises((OSError, AnnotateRefused)) as refused:
        annotate(source, column=LOG_HEADER, plan=plan(), streaming=streaming)
    assert "C3" in str(refused.value) or "bytes that were checked" in str(refused.value)
    target = default_output(source)
    # the stream checks before the move, so nothing is there; the openpyxl path may only leave a file it
    # has just called unusable in its message
    assert not target.exists() or "do not use it" in str(refused.value)


def test_the_command_line_reports_a_book_written_wrong(tmp_path, monkeypatch, capsys):
    source = styled_log(tmp_path / "log.xlsx")
    monkeypatch.setattr(annotate_module, "write_file_atomically",
                        corrupting_writer(annotate_module.write_file_atomically))
    code = main(["annotate", str(source), "--column", LOG_HEADER, "--threshold", "900", "--accuracy", "3",
                 "--confidence", "0.9", "--pilot", "10"])
    err = capsys.readouterr().err
    assert code == 1 and "Traceback" not in err and err.startswith("tailstop annotate: ")
