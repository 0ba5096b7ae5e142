"""One screening pass at a time: an exclusive lock file beside the archive.

``surgesift serve`` and a manual ``surgesift screen`` take the same lock; the second one to
arrive is told who holds it and does nothing. The lock is an OS-level advisory lock
(``fcntl.flock``), released by the kernel if the holder dies, so a crash never leaves a stale
lock behind.
"""

from __future__ import annotations

import contextlib
import fcntl
import os
import socket
from pathlib import Path
from typing import Iterator

from .store import utc_now

__all__ = ["PassLockedError", "screening_lock"]


class PassLockedError(RuntimeError):
    """Another screening pass holds the lock."""


@contextlib.contextmanager
def screening_lock(lock_path: Path) -> Iterator[None]:
    """Hold the screening lock for the duration of the block.

    Raises
    ------
    PassLockedError
        Naming the holder (host, process id, start time) when another pass runs.
    """
    lock_path = Path(lock_path)
    lock_path.parent.mkdir(parents=True, exist_ok=True)
    handle = open(lock_path, "a+")
    try:
        try:
            fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            handle.seek(0)
            holder = handle.read().strip() or "another process"
            raise PassLockedError(
                f"another screening pass is running ({holder}); this one did nothing. "
                "Wait for it to finish, or run again later."
            ) from None
        handle.seek(0)
        handle.truncate()
        handle.write(f"pid {os.getpid()} on {socket.gethostname()} since {utc_now():%Y-%m-%d %H:%M:%S} UTC")
        handle.flush()
        yield
    finally:
        with contextlib.suppress(OSError):
            fcntl.flock(handle.fileno(), fcntl.LOCK_UN)
        handle.close()
