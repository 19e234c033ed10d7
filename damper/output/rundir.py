"""A run directory is one run: an OS lock, a journal, a manifest, and safe ``--force``.

The contract (docs/run-directory.md):

* A run holds an exclusive ``flock`` on ``.damper-lock`` in the directory for its whole
  life; the kernel releases it when the process ends, however it ends. The file names
  the holder (pid, host, start time, command); a second run into a locked directory is
  refused (exit 2) with that name.
* From its start a run journals every file before creating it
  (:mod:`damper.output.journal`); at its end the journal becomes ``manifest.json``.
  A directory with a journal (or without a manifest) holds an *incomplete* run.
* A new run goes into a new or empty directory. ``--force`` accepts a directory whose
  journal or manifest accounts for every file in it and removes exactly those files; a
  directory holding anything no run accounts for is refused, ``--force`` or not.
* A command that adds to a complete run (``respond``, ``robust``, ``report``) takes its
  lock, replaces only the files of its own parts, and rewrites the manifest.
"""

from __future__ import annotations

import datetime as _dt
import errno
import os
import re
import socket
import sys

from ..errors import Interrupted, RunDirectoryError
from . import journal
from .files import output_error, write_atomic

try:
    import fcntl
except ImportError:  # pragma: no cover - not POSIX
    fcntl = None

#: How a command uses the directory: a whole new run, an addition to one, or the report.
MODES = ("new", "add", "report")


