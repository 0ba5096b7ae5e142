"""One screening pass: the orchestration object that wires ingest, archive, detectors and store.

A pass (see DESIGN.md, "Files, windows and exactly-once"):

1. records a ``screening_runs`` row (status ``running``);
2. removes archive parts left by a crashed earlier pass (no committed ``source_files`` row);
3. for every inbox file not seen before (by SHA-256): reads and validates it, writes its
   samples to the archive and, in one transaction, its ``source_files`` row and the pending
   spans of the systems it feeds; a file that cannot be read gets a ``quarantined`` row with a
   reason a person can act on, and is left where it is;
4. for every system with pending spans: plans windows, loads all its sensors over each window
   (plus the margin), runs the detectors and the event analysis, and in one transaction per
   window replaces the window's events and clears its pending spans;
5. closes the run row (``completed``, or ``failed`` with the reason).
"""

from __future__ import annotations

import fnmatch
import hashlib
import logging
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
from sqlalchemy import delete, select
from sqlalchemy.orm import sessionmaker

from detectors.events import detect_events
from detectors.traces import SensorTrace

from .analysis import EventAnalyser
from .blas_threads import single_blas_thread
from .archive import SampleArchive
from .config import Config, ConfigError
from .findings import EventFindings, ns_to_utc, replace_window_events, utc_to_ns
from .ingest import ChannelSpec, IngestError, read_logger_file
from .locking import screening_lock
from .params import detection_params
from .screening_queue import StoreQueue, in_order_ahead
from .store import PendingSpan, ScreeningRun, SourceFile, database_identity, open_store, utc_now
from .windows import ScreeningWindow, plan_windows

__all__ = ["ScreeningPass", "PassSummary", "FileOutcome", "file_sha256", "inbox_files"]

log = logging.getLogger(__name__)
NS = 10**9


@dataclass
class FileOutcome:
    path: str
    status: str  # screened | quarantined | seen_before
    n_samples: int = 0
    error: str | None = None
    notes: tuple[str, ...] = ()


@dataclass
class PassSummary:
    run_id: int | None = None
    status: str = "running"
    files: list[FileOutcome] = field(default_factory=list)
    windows_screened: int = 0
    events_new: int = 0
    events_replaced: int = 0
    events: list[tuple[str, EventFindings]] = field(default_factory=list)
    message: str | None = None

    def count(self, status: str) -> int:
        return sum(1 for f in self.files if f.status == status)


def file_sha256(path: Path) -> str:
    """SHA-256 of a file's bytes (read into one reused buffer: ``hashlib.file_digest``)."""
    with open(path, "rb") as fh:
        return hashlib.file_digest(fh, "sha256").hexdigest()


def inbox_files(inbox: Path, patterns: tuple[str, ...]) -> list[Path]:
    """Candidate logger files below the inbox (recursively, names matched case-insensitively),
    sorted by path; hidden files and folders are left out."""
    wanted = tuple(p.lower() for p in patterns)
    found = [p for p in inbox.rglob("*")
             if p.is_file() and any(fnmatch.fnmatch(p.name.lower(), w) for w in wanted)]
    return sorted(p for p in found if not any(part.startswith(".") for part in p.relative_to(inbox).parts))


