"""The audit trail of one command: what was run, on which files, when, by which version.

A laboratory that files a result must be able to show later exactly which inputs produced it. The
record holds the command line, bayespool's version, the seed, the date (UTC) and, for every input
file, its name, size in bytes and SHA-256 digest (FIPS 180-4), read in chunks so large files cost
little memory. The report prints it and ``--json`` carries it; anyone can check a file against it
with ``sha256sum``.
"""
from __future__ import annotations

import hashlib
import shlex
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

from . import __version__
from .io import split_sheet

CHUNK = 1 << 20


def sha256_of(path) -> str:
    """Hex SHA-256 digest of a file's bytes."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(CHUNK), b""):
            digest.update(block)
    return digest.hexdigest()


@dataclass
class Audit:
    """The record; ``inputs`` holds one dict per file: role, name, size, sha256 (and sheet)."""

    command: str | None
    version: str
    seed: int | None
    created: datetime | str
    inputs: list = field(default_factory=list)

    @property
    def date(self) -> str:
        """The date as ISO 8601 text (a date given as text is kept as given)."""
        if isinstance(self.created, datetime):
            return self.created.isoformat(timespec="seconds")
        return str(self.created)

    def to_dict(self) -> dict:
        return {"command": self.command, "version": self.version, "seed": self.seed,
                "date": self.date, "inputs": [dict(f) for f in self.inputs]}


def file_record(role: str, path) -> dict:
    """Name, size and SHA-256 of one input (the workbook itself for ``book.xlsx#Sheet``)."""
    file, sheet = split_sheet(path)
    p = Path(file)
    out = {"role": role, "name": str(path), "size": p.stat().st_size, "sha256": sha256_of(p)}
    if sheet is not None:
        out["sheet"] = sheet
    return out


def make_audit(inputs: dict, *, argv=None, seed=None, created: datetime | str | None = None) -> Audit:
    """The audit of a command whose input files are ``inputs`` (role -> path or None).

    ``argv`` are the command's arguments (without the program name); None when the work was done
    through the Python library, which the record then says.
    """
    files = [file_record(role, path) for role, path in inputs.items()
             if path is not None and Path(split_sheet(path)[0]).is_file()]
    command = None if argv is None else "bayespool " + shlex.join(str(a) for a in argv)
    when = created if created is not None else datetime.now(timezone.utc)
    return Audit(command, __version__, seed, when, files)
