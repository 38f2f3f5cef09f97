"""Running LibreOffice headless: find it, install the extension, let it compute a book.

Every run here uses a throwaway user profile (``-env:UserInstallation``), because
a LibreOffice already open on the same profile would take the job over, and a
throwaway location for "shared" extensions (``UNO_SHARED_PACKAGES_CACHE``), so
that installing as root (which ``unopkg`` allows only with ``--shared``) changes
nothing outside the temporary folder.
"""
from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import tempfile
from contextlib import contextmanager
from pathlib import Path

__all__ = ["find_program", "office_environment", "run_bounded", "LibreOfficeError", "Sandbox", "sandbox", "user_install", "is_root"]

RUN_TIMEOUT = 300  # seconds for one soffice or unopkg run
SOFFICE_VARIABLE = "TAILSTOP_SOFFICE"

# Load every .xlsx and .ods recalculated (0 = always), whatever values it holds.
_ALWAYS_RECALCULATE = """<?xml version="1.0" encoding="UTF-8"?>
<oor:items xmlns:oor="http://openoffice.org/2001/registry" xmlns:xs="http://www.w3.org/2001/XMLSchema"
 xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">
<item oor:path="/org.openoffice.Office.Calc/Formula/Load"><prop oor:name="OOXMLRecalcMode" oor:op="fuse"><value>0</value></prop></item>
<item oor:path="/org.openoffice.Office.Calc/Formula/Load"><prop oor:name="ODFRecalcMode" oor:op="fuse"><value>0</value></prop></item>
</oor:items>
"""

_PLACES = {
    "linux": ["/usr/lib/libreoffice/program", "/opt/libreoffice/program", "/usr/local/lib/libreoffice/program",
              "/snap/libreoffice/current/lib/libreoffice/program"],
    "darwin": ["/Applications/LibreOffice.app/Contents/MacOS"],
    "win32": [r"C:\Program Files\LibreOffice\program", r"C:\Program Files (x86)\LibreOffice\program"],
}


class LibreOfficeError(OSError):
    """LibreOffice is missing or a run of it failed; the message says which and what to do."""


def is_root() -> bool:
    return hasattr(os, "geteuid") and os.geteuid() == 0


def find_program(name: str) -> str:
    """The path of ``soffice`` or ``unopkg``; LibreOfficeError if it is not installed.

    ``TAILSTOP_SOFFICE``, when set, names the soffice to use (and nothing else
    is looked at); unopkg is then the one in the same folder.
    """
    chosen = os.environ.get(SOFFICE_VARIABLE)
    if chosen is not None:
        soffice = shutil.which(chosen)
        found = soffice if name == "soffice" else shutil.which(name, path=str(Path(soffice or "").resolve().parent))
        if found:
            return found
        raise LibreOfficeError(f"{SOFFICE_VARIABLE}={chosen!r} names no LibreOffice with {name}")
    found = shutil.which(name)
    if found:
        return found
    platform = "win32" if sys.platform.startswith("win") else ("darwin" if sys.platform == "darwin" else "linux")
    suffix = ".exe" if platform == "win32" else ""
    for folder in _PLACES[platform]:
        candidate = Path(folder) / f"{name}{suffix}"
        if candidate.exists():
            return str(candidate)
    raise LibreOfficeError(f"LibreOffice's {name} was not found: install LibreOffice "
                           "(Debian/Ubuntu: apt install libreoffice-calc-nogui python3-uno) or put it on PATH")


def office_environment(environment=None):
    """The environment for a LibreOffice program, without this Python's virtual environment.

    LibreOffice's embedded Python looks for ``python3`` on PATH to find its
    own files; an activated virtual environment first on PATH makes it take
    that environment's settings and fail to start (Calc then cannot even open
    a book that uses an add-in). The virtual environment's folders and the
    variables that redirect Python are left out.
    """
    environment = dict(os.environ if environment is None else environment)
    for name in ("VIRTUAL_ENV", "PYTHONHOME", "PYTHONPATH", "PYTHONEXECUTABLE", "__PYVENV_LAUNCHER__"):
        environment.pop(name, None)
    folders = environment.get("PATH", "").split(os.pathsep)
    environment["PATH"] = os.pathsep.join(folder for folder in folders
                                          if folder and not (Path(folder).parent / "pyvenv.cfg").exists())
    return environment


