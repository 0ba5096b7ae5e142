"""Scheduler wiring, tested without sleeping: trigger, job options, the job running one pass."""

from __future__ import annotations

import datetime as dt
import threading
from pathlib import Path
from zoneinfo import ZoneInfo

import pytest

from service import scheduler as sched
from service.config import load_config
from service.locking import PassLockedError, screening_lock

REPO = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def config():
    return load_config(REPO / "config")


def test_job_options_and_trigger(config):
    scheduler = sched.build_scheduler(config, lambda: None)
    scheduler.start(paused=True)
    try:
        job = scheduler.get_job(sched.JOB_ID)
        assert job.max_instances == 1
        assert job.coalesce is True
        assert job.misfire_grace_time == 3600
        # "30 2 * * *" in UTC: the next fire after 2026-12-01 03:00 UTC is 2026-12-02 02:30 UTC.
        now = dt.datetime(2026, 12, 1, 3, 0, tzinfo=ZoneInfo("UTC"))
        fire = job.trigger.get_next_fire_time(None, now)
        assert fire == dt.datetime(2026, 12, 2, 2, 30, tzinfo=ZoneInfo("UTC"))
    finally:
        scheduler.shutdown(wait=False)


def test_job_runs_exactly_one_pass(config, monkeypatch):
    calls = []

    class FakePass:
        def __init__(self, cfg, database_url=None, inbox=None, trigger="manual"):
            calls.append(trigger)

        def run(self):
            class Summary:
                run_id, status, events_new = 1, "completed", 0

                def count(self, status):
                    return 0

            return Summary()

    monkeypatch.setattr(sched, "ScreeningPass", FakePass)
    sched.scheduled_pass(config)
    assert calls == ["schedule"]


def test_locked_pass_is_skipped_not_raised(config, monkeypatch):
    class LockedPass:
        def __init__(self, *a, **k):
            pass

        def run(self):
            raise PassLockedError("another screening pass is running")

    monkeypatch.setattr(sched, "ScreeningPass", LockedPass)
    sched.scheduled_pass(config)  # logs and returns; must not raise into the scheduler


def test_serve_stops_when_asked(config):
    stop = threading.Event()
    stop.set()
    sched.serve(config, stop=stop)  # starts, logs the next run, shuts down cleanly


def test_second_lock_holder_is_refused(tmp_path):
    lock = tmp_path / "screen.lock"
    with screening_lock(lock):
        with pytest.raises(PassLockedError, match=r"another screening pass is running \(pid \d+"):
            with screening_lock(lock):
                pass
    with screening_lock(lock):  # released: can be taken again
        pass
