"""The dated, verifiable record of each briefing, and the archive that holds them.

Layout of an archive folder::

    ARCHIVE/
      archive.sqlite            index (records, files, decisions, sends); rebuilt if lost
      .forebrief.lock           serialises concurrent runs
      2026-11-23/               one record per issue date ...
      2026-11-30/
      2026-11-30-r2/            ... and its revisions, each with its reason

A record holds the briefing (txt, html, pdf, eml), the tables and facts, ``inputs/`` (every
input file, gzip-compressed, so the run can be reproduced years later), ``manifest.json``,
``SHA256SUMS`` (``sha256sum -c`` format) and the append-only logs ``decisions.jsonl`` and
``sends.jsonl``.

Integrity:

- A record is written into a temporary folder beside its final place, flushed, then moved into
  place with one rename (``os.replace``, atomic on one POSIX file system): a crash leaves either
  no record or a complete one. A hidden ``.*.partial`` folder is what a crash leaves behind.
- ``manifest.json`` carries the SHA-256 of every data file and input, the analysis decisions,
  and the SHA-256 of the previous record's ``manifest.json`` and ``SHA256SUMS`` (in the order
  records were written), making the archive a hash chain. The PDF embeds the manifest, so the
  PDF and the e-mail are listed in ``SHA256SUMS`` rather than in the manifest.
- Each decision or send log line holds the hash of the line before it (the first, of the
  record's manifest), so an edited line breaks the chain.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import fcntl
import gzip
import hashlib
import json
import os
import secrets
import shutil
import sqlite3
import time
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from forebrief.errors import ArchiveError
from forebrief.io.outputs import json_bytes, json_ready

__all__ = [
    "DECISIONS",
    "INDEX",
    "LOCK",
    "LOGS",
    "MANIFEST",
    "SENDS",
    "SUMS",
    "ArchiveRecord",
    "InputFile",
    "VerifyReport",
    "append_log",
    "archive_lock",
    "canonical_json",
    "file_digest",
    "find_record",
    "index_rows",
    "latest_record_before",
    "list_records",
    "read_facts",
    "read_log",
    "rebuild_index",
    "record_dir",
    "verify_archive",
    "write_record",
]

MANIFEST = "manifest.json"
SUMS = "SHA256SUMS"
INDEX = "archive.sqlite"
LOCK = ".forebrief.lock"
DECISIONS = "decisions.jsonl"
SENDS = "sends.jsonl"
LOGS = (DECISIONS, SENDS)
#: SQLite application_id for forebrief archives ("FBRF").
APPLICATION_ID = 0x46425246
SCHEMA_VERSION = 1


def sha256_bytes(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def file_digest(path: Path) -> str:
    """SHA-256 of a file, read in blocks."""
    with path.open("rb") as fh:
        return hashlib.file_digest(fh, "sha256").hexdigest()


def canonical_json(payload: Any) -> bytes:
    """Canonical JSON (sorted keys, no spaces) for hashing log entries."""
    return json.dumps(
        json_ready(payload),
        sort_keys=True,
        separators=(",", ":"),
        ensure_ascii=False,
        allow_nan=False,
    ).encode("utf-8")


# --------------------------------------------------------------------------------------------
# records


@dataclass(frozen=True)
class InputFile:
    """One input of a run: where it was read, the label it is known by, and its role."""

    path: Path
    label: str
    role: str  # "forecasts" or "observations"


@dataclass(frozen=True)
class ArchiveRecord:
    """A record folder and what its manifest says about it."""

    name: str
    path: Path
    issued: str
    revision: int
    sequence: int
    manifest: Mapping[str, Any] = field(repr=False)

    @property
    def title(self) -> str:
        return str(self.manifest.get("title", ""))

    @property
    def headline(self) -> str:
        return str(self.manifest.get("headline", ""))


def record_dir(archive: Path, issued: pd.Timestamp, revision: int = 1) -> Path:
    base = f"{pd.Timestamp(issued):%Y-%m-%d}"
    return archive / (base if revision <= 1 else f"{base}-r{revision}")


def _parse_name(name: str) -> tuple[str, int] | None:
    """('2026-11-30', 1) for '2026-11-30', ('2026-11-30', 2) for '2026-11-30-r2'."""
    day = name[:10]
    try:
        dt.date.fromisoformat(day)
    except ValueError:
        return None
    if len(name) == 10:
        return day, 1
    if name[10:12] == "-r" and name[12:].isdigit():
        return day, int(name[12:])
    return None


def _read_manifest(path: Path) -> dict[str, Any]:
    try:
        data = json.loads((path / MANIFEST).read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError) as exc:
        raise ArchiveError(
            f"{path / MANIFEST}: cannot be read ({exc}); fix: restore the record from a backup"
        ) from None
    if not isinstance(data, dict):
        raise ArchiveError(f"{path / MANIFEST}: is not a manifest")
    return data


def _scan_records(archive: Path) -> tuple[list[ArchiveRecord], list[tuple[bool, str]]]:
    """The complete records, and (unreadable?, problem) for each dated folder that is not one."""
    if not archive.is_dir():
        return [], []
    out = []
    broken: list[tuple[bool, str]] = []
    for p in archive.iterdir():
        parsed = _parse_name(p.name)
        if parsed is None or not p.is_dir():
            continue
        if not (p / MANIFEST).is_file():
            broken.append(
                (
                    False,
                    f"{p / MANIFEST}: missing (the folder is not a complete "
                    "record; fix: restore the record from a backup, or move "
                    "the folder out of the archive)",
                )
            )
            continue
        try:
            m = _read_manifest(p)
            sequence = int(m.get("sequence", 0))
        except (ArchiveError, TypeError, ValueError) as exc:
            broken.append(
                (
                    True,
                    str(exc)
                    if isinstance(exc, ArchiveError)
                    else f"{p / MANIFEST}: is not a forebrief manifest ({exc}); fix: "
                    "restore the record from a backup",
                )
            )
            continue
        out.append(ArchiveRecord(p.name, p, parsed[0], parsed[1], sequence, m))
    return sorted(out, key=lambda r: (r.sequence, r.name)), broken


def list_records(archive: Path) -> list[ArchiveRecord]:
    """Every complete record in the archive, in the order they were written.

    A record folder whose manifest cannot be read raises :class:`ArchiveError`. The SQLite
    index is (re)created or completed from the folders on the way, so it is never lost for
    long (records that a crash left unindexed are added; nothing indexed is changed).
    """
    records, broken = _scan_records(archive)
    unreadable = [text for bad, text in broken if bad]
    if unreadable:
        raise ArchiveError(unreadable[0])
    if records:
        with (
            contextlib.suppress(sqlite3.Error, OSError, ArchiveError),
            _index(archive, sync=False) as db,
        ):
            _sync_index(db, records)
    return records


def find_record(archive: Path, date: str) -> ArchiveRecord:
    """The record named ``date``: ``YYYY-MM-DD`` gives the latest revision of that day,
    ``YYYY-MM-DD-rN`` revision N (``-r1`` the first, whose folder is the bare date)."""
    records = list_records(archive)
    parsed = _parse_name(date)
    if parsed is not None:
        day, revision = parsed
        same_day = sorted((r for r in records if r.issued == day), key=lambda r: r.revision)
        if len(date) == 10 and same_day:
            return same_day[-1]
        exact = [r for r in same_day if r.revision == revision]
        if exact:
            return exact[0]
    names = ", ".join(r.name for r in records[-5:]) or "none"
    raise ArchiveError(
        f"{archive}: no record for {date!r}; the latest records are: {names}; "
        "fix: give a date from `forebrief archive list`"
    )


def latest_record_before(archive: Path, issued: pd.Timestamp) -> Path | None:
    """The newest record (latest revision) dated before ``issued``."""
    day = f"{pd.Timestamp(issued):%Y-%m-%d}"
    earlier = [r for r in list_records(archive) if r.issued < day]
    if not earlier:
        return None
    latest_day = max(r.issued for r in earlier)
    return max((r for r in earlier if r.issued == latest_day), key=lambda r: r.revision).path


def read_facts(record: Path) -> dict[str, Any] | None:
    path = record / "facts.json"
    if not path.is_file():
        return None
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError) as exc:
        raise ArchiveError(
            f"{path}: cannot be read ({exc}); fix: restore the record from a "
            "backup, or move it out of the archive"
        ) from None
    return data if isinstance(data, dict) else None


# --------------------------------------------------------------------------------------------
# locking and atomic writing


@contextlib.contextmanager
def archive_lock(archive: Path, *, wait: float = 30.0) -> Iterator[None]:
    """Hold the archive's lock; wait up to ``wait`` seconds, then give up with a clear message."""
    try:
        archive.mkdir(parents=True, exist_ok=True)
        fh = (archive / LOCK).open("a+")
    except OSError as exc:
        raise ArchiveError(
            f"{archive}: cannot use the archive ({exc.strerror}); fix: choose a "
            "folder you can write to"
        ) from None
    deadline = time.monotonic() + wait
    try:
        while True:
            try:
                fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise ArchiveError(
                        f"{archive}: another forebrief run is writing this archive and did not "
                        f"finish within {wait:g} s; nothing was written; fix: wait for it to end "
                        "and run again"
                    ) from None
                time.sleep(0.1)
        yield
    finally:
        with contextlib.suppress(OSError):
            fcntl.flock(fh.fileno(), fcntl.LOCK_UN)
        fh.close()


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
    path.parent.mkdir(parents=True, exist_ok=True)
    with path.open("wb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())


def _sums_text(files: Mapping[str, bytes]) -> bytes:
    lines = [f"{sha256_bytes(data)}  {name}\n" for name, data in sorted(files.items())]
    return "".join(lines).encode("utf-8")


#: Called with the manifest's bytes and the data files; returns the sealed files (PDF, e-mail).
Sealer = Callable[[bytes, Mapping[str, bytes]], Mapping[str, bytes]]


def write_record(
    archive: Path,
    issued: pd.Timestamp,
    *,
    files: Mapping[str, bytes],
    inputs: Sequence[InputFile],
    manifest: Mapping[str, Any],
    seal: Sealer | None = None,
    revise_reason: str | None = None,
    wait: float = 30.0,
    _crash_hook: Callable[[str], None] | None = None,
) -> ArchiveRecord:
    """Write a complete record for ``issued``; refuse if one exists unless revising.

    ``files`` are the data files (name -> bytes); their hashes go into the manifest. ``seal``
    builds the files that embed the manifest (the PDF/A and the e-mail). Everything happens
    under the archive lock; the record appears in one rename, then the index is updated.
    """
    hook = _crash_hook or (lambda _stage: None)
    with archive_lock(archive, wait=wait):
        records = list_records(archive)
        day = f"{pd.Timestamp(issued):%Y-%m-%d}"
        same_day = sorted((r for r in records if r.issued == day), key=lambda r: r.revision)
        if same_day and revise_reason is None:
            raise ArchiveError(
                f"{same_day[-1].path}: a record for {day} already exists and is never "
                'overwritten; nothing was changed; fix: pass --revise --reason "..." to write '
                "a revision, or use another archive"
            )
        if revise_reason is not None and not revise_reason.strip():
            raise ArchiveError(
                "--reason must say why the record is revised; fix: "
                '--revise --reason "corrected observations for one region"'
            )
        revision = same_day[-1].revision + 1 if same_day else 1
        final = record_dir(archive, issued, revision)
        previous = records[-1] if records else None
        stored: dict[str, bytes] = {}
        input_entries = []
        for item in inputs:
            try:
                raw = item.path.read_bytes()
            except OSError as exc:
                raise ArchiveError(
                    f"{item.path}: cannot be read to archive it "
                    f"({exc.strerror}); fix: check the file"
                ) from None
            name = "inputs/" + item.label.lstrip("/").replace("..", "_") + ".gz"
            packed = gzip.compress(raw, compresslevel=6, mtime=0)
            stored[name] = packed
            input_entries.append(
                {
                    "role": item.role,
                    "label": item.label,
                    "path": str(item.path),
                    "sha256": sha256_bytes(raw),
                    "bytes": len(raw),
                    "stored": name,
                    "stored_sha256": sha256_bytes(packed),
                }
            )
        data = {**files, **stored}
        man = {
            **json_ready(dict(manifest)),
            "record": final.name,
            "issued": day,
            "revision": revision,
            "supersedes": same_day[-1].name if same_day else None,
            "revision_reason": revise_reason,
            "sequence": (previous.sequence + 1) if previous else 1,
            "previous_record": previous.name if previous else None,
            "previous_manifest_sha256": file_digest(previous.path / MANIFEST) if previous else None,
            "previous_sums_sha256": (
                file_digest(previous.path / SUMS)
                if previous and (previous.path / SUMS).is_file()
                else None
            ),
            "inputs": input_entries,
            "outputs": [
                {"path": n, "sha256": sha256_bytes(b), "bytes": len(b)}
                for n, b in sorted(files.items())
            ],
        }
        manifest_bytes = json_bytes(man)
        sealed = dict(seal(manifest_bytes, files)) if seal else {}
        everything = {**data, MANIFEST: manifest_bytes, **sealed}
        everything[SUMS] = _sums_text(everything)
        if final.exists():
            raise ArchiveError(
                f"{final}: already exists but is not a complete record (no readable "
                f"{MANIFEST}); nothing was written; fix: move that folder out of the archive "
                "and run again"
            )
        hook("before-temp")
        # a fresh hidden folder beside the final one; mkdir (not mkdtemp, whose folder is
        # private to its owner) so the record gets the same permissions as its neighbours
        tmp = archive / f".{final.name}.{secrets.token_hex(6)}.partial"
        try:
            tmp.mkdir()
        except OSError as exc:
            raise ArchiveError(
                f"{archive}: cannot write the archive ({exc.strerror}); fix: "
                "choose a folder you can write to"
            ) from None
        try:
            for i, (name, blob) in enumerate(sorted(everything.items())):
                _write_bytes(tmp / name, blob)
                if i == len(everything) // 2:
                    hook("half-written")
            for sub in sorted({p.parent for p in tmp.rglob("*")}, reverse=True):
                _fsync_dir(sub)
            hook("before-rename")
            os.replace(tmp, final)
            _fsync_dir(archive)
        except OSError as exc:
            shutil.rmtree(tmp, ignore_errors=True)
            raise ArchiveError(
                f"{final}: the record could not be written ({exc.strerror}); "
                "nothing was written; fix: free disk space or check the "
                "folder's permissions, and run again"
            ) from None
        except BaseException:
            shutil.rmtree(tmp, ignore_errors=True)
            raise
        hook("after-rename")
        record = ArchiveRecord(final.name, final, day, revision, int(man["sequence"]), man)
        with contextlib.suppress(sqlite3.Error, OSError, ArchiveError), _index(archive) as db:
            _index_record(db, record)
        return record


# --------------------------------------------------------------------------------------------
# append-only logs (decisions, sends)


def read_log(record: Path, name: str) -> list[dict[str, Any]]:
    path = record / name
    if not path.is_file():
        return []
    out = []
    for i, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        if not line.strip():
            continue
        try:
            entry = json.loads(line)
        except json.JSONDecodeError:
            raise ArchiveError(
                f"{path} line {i}: not valid JSON; the log was edited; fix: "
                "restore it from a backup"
            ) from None
        if not isinstance(entry, dict):
            raise ArchiveError(
                f"{path} line {i}: not a log entry (a JSON object); the log was "
                "edited; fix: restore it from a backup"
            )
        out.append(entry)
    return out


def append_log(
    archive: Path, record: ArchiveRecord, name: str, entry: Mapping[str, Any]
) -> dict[str, Any]:
    """Append one hash-chained entry to a record's log (under the archive lock)."""
    if name not in LOGS:
        raise ValueError(f"unknown log {name!r}")
    with archive_lock(archive):
        broken = _check_log(record, name)
        if broken:
            raise ArchiveError(
                f"{broken[0]}; nothing was appended; fix: restore the log from "
                "a backup (forebrief archive verify lists every problem)"
            )
        existing = read_log(record.path, name)
        prev = existing[-1]["hash"] if existing else file_digest(record.path / MANIFEST)
        body = {
            **json_ready(dict(entry)),
            "seq": len(existing) + 1,
            "record": record.name,
            "prev": prev,
        }
        full = {**body, "hash": sha256_bytes(canonical_json(body))}
        line = json.dumps(full, ensure_ascii=False, sort_keys=True) + "\n"
        path = record.path / name
        with path.open("a", encoding="utf-8") as fh:
            fh.write(line)
            fh.flush()
            os.fsync(fh.fileno())
        with contextlib.suppress(sqlite3.Error, OSError, ArchiveError), _index(archive) as db:
            _index_log(db, record.name, name, full)
        return full


def _check_log(record: ArchiveRecord, name: str) -> list[str]:
    problems = []
    path = record.path / name
    try:
        entries = read_log(record.path, name)
    except ArchiveError as exc:
        return [str(exc)]
    prev = file_digest(record.path / MANIFEST) if (record.path / MANIFEST).is_file() else None
    for i, e in enumerate(entries, start=1):
        body = {k: v for k, v in e.items() if k != "hash"}
        if e.get("prev") != prev:
            problems.append(
                f"{path} entry {i}: does not follow the entry before it (the log "
                "was edited, reordered or cut)"
            )
        if sha256_bytes(canonical_json(body)) != e.get("hash"):
            problems.append(
                f"{path} entry {i}: its content does not match its hash (the entry was edited)"
            )
        if e.get("seq") != i:
            problems.append(f"{path} entry {i}: numbered {e.get('seq')!r}, expected {i}")
        prev = e.get("hash")
    return problems


# --------------------------------------------------------------------------------------------
# verification


@dataclass(frozen=True)
class VerifyReport:
    checked: tuple[str, ...]
    problems: tuple[str, ...]
    warnings: tuple[str, ...] = ()

    @property
    def ok(self) -> bool:
        return not self.problems


def _read_sums(sums: Path) -> tuple[dict[str, str], list[str]]:
    """The lines of a ``SHA256SUMS`` file (name -> digest), and a problem per bad line."""
    listed: dict[str, str] = {}
    problems = []
    try:
        text = sums.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        return {}, [f"{sums}: cannot be read ({exc}); the file was changed"]
    for i, line in enumerate(text.splitlines(), start=1):
        digest, sep, name = line.partition("  ")
        if (
            not sep
            or not name
            or len(digest) != 64
            or any(c not in "0123456789abcdef" for c in digest)
        ):
            problems.append(f"{sums} line {i}: not a 'SHA-256  name' line (the file was changed)")
            continue
        listed[name] = digest
    return listed, problems


def _verify_record(record: ArchiveRecord) -> list[str]:
    """Every file against ``SHA256SUMS`` and ``manifest.json``; no file added; the logs."""
    problems: list[str] = []
    root = record.path
    sums = root / SUMS
    listed: dict[str, str] = {}
    if not sums.is_file():
        problems.append(f"{sums}: missing")
    else:
        listed, bad = _read_sums(sums)
        problems.extend(bad)
    m = record.manifest
    # what the manifest says (the data files and the stored inputs)
    declared: dict[str, str] = {}
    try:
        for out in m.get("outputs", []):
            declared[str(out["path"])] = str(out["sha256"])
        for item in m.get("inputs", []):
            declared[str(item["stored"])] = str(item["stored_sha256"])
    except (TypeError, KeyError, AttributeError):
        problems.append(
            f"{root / MANIFEST}: its outputs or inputs are not in forebrief's form "
            "(the file was changed)"
        )
    if sums.is_file() and MANIFEST not in listed:
        problems.append(f"{sums}: does not list {MANIFEST} (the file was changed)")
    for name in sorted(set(listed) | set(declared)):
        path = root / name
        in_sums, in_manifest = listed.get(name), declared.get(name)
        if not path.is_file():
            problems.append(f"{path}: missing")
            continue
        actual = file_digest(path)
        if in_manifest is not None:
            if actual != in_manifest:
                problems.append(f"{path}: changed (SHA-256 differs from {MANIFEST})")
            elif sums.is_file() and in_sums != in_manifest:
                problems.append(
                    f"{sums}: its line for {name} was changed or removed (the "
                    f"file itself matches {MANIFEST})"
                )
        elif actual != in_sums:
            problems.append(f"{path}: changed (SHA-256 differs from its line in {SUMS})")
    known = set(listed) | set(declared) | {SUMS, *LOGS}
    for path in sorted(p for p in root.rglob("*") if p.is_file() or p.is_symlink()):
        rel = path.relative_to(root).as_posix()
        if rel not in known:
            problems.append(f"{path}: not part of the record (added after it was written)")
    for name in LOGS:
        problems.extend(_check_log(record, name))
    return problems


def _index_witness(archive: Path) -> dict[str, Any] | None:
    """What the index noted when records and log lines were written (read-only), or None."""
    path = archive / INDEX
    if not path.is_file():
        return None
    try:
        db = sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True, timeout=30)
    except sqlite3.Error:
        return None
    try:
        records = dict(db.execute("SELECT name, manifest_sha256 FROM records"))
        logs: dict[tuple[str, str], dict[int, str]] = {}
        for table, log in (("decisions", DECISIONS), ("sends", SENDS)):
            for rec, seq, digest in db.execute(f"SELECT record, seq, hash FROM {table}"):
                logs.setdefault((rec, log), {})[int(seq)] = digest
    except sqlite3.Error:
        return None
    finally:
        db.close()
    return {"records": records, "logs": logs}


