"""The journal and the manifest of a run directory (docs/run-directory.md).

A run records every file *before* it creates it: the journal (``.damper-journal``, one
JSON object per line, appended with ``O_APPEND`` so the plot worker process can add to
it too) names the file, the temporary name it is written under and the part of the run
it belongs to; a second line gives its SHA-256 once it is in place. At the run's end the
journal becomes the manifest (``manifest.json``): every file with its SHA-256 and size,
the input's hash and ``complete: true``. So at every moment every file in the directory
is accounted for by the journal or the manifest, whatever kills the process.

This module holds the formats and the process's *active run* (the journal that
:func:`damper.output.files.write_atomic` records into); locking and the rules of
``--force`` are in :mod:`damper.output.rundir`.
"""

from __future__ import annotations

import contextlib
import json
import os
import posixpath

LOCK_NAME = ".damper-lock"
JOURNAL_NAME = ".damper-journal"
MANIFEST_NAME = "manifest.json"
#: Files of the run directory's own bookkeeping (never listed in a manifest).
BOOKKEEPING = (LOCK_NAME, JOURNAL_NAME, MANIFEST_NAME)
#: The value of ``manifest.json``'s ``format`` key; a file without it is not ours.
MANIFEST_FORMAT = "damper run manifest"
MANIFEST_VERSION = 1
#: Parts of a run: a command that adds to a run replaces only its own parts.
PARTS = ("design", "schedule", "responses", "robustness", "failures", "report")

# The process's active run: root directory (absolute), journal path and current part.
# Set by :class:`damper.output.rundir.RunDirectory` (main process) and by the plot
# worker's initializer; read by write_atomic. One run per process at a time.
_ACTIVE = {"root": None, "journal": None, "part": None}


def activate(root, journal_path, part=None) -> None:
    """Make `journal_path` the journal of every file written under `root` by this process."""
    _ACTIVE.update(root=os.path.abspath(os.fspath(root)), journal=os.fspath(journal_path), part=part)


def deactivate() -> None:
    """No active run (files are written without a journal)."""
    _ACTIVE.update(root=None, journal=None, part=None)


def active():
    """``(root, journal_path, part)`` of the active run, or None."""
    if _ACTIVE["root"] is None:
        return None
    return _ACTIVE["root"], _ACTIVE["journal"], _ACTIVE["part"]


@contextlib.contextmanager
def part(name):
    """Files written inside the block belong to part `name` of the active run."""
    before = _ACTIVE["part"]
    _ACTIVE["part"] = name
    try:
        yield
    finally:
        _ACTIVE["part"] = before


def in_part(name, fn, *args):
    """Call ``fn(*args)`` with part `name` active (a plot job sent to the worker process)."""
    with part(name):
        return fn(*args)


def relative(root, path):
    """`path` relative to `root` with '/' separators, or None when it is not inside `root`."""
    rel = os.path.relpath(os.path.abspath(os.fspath(path)), root)
    if rel == os.curdir or rel.startswith(os.pardir + os.sep) or rel == os.pardir or os.path.isabs(rel):
        return None
    return rel.replace(os.sep, "/")


def append(journal_path, entry) -> None:
    """Append one entry (a dict) as one line, in one ``write`` (atomic with ``O_APPEND``)."""
    line = (json.dumps(entry, sort_keys=True, ensure_ascii=True) + "\n").encode("ascii")
    fd = os.open(journal_path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o666)
    try:
        os.write(fd, line)
    finally:
        os.close(fd)


def read_entries(journal_path):
    """The journal's entries; None when there is no journal or it is not ours.

    A last line cut short (the process was killed while writing it) is left out: the
    file it would have named was never created (entries are written before the file).
    """
    try:
        with open(journal_path, "rb") as fh:
            data = fh.read()
    except FileNotFoundError:
        return None
    entries = []
    for k, line in enumerate(data.split(b"\n")):
        if not line.strip():
            continue
        try:
            entry = json.loads(line.decode("ascii"))
        except (ValueError, UnicodeDecodeError):
            if k == data.count(b"\n"):  # the unfinished last line
                break
            return None
        if not isinstance(entry, dict):
            return None
        entries.append(entry)
    if not entries or "start" not in entries[0]:
        return None
    return entries


def journal_paths(entries):
    """Every path a journal accounts for: files, their temporary names, directories, removals."""
    out = set()
    for e in entries:
        for key in ("write", "tmp", "done", "dir", "remove"):
            value = e.get(key)
            if isinstance(value, str) and _safe_rel(value):
                out.add(value)
    return out


def journal_done(entries):
    """Files the journal saw finished: ``{path: {"sha256", "bytes", "part"}}`` (later entries win)."""
    return listed_files(None, entries)


def listed_files(manifest, entries):
    """The files of a run as its manifest and then its journal leave them: ``{path: entry}``."""
    out = manifest_files(manifest) if manifest is not None else {}
    for e in entries or ():
        if isinstance(e.get("done"), str) and _safe_rel(e["done"]):
            out[e["done"]] = {"sha256": e.get("sha256"), "bytes": e.get("bytes"), "part": e.get("part")}
        elif isinstance(e.get("remove"), str):
            out.pop(e["remove"], None)
    out.pop(MANIFEST_NAME, None)
    return out


def journal_changed(entries, since=0) -> bool:
    """True when entries from index `since` on wrote or removed anything."""
    return any(("write" in e or "remove" in e or "dir" in e) for e in entries[since:])


def read_manifest(root):
    """The run's manifest (a dict), or None when there is none or it is not ours."""
    path = os.path.join(root, MANIFEST_NAME)
    try:
        with open(path, "rb") as fh:
            doc = json.loads(fh.read().decode("utf-8"))
    except (OSError, ValueError, UnicodeDecodeError):
        return None
    if not isinstance(doc, dict) or doc.get("format") != MANIFEST_FORMAT or not isinstance(doc.get("files"), list):
        return None
    files = [f for f in doc["files"] if isinstance(f, dict) and isinstance(f.get("path"), str) and _safe_rel(f["path"])]
    if len(files) != len(doc["files"]):
        return None
    return doc


def manifest_files(manifest):
    """``{path: {"sha256", "bytes", "part"}}`` of a manifest."""
    return {f["path"]: {"sha256": f.get("sha256"), "bytes": f.get("bytes"), "part": f.get("part")} for f in manifest["files"]}


def manifest_document(files, runs, input_sha256, tool_version) -> dict:
    """The manifest: every file with its SHA-256 and size, in path order."""
    return {
        "format": MANIFEST_FORMAT,
        "version": MANIFEST_VERSION,
        "complete": True,
        "tool_version": tool_version,
        "input_sha256": input_sha256,
        "commands": list(runs),
        "files": [
            {"path": p, "sha256": files[p]["sha256"], "bytes": files[p]["bytes"], "part": files[p]["part"]}
            for p in sorted(files)
        ],
    }


def _safe_rel(rel) -> bool:
    """A relative path that stays inside the run directory."""
    if not rel or rel.startswith("/") or "\\" in rel or "\x00" in rel:
        return False
    norm = posixpath.normpath(rel)
    return norm == rel and norm != "." and not norm.startswith("../") and norm != ".."


__all__ = [
    "BOOKKEEPING",
    "JOURNAL_NAME",
    "LOCK_NAME",
    "MANIFEST_NAME",
    "PARTS",
    "activate",
    "active",
    "append",
    "deactivate",
    "in_part",
    "journal_done",
    "journal_paths",
    "listed_files",
    "manifest_document",
    "manifest_files",
    "part",
    "read_entries",
    "read_manifest",
    "relative",
]