class ScreeningPass:
    """Runs one screening pass over an inbox into a findings database.

    Parameters
    ----------
    config : Config
        The validated configuration.
    database_url, inbox : optional overrides of the service config.
    trigger : str
        ``manual`` or ``schedule``, recorded on the run row.
    fail_hook : callable, optional
        Test hook called with a stage name (``"file-archived"``, ``"window-written"``) at the
        points where a crash must leave nothing partial; raising from it simulates a crash.
    """

    def __init__(
        self,
        config: Config,
        database_url: str | None = None,
        inbox: Path | None = None,
        trigger: str = "manual",
        fail_hook: Callable[[str], None] | None = None,
    ):
        self.config = config
        self.database_url = database_url or config.database_url
        self.inbox = Path(inbox) if inbox is not None else config.inbox_path
        self.trigger = trigger
        self.archive = SampleArchive(config.archive_path)
        self.fail_hook = fail_hook or (lambda stage: None)
        self.sensor_system = config.sensor_system()
        self.channels = {
            s.id: ChannelSpec(
                sensor_id=s.id, quantity=s.quantity, unit=s.unit, timezone=s.timezone, range_max=s.range_max
            )
            for system in config.systems.values()
            for s in system.sensors
        }

    @property
    def lock_path(self) -> Path:
        return self.config.archive_path / ".screening.lock"

    # ----------------------------------------------------------------------------------------
    def run(self) -> PassSummary:
        """Run the pass under the screening lock (raises ``PassLockedError`` if taken), with
        one BLAS thread (the pass runs its own threads; see :mod:`service.blas_threads`)."""
        with screening_lock(self.lock_path), single_blas_thread():
            _, factory = open_store(self.database_url)
            return self._run(factory)

    def _run(self, factory: sessionmaker) -> PassSummary:
        summary = PassSummary()
        with factory() as session, session.begin():
            run = ScreeningRun(started_at=utc_now(), status="running", trigger=self.trigger)
            session.add(run)
            session.flush()
            summary.run_id = run.id
        try:
            self.archive.claim(database_identity(factory))
            if not self.inbox.is_dir():
                raise ConfigError([f"inbox folder {self.inbox} does not exist; check [inbox] path in "
                                   "service.toml or the --inbox option"])
            self._remove_orphans(factory)
            with ThreadPoolExecutor(max_workers=1, thread_name_prefix="archive") as pool:
                stores = StoreQueue(pool)
                try:
                    self._ingest_all(factory, summary, stores)
                    self._screen_pending(factory, summary, stores)
                    stores.wait()
                finally:
                    summary.files = stores.outcomes()
            summary.status = "completed"
        except Exception as exc:
            summary.status = "failed"
            summary.message = f"{exc.__class__.__name__}: {exc}"
            self._close_run(factory, summary)
            raise
        self._close_run(factory, summary)
        return summary

    def _close_run(self, factory: sessionmaker, summary: PassSummary) -> None:
        with factory() as session, session.begin():
            run = session.get(ScreeningRun, summary.run_id)
            run.finished_at = utc_now()
            run.status = summary.status
            run.files_new = summary.count("screened") + summary.count("quarantined")
            run.files_quarantined = summary.count("quarantined")
            run.files_seen_before = summary.count("seen_before")
            run.events_new = summary.events_new
            run.windows_screened = summary.windows_screened
            run.message = summary.message

    def _remove_orphans(self, factory: sessionmaker) -> None:
        with factory() as session:
            committed = session.scalars(select(SourceFile.sha256).where(SourceFile.status == "screened")).all()
        removed = self.archive.remove_orphan_parts(committed)
        if removed:
            log.warning("removed %d archive part(s) left by an interrupted pass", removed)

    # ----------------------------------------------------------------------------------------
    def _display_path(self, path: Path) -> str:
        try:
            return str(path.resolve().relative_to(self.config.root))
        except ValueError:
            return str(path)

    def _ingest_all(self, factory: sessionmaker, summary: PassSummary, stores: StoreQueue) -> None:
        """Read each new file and queue its store (archive parts, then its row).

        Storing runs in one worker thread (pyarrow's Parquet writer releases the GIL), in
        the order of the files, while the next file is read and then while the windows are
        screened: a file's parts are staged in the archive's memory first, so the screening
        sees them before they reach the disk. No window is written before every store has
        committed (see :meth:`_screen_pending`).
        """
        seen_this_pass: set[str] = set()
        paths = inbox_files(self.inbox, self.config.service.inbox.patterns)
        for read in self._reads_ahead(factory, paths):
            if read.seen_before or read.sha in seen_this_pass:  # also: same bytes, other name
                stores.add_outcome(FileOutcome(read.shown, "seen_before"))
                continue
            seen_this_pass.add(read.sha)
            if read.error is not None:
                stores.add_outcome(self._quarantine(factory, read.path, read.shown, read.sha,
                                                    summary.run_id, read.error))
                continue
            result = read.result
            spans = self._system_spans(result)
            stores.submit({system: (_db_ns(first), _db_ns(last)) for system, (first, last) in spans.items()},
                          read.sha, self.archive, self._store_one, factory, read.path,
                          read.shown, read.sha, result, read.staged, spans, summary.run_id)

    def _reads_ahead(self, factory: sessionmaker, paths: list[Path], ahead: int = 2):
        """The files read (:meth:`_read_one`) in order, up to ``ahead`` at once in threads
        (pyarrow's reader and numpy's array work release the GIL)."""
        with ThreadPoolExecutor(max_workers=ahead, thread_name_prefix="read") as pool:
            yield from in_order_ahead(pool, lambda path: self._read_one(factory, path), paths, ahead)

    def _read_one(self, factory: sessionmaker, path: Path) -> "_Read":
        """Hash a file and, unless the database has it already, read it and stage its
        archive parts in memory (in a reader thread; the pass records the outcome in inbox
        order). A file that repeats another file's bytes stages the same parts again, which
        the pass then leaves to the first file."""
        shown = self._display_path(path)
        sha = file_sha256(path)
        with factory() as session:
            if session.scalar(select(SourceFile.id).where(SourceFile.sha256 == sha)) is not None:
                return _Read(path, shown, sha, seen_before=True)
        try:
            result = read_logger_file(path, self.channels)
        except IngestError as exc:
            return _Read(path, shown, sha, error=str(exc))
        except Exception as exc:  # a reader bug must not sink the pass nor lose the file
            log.exception("unexpected failure reading %s", shown)
            return _Read(path, shown, sha, error=(
                f"{path.name}: could not be read ({exc.__class__.__name__}: {exc}); "
                "the file is kept as it is; please report this together with the file"))
        staged = self.archive.stage_file_samples(sha, result.samples, self.sensor_system,
                                                 result.sensor_steps, values_rounded=True)
        return _Read(path, shown, sha, result=result, staged=staged)

    def _store_one(self, factory: sessionmaker, path: Path, shown: str, sha: str, result, staged,
                   spans: dict[str, tuple[int, int]], run_id: int) -> FileOutcome:
        """Write a read file's staged archive parts, then commit its row and pending spans."""
        try:
            self.archive.write_staged(staged)
            self.fail_hook("file-archived")
            with factory() as session, session.begin():
                row = SourceFile(
                    path=shown, sha256=sha, status="screened", n_samples=int(result.n_rows),
                    first_time=ns_to_utc(result.first_time_ns), last_time=ns_to_utc(result.last_time_ns),
                    run_id=run_id, size_bytes=path.stat().st_size,
                    systems=",".join(sorted({self.sensor_system[s] for s in result.sensors})),
                    sensors=",".join(result.sensors), notes="\n".join(result.notes) or None,
                )
                session.add(row)
                session.flush()
                for system_id, (first, last) in spans.items():
                    session.add(PendingSpan(system_id=system_id, start_time=ns_to_utc(first),
                                            end_time=ns_to_utc(last), source_file_id=row.id))
        except BaseException:
            self.archive.remove_parts(sha)
            raise
        for note in result.notes:
            log.info("%s: %s", shown, note)
        return FileOutcome(shown, "screened", int(result.n_rows), notes=tuple(result.notes))

    def _system_spans(self, result) -> dict[str, tuple[int, int]]:
        """First and last sample time [ns] per system fed by a file (from its sensors' spans)."""
        spans: dict[str, tuple[int, int]] = {}
        for sensor_id, (first, last) in result.sensor_spans.items():
            system_id = self.sensor_system[sensor_id]
            if system_id in spans:
                first, last = min(first, spans[system_id][0]), max(last, spans[system_id][1])
            spans[system_id] = (first, last)
        return spans

    def _quarantine(self, factory, path: Path, shown: str, sha: str, run_id: int, error: str) -> FileOutcome:
        log.info("quarantined %s: %s", shown, error)
        with factory() as session, session.begin():
            session.add(SourceFile(path=shown, sha256=sha, status="quarantined", error=error,
                                   run_id=run_id, size_bytes=path.stat().st_size))
        return FileOutcome(shown, "quarantined", error=error)

    # ----------------------------------------------------------------------------------------
    def _screen_pending(self, factory: sessionmaker, summary: PassSummary, stores: StoreQueue) -> None:
        """Screen every window of the pending spans: those committed by earlier passes and
        those of this pass's files (still being stored). Each window is analysed at once and
        written only after every store of the pass has committed, so a window never clears
        spans, or replaces events, ahead of the files they come from."""
        detection = self.config.service.detection
        params = detection_params(detection)
        with factory() as session:
            pending = session.scalars(select(PendingSpan)).all()
        by_system: dict[str, list[tuple[int, int]]] = {}
        for span in pending:
            by_system.setdefault(span.system_id, []).append((utc_to_ns(span.start_time), utc_to_ns(span.end_time)))
        for system_id, spans in stores.spans_by_system().items():
            by_system.setdefault(system_id, []).extend(spans)
        for system_id in sorted(by_system):
            if system_id not in self.config.systems:
                log.warning("pending data for system %r which is no longer configured; left pending", system_id)
                continue
            analyser = EventAnalyser(self.config, system_id, factory)
            analyser.prepare_for_threads()
            margin_ns = int(max(detection.window_margin_s, analyser.travel_margin_s) * NS)
            windows = plan_windows(system_id, by_system[system_id], margin_ns, int(detection.window_max_s * NS))
            # the next window is detected and measured while this one is analysed and written
            with ThreadPoolExecutor(max_workers=2, thread_name_prefix="window") as pool:
                measured = in_order_ahead(pool, lambda w: self._measure_window(w, analyser, params), windows, 1)
                for window, (core, measures) in zip(windows, measured):
                    if stores.failed.is_set():
                        stores.wait()  # raises the store's error: the pass ends here
                    # flags that depend on earlier events (repeated trips): in time order
                    findings = [analyser.analyse(event, {}, m) for event, m in zip(core, measures)]
                    stores.wait()
                    self._write_window(factory, window, findings, summary)
            stores.wait()
            with factory() as session, session.begin():
                session.execute(delete(PendingSpan).where(PendingSpan.system_id == system_id))

    def _load_traces(self, window: ScreeningWindow) -> dict[str, SensorTrace]:
        system = self.config.system(window.system_id)
        traces = {}
        for sensor in system.sensors:
            times, values, clipped = self.archive.load_sensor_arrays(
                window.system_id, sensor.id, window.load_start_ns, window.load_end_ns)
            if times.size == 0:
                continue
            traces[sensor.id] = SensorTrace(sensor_id=sensor.id, quantity=sensor.quantity,
                                            times_ns=times, values=values, clipped=clipped)
        return traces

    def _measure_window(self, window: ScreeningWindow, analyser: "EventAnalyser", params) -> tuple[list, list]:
        """The events that start in the window's core and their measurements (wave speeds,
        model replay): pure computation on the window's samples, run in a worker thread."""
        traces = self._load_traces(window)
        with ThreadPoolExecutor(max_workers=2, thread_name_prefix="detect") as pool:
            events = detect_events(traces, analyser.layout, params, pool.map) if traces else []
            core = [event for event in events
                    if window.core_start_ns <= event.start_time_ns < window.core_end_ns]
            # wave speeds and model replays of different events side by side (the MOC
            # kernel releases the GIL)
            measures = list(pool.map(lambda event: analyser.measure(event, traces), core))
        return core, measures

    def _write_window(self, factory, window: ScreeningWindow, findings: list[EventFindings],
                      summary: PassSummary) -> None:
        """Replace the window's events by ``findings`` in one transaction."""
        with factory() as session, session.begin():
            n_new, n_replaced = replace_window_events(
                session, window.system_id, window.core_start_ns, window.core_end_ns, findings, summary.run_id
            )
            self.fail_hook("window-written")
        summary.windows_screened += 1
        summary.events_new += n_new
        summary.events_replaced += n_replaced
        summary.events.extend((window.system_id, f) for f in findings)


@dataclass
class _Read:
    """One inbox file after hashing and reading: seen before, refused (``error``), or read."""

    path: Path
    shown: str
    sha: str
    seen_before: bool = False
    error: str | None = None
    result: object = None
    staged: list = field(default_factory=list)


def _db_ns(time_ns: int) -> int:
    """A time as it comes back from a pending-span row (the database keeps microseconds)."""
    return utc_to_ns(ns_to_utc(time_ns))
