"""The dated archive: records, manifests, logs, verification and the index.

Only :mod:`forebrief.app` uses it; import from this package, not its modules.
"""

from __future__ import annotations

from forebrief.record.archive import (
    DECISIONS,
    INDEX,
    LOCK,
    LOGS,
    MANIFEST,
    SENDS,
    SUMS,
    ArchiveRecord,
    InputFile,
    VerifyReport,
    append_log,
    archive_lock,
    canonical_json,
    file_digest,
    find_record,
    index_rows,
    latest_record_before,
    list_records,
    read_facts,
    read_log,
    rebuild_index,
    record_dir,
    verify_archive,
    write_record,
)

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
