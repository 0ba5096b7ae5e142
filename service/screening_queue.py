"""The screening pass's store queue: file outcomes in inbox order and the stores (archive
parts, then the file's row) still running in the writer thread."""

from __future__ import annotations

import threading
from collections import deque
from concurrent.futures import Future, ThreadPoolExecutor
from typing import TYPE_CHECKING, Callable, Iterable, Iterator, TypeVar

from .archive import SampleArchive

if TYPE_CHECKING:
    from .screening import FileOutcome

__all__ = ["StoreQueue", "StoreSkipped", "in_order_ahead"]

T = TypeVar("T")
R = TypeVar("R")


def in_order_ahead(pool: ThreadPoolExecutor, work: Callable[[T], R], items: Iterable[T],
                   ahead: int) -> Iterator[R]:
    """``work(item)`` of each item, yielded in the items' order, with up to ``ahead`` items
    beyond the one being consumed already running in ``pool``. Work not yet started when the
    consumer stops (or fails) is cancelled."""
    pending: deque[Future] = deque()
    try:
        for item in items:
            pending.append(pool.submit(work, item))
            if len(pending) > ahead:
                yield pending.popleft().result()
        while pending:
            yield pending.popleft().result()
    finally:
        for future in pending:
            future.cancel()


class StoreQueue:
    """This pass's file outcomes in inbox order, the stores still running among them, and
    the pending spans those stores will commit.

    After a store fails, the later ones only drop their staged parts: the pass fails, and
    the next one reads those files again (as before a crash).
    """

    def __init__(self, pool: ThreadPoolExecutor):
        self.pool = pool
        self.entries: list[FileOutcome | Future] = []
        self.spans: list[dict[str, tuple[int, int]]] = []
        self.failed = threading.Event()

    def add_outcome(self, outcome: FileOutcome) -> None:
        self.entries.append(outcome)

    def submit(self, spans: dict[str, tuple[int, int]], sha: str, archive: SampleArchive,
               store: Callable[..., FileOutcome], *args) -> None:
        def job() -> FileOutcome:
            if self.failed.is_set():
                archive.remove_parts(sha)
                raise StoreSkipped(sha)
            try:
                return store(*args)
            except BaseException:
                self.failed.set()
                raise

        self.entries.append(self.pool.submit(job))
        self.spans.append(spans)

    def spans_by_system(self) -> dict[str, list[tuple[int, int]]]:
        out: dict[str, list[tuple[int, int]]] = {}
        for spans in self.spans:
            for system_id, span in spans.items():
                out.setdefault(system_id, []).append(span)
        return out

    def wait(self) -> None:
        """Return once every store has finished; raises the first store's error."""
        for entry in self.entries:
            if isinstance(entry, Future):
                entry.result()

    def outcomes(self) -> list[FileOutcome]:
        """The outcomes of the files read or stored, in inbox order (waits for the stores;
        a file whose store failed or was skipped is left out)."""
        out = []
        for entry in self.entries:
            if not isinstance(entry, Future):
                out.append(entry)
            elif entry.exception() is None:
                out.append(entry.result())
        return out


class StoreSkipped(RuntimeError):
    """A store not run because an earlier store of the pass failed."""
