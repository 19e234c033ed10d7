"""The files of a run that the report may read: listed by the run, with matching SHA-256.

The report embeds a file only when the run's manifest (or, for a run in progress or an
incomplete one, its journal) lists it and its bytes still have the listed SHA-256; a
file added, changed or left behind by anything else is not shown (docs/run-directory.md).
"""

from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass

from ..errors import DamperError
from . import journal


@dataclass(frozen=True)
class RunFiles:
    """Listed files of a run directory, verified once when opened and again when read.

    Attributes
    ----------
    root : str
        The run directory.
    listed : dict
        ``{relative path ('/' separators): sha256}`` of the files whose bytes matched.
    complete : bool
        False for a run without a complete manifest (interrupted or failed).
    changed : tuple of str
        Listed files that are missing or whose bytes no longer match (left out).
    """

    root: str
    listed: dict
    complete: bool
    changed: tuple = ()

    @classmethod
    def verified(cls, root, files, complete=True) -> "RunFiles":
        """Check every listed file now (`files`: ``{path: {"sha256": ...}}``)."""
        ok, changed = {}, []
        for rel in sorted(files):
            sha = (files[rel] or {}).get("sha256")
            data = _read(root, rel)
            if data is not None and sha and hashlib.sha256(data).hexdigest() == sha:
                ok[rel] = sha
            else:
                changed.append(rel)
        return cls(os.fspath(root), ok, complete, tuple(changed))

    @classmethod
    def of_directory(cls, root) -> "RunFiles":
        """The files a finished (or incomplete) run directory lists.

        Raises
        ------
        DamperError
            If the directory has neither a manifest nor a journal of a damper run.
        """
        root = os.fspath(root)
        manifest = journal.read_manifest(root)
        entries = journal.read_entries(os.path.join(root, journal.JOURNAL_NAME))
        if manifest is None and entries is None:
            raise DamperError(
                f"{root}: no manifest.json or journal of a damper run here (written by an older version, or not "
                f"by damper); rerun 'damper design CASE --out {root}'"
            )
        files = journal.listed_files(manifest, entries)
        return cls.verified(root, files, complete=manifest is not None and entries is None)

    def has(self, rel) -> bool:
        """True when `rel` is listed and matched."""
        return _norm(rel) in self.listed

    def read(self, rel):
        """The bytes of a listed file, or None (not listed, missing, or changed since)."""
        rel = _norm(rel)
        sha = self.listed.get(rel)
        if sha is None:
            return None
        data = _read(self.root, rel)
        if data is None or hashlib.sha256(data).hexdigest() != sha:
            return None
        return data

    def names(self, directory="") -> list:
        """Listed files directly inside `directory` ('' for the top), as relative paths, sorted."""
        prefix = _norm(directory) + "/" if directory else ""
        return sorted(p for p in self.listed if p.startswith(prefix) and "/" not in p[len(prefix):])


def _norm(rel) -> str:
    return os.fspath(rel).replace(os.sep, "/")


def _read(root, rel):
    from ..readfile import read_regular_file

    try:  # never blocks on a FIFO put in a listed file's place
        return read_regular_file(os.path.join(root, *rel.split("/")), MAX_FILE_BYTES)
    except OSError:
        return None


#: Largest file of a run the report reads, bytes.
MAX_FILE_BYTES = 1 << 31


__all__ = ["RunFiles"]
