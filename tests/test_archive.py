"""The dated archive: atomic records, revisions, the lock, the manifest and hash chain, the
SQLite index, decisions, sending through the command line, PDF/A-3b, and tampering.

Outside checks: GNU coreutils ``sha256sum -c`` (the real command, run in the record folder)
must accept every ``SHA256SUMS`` and reject the tampered ones; hashes are recomputed here
with :mod:`hashlib` (FIPS 180-4 SHA-256) independently of forebrief's helpers; the SQLite
library itself answers ``PRAGMA journal_mode``, ``application_id``, ``integrity_check`` and
``table_list`` (STRICT tables need SQLite >= 3.37, sqlite.org/stricttables.html) and raises
the append-only triggers; pypdf (an independent PDF reader) reads the XMP metadata, the
output intent and the attachments (ISO 19005-3:2012, PDF/A-3: ``pdfaid:part=3``,
``pdfaid:conformance=B``, OutputIntent subtype ``/GTS_PDFA1``); an aiosmtpd server (the SMTP
server the Python docs name as the replacement of ``smtpd``) receives the e-mail; a real
``SIGKILL`` of a real process interrupts the writes. The record's inputs are the invented
demo scenario (forebrief.demo), for the demo only.

Cost: the demo, two more weekly runs, one reproduction and one crash driver run as
subprocesses, two at a time, in one module fixture (about a minute on two cores).
"""

from __future__ import annotations

import gzip
import hashlib
import importlib.metadata
import json
import os
import shutil
import socket
import sqlite3
import subprocess
import sys
import textwrap
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from email import message_from_bytes
from email import policy as email_policy
from pathlib import Path
from typing import Any

import pytest

import forebrief
from forebrief import record as arc
from forebrief.cli import main
from forebrief.errors import ArchiveError

pytestmark = pytest.mark.slow

DEMO_DAY = "2026-11-30"  # the demo's latest issue date
EARLIER_DAY = "2026-11-23"
REASON = "observations for Fernquill were corrected by the reporting office"
STAGES = ("before-temp", "half-written", "before-rename", "after-rename")
ATTACHED = ("facts.json", "ensemble.csv", "scores_by_model.csv", "manifest.json")

Run = Callable[..., tuple[int, str, str]]


# --------------------------------------------------------------------------------------------
# helpers


def sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def snapshot(folder: Path) -> dict[str, bytes]:
    """Every file below ``folder`` (relative name -> bytes)."""
    return {
        p.relative_to(folder).as_posix(): p.read_bytes()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


def sha256sum_check(record: Path) -> subprocess.CompletedProcess[str]:
    """GNU coreutils ``sha256sum -c SHA256SUMS``, run in the record folder."""
    exe = shutil.which("sha256sum")
    assert exe is not None, "coreutils sha256sum is needed for this check"
    return subprocess.run(
        [exe, "-c", "--strict", arc.SUMS],
        cwd=record,
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )


def forebrief_cmd(*argv: object) -> list[str]:
    exe = shutil.which("forebrief")
    assert exe is not None, "the forebrief console script is not installed"
    return [exe, *map(str, argv)]


def subprocess_env() -> dict[str, str]:
    return {**os.environ, "NO_COLOR": "1", "MPLBACKEND": "Agg"}


def finish(proc: subprocess.Popen[str], what: str, timeout: float = 300) -> tuple[str, str]:
    out, err = proc.communicate(timeout=timeout)
    assert proc.returncode == 0, f"{what} failed ({proc.returncode}):\n{out}\n{err}"
    return out, err


@pytest.fixture
def run(capsys: pytest.CaptureFixture[str]) -> Run:
    """Call ``main(argv)`` in this process (arguments one by one); return (exit code, stdout, stderr)."""

    def call(*argv: object) -> tuple[int, str, str]:
        try:
            code = main([str(a) for a in argv])
        except SystemExit as exc:  # argparse usage errors
            code = int(exc.code) if exc.code is not None else 0
        out, err = capsys.readouterr()
        return code, out, err

    return call


# The crash driver: one weekly run (record_briefing) whose write is forked. Before the real
# write, the archive is copied once per stage; a child per stage then writes into its copy
# with record_briefing's _crash_hook, which SIGKILLs the child at that stage. The sealed files
# (PDF, e-mail) are computed once and reused (the manifest is the same byte for byte in every
# copy), so the driver costs one weekly run. After the crashes, a later normal write goes into
# a copy of each crashed archive that was left with a partial folder; the real write, into
# the archive itself, is the run's own record.
CRASH_DRIVER = textwrap.dedent("""
    import json, os, shutil, signal, sys
    from pathlib import Path
    import pandas as pd
    from forebrief.app import pipeline
    from forebrief.app.config import load_config

    config, issued, out_json = sys.argv[1:4]
    stages = sys.argv[4:]
    kill_at = {"stage": None}

    def crash_hook(stage):
        if stage == kill_at["stage"]:
            os.kill(os.getpid(), signal.SIGKILL)

    real_write = pipeline.write_record
    results = {}

    def forking_write(archive, issued, **kw):
        seal, cache = kw["seal"], {}

        def cached_seal(manifest, files):
            if manifest not in cache:
                cache[manifest] = dict(seal(manifest, files))
            return cache[manifest]

        kw["seal"] = cached_seal
        base = archive.parent
        for stage in stages:
            shutil.copytree(archive, base / f"archive-{stage}")
        record = real_write(archive, issued, **kw)  # the run's own record; fills the cache
        for stage in stages:
            pid = os.fork()
            if pid == 0:
                kill_at["stage"] = stage
                try:
                    real_write(base / f"archive-{stage}", issued, **kw)
                finally:
                    os._exit(3)  # reached only if the hook did not kill us
            _, status = os.waitpid(pid, 0)
            results[stage] = bool(os.WIFSIGNALED(status)
                                  and os.WTERMSIG(status) == signal.SIGKILL)
        for stage in stages[1:3]:  # these leave a .partial folder behind
            later = base / f"archive-{stage}-later"
            shutil.copytree(base / f"archive-{stage}", later)
            real_write(later, issued, **kw)
        return record

    pipeline.write_record = forking_write
    cfg = load_config(Path(config))
    pipeline.record_briefing(cfg, issued=pd.Timestamp(issued), _crash_hook=crash_hook)
    Path(out_json).write_text(json.dumps(results))
""")


@dataclass(frozen=True)
class World:
    demo: Path  # demo folder; its archive holds the demo's one record, untouched
    chain: Path  # a copy of the demo: + EARLIER_DAY (by the crash driver), + DEMO_DAY-r2
    crashed: dict[str, bool]  # stage -> the writer died of SIGKILL at that stage
    reproduce: tuple[int, str, str]  # exit code, stdout, stderr of `archive reproduce`

    @property
    def archive(self) -> Path:
        return self.demo / "archive"

    @property
    def record(self) -> Path:
        return self.archive / DEMO_DAY


@pytest.fixture(scope="module")
def world(tmp_path_factory: pytest.TempPathFactory) -> World:
    """The demo, then (two at a time) the crash driver and a reproduction, then a revision."""
    root = tmp_path_factory.mktemp("archive-world")
    env = subprocess_env()
    demo, chain = root / "demo", root / "chain"
    pipe = {"env": env, "text": True, "stdout": subprocess.PIPE, "stderr": subprocess.PIPE}
    finish(subprocess.Popen(forebrief_cmd("demo", "--out", demo, "-q"), **pipe), "forebrief demo")
    shutil.copytree(demo, chain)
    driver = root / "crash_driver.py"
    driver.write_text(CRASH_DRIVER, encoding="utf-8")
    crashed_json = root / "crashed.json"
    p_crash = subprocess.Popen(
        [
            sys.executable,
            str(driver),
            str(chain / "forebrief.toml"),
            EARLIER_DAY,
            str(crashed_json),
            *STAGES,
        ],
        **pipe,
    )
    p_repro = subprocess.Popen(
        forebrief_cmd("archive", "reproduce", demo / "archive", DEMO_DAY), **pipe
    )
    finish(p_crash, f"the crash driver (a weekly run for {EARLIER_DAY})")
    p_rev = subprocess.Popen(
        forebrief_cmd(
            "brief",
            "--config",
            chain / "forebrief.toml",
            "--issued",
            DEMO_DAY,
            "--revise",
            "--reason",
            REASON,
            "-q",
        ),
        **pipe,
    )
    out, err = p_repro.communicate(timeout=300)
    finish(p_rev, "forebrief brief --revise")
    return World(demo, chain, json.loads(crashed_json.read_text()), (p_repro.returncode, out, err))


@pytest.fixture
def archive_copy(world: World, tmp_path: Path) -> Path:
    """A private copy of the demo archive (one record), for destructive tests."""
    target = tmp_path / "archive"
    shutil.copytree(world.archive, target)
    return target


@pytest.fixture
def chain_copy(world: World, tmp_path: Path) -> Path:
    target = tmp_path / "chain"
    shutil.copytree(world.chain / "archive", target)
    return target


def add_decisions(archive: Path, n: int = 2, day: str = DEMO_DAY) -> Path:
    record = arc.find_record(archive, day)
    for i in range(n):
        arc.append_log(
            archive,
            record,
            arc.DECISIONS,
            {
                "time": f"2026-12-0{i + 1}T09:00:00+00:00",
                "by": "Duty director (invented)",
                "text": f"decision {i + 1}: keep the surge ward on standby",
                "ref": f"minute {i}",
            },
        )
    return record.path


# --------------------------------------------------------------------------------------------
# a record and its manifest


def test_the_demo_record_verifies_and_coreutils_agrees(world: World, run: Run) -> None:
    code, out, err = run("archive", "verify", world.archive)
    assert code == 0, out + err
    assert "verified 1 record(s)" in err
    assert "FAILED" not in out
    check = sha256sum_check(world.record)
    assert check.returncode == 0, check.stdout + check.stderr
    lines = check.stdout.splitlines()
    assert lines
    assert all(line.endswith(": OK") for line in lines)
    # every file of the record is listed, apart from SHA256SUMS and the append-only logs
    listed = {line.rsplit(": ", 1)[0] for line in lines}
    on_disk = set(snapshot(world.record)) - {arc.SUMS, *arc.LOGS}
    assert listed == on_disk
    assert {
        "briefing.pdf",
        "briefing.eml",
        "briefing.html",
        "briefing.txt",
        "manifest.json",
        "facts.json",
        "ensemble.csv",
        "scores_by_model.csv",
    } <= listed


def test_manifest_holds_version_config_inputs_outputs_and_decisions(world: World) -> None:
    from forebrief.app.config import load_config
    from forebrief.io.outputs import json_ready

    m = json.loads((world.record / arc.MANIFEST).read_text(encoding="utf-8"))
    assert m["tool_version"] == forebrief.__version__ == importlib.metadata.version("forebrief")
    cfg = load_config(world.demo / "forebrief.toml").with_overrides(archive=world.demo / "archive")
    assert m["config"] == json.loads(json.dumps(json_ready(cfg.as_dict())))
    assert m["config"]["window"] == 12
    assert m["config"]["alpha"] == "auto"
    # inputs: every demo input file, its SHA-256 and size, and a gzip copy in the record
    expected = {
        p.relative_to(world.demo).as_posix(): p.read_bytes()
        for p in [*(world.demo / "submissions").rglob("*.csv"), world.demo / "observations.csv"]
    }
    assert {i["label"] for i in m["inputs"]} == set(expected)
    for item in m["inputs"]:
        raw = expected[item["label"]]
        assert item["sha256"] == sha256(raw)
        assert item["bytes"] == len(raw)
        stored = (world.record / item["stored"]).read_bytes()
        assert gzip.decompress(stored) == raw
        assert item["stored_sha256"] == sha256(stored)
    assert {i["role"] for i in m["inputs"]} == {"forecasts", "observations"}
    # outputs: SHA-256 and size of every data file
    outputs = {o["path"]: o for o in m["outputs"]}
    for name in (
        "facts.json",
        "ensemble.csv",
        "scores_by_model.csv",
        "briefing.txt",
        "weights.csv",
        "excluded.csv",
    ):
        blob = (world.record / name).read_bytes()
        assert outputs[name]["sha256"] == sha256(blob)
        assert outputs[name]["bytes"] == len(blob)
    # the analysis decisions
    d = m["decisions"]
    assert d["window_weeks"] == 12
    assert d["alpha"], "no cutoff recorded"
    for g in d["alpha"]:
        assert 0.0 <= g["alpha"] <= 1.0
        assert g["how"].startswith("optimised")  # alpha = "auto" in the demo configuration
    assert d["members"]
    for q, h in {(mm["quantity"], mm["horizon"]) for mm in d["members"]}:
        weights = [mm["weight"] for mm in d["members"] if (mm["quantity"], mm["horizon"]) == (q, h)]
        assert all(w >= 0 for w in weights)
        assert sum(weights) == pytest.approx(1.0, abs=1e-5)  # weights of a pool sum to one
    n_excluded = len((world.record / "excluded.csv").read_text().splitlines()) - 1
    assert len(d["excluded"]) == n_excluded > 0  # the demo carries malformed submissions
    assert d["data_as_of"]
    assert d["latest_vintage_used"]
    # the first record of the chain has nothing before it
    assert m["sequence"] == 1
    assert m["previous_record"] is None
    assert m["previous_manifest_sha256"] is None


def test_pdf_is_marked_pdfa3b_and_attachments_are_the_record_files(world: World) -> None:
    from pypdf import PdfReader

    reader = PdfReader(world.record / "briefing.pdf")
    xmp = reader.xmp_metadata
    assert xmp is not None
    assert str(xmp.pdfaid_part) == "3"
    assert str(xmp.pdfaid_conformance) == "B"
    root = reader.trailer["/Root"]
    intents = [o.get_object() for o in root["/OutputIntents"]]
    assert [str(o["/S"]) for o in intents] == ["/GTS_PDFA1"]
    assert all("/DestOutputProfile" in o for o in intents)
    assert "/AF" in root  # PDF/A-3 associated files
    attachments = reader.attachments
    assert sorted(attachments) == sorted(ATTACHED)
    for name in ATTACHED:
        assert attachments[name] == [(world.record / name).read_bytes()], name


def test_email_in_the_record_carries_the_pdf(world: World) -> None:
    msg = message_from_bytes(
        (world.record / "briefing.eml").read_bytes(), policy=email_policy.default
    )
    pdfs = [p for p in msg.iter_attachments() if p.get_content_type() == "application/pdf"]
    assert len(pdfs) == 1
    assert pdfs[0].get_content() == (world.record / "briefing.pdf").read_bytes()


# --------------------------------------------------------------------------------------------
# list, show, reproduce


def test_list_and_show(world: World, run: Run) -> None:
    code, out, _ = run("archive", "list", world.chain / "archive")
    assert code == 0
    rows = [line.split() for line in out.splitlines()[2:]]
    assert [r[0] for r in rows] == [DEMO_DAY, EARLIER_DAY, f"{DEMO_DAY}-r2"]
    assert [r[1] for r in rows] == ["1", "1", "2"]  # revision
    assert "Weekly respiratory outlook" in out.splitlines()[0]
    assert f"[revised: {REASON}]" in out
    manifest = json.loads((world.record / arc.MANIFEST).read_text())
    assert manifest["headline"].split(". ")[0] in out
    code, out, _ = run("archive", "show", world.chain / "archive", DEMO_DAY)
    assert code == 0
    assert out.startswith(f"record      {DEMO_DAY}-r2  (sequence 3")  # the latest revision
    assert f"supersedes {DEMO_DAY}: {REASON}" in out
    code, out, _ = run("archive", "show", world.chain / "archive", DEMO_DAY + "-r1")
    assert code == 0
    assert out.startswith(f"record      {DEMO_DAY}  (sequence 1")  # the first revision
    code, out, _ = run("archive", "show", world.chain / "archive", DEMO_DAY + "-r2")
    assert out.startswith(f"record      {DEMO_DAY}-r2  (sequence 3")


def test_show_an_unknown_date_names_the_records(world: World, run: Run) -> None:
    code, out, err = run("archive", "show", world.archive, "2026-01-05")
    assert code == 1
    assert out == ""
    assert "no record for '2026-01-05'" in err
    assert DEMO_DAY in err
    assert "Traceback" not in err


def test_reproduce_from_the_archived_inputs_is_identical(world: World) -> None:
    code, out, err = world.reproduce
    assert code == 0, out + err
    assert out == "", out  # no DIFFERENT / MISSING lines
    assert f"{DEMO_DAY}: reproduced from its archived inputs" in err
    assert "outputs are identical" in err


# --------------------------------------------------------------------------------------------
# refusing a second run; revisions; the chain


def test_a_second_run_for_the_same_date_refuses_and_changes_nothing(
    world: World, tmp_path: Path, run: Run
) -> None:
    demo = tmp_path / "demo"
    shutil.copytree(world.demo, demo)
    before = snapshot(demo / "archive")
    code, out, err = run("brief", "--config", demo / "forebrief.toml", "-q")
    assert code == 1
    assert out == ""
    assert f"a record for {DEMO_DAY} already exists and is never overwritten" in err
    assert "--revise --reason" in err
    assert "Traceback" not in err
    assert snapshot(demo / "archive") == before
    assert not list((demo / "archive").glob(".*.partial"))


def test_revise_needs_a_reason(world: World, tmp_path: Path, run: Run) -> None:
    demo = tmp_path / "demo"
    shutil.copytree(world.demo, demo)
    before = snapshot(demo / "archive")
    code, _, err = run("brief", "--config", demo / "forebrief.toml", "--revise", "-q")
    assert code == 2
    assert "--reason" in err
    code, _, err = run(
        "brief", "--config", demo / "forebrief.toml", "--revise", "--reason", "  ", "-q"
    )
    assert code == 2
    assert "--reason" in err
    assert snapshot(demo / "archive") == before


def test_a_revision_records_its_reason_and_leaves_the_original(world: World, run: Run) -> None:
    archive = world.chain / "archive"
    r2 = archive / f"{DEMO_DAY}-r2"
    m = json.loads((r2 / arc.MANIFEST).read_text())
    assert (m["record"], m["issued"], m["revision"]) == (r2.name, DEMO_DAY, 2)
    assert m["supersedes"] == DEMO_DAY
    assert m["revision_reason"] == REASON
    # the original record is byte for byte what the demo wrote
    assert snapshot(archive / DEMO_DAY) == snapshot(world.record)
    code, out, err = run("archive", "verify", archive)
    assert code == 0, out + err
    assert "verified 3 record(s)" in err
    for name in (DEMO_DAY, EARLIER_DAY, r2.name):
        check = sha256sum_check(archive / name)
        assert check.returncode == 0, check.stdout


def test_records_form_a_hash_chain_in_the_order_written(world: World) -> None:
    archive = world.chain / "archive"
    order = [DEMO_DAY, EARLIER_DAY, f"{DEMO_DAY}-r2"]
    manifests = [json.loads((archive / n / arc.MANIFEST).read_text()) for n in order]
    assert [m["sequence"] for m in manifests] == [1, 2, 3]
    for before, m in zip(order, manifests[1:], strict=False):
        assert m["previous_record"] == before
        assert m["previous_manifest_sha256"] == sha256(
            (archive / before / arc.MANIFEST).read_bytes()
        )
        assert m["previous_sums_sha256"] == sha256((archive / before / arc.SUMS).read_bytes())
    # the PDF of each record embeds that record's manifest
    from pypdf import PdfReader

    for n in order:
        pdf = PdfReader(archive / n / "briefing.pdf")
        assert pdf.attachments[arc.MANIFEST] == [(archive / n / arc.MANIFEST).read_bytes()]


# --------------------------------------------------------------------------------------------
# the index


def test_index_is_wal_strict_with_application_id_and_intact(world: World) -> None:
    db = sqlite3.connect(world.chain / "archive" / arc.INDEX)
    try:
        assert db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert db.execute("PRAGMA application_id").fetchone()[0] == 0x46425246  # "FBRF"
        assert db.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        strict = {
            name: s
            for _schema, name, _type, _ncol, _wr, s in db.execute("PRAGMA table_list")
            if not name.startswith("sqlite_")
        }
        assert strict == {"records": 1, "files": 1, "decisions": 1, "sends": 1}
        names = [r[0] for r in db.execute("SELECT name FROM records ORDER BY sequence")]
        assert names == [DEMO_DAY, EARLIER_DAY, f"{DEMO_DAY}-r2"]
        # the files table mirrors SHA256SUMS
        files = dict(db.execute("SELECT path, sha256 FROM files WHERE record = ?", (DEMO_DAY,)))
    finally:
        db.close()
    sums = dict(
        reversed(line.split("  ", 1)) for line in (world.record / arc.SUMS).read_text().splitlines()
    )
    assert files == sums


def test_decisions_and_sends_are_append_only_in_the_index(archive_copy: Path) -> None:
    add_decisions(archive_copy, 1)
    record = arc.find_record(archive_copy, DEMO_DAY)
    arc.append_log(
        archive_copy,
        record,
        arc.SENDS,
        {
            "time": "2026-12-01T10:00:00+00:00",
            "recipients": ["lead@health.example"],
            "server_reply": "250 OK",
        },
    )
    db = sqlite3.connect(archive_copy / arc.INDEX)
    try:
        for table in ("decisions", "sends"):
            assert db.execute(f"SELECT count(*) FROM {table}").fetchone()[0] == 1
            with pytest.raises(sqlite3.IntegrityError, match="append-only"):
                db.execute(f"UPDATE {table} SET hash = 'x'")
            with pytest.raises(sqlite3.IntegrityError, match="append-only"):
                db.execute(f"DELETE FROM {table}")
            assert db.execute(f"SELECT count(*) FROM {table}").fetchone()[0] == 1
        assert db.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
    finally:
        db.close()


def index_content(archive: Path) -> dict[str, list[tuple[Any, ...]]]:
    return {
        t: sorted(arc.index_rows(archive, t)) for t in ("records", "files", "decisions", "sends")
    }


@pytest.mark.parametrize("how", ["reindex", "list", "show", "verify"])
def test_a_lost_index_is_rebuilt_from_the_folders(chain_copy: Path, run: Run, how: str) -> None:
    add_decisions(chain_copy, 2, day=EARLIER_DAY)
    before = index_content(chain_copy)
    assert len(before["records"]) == 3
    assert len(before["decisions"]) == 2
    for suffix in ("", "-wal", "-shm"):
        Path(str(chain_copy / arc.INDEX) + suffix).unlink(missing_ok=True)
    argv = {
        "reindex": ("archive", "reindex", chain_copy),
        "list": ("archive", "list", chain_copy),
        "show": ("archive", "show", chain_copy, EARLIER_DAY),
        "verify": ("archive", "verify", chain_copy),
    }[how]
    code, out, err = run(*argv)
    assert code == 0, out + err
    assert (chain_copy / arc.INDEX).is_file()
    assert index_content(chain_copy) == before


def test_an_index_that_missed_a_record_is_completed(chain_copy: Path, run: Run) -> None:
    # what a crash between the rename and the index update leaves: a record the index lacks
    before = index_content(chain_copy)
    db = sqlite3.connect(chain_copy / arc.INDEX)
    with db:
        db.execute("DELETE FROM files WHERE record = ?", (f"{DEMO_DAY}-r2",))
        db.execute("DELETE FROM records WHERE name = ?", (f"{DEMO_DAY}-r2",))
    db.close()
    code, _, _ = run("archive", "list", chain_copy)
    assert code == 0
    assert index_content(chain_copy) == before


# --------------------------------------------------------------------------------------------
# decisions


def canonical(payload: dict[str, Any]) -> bytes:
    """Canonical JSON as the archive docs define it (sorted keys, no spaces, UTF-8)."""
    return json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode(
        "utf-8"
    )


def test_decide_appends_hash_chained_entries(archive_copy: Path, run: Run) -> None:
    record = archive_copy / DEMO_DAY
    before = snapshot(record)
    code, _, err = run(
        "decide",
        archive_copy,
        "--date",
        DEMO_DAY,
        "--text",
        "Open the second surge ward",
        "--by",
        "Duty director (invented)",
        "--ref",
        "minute 14",
    )
    assert code == 0, err
    code, _, err = run(
        "decide",
        archive_copy,
        "--date",
        DEMO_DAY,
        "--text",
        "Keep visiting hours",
        "--by",
        "Duty director (invented)",
    )
    assert code == 0, err
    # only the decision log is new; nothing else in the record changed
    after = snapshot(record)
    assert set(after) - set(before) == {arc.DECISIONS}
    assert all(after[k] == v for k, v in before.items())
    entries = [json.loads(line) for line in after[arc.DECISIONS].decode().splitlines()]
    assert [e["seq"] for e in entries] == [1, 2]
    assert entries[0]["prev"] == sha256(before[arc.MANIFEST])
    assert entries[1]["prev"] == entries[0]["hash"]
    for e in entries:
        body = {k: v for k, v in e.items() if k != "hash"}
        assert e["hash"] == sha256(canonical(body))
    assert (entries[0]["text"], entries[0]["ref"]) == ("Open the second surge ward", "minute 14")
    assert entries[1]["ref"] is None
    code, out, _ = run("archive", "show", archive_copy, DEMO_DAY)
    assert "decision 1" in out
    assert "Open the second surge ward [ref minute 14]" in out
    assert "decision 2" in out
    assert "Keep visiting hours" in out
    code, out, _ = run("archive", "list", archive_copy)
    assert out.splitlines()[2].split()[2] == "2"  # decisions column
    rows = arc.index_rows(archive_copy, "decisions")
    assert [(r[1], r[4], r[6]) for r in sorted(rows)] == [
        (e["seq"], e["text"], e["hash"]) for e in entries
    ]
    code, out, err = run("archive", "verify", archive_copy)
    assert code == 0, out + err


@pytest.mark.parametrize(
    ("flag", "value"), [("--text", ""), ("--by", "  "), ("--text", "two\nlines")]
)
def test_decide_refuses_empty_or_multiline_fields(
    archive_copy: Path, run: Run, flag: str, value: str
) -> None:
    argv = {"--text": "Open a ward", "--by": "Director"}
    argv[flag] = value
    code, _, err = run(
        "decide", archive_copy, "--date", DEMO_DAY, "--text", argv["--text"], "--by", argv["--by"]
    )
    assert code == 2
    assert flag in err
    assert not (archive_copy / DEMO_DAY / arc.DECISIONS).exists()


def test_decide_refuses_to_extend_a_broken_log(archive_copy: Path, run: Run) -> None:
    log = add_decisions(archive_copy, 1) / arc.DECISIONS
    log.write_text(log.read_text().replace("keep the surge", "close the surge"))
    before = log.read_bytes()
    code, _, err = run("decide", archive_copy, "--date", DEMO_DAY, "--text", "x", "--by", "y")
    assert code == 1
    assert f"{log} entry 1" in err
    assert "nothing was appended" in err
    assert log.read_bytes() == before


# --------------------------------------------------------------------------------------------
# tampering


def flip_middle_byte(path: Path) -> None:
    data = bytearray(path.read_bytes())
    data[len(data) // 2] ^= 0x01
    path.write_bytes(bytes(data))


def flip_hex_digit_in_first_line(path: Path) -> None:
    text = path.read_text()
    path.write_text(("1" if text[0] != "1" else "2") + text[1:])


def break_json(path: Path) -> None:
    data = path.read_bytes()
    path.write_bytes(b"[" + data[1:])


def verify(run: Run, archive: Path) -> tuple[int, str]:
    code, out, err = run("archive", "verify", archive)
    assert "Traceback" not in err
    return code, out + err


@pytest.mark.parametrize(
    ("name", "change"),
    [
        ("briefing.pdf", flip_middle_byte),
        ("briefing.eml", flip_middle_byte),
        ("facts.json", flip_middle_byte),
        ("inputs/observations.csv.gz", flip_middle_byte),
        ("inputs/submissions/amberkite/2026-08-03.csv.gz", flip_middle_byte),
        ("manifest.json", flip_middle_byte),
        ("manifest.json", break_json),
        ("SHA256SUMS", flip_middle_byte),
        ("SHA256SUMS", flip_hex_digit_in_first_line),
    ],
)
def test_a_changed_byte_fails_verification_naming_the_file(
    archive_copy: Path, run: Run, name: str, change: Callable[[Path], None]
) -> None:
    target = archive_copy / DEMO_DAY / name
    assert target.is_file()
    change(target)
    code, text = verify(run, archive_copy)
    assert code == 1, text
    assert str(target) in text
    assert sha256sum_check(archive_copy / DEMO_DAY).returncode != 0  # coreutils agrees


@pytest.mark.parametrize(
    "name",
    [
        "briefing.pdf",
        "facts.json",
        "manifest.json",
        "SHA256SUMS",
        "inputs/observations.csv.gz",
        "charts/outlook_deaths.png",
    ],
)
def test_a_deleted_file_fails_verification_naming_it(
    archive_copy: Path, run: Run, name: str
) -> None:
    target = archive_copy / DEMO_DAY / name
    target.unlink()
    code, text = verify(run, archive_copy)
    assert code == 1, text
    assert f"{target}: missing" in text


@pytest.mark.parametrize("name", ["notes.txt", "charts/extra.png", "inputs/late.csv.gz"])
def test_an_added_file_fails_verification_naming_it(
    archive_copy: Path, run: Run, name: str
) -> None:
    target = archive_copy / DEMO_DAY / name
    target.write_bytes(b"added later\n")
    code, text = verify(run, archive_copy)
    assert code == 1, text
    assert f"{target}: not part of the record" in text


def test_an_edited_decision_fails_verification(archive_copy: Path, run: Run) -> None:
    log = add_decisions(archive_copy, 2) / arc.DECISIONS
    lines = log.read_text().splitlines(keepends=True)
    lines[0] = lines[0].replace("keep the surge ward", "close the surge ward")
    log.write_text("".join(lines))
    code, text = verify(run, archive_copy)
    assert code == 1
    assert f"{log} entry 1: its content does not match its hash" in text


def test_a_reordered_decision_log_fails_verification(archive_copy: Path, run: Run) -> None:
    log = add_decisions(archive_copy, 3) / arc.DECISIONS
    lines = log.read_text().splitlines(keepends=True)
    log.write_text("".join([lines[1], lines[0], lines[2]]))
    code, text = verify(run, archive_copy)
    assert code == 1
    assert f"{log} entry 1: does not follow the entry before it" in text


def test_a_cut_decision_log_fails_verification_thanks_to_the_index(
    archive_copy: Path, run: Run
) -> None:
    # the chain inside the file cannot show a removed last line; the index noted it
    log = add_decisions(archive_copy, 2) / arc.DECISIONS
    lines = log.read_text().splitlines(keepends=True)
    log.write_text(lines[0])
    code, text = verify(run, archive_copy)
    assert code == 1
    assert f"{log} entry 2: noted in {arc.INDEX} but missing" in text


def test_a_record_removed_from_the_middle_of_the_chain_fails(chain_copy: Path, run: Run) -> None:
    shutil.rmtree(chain_copy / EARLIER_DAY)
    code, text = verify(run, chain_copy)
    assert code == 1
    assert f"follows '{EARLIER_DAY}'" in text
    assert f"{chain_copy / EARLIER_DAY}: missing" in text
    assert "a record before it is missing" in text


def test_the_last_record_removed_fails_thanks_to_the_index(chain_copy: Path, run: Run) -> None:
    shutil.rmtree(chain_copy / f"{DEMO_DAY}-r2")
    code, text = verify(run, chain_copy)
    assert code == 1
    assert f"{chain_copy / (DEMO_DAY + '-r2')}: missing" in text
    # on purpose: reindex, and the archive verifies again
    assert run("archive", "reindex", chain_copy)[0] == 0
    assert verify(run, chain_copy)[0] == 0


def test_verify_of_one_date_still_checks_the_chain(chain_copy: Path, run: Run) -> None:
    flip_middle_byte(chain_copy / EARLIER_DAY / "facts.json")
    code, out, _ = run("archive", "verify", chain_copy, DEMO_DAY)
    assert code == 0
    assert out == ""
    code, out, _ = run("archive", "verify", chain_copy, EARLIER_DAY)
    assert code == 1
    assert str(chain_copy / EARLIER_DAY / "facts.json") in out
    (chain_copy / EARLIER_DAY / arc.MANIFEST).write_text(
        (chain_copy / EARLIER_DAY / arc.MANIFEST).read_text().replace("\n", "\n ", 1)
    )
    code, out, _ = run("archive", "verify", chain_copy, DEMO_DAY)
    assert code == 1
    assert f"{chain_copy / EARLIER_DAY / arc.MANIFEST}: changed since {DEMO_DAY}-r2" in out


# --------------------------------------------------------------------------------------------
# crashes


def raw_index_names(archive: Path) -> list[str]:
    """The records the index holds, read with sqlite3 itself (nothing is added on the way)."""
    db = sqlite3.connect(f"{(archive / arc.INDEX).as_uri()}?mode=ro", uri=True)
    try:
        return [r[0] for r in db.execute("SELECT name FROM records ORDER BY sequence")]
    finally:
        db.close()


def record_folders(archive: Path) -> list[str]:
    return sorted(p.name for p in archive.iterdir() if p.is_dir() and not p.name.startswith("."))


@pytest.mark.parametrize("stage", STAGES)
def test_a_kill_leaves_no_record_or_a_complete_one(world: World, run: Run, stage: str) -> None:
    assert world.crashed[stage], f"the writer was not killed at {stage}"
    archive = world.chain / f"archive-{stage}"
    partials = sorted(archive.glob(".*.partial"))
    assert raw_index_names(archive) == [DEMO_DAY]  # no crash reached the index update
    code, out, err = run("archive", "verify", archive)
    assert code == 0, out + err
    assert out == ""
    if stage == "after-rename":
        assert record_folders(archive) == [EARLIER_DAY, DEMO_DAY]
        assert not partials
        assert sha256sum_check(archive / EARLIER_DAY).returncode == 0
        # complete: the same files as the uninterrupted write of the same run
        assert snapshot(archive / EARLIER_DAY) == snapshot(world.chain / "archive" / EARLIER_DAY)
        # the crash came before the index update; the next command completed the index
        assert raw_index_names(archive) == [DEMO_DAY, EARLIER_DAY]
        return
    assert record_folders(archive) == [DEMO_DAY]
    assert raw_index_names(archive) == [DEMO_DAY]
    if stage == "before-temp":
        assert not partials
        assert "warning" not in err
        return
    assert len(partials) == 1
    assert partials[0].name.startswith(f".{EARLIER_DAY}.")
    assert f"warning: {partials[0]}: an unfinished record" in err
    # a later normal run on the crashed archive succeeds and verifies (warning only)
    later = world.chain / f"archive-{stage}-later"
    assert record_folders(later) == [EARLIER_DAY, DEMO_DAY]
    code, out, err = run("archive", "verify", later)
    assert code == 0
    assert out == ""
    assert "warning" in err
    assert sha256sum_check(later / EARLIER_DAY).returncode == 0


def test_records_get_the_permissions_of_ordinary_folders(world: World) -> None:
    # a record is readable by whoever may read the archive folder (not private to its writer)
    for record in (world.record, world.chain / "archive" / EARLIER_DAY):
        mode = record.stat().st_mode & 0o777
        assert mode == (record.parent.stat().st_mode & 0o777), oct(mode)


def test_a_leftover_folder_with_the_record_name_is_refused(
    archive_copy: Path, world: World
) -> None:
    stray = archive_copy / EARLIER_DAY
    (stray / "notes").mkdir(parents=True)
    prime = world.chain / "archive" / EARLIER_DAY
    files = {n: (prime / n).read_bytes() for n in ("facts.json", "briefing.txt")}
    with pytest.raises(ArchiveError, match="already exists but is not a complete record"):
        arc.write_record(archive_copy, EARLIER_DAY, files=files, inputs=(), manifest={})
    assert sorted(p.name for p in stray.rglob("*")) == ["notes"]
    assert not list(archive_copy.glob(".*.partial"))


# --------------------------------------------------------------------------------------------
# the lock


@contextmanager
def lock_held_by_another_process(archive: Path) -> Iterator[subprocess.Popen[str]]:
    """A second process holding the archive lock until its stdin is closed."""
    code = (
        "import sys; from pathlib import Path; from forebrief.record import archive_lock\n"
        f"with archive_lock(Path({str(archive)!r})):\n"
        "    print('held', flush=True); sys.stdin.read()\n"
    )
    proc = subprocess.Popen(
        [sys.executable, "-c", code],
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        text=True,
        env=subprocess_env(),
    )
    try:
        assert proc.stdout is not None
        assert proc.stdout.readline().strip() == "held"
        yield proc
    finally:
        if proc.stdin and not proc.stdin.closed:
            proc.stdin.close()
        proc.wait(timeout=30)
        if proc.stdout:
            proc.stdout.close()


def test_a_held_lock_makes_the_other_writer_give_up_with_a_clear_message(
    archive_copy: Path,
) -> None:
    before = snapshot(archive_copy)
    with lock_held_by_another_process(archive_copy):
        t0 = time.monotonic()
        with (
            pytest.raises(ArchiveError, match="another forebrief run is writing") as info,
            arc.archive_lock(archive_copy, wait=0.3),
        ):
            pass
        assert time.monotonic() - t0 >= 0.3
        assert "nothing was written" in str(info.value)
        record = arc.find_record(archive_copy, DEMO_DAY)
        with pytest.raises(ArchiveError, match="another forebrief run"):
            arc.write_record(
                archive_copy, EARLIER_DAY, files={"a.txt": b"a"}, inputs=(), manifest={}, wait=0.2
            )
        assert record.path.is_dir()
    assert snapshot(archive_copy) == before
    with arc.archive_lock(archive_copy, wait=0.3):  # free again once the holder ended
        pass


def test_a_writer_waits_for_the_lock_then_proceeds(archive_copy: Path, run: Run) -> None:
    with lock_held_by_another_process(archive_copy) as holder:
        assert holder.stdin is not None
        timer = threading.Timer(1.0, holder.stdin.close)
        timer.start()
        t0 = time.monotonic()
        code, _, err = run(
            "decide", archive_copy, "--date", DEMO_DAY, "--text", "Open a ward", "--by", "Director"
        )
        waited = time.monotonic() - t0
        timer.join()
    assert code == 0, err
    assert waited >= 0.9  # it waited for the other process to let go
    assert len(arc.read_log(archive_copy / DEMO_DAY, arc.DECISIONS)) == 1


# --------------------------------------------------------------------------------------------
# sending through the command line


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


class Keep:
    def __init__(self) -> None:
        self.envelopes: list[Any] = []

    async def handle_DATA(self, server: Any, session: Any, envelope: Any) -> str:
        self.envelopes.append(envelope)
        return "250 2.0.0 Ok: queued as 7C1D"


class RefuseData(Keep):
    async def handle_DATA(self, server: Any, session: Any, envelope: Any) -> str:
        return "554 5.7.1 message content rejected"  # RFC 5321 4.2.3


@contextmanager
def smtp_server(handler: Any, **kwargs: Any) -> Iterator[int]:
    from aiosmtpd.controller import Controller

    port = free_port()
    controller = Controller(handler, hostname="127.0.0.1", port=port, ready_timeout=10, **kwargs)
    controller.start()
    try:
        yield port
    finally:
        controller.stop()


def crlf(data: bytes) -> bytes:
    return data.replace(b"\r\n", b"\n").replace(b"\n", b"\r\n")


def test_send_delivers_the_archived_message_and_logs_it(archive_copy: Path, run: Run) -> None:
    record = archive_copy / DEMO_DAY
    eml = (record / "briefing.eml").read_bytes()
    before = snapshot(record)
    handler = Keep()
    with smtp_server(handler) as port:
        code, out, err = run("send", record, "--smtp-host", "127.0.0.1", "--smtp-port", port)
    assert code == 0, err
    assert len(handler.envelopes) == 1
    env = handler.envelopes[0]
    assert env.mail_from == "forecast-desk@health.example"  # the demo's [email] from
    assert env.rcpt_tos == ["leadership@health.example"]
    assert crlf(env.original_content) == crlf(eml)
    got = message_from_bytes(env.original_content, policy=email_policy.default)
    pdf = [p for p in got.iter_attachments() if p.get_content_type() == "application/pdf"]
    assert pdf[0].get_content() == before["briefing.pdf"]
    # the send log is the only change, and the archive still verifies
    after = snapshot(record)
    assert set(after) - set(before) == {arc.SENDS}
    assert all(after[k] == v for k, v in before.items())
    (entry,) = arc.read_log(record, arc.SENDS)
    assert entry["recipients"] == ["leadership@health.example"]
    assert entry["server_reply"] == "250 2.0.0 Ok: queued as 7C1D"
    assert (entry["host"], entry["port"]) == ("127.0.0.1", port)
    assert entry["prev"] == sha256(before[arc.MANIFEST])
    assert f"sent {DEMO_DAY} to leadership@health.example" in err
    assert run("archive", "verify", archive_copy)[0] == 0
    code, out, _ = run("archive", "show", archive_copy, DEMO_DAY)
    assert "sent 1" in out
    assert "to leadership@health.example" in out
    rows = arc.index_rows(archive_copy, "sends")
    assert [(r[1], json.loads(r[3]), r[5]) for r in rows] == [
        (1, ["leadership@health.example"], entry["hash"])
    ]


def test_send_to_other_addresses_with_the_password_from_the_environment(
    archive_copy: Path, run: Run, monkeypatch: pytest.MonkeyPatch
) -> None:
    from aiosmtpd.smtp import AuthResult, LoginPassword

    record = archive_copy / DEMO_DAY
    from forebrief.app.config import config_from_dict

    manifest = json.loads((record / arc.MANIFEST).read_text())
    env_name = config_from_dict(manifest["config"]).email.password_env
    assert env_name == "FOREBRIEF_SMTP_PASSWORD"  # the documented default
    monkeypatch.setenv(env_name, "Tr1al-pass-phrase")
    seen: list[tuple[bytes, bytes]] = []

    def check(
        server: Any, session: Any, envelope: Any, mechanism: str, auth_data: Any
    ) -> AuthResult:
        assert isinstance(auth_data, LoginPassword)
        seen.append((auth_data.login, auth_data.password))
        return AuthResult(success=auth_data.password == b"Tr1al-pass-phrase", handled=False)

    handler = Keep()
    with smtp_server(handler, authenticator=check, auth_require_tls=False) as port:
        code, _, err = run(
            "send",
            record,
            "--to",
            "a@health.example",
            "b@health.example",
            "--smtp-host",
            "127.0.0.1",
            "--smtp-port",
            port,
            "--user",
            "desk",
        )
    assert code == 0, err
    assert seen == [(b"desk", b"Tr1al-pass-phrase")]
    assert handler.envelopes[0].rcpt_tos == ["a@health.example", "b@health.example"]
    assert "Tr1al-pass-phrase" not in err
    assert "Tr1al-pass-phrase" not in (record / arc.SENDS).read_text()
    assert arc.read_log(record, arc.SENDS)[0]["recipients"] == [
        "a@health.example",
        "b@health.example",
    ]


@pytest.mark.parametrize("server", ["refuses", "absent"])
def test_a_failed_send_leaves_the_record_unchanged(
    archive_copy: Path, run: Run, server: str
) -> None:
    record = archive_copy / DEMO_DAY
    before = snapshot(archive_copy)
    if server == "refuses":
        with smtp_server(RefuseData()) as port:
            code, out, err = run("send", record, "--smtp-host", "127.0.0.1", "--smtp-port", port)
        assert "554" in err
    else:
        code, out, err = run("send", record, "--smtp-host", "127.0.0.1", "--smtp-port", free_port())
        assert "refused" in err
    assert code == 1
    assert out == ""
    assert "nothing was sent" in err
    assert "Traceback" not in err
    assert snapshot(archive_copy) == before
    assert arc.index_rows(archive_copy, "sends") == []


def test_send_of_an_original_that_has_a_revision_logs_in_that_original(
    chain_copy: Path, run: Run
) -> None:
    record = chain_copy / DEMO_DAY
    handler = Keep()
    with smtp_server(handler) as port:
        code, _, err = run("send", record, "--smtp-host", "127.0.0.1", "--smtp-port", port)
    assert code == 0, err
    assert crlf(handler.envelopes[0].original_content) == crlf(
        (record / "briefing.eml").read_bytes()
    )
    assert len(arc.read_log(record, arc.SENDS)) == 1
    assert not (chain_copy / f"{DEMO_DAY}-r2" / arc.SENDS).exists()


def test_send_from_inside_the_record_folder(
    archive_copy: Path, run: Run, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.chdir(archive_copy / DEMO_DAY)
    handler = Keep()
    with smtp_server(handler) as port:
        code, _, err = run("send", ".", "--smtp-host", "127.0.0.1", "--smtp-port", port)
    assert code == 0, err
    assert len(handler.envelopes) == 1


def test_send_names_a_folder_that_is_not_a_record(tmp_path: Path, run: Run) -> None:
    code, _, err = run("send", tmp_path, "--smtp-host", "127.0.0.1", "--smtp-port", 2525)
    assert code == 1
    assert f"{tmp_path / 'briefing.eml'}: no e-mail in this record" in err


def test_public_names_of_the_archive_module_exist() -> None:
    assert all(hasattr(arc, name) for name in arc.__all__)
    assert {
        "archive_lock",
        "verify_archive",
        "write_record",
        "find_record",
        "rebuild_index",
    } <= set(arc.__all__)
