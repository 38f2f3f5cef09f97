"""The LibreOffice tests never pass silently: missing or broken means skip with the reason, or fail under CI.

Fake programs stand in for soffice here: a script that exits with a
message, and one that "converts" without writing anything.
"""
from __future__ import annotations

import os
import stat

import pytest

import libreoffice
from libreoffice import SOFFICE_VARIABLE, find_soffice, libreoffice_status, require_libreoffice


def fake_program(folder, name, body):
    path = folder / name
    path.write_text("#!/bin/sh\n" + body + "\n")
    path.chmod(path.stat().st_mode | stat.S_IXUSR)
    return path


@pytest.fixture
def clean_environment(monkeypatch, tmp_path):
    """No CI flag, no TAILSTOP_SOFFICE, and a PATH with nothing but an empty folder."""
    monkeypatch.delenv("CI", raising=False)
    monkeypatch.delenv(SOFFICE_VARIABLE, raising=False)
    empty = tmp_path / "empty-bin"
    empty.mkdir()
    monkeypatch.setenv("PATH", str(empty))
    monkeypatch.setattr(libreoffice, "INSTALL_FOLDERS", ())  # nor in the usual install folders
    return tmp_path


def test_a_variable_naming_nothing_means_missing_even_with_soffice_on_path(clean_environment, monkeypatch):
    folder = clean_environment
    found = fake_program(folder / "empty-bin", "soffice", "exit 0")
    assert find_soffice() == str(found)  # on PATH, without the variable
    for value in (str(folder / "no-such-soffice"), "", str(folder)):  # a missing file, empty, a folder
        monkeypatch.setenv(SOFFICE_VARIABLE, value)
        assert find_soffice() is None, value
        soffice, problem = libreoffice_status(folder / "probe")
        assert soffice is None and SOFFICE_VARIABLE in problem and "not installed" in problem


def test_missing_skips_with_the_reason_outside_ci(clean_environment, monkeypatch):
    monkeypatch.setenv(SOFFICE_VARIABLE, str(clean_environment / "nowhere" / "soffice"))
    with pytest.raises(pytest.skip.Exception, match="LibreOffice is not installed"):
        require_libreoffice(clean_environment / "probe")


@pytest.mark.parametrize("ci", ["true", "TRUE", "1"])
def test_missing_fails_the_run_in_ci(clean_environment, monkeypatch, ci):
    monkeypatch.setenv("CI", ci)
    with pytest.raises(pytest.fail.Exception, match="CI=true and LibreOffice cannot run these tests: LibreOffice is "
                                                    "not installed"):
        require_libreoffice(clean_environment / "probe")


@pytest.mark.parametrize("body, said", [
    ('echo "soffice: cannot open display" >&2; exit 1', "cannot open display"),
    ("exit 0", "wrote no probe.xlsx"),
])
def test_a_broken_program_is_named_with_what_the_probe_saw(clean_environment, monkeypatch, body, said):
    broken = fake_program(clean_environment, "broken-soffice", body)
    monkeypatch.setenv(SOFFICE_VARIABLE, str(broken))
    assert find_soffice() == str(broken)
    soffice, problem = libreoffice_status(clean_environment / "probe")
    assert soffice is None and "probe conversion" in problem and said in problem and str(broken) in problem
    with pytest.raises(pytest.skip.Exception, match="probe conversion"):
        require_libreoffice(clean_environment / "probe-2")
    monkeypatch.setenv("CI", "true")
    with pytest.raises(pytest.fail.Exception, match="probe conversion"):
        require_libreoffice(clean_environment / "probe-3")


def test_a_file_that_is_not_a_program_is_missing(clean_environment, monkeypatch):
    plain = clean_environment / "soffice.txt"
    plain.write_text("not a program")
    monkeypatch.setenv(SOFFICE_VARIABLE, str(plain))
    assert find_soffice() is None


def test_the_real_libreoffice_when_this_machine_has_one(soffice):
    # the session's probe found a working program; the fixture is what every LibreOffice test uses
    assert os.access(soffice, os.X_OK)


def test_the_ci_script_runs_the_tests_as_ci():
    # .ci/run must set CI=true before the test command, or a CI machine without LibreOffice would pass
    from pathlib import Path

    script = (Path(__file__).resolve().parent.parent / ".ci" / "run").read_text().splitlines()
    exported = next(i for i, line in enumerate(script) if line.strip() == 'export CI="${CI:-true}"')
    tests = next(i for i, line in enumerate(script) if "python -m pytest" in line and not line.startswith("#"))
    assert exported < tests