def _compare_with_index(
    witness: Mapping[str, Any],
    records: Sequence[ArchiveRecord],
    chosen: Sequence[ArchiveRecord],
    archive: Path,
    present: set[str],
) -> list[str]:
    problems = []
    by_name = {r.name: r for r in records}
    for name in sorted(set(witness["records"]) - present):
        problems.append(
            f"{archive / name}: missing (the index {INDEX} lists this record; it "
            "was removed or renamed); fix: restore it from a backup, or run "
            "`forebrief archive reindex` if it was removed on purpose"
        )
    for r in chosen:
        noted = witness["records"].get(r.name)
        if (
            noted is not None
            and (r.path / MANIFEST).is_file()
            and file_digest(r.path / MANIFEST) != noted
        ):
            problems.append(
                f"{r.path / MANIFEST}: differs from the one noted in {INDEX} when "
                "the record was written"
            )
        for log in LOGS:
            noted_log = witness["logs"].get((r.name, log), {})
            if not noted_log:
                continue
            try:
                now = {int(e.get("seq", 0)): e.get("hash") for e in read_log(r.path, log)}
            except ArchiveError:
                continue  # reported by the log check
            for seq, digest in sorted(noted_log.items()):
                if now.get(seq) != digest:
                    problems.append(
                        f"{by_name[r.name].path / log} entry {seq}: noted in "
                        f"{INDEX} but missing or changed in the log"
                    )
    return problems


