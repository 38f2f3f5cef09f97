"""Tuning results kept in the process and in a small file in the user's cache folder.

The file holds one record per (algorithm, accuracy, confidence, pilot,
check_every), each with the SHA-256 of its own canonical JSON. A record
whose hash does not match, or a file that cannot be read, is ignored and the
tuning recomputed (and written again); a folder that cannot be written only
costs the recomputation next time. ``TAILSTOP_CACHE_DIR`` moves the folder
(the tests point it at a temporary one).
"""
from __future__ import annotations

import hashlib
import json
import os
import sys
import tempfile
from pathlib import Path

__all__ = ["cache_folder", "cache_file", "read_record", "write_record", "FILE_NAME"]

FILE_NAME = "pass-fail-exact-tuning.json"


def cache_folder() -> Path:
    """TAILSTOP_CACHE_DIR, else the platform's user cache folder + /tailstop."""
    chosen = os.environ.get("TAILSTOP_CACHE_DIR")
    if chosen:
        return Path(chosen)
    if sys.platform == "win32":
        base = os.environ.get("LOCALAPPDATA") or Path.home() / "AppData" / "Local"
    elif sys.platform == "darwin":
        base = Path.home() / "Library" / "Caches"
    else:
        base = os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache"
    return Path(base) / "tailstop"


def cache_file() -> Path:
    return cache_folder() / FILE_NAME


def _digest(record):
    return hashlib.sha256(json.dumps(record, sort_keys=True).encode("utf-8")).hexdigest()


def _load():
    try:
        content = json.loads(cache_file().read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return content if isinstance(content, dict) else {}


def read_record(key):
    """The stored record for ``key`` if present and intact, else None."""
    entry = _load().get(key)
    if not isinstance(entry, dict) or not isinstance(entry.get("record"), dict):
        return None
    record = entry["record"]
    return record if entry.get("sha256") == _digest(record) else None


def write_record(key, record):
    """Store ``record`` under ``key`` (drops damaged records); False if the folder cannot be written."""
    content = {name: entry for name, entry in _load().items()
               if isinstance(entry, dict) and isinstance(entry.get("record"), dict)
               and entry.get("sha256") == _digest(entry["record"])}
    content[key] = {"record": record, "sha256": _digest(record)}
    folder = cache_folder()
    try:
        folder.mkdir(parents=True, exist_ok=True)
        handle, temporary = tempfile.mkstemp(dir=folder, prefix=".tuning-", suffix=".tmp")
        with os.fdopen(handle, "w", encoding="utf-8") as stream:
            json.dump(content, stream, sort_keys=True, indent=1)
        os.replace(temporary, folder / FILE_NAME)
    except OSError:
        return False
    return True
