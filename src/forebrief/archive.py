"""The dated record of each briefing: ``ARCHIVE/<YYYY-MM-DD>/``.

A record is written into a temporary folder beside its final place, flushed to disk, and then
moved into place with one rename, so a crash leaves either no record or a complete one
(``os.replace`` is atomic on one POSIX file system). An existing record is never changed.
``manifest.json`` lists the tool version, the effective configuration and the SHA-256 and size
of every input and output, so anyone can check the record with ``sha256sum``-style tools.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import tempfile
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

import pandas as pd

from forebrief.errors import ArchiveError
from forebrief.io.outputs import json_ready, write_csv

__all__ = [
    "MANIFEST",
    "file_digest",
    "latest_record_before",
    "read_facts",
    "record_dir",
    "write_record",
]

MANIFEST = "manifest.json"


def record_dir(archive: Path, issued: pd.Timestamp) -> Path:
    return archive / f"{pd.Timestamp(issued):%Y-%m-%d}"


def file_digest(path: Path) -> str:
    """SHA-256 of a file, read in blocks."""
    with path.open("rb") as fh:
        return hashlib.file_digest(fh, "sha256").hexdigest()


def _records(archive: Path) -> list[Path]:
    if not archive.is_dir():
        return []
    out = []
    for p in archive.iterdir():
        if p.is_dir() and (p / MANIFEST).is_file() and len(p.name) >= 10:
            try:
                pd.Timestamp(p.name[:10])
            except ValueError:
                continue
            out.append(p)
    return sorted(out, key=lambda p: p.name)


def latest_record_before(archive: Path, issued: pd.Timestamp) -> Path | None:
    """The newest complete record dated before ``issued`` (None if there is none)."""
    day = f"{pd.Timestamp(issued):%Y-%m-%d}"
    earlier = [p for p in _records(archive) if p.name[:10] < day]
    return earlier[-1] if earlier else None


def read_facts(record: Path) -> dict[str, Any] | None:
    path = record / "facts.json"
    if not path.is_file():
        return None
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError) as exc:
        raise ArchiveError(f"{path}: cannot be read ({exc}); fix: restore the record from a "
                           "backup, or move it out of the archive") from None
    return data if isinstance(data, dict) else None


def _fsync_dir(path: Path) -> None:
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _write_bytes(path: Path, data: bytes) -> None:
    with path.open("wb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())


def write_record(
    archive: Path,
    issued: pd.Timestamp,
    *,
    tables: Mapping[str, pd.DataFrame],
    texts: Mapping[str, str],
    blobs: Mapping[str, bytes] | None = None,
    json_files: Mapping[str, Any],
    inputs: Iterable[Path],
    manifest_extra: Mapping[str, Any],
) -> Path:
    """Write a complete record for ``issued`` atomically; refuse if it already exists."""
    final = record_dir(archive, issued)
    if final.exists():
        raise ArchiveError(
            f"{final}: a record for {pd.Timestamp(issued):%Y-%m-%d} already exists and is never "
            "overwritten; fix: choose another --archive, or remove the record deliberately "
            "if it must be rebuilt"
        )
    try:
        archive.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{final.name}.", suffix=".partial", dir=archive))
    except OSError as exc:
        raise ArchiveError(f"{archive}: cannot write the archive ({exc.strerror}); fix: choose "
                           "a folder you can write to with --archive") from None
    try:
        for name, frame in tables.items():
            write_csv(frame, tmp / name)
        for name, text in texts.items():
            _write_bytes(tmp / name, text.encode("utf-8"))
        for name, data in (blobs or {}).items():
            _write_bytes(tmp / name, data)
        for name, payload in json_files.items():
            text = json.dumps(json_ready(payload), indent=2, ensure_ascii=False,
                              allow_nan=False)
            _write_bytes(tmp / name, (text + "\n").encode("utf-8"))
        outputs = sorted(p for p in tmp.rglob("*") if p.is_file())
        manifest = {
            **json_ready(dict(manifest_extra)),
            "issued": f"{pd.Timestamp(issued):%Y-%m-%d}",
            "inputs": [
                {"path": str(p), "sha256": file_digest(p), "bytes": p.stat().st_size}
                for p in sorted(set(inputs))
            ],
            "outputs": [
                {"path": p.relative_to(tmp).as_posix(), "sha256": file_digest(p),
                 "bytes": p.stat().st_size}
                for p in outputs
            ],
        }
        text = json.dumps(manifest, indent=2, ensure_ascii=False, allow_nan=False)
        _write_bytes(tmp / MANIFEST, (text + "\n").encode("utf-8"))
        _fsync_dir(tmp)
        if final.exists():
            raise ArchiveError(f"{final}: another run wrote this record meanwhile; nothing "
                               "was changed by this run")
        os.replace(tmp, final)
        _fsync_dir(archive)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return final