def verify_archive(archive: Path, date: str | None = None) -> VerifyReport:
    """Recompute every hash, the chain of records, and the decision and send logs.

    The index, where it exists, is a second witness: a record or log line it noted that has
    since gone or changed is a problem too. Cost: one read of every file of the records.
    """
    if not archive.is_dir():
        raise ArchiveError(f"{archive}: no such archive folder; fix: check the path")
    witness = _index_witness(archive)
    records, broken = _scan_records(archive)
    problems: list[str] = [text for _bad, text in broken]
    warnings: list[str] = []
    chosen = records if date is None else [find_record(archive, date)]
    for r in chosen:
        problems.extend(_verify_record(r))
    # the chain, in the order records were written
    for i, r in enumerate(records):
        expected_seq = i + 1
        if r.sequence != expected_seq:
            problems.append(
                f"{r.path}: is record {r.sequence} of the chain, expected "
                f"{expected_seq}: a record before it is missing"
            )
        prev = records[i - 1] if i else None
        want = r.manifest.get("previous_manifest_sha256")
        if prev is None:
            if want is not None:
                problems.append(
                    f"{r.path}: follows {r.manifest.get('previous_record')!r}, "
                    "which is missing (the chain is broken)"
                )
            continue
        if r.manifest.get("previous_record") != prev.name:
            problems.append(
                f"{r.path}: follows {r.manifest.get('previous_record')!r} but the "
                f"archive has {prev.name!r} before it: the chain is broken"
            )
        elif want != file_digest(prev.path / MANIFEST):
            problems.append(
                f"{prev.path / MANIFEST}: changed since {r.name} was written "
                "(the hash chain is broken)"
            )
        want_sums = r.manifest.get("previous_sums_sha256")
        if (
            want_sums
            and (prev.path / SUMS).is_file()
            and want_sums != file_digest(prev.path / SUMS)
        ):
            problems.append(
                f"{prev.path / SUMS}: changed since {r.name} was written (the hash chain is broken)"
            )
    if witness is not None:
        present = {p.name for p in archive.iterdir() if p.is_dir()}
        problems.extend(_compare_with_index(witness, records, chosen, archive, present))
    for p in sorted(archive.glob(".*.partial")):
        warnings.append(
            f"{p}: an unfinished record left by an interrupted run (not part of "
            "the archive; safe to delete)"
        )
    if records:
        with (
            contextlib.suppress(sqlite3.Error, OSError, ArchiveError),
            _index(archive, sync=False) as db,
        ):
            _sync_index(db, records)
    return VerifyReport(tuple(r.name for r in chosen), tuple(problems), tuple(warnings))


