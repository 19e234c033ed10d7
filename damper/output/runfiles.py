"""The files of a run that the report may read: listed by the run, with matching SHA-256.

The report embeds a file only when the run's manifest (or, for a run in progress or an
incomplete one, its journal) lists it and its bytes still have the listed SHA-256; a
file added, changed or left behind by anything else is not shown (docs/run-directory.md).
"""

from __future__ import annotations

import base64
import hashlib
import json
import os
from dataclasses import dataclass

from ..errors import DamperError
from . import journal

#: Largest SVG inlined as vector graphics; a larger plot is inlined as its PNG, bytes.
MAX_SVG_BYTES = 3_000_000


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


# ---------------------------------------------------------------------------------
# reading for the report
# ---------------------------------------------------------------------------------
def read_json(files, name, required):
    """A listed JSON document of the run and its SHA-256; (None, None) when it is not listed."""
    data = files.read(name)
    if data is None:
        if required:
            if name in files.changed:
                raise DamperError(f"{os.path.join(files.root, name)}: changed since the run wrote it (its SHA-256 no "
                                  "longer matches the run's list); rerun 'damper design'")
            raise DamperError(
                f"{files.root}: no design.json here; give the directory of a finished 'damper design CASE --out DIR' run"
            )
        return None, None
    sha = hashlib.sha256(data).hexdigest()
    try:
        return json.loads(data.decode("utf-8")), sha
    except (ValueError, UnicodeDecodeError) as exc:
        if required:
            raise DamperError(f"{os.path.join(files.root, name)}: not valid JSON ({exc}); rerun 'damper design'") from None
        return {"_unreadable": f"not valid JSON ({exc})"}, sha


def _data_uri(name, data):
    ext = os.path.splitext(name)[1].lower()
    mime = {".svg": "image/svg+xml", ".png": "image/png"}[ext]
    return f"data:{mime};base64,{base64.b64encode(data).decode('ascii')}"


def image_uri(files, stem_candidates):
    """The data URI of the first listed plot among `stem_candidates` (SVG first), or None.

    `files` is the run's :class:`~damper.output.runfiles.RunFiles`: a plot the run does
    not list, or whose bytes changed since, is never embedded.
    """
    for stem in stem_candidates:
        stem = stem.replace(os.sep, "/")
        svg = files.read(stem + ".svg")
        if svg is not None and len(svg) <= MAX_SVG_BYTES:
            return _data_uri(stem + ".svg", svg)
        png = files.read(stem + ".png")
        if png is not None:
            return _data_uri(stem + ".png", png)
    return None


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


__all__ = ["RunFiles", "image_uri", "read_json"]