def run_bounded(command, what, timeout=RUN_TIMEOUT):
    """Run a LibreOffice program in its own process group; the whole group is killed after ``timeout``."""
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                               stdin=subprocess.DEVNULL, start_new_session=True, env=office_environment())
    try:
        output, _ = process.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        _kill_group(process)
        process.communicate()
        raise LibreOfficeError(f"{what} did not finish within {timeout} s") from None
    if process.returncode != 0:
        lines = output.strip().splitlines()
        raise LibreOfficeError(f"{what} failed (exit {process.returncode}): {lines[-1] if lines else 'no message'}")
    return output


def _kill_group(process):
    if hasattr(os, "killpg"):
        os.killpg(process.pid, signal.SIGKILL)
    else:  # pragma: no cover - Windows
        process.kill()


class Sandbox:
    """A temporary place holding one shared-extension cache and fresh user profiles."""

    def __init__(self, root: Path):
        self.root = Path(root)
        self.shared = self.root / "shared"
        self.shared.mkdir(parents=True, exist_ok=True)

    def _environment(self, profile: Path):
        return [f"-env:UserInstallation={profile.as_uri()}", f"-env:UNO_SHARED_PACKAGES_CACHE={self.shared.as_uri()}"]

    def office_arguments(self):
        """The ``-env:`` arguments of a run in a fresh profile that sees this sandbox's extensions."""
        return self._environment(self._new_profile())

    def _new_profile(self) -> Path:
        profile = Path(tempfile.mkdtemp(prefix="profile-", dir=self.root))
        (profile / "user").mkdir()
        (profile / "user" / "registrymodifications.xcu").write_text(_ALWAYS_RECALCULATE, encoding="utf-8")
        return profile

    def install(self, oxt) -> None:
        """Install the extension into this sandbox only."""
        command = [find_program("unopkg"), "add", "--shared", "--force", "--suppress-license",
                   *self.office_arguments(), str(Path(oxt).resolve())]
        run_bounded(command, "unopkg add")

    def convert(self, book, out_dir, to="xlsx") -> Path:
        """Open ``book`` in a fresh profile, recalculate everything, save it as ``to`` in ``out_dir``."""
        out_dir = Path(out_dir)
        out_dir.mkdir(parents=True, exist_ok=True)
        book = Path(book).resolve()
        command = [find_program("soffice"), *self.office_arguments(), "--headless", "--norestore",
                   "--nolockcheck", "--convert-to", to, "--outdir", str(out_dir), str(book)]
        run_bounded(command, "soffice --convert-to")
        written = out_dir / f"{book.stem}.{to.split(':')[0]}"
        if not written.exists():
            raise LibreOfficeError(f"LibreOffice wrote no {written.name}; it may not read {book.name}")
        return written


@contextmanager
def sandbox():
    """A Sandbox in a temporary folder, removed afterwards."""
    with tempfile.TemporaryDirectory(prefix="tailstop-libreoffice-") as folder:
        yield Sandbox(Path(folder))


def user_install(oxt, shared=False):
    """Install the extension for the current user (or for all users with ``shared``); returns unopkg's output."""
    if is_root() and not shared:
        raise LibreOfficeError("unopkg refuses to install into root's own profile. Run "
                               "`tailstop extension install` as the user who runs LibreOffice, or "
                               "`tailstop extension install --shared` to install it for every user")
    if not shared:
        # LibreOffice's first start on a profile drops the extensions unopkg registered there before it,
        # so let it create the profile first (a no-op when the profile exists)
        run_bounded([find_program("soffice"), "--headless", "--norestore", "--terminate_after_init"],
                    "starting LibreOffice once to create your profile")
    command = [find_program("unopkg"), "add", "--force", "--suppress-license"]
    if shared:
        command.insert(2, "--shared")
    return run_bounded([*command, str(Path(oxt).resolve())], "unopkg add").strip()