# --------------------------------------------------------------------------------------------
# the SQLite index

_SCHEMA = f"""
PRAGMA application_id = {APPLICATION_ID};
PRAGMA user_version = {SCHEMA_VERSION};
CREATE TABLE IF NOT EXISTS records (
  name TEXT PRIMARY KEY, issued TEXT NOT NULL, revision INTEGER NOT NULL,
  sequence INTEGER NOT NULL, supersedes TEXT, reason TEXT, title TEXT, headline TEXT,
  manifest_sha256 TEXT NOT NULL, created TEXT
) STRICT;
CREATE TABLE IF NOT EXISTS files (
  record TEXT NOT NULL, path TEXT NOT NULL, sha256 TEXT NOT NULL, bytes INTEGER NOT NULL,
  PRIMARY KEY (record, path)
) STRICT;
CREATE TABLE IF NOT EXISTS decisions (
  record TEXT NOT NULL, seq INTEGER NOT NULL, time TEXT NOT NULL, by TEXT NOT NULL,
  text TEXT NOT NULL, ref TEXT, hash TEXT NOT NULL, PRIMARY KEY (record, seq)
) STRICT;
CREATE TABLE IF NOT EXISTS sends (
  record TEXT NOT NULL, seq INTEGER NOT NULL, time TEXT NOT NULL, recipients TEXT NOT NULL,
  server_reply TEXT, hash TEXT NOT NULL, PRIMARY KEY (record, seq)
) STRICT;
CREATE TRIGGER IF NOT EXISTS decisions_append_only_u BEFORE UPDATE ON decisions
  BEGIN SELECT RAISE(ABORT, 'decisions are append-only'); END;
CREATE TRIGGER IF NOT EXISTS decisions_append_only_d BEFORE DELETE ON decisions
  BEGIN SELECT RAISE(ABORT, 'decisions are append-only'); END;
CREATE TRIGGER IF NOT EXISTS sends_append_only_u BEFORE UPDATE ON sends
  BEGIN SELECT RAISE(ABORT, 'sends are append-only'); END;
CREATE TRIGGER IF NOT EXISTS sends_append_only_d BEFORE DELETE ON sends
  BEGIN SELECT RAISE(ABORT, 'sends are append-only'); END;
"""


