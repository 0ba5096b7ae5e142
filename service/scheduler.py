"""The nightly schedule: APScheduler runs one screening pass on the configured cron trigger.

One instance at a time (``max_instances=1``), missed runs coalesced into one, and a grace time
within which a late start still runs. The screening lock also keeps a manual ``surgesift
screen`` from overlapping a scheduled pass. SIGINT and SIGTERM stop the scheduler cleanly after
the running pass (if any) has finished.
"""

from __future__ import annotations

import logging
import signal
import threading
from typing import Callable

from apscheduler.schedulers.background import BackgroundScheduler
from apscheduler.triggers.cron import CronTrigger

from .config import Config
from .locking import PassLockedError
from .screening import ScreeningPass

__all__ = ["build_scheduler", "scheduled_pass", "serve", "JOB_ID"]

log = logging.getLogger(__name__)
JOB_ID = "nightly-screening"


def scheduled_pass(config: Config, database_url: str | None = None, inbox=None) -> None:
    """The job: one screening pass; a pass already running is reported, not waited for."""
    try:
        summary = ScreeningPass(config, database_url=database_url, inbox=inbox, trigger="schedule").run()
    except PassLockedError as exc:
        log.warning("scheduled pass skipped: %s", exc)
        return
    except Exception:
        log.exception("scheduled screening pass failed; the next one will retry the pending work")
        return
    log.info(
        "scheduled pass %s %s: %d new file(s), %d quarantined, %d new event(s)",
        summary.run_id, summary.status, summary.count("screened"), summary.count("quarantined"),
        summary.events_new,
    )


def build_scheduler(config: Config, job: Callable[[], None]) -> BackgroundScheduler:
    """A scheduler with the nightly job added (not started)."""
    schedule = config.service.schedule
    trigger = CronTrigger.from_crontab(schedule.cron, timezone=schedule.timezone)
    scheduler = BackgroundScheduler(timezone=schedule.timezone)
    scheduler.add_job(
        job, trigger, id=JOB_ID, name="surgesift screening pass", max_instances=1, coalesce=True,
        misfire_grace_time=int(schedule.misfire_grace_time_s), replace_existing=True,
    )
    return scheduler


def serve(config: Config, database_url: str | None = None, inbox=None, stop: threading.Event | None = None) -> None:
    """Run the schedule until SIGINT/SIGTERM (or until ``stop`` is set)."""
    stop = stop or threading.Event()
    scheduler = build_scheduler(config, lambda: scheduled_pass(config, database_url, inbox))

    def _stop(signum, _frame):
        log.info("received %s; stopping after the running pass", signal.Signals(signum).name)
        stop.set()

    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGINT, _stop)
        signal.signal(signal.SIGTERM, _stop)
    scheduler.start()
    job = scheduler.get_job(JOB_ID)
    log.warning("serving: next screening pass at %s (cron %r, %s)", job.next_run_time,
                config.service.schedule.cron, config.service.schedule.timezone)
    try:
        while not stop.wait(timeout=60):
            job = scheduler.get_job(JOB_ID)
            log.info("next screening pass at %s", job.next_run_time)
    finally:
        scheduler.shutdown(wait=True)
        log.warning("scheduler stopped")