def _holder_text(command) -> str:
    started = _dt.datetime.now(tz=_dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")
    text = f"pid {os.getpid()} on {socket.gethostname()}, started {started}: {command}"
    return re.sub(r"[\x00-\x1f\x7f]", " ", text)[:500]


def _acquire(root, command):
    """Open, lock and name ``.damper-lock``; returns (fd, created). Never waits."""
    path = os.path.join(root, journal.LOCK_NAME)
    for _ in range(20):
        try:
            fd = os.open(path, os.O_RDWR | os.O_CREAT | os.O_EXCL, 0o666)
            created = True
        except FileExistsError:
            try:
                fd = os.open(path, os.O_RDWR)
            except FileNotFoundError:  # removed by its holder in between: try again
                continue
            created = False
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as exc:
            if exc.errno not in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                os.close(fd)
                raise
            holder = os.pread(fd, 600, 0).decode("utf-8", "replace").strip() or "a run that has just started"
            os.close(fd)
            raise RunDirectoryError(
                f"{root}: in use by another damper run ({holder}); wait until it ends or choose another --out"
            ) from None
        try:
            same = os.stat(path).st_ino == os.fstat(fd).st_ino
        except FileNotFoundError:
            same = False
        if not same:  # its holder removed the file before we locked it: lock the new one
            os.close(fd)
            continue
        text = _holder_text(command).encode("utf-8")
        os.ftruncate(fd, 0)
        os.pwrite(fd, text, 0)
        return fd, created
    raise RunDirectoryError(f"{root}: could not lock {journal.LOCK_NAME} (other runs keep replacing it)")


def _refuse_file_on_the_way(root, parent):
    """A clear message when a part of the path to `root` is an existing file."""
    d = parent
    while d and not os.path.lexists(d):
        up = os.path.dirname(d)
        if up == d:
            return
        d = up
    if d and os.path.lexists(d) and not os.path.isdir(d):
        raise RunDirectoryError(f"{root}: {d} is a file, not a directory; choose another --out")


def _scan(root):
    """Every entry under `root` (no symbolic link followed): (files, directories), relative."""
    files, dirs = [], []
    stack = [""]
    while stack:
        rel = stack.pop()
        with os.scandir(os.path.join(root, rel) if rel else root) as it:
            for entry in it:
                name = f"{rel}/{entry.name}" if rel else entry.name
                if entry.is_dir(follow_symlinks=False):
                    dirs.append(name)
                    stack.append(name)
                else:
                    files.append(name)
    return sorted(files), sorted(dirs)


class RunDirectory:
    """A run directory held by this process (a context manager).

    Parameters
    ----------
    root : str or path
        The directory (created if absent).
    command : str
        The command line, recorded in the lock file, the journal and the manifest.
    input_sha256 : str or None
        SHA-256 of the case file.
    mode : str
        ``"new"`` (a whole run; ``--force`` replaces the earlier one), ``"add"`` (adds
        `parts` to a run, or starts one) or ``"report"`` (rebuilds the report of a run).
    parts : tuple of str
        With ``"add"``: the parts this command writes (and replaces with ``force``).
    force : bool
        ``--force`` was given.
    """

    def __init__(self, root, command, input_sha256=None, mode="new", parts=(), force=False):
        if mode not in MODES:
            raise ValueError(f"unknown mode {mode!r}")
        self.root = os.fspath(root)
        self.command = command
        self.input_sha256 = input_sha256
        self.mode = mode
        self.parts = tuple(parts)
        self.force = force
        self.fd = None
        self.created_dir = False
        self.base = {}  # files kept from the earlier manifest: path -> entry
        self.runs = []  # the manifest's command history
        self.since = 0  # index of this run's first journal entry
        self.replaced_incomplete = False
        self.writes_manifest = True
        self.journal_path = os.path.join(self.root, journal.JOURNAL_NAME)

    # --- opening -------------------------------------------------------------------
    def __enter__(self):
        self.open()
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None and self.fd is not None:
            self.abort(exc)
        return False

    def open(self):
        """Create or check the directory, take its lock, and prepare it for this run."""
        root = self.root
        if not root.strip():
            raise RunDirectoryError("--out is empty: give a directory for the run")
        try:
            existed = os.path.isdir(root)
            if os.path.lexists(root) and not existed:
                raise RunDirectoryError(f"{root}: exists and is not a directory; choose another --out")
            if existed:
                self._refuse_foreign_early()
            else:
                parent = os.path.dirname(os.path.abspath(root))
                _refuse_file_on_the_way(root, parent)
                os.makedirs(parent, exist_ok=True)
                try:
                    os.mkdir(root)
                    self.created_dir = True
                except FileExistsError:
                    pass
            if fcntl is None:  # pragma: no cover
                raise RunDirectoryError("run directories need POSIX file locks (fcntl), which this system lacks")
            self.fd, _ = _acquire(root, self.command)
        except OSError as exc:
            raise output_error(exc, root, "cannot create or lock the run directory") from None
        try:
            self._prepare()
        except BaseException:
            self._release(remove_dir=True)
            raise
        journal.activate(root, self.journal_path, self.parts[0] if self.parts else None)

    def _refuse_foreign_early(self):
        """Refuse a non-empty directory that holds no run at all before creating anything in it."""
        names = os.listdir(self.root)
        if names and not any(n in journal.BOOKKEEPING for n in names):
            self._refuse_foreign(sorted(names)[0])

    def _refuse_foreign(self, name):
        if self.mode == "report":
            raise RunDirectoryError(
                f"{self.root}: holds no run of this damper version (no manifest or journal; e.g. {name!r}); "
                f"rerun 'damper design CASE --out {self.root}'"
            )
        raise RunDirectoryError(
            f"{self.root}: is not empty and holds files no damper run wrote (e.g. {name!r}); "
            "choose a new or empty directory (damper never removes files it did not write)"
        )

    def _state(self):
        """(manifest, journal entries, present files, present dirs, unaccounted)."""
        manifest = journal.read_manifest(self.root)
        entries = journal.read_entries(self.journal_path)
        files, dirs = _scan(self.root)
        known = {journal.LOCK_NAME}
        if manifest is not None:
            known |= set(journal.manifest_files(manifest)) | {journal.MANIFEST_NAME}
        if entries is not None:
            known |= journal.journal_paths(entries) | {journal.JOURNAL_NAME}
        under = {k.rsplit("/", 1)[0] for k in known if "/" in k}
        parents = set()
        for d in under:
            while d:
                parents.add(d)
                d = d.rsplit("/", 1)[0] if "/" in d else ""
        unaccounted = [f for f in files if f not in known] + [d for d in dirs if d not in known and d not in parents]
        return manifest, entries, files, dirs, unaccounted

    def _prepare(self):
        manifest, entries, files, dirs, unaccounted = self._state()
        if self.mode == "report":  # the report touches report.html only; other files are just not shown
            unaccounted = [f for f in unaccounted if f == "report.html"]
            if unaccounted:
                raise RunDirectoryError(f"{self.root}: its report.html was not written by a damper run; move it away "
                                        "first (damper never replaces a file it did not write)")
        if unaccounted:
            self._refuse_foreign(unaccounted[0])
        empty = not [f for f in files if f != journal.LOCK_NAME] and not dirs
        complete = manifest is not None and entries is None
        if self.mode == "report":
            if manifest is None and entries is None:
                self._refuse_foreign(journal.LOCK_NAME)
            self._start(entries, manifest if complete else None)
            if not complete:  # the report of an incomplete run: it stays incomplete
                self.writes_manifest = False
                self.base = journal.listed_files(manifest, entries)
            return
        if empty:
            self._start(entries, None)
            return
        if not self.force:
            what = "an earlier run" + ("" if complete else " (incomplete: interrupted or failed)")
            replaces = "its files" if self.mode == "new" or not complete else f"its {' and '.join(self.parts)}"
            keeps = "" if self.mode == "new" or not complete else " (its other files are kept)"
            raise RunDirectoryError(
                f"{self.root}: holds {what}; choose another --out or add --force to replace {replaces}{keeps}"
            )
        if self.mode == "new" or not complete:
            self.replaced_incomplete = not complete
            self._start(entries, None)
            self._remove([f for f in files if f != journal.LOCK_NAME], dirs)
            return
        self._start(entries, manifest)
        own = [p for p, e in self.base.items() if e.get("part") in self.parts]
        for p in own:
            del self.base[p]
        self._remove([p for p in own if os.path.lexists(os.path.join(self.root, p))], [])

    def _start(self, entries, manifest):
        """Begin this run's journal entries (after any earlier ones); keep `manifest`'s files."""
        self.since = len(entries) if entries else 0
        if manifest is not None:
            self.base = journal.manifest_files(manifest)
            self.runs = [r for r in manifest.get("commands") or [] if isinstance(r, dict)]
        try:
            journal.append(self.journal_path, {
                "start": self.command, "mode": self.mode, "parts": list(self.parts),
                "holder": _holder_text(self.command), "input_sha256": self.input_sha256,
            })
        except OSError as exc:
            raise output_error(exc, self.journal_path) from None

    def _remove(self, files, dirs):
        """Journal, then remove, `files` (the manifest first) and then the emptied `dirs`."""
        try:
            for f in files:
                journal.append(self.journal_path, {"remove": f})
            order = sorted(files, key=lambda f: (f != journal.MANIFEST_NAME, f == journal.JOURNAL_NAME, f))
            for f in order:
                if f == journal.JOURNAL_NAME:
                    continue  # this run's own journal now
                os.unlink(os.path.join(self.root, f))
            for d in sorted(dirs, key=lambda d: -d.count("/")):
                try:
                    os.rmdir(os.path.join(self.root, d))
                except OSError as exc:
                    if exc.errno not in (errno.ENOTEMPTY, errno.EEXIST, errno.ENOENT):
                        raise
        except OSError as exc:
            raise output_error(exc, self.root, "cannot remove the files of the earlier run") from None

    # --- during the run ----------------------------------------------------------------
    def files(self) -> dict:
        """``{path: entry}`` of every file of the run as it stands (kept ones and this run's)."""
        entries = journal.read_entries(self.journal_path) or []
        out = dict(self.base)
        out.update(journal.journal_done(entries[self.since:]))
        out.pop(journal.MANIFEST_NAME, None)
        return out

    # --- ending --------------------------------------------------------------------------
    def finish(self) -> None:
        """Turn the journal into the manifest (complete), then remove the journal and the lock."""
        from .. import __version__

        files = self.files()
        if self.writes_manifest:
            runs = self.runs + [{"command": self.command, "input_sha256": self.input_sha256,
                                 "parts": list(self.parts) or list(journal.PARTS)}]
            first = self.runs[0].get("input_sha256") if self.runs else self.input_sha256
            doc = journal.manifest_document(files, runs, first, __version__)
            from .documents.jsonout import dumps

            write_atomic(os.path.join(self.root, journal.MANIFEST_NAME), dumps(doc))
            try:
                os.unlink(self.journal_path)
            except OSError as exc:
                raise output_error(exc, self.journal_path, "cannot remove the journal") from None
        else:
            journal.append(self.journal_path, {"end": "report written; the run is still incomplete"})
        self._release()

    def abort(self, exc) -> None:
        """End after an error or an interrupt: no run, or one marked incomplete (its journal kept)."""
        status = "interrupted" if isinstance(exc, (KeyboardInterrupt, Interrupted)) else "failed"
        entries = journal.read_entries(self.journal_path) or []
        changed = journal.journal_changed(entries, self.since)
        try:
            if not changed and self.since == 0:
                os.unlink(self.journal_path)  # nothing written or removed: the directory is as it was
            else:
                journal.append(self.journal_path, {"end": status})
        except OSError:
            pass
        if changed:
            note = (f"damper: note: {self.root} holds an incomplete run ({status}); the files written so far are "
                    "listed in its journal; replace it with --force")
            try:  # printed by the command line after its own line about the error
                exc.damper_note = note
            except AttributeError:
                print(note, file=sys.stderr)
        self._release(remove_dir=not changed)

    def _release(self, remove_dir=False):
        journal.deactivate()
        if self.fd is None:
            return
        try:
            os.unlink(os.path.join(self.root, journal.LOCK_NAME))  # while still locked: see _acquire
        except OSError:
            pass
        os.close(self.fd)
        self.fd = None
        if remove_dir and self.created_dir:
            try:
                os.rmdir(self.root)
            except OSError:
                pass


__all__ = ["MODES", "RunDirectory"]