@contextlib.contextmanager
def _index(archive: Path, *, sync: bool = True) -> Iterator[sqlite3.Connection]:
    """The open index, created (and filled from the folders) when missing.

    With ``sync``, records and log lines missing from an existing index (a crash between the
    rename and the index update) are added; nothing already indexed is changed.
    """
    path = archive / INDEX
    fresh = not path.exists()
    db = sqlite3.connect(path, timeout=30)
    try:
        app_id = db.execute("PRAGMA application_id").fetchone()[0]
        if app_id not in (0, APPLICATION_ID):
            raise ArchiveError(
                f"{path}: is not a forebrief index (application_id {app_id:#x}); "
                "fix: move that file out of the archive folder"
            )
        if db.execute("PRAGMA journal_mode").fetchone()[0] != "wal":
            db.execute("PRAGMA journal_mode=WAL")
        # the schema once (an index that is only read is not rewritten)
        if db.execute("PRAGMA user_version").fetchone()[0] != SCHEMA_VERSION:
            db.executescript(_SCHEMA)
        if fresh:
            _fill_index(db, archive)
        elif sync:
            _sync_index(db, _scan_records(archive)[0])
        with db:
            yield db
    finally:
        db.close()


def _index_record(db: sqlite3.Connection, r: ArchiveRecord) -> None:
    m = r.manifest
    db.execute(
        "INSERT OR REPLACE INTO records VALUES (?,?,?,?,?,?,?,?,?,?)",
        (
            r.name,
            r.issued,
            r.revision,
            r.sequence,
            m.get("supersedes"),
            m.get("revision_reason"),
            m.get("title"),
            m.get("headline"),
            file_digest(r.path / MANIFEST),
            m.get("created"),
        ),
    )
    sums = r.path / SUMS
    if sums.is_file():
        for line in sums.read_text(encoding="utf-8").splitlines():
            digest, _, name = line.partition("  ")
            if name:
                size = (r.path / name).stat().st_size if (r.path / name).is_file() else -1
                db.execute(
                    "INSERT OR REPLACE INTO files VALUES (?,?,?,?)", (r.name, name, digest, size)
                )


def _index_log(db: sqlite3.Connection, record: str, name: str, e: Mapping[str, Any]) -> None:
    if name == DECISIONS:
        db.execute(
            "INSERT OR IGNORE INTO decisions VALUES (?,?,?,?,?,?,?)",
            (
                record,
                e["seq"],
                e.get("time", ""),
                e.get("by", ""),
                e.get("text", ""),
                e.get("ref"),
                e["hash"],
            ),
        )
    else:
        db.execute(
            "INSERT OR IGNORE INTO sends VALUES (?,?,?,?,?,?)",
            (
                record,
                e["seq"],
                e.get("time", ""),
                json.dumps(e.get("recipients", [])),
                e.get("server_reply"),
                e["hash"],
            ),
        )


def _index_logs(db: sqlite3.Connection, r: ArchiveRecord) -> None:
    for name in LOGS:
        with contextlib.suppress(ArchiveError):
            for e in read_log(r.path, name):
                if "hash" in e and "seq" in e:
                    _index_log(db, r.name, name, e)


def _fill_index(db: sqlite3.Connection, archive: Path) -> None:
    with db:
        for r in _scan_records(archive)[0]:
            _index_record(db, r)
            _index_logs(db, r)


def _sync_index(db: sqlite3.Connection, records: Sequence[ArchiveRecord]) -> None:
    """Add the records and log lines the index lacks; never change what it holds."""
    indexed = {name for (name,) in db.execute("SELECT name FROM records")}
    logged: set[tuple[str, str, int]] = set()
    for table, log in (("decisions", DECISIONS), ("sends", SENDS)):
        logged |= {
            (rec, log, int(seq)) for rec, seq in db.execute(f"SELECT record, seq FROM {table}")
        }
    with db:
        for r in records:
            if r.name not in indexed:
                _index_record(db, r)
            for name in LOGS:
                with contextlib.suppress(ArchiveError):
                    for e in read_log(r.path, name):
                        if "hash" in e and "seq" in e and (r.name, name, e["seq"]) not in logged:
                            _index_log(db, r.name, name, e)


def rebuild_index(archive: Path) -> Path:
    """Rebuild ``archive.sqlite`` from the record folders (the folders are the truth)."""
    with archive_lock(archive):
        path = archive / INDEX
        for suffix in ("", "-wal", "-shm"):
            with contextlib.suppress(FileNotFoundError):
                Path(str(path) + suffix).unlink()
        with _index(archive):
            pass
    return path


def index_rows(archive: Path, table: str) -> list[tuple[Any, ...]]:
    """All rows of one index table (for ``archive list``/``show`` and tests)."""
    if table not in ("records", "files", "decisions", "sends"):
        raise ValueError(table)
    with _index(archive) as db:
        return list(db.execute(f"SELECT * FROM {table}"))
