"""The CLI's commands: each takes the validated config and the parsed arguments."""

from __future__ import annotations

import datetime as dt
import time
from argparse import Namespace

import pandas as pd
from sqlalchemy import select

from .config import Config
from .screening import PassSummary, ScreeningPass
from .store import Event, EventObservation, Flag, PressureCycleBin, StoreError, open_store
from .tables import CAUTION, fmt_num, fmt_time, format_table

__all__ = ["cmd_screen", "cmd_serve", "cmd_events", "cmd_wavespeed", "cmd_simulate", "cmd_report", "parse_time"]

KPA = 1000.0


def parse_time(text: str | None) -> dt.datetime | None:
    """ISO 8601 text to a naive UTC datetime (UTC when no offset is given)."""
    if text is None:
        return None
    try:
        ts = pd.Timestamp(text)
    except ValueError:
        raise ValueError(f"{text!r} is not an ISO 8601 time; write e.g. 2026-11-30 or 2026-11-30T02:00Z") from None
    if ts.tzinfo is not None:
        ts = ts.tz_convert("UTC").tz_localize(None)
    return ts.to_pydatetime()


def _database_label(config: Config, url: str) -> str:
    """The database as a person reads it: a path relative to the root, or the URL sans password."""
    from pathlib import Path

    from sqlalchemy.engine import make_url

    prefix = "sqlite:///"
    if url.startswith(prefix):
        path = Path(url[len(prefix):])
        try:
            return str(path.resolve().relative_to(config.root))
        except ValueError:
            return str(path)
    return make_url(url).render_as_string(hide_password=True)


def _print_summary(config: Config, summary: PassSummary, elapsed_s: float, url: str) -> None:
    new = summary.count("screened") + summary.count("quarantined")
    print(f"surgesift screening pass {summary.run_id} {summary.status} in {elapsed_s:.1f} s")
    print(f"  files: {new} new ({summary.count('screened')} read, {summary.count('quarantined')} quarantined), "
          f"{summary.count('seen_before')} seen before")
    n_samples = sum(f.n_samples for f in summary.files)
    if n_samples:
        print(f"  samples archived: {n_samples:,}")
    quarantined = [f for f in summary.files if f.status == "quarantined"]
    if quarantined:
        print("  quarantined (left in place, not screened):")
        for f in quarantined:
            print(f"    {f.path}")
            print(f"      {f.error}")
    noted = [f for f in summary.files if f.status == "screened" and f.notes]
    if noted:
        print("  notes on files read:")
        for f in noted:
            for note in f.notes:
                print(f"    {f.path}: {note}")
    print(f"  windows screened: {summary.windows_screened}; events: {summary.events_new} new, "
          f"{summary.events_replaced} re-screened")
    if summary.events:
        rows = []
        for system_id, item in sorted(summary.events, key=lambda x: x[1].event.start_time_ns):
            e = item.event
            maxima = [o.max_pa for o in e.observations if o.max_pa is not None]
            minima = [o.min_pa for o in e.observations if o.min_pa is not None]
            rows.append([
                fmt_time(pd.Timestamp(e.start_time_ns, unit="ns").to_pydatetime(warn=False)), system_id, e.kind,
                e.severity, e.origin_sensor, len(e.observations),
                fmt_num(max(maxima) / KPA) if maxima else "-", fmt_num(min(minima) / KPA) if minima else "-",
                len(item.flags),
            ])
        table = format_table(["start (UTC)", "system", "kind", "severity", "first sensor", "sensors",
                              "max kPa", "min kPa", "flags"], rows, right=(5, 6, 7, 8))
        print("\n".join("    " + line for line in table.splitlines()))
        flags = [f for _, item in summary.events for f in item.flags]
        for f in flags:
            if f["severity"] == "critical":
                print(f"  CRITICAL {f['kind']} [{f['asset_id']}]: {f['message']}")
    print(f"  findings: {_database_label(config, url)} (see: surgesift events --details)")
    print(f"  {CAUTION}")


def cmd_screen(config: Config, args: Namespace) -> int:
    url = args.database_url or config.database_url
    started = time.perf_counter()
    summary = ScreeningPass(config, database_url=url, inbox=args.inbox).run()
    _print_summary(config, summary, time.perf_counter() - started, url)
    return 0


def cmd_serve(config: Config, args: Namespace) -> int:
    from .scheduler import serve

    serve(config, database_url=args.database_url, inbox=args.inbox)
    return 0


def cmd_events(config: Config, args: Namespace) -> int:
    url = args.database_url or config.database_url
    _, factory = open_store(url)
    query = select(Event).order_by(Event.start_time)
    since = parse_time(args.since)
    if since is not None:
        query = query.where(Event.start_time >= since)
    if args.system:
        config.system(args.system)
        query = query.where(Event.system_id == args.system)
    if args.kind:
        kinds = ("pump_trip", "pump_start", "valve_closure", "burst_suspected", "sensor_fault", "unclassified")
        if args.kind not in kinds:
            raise ValueError(f"--kind {args.kind!r} is not a kind; use one of {', '.join(kinds)}")
        query = query.where(Event.kind == args.kind)
    with factory() as session:
        events = session.scalars(query.limit(args.limit)).all()
        if not events:
            print("no events match (screen some files first: surgesift screen)")
            return 0
        rows = [[e.id, fmt_time(e.start_time), e.system_id, e.kind, e.severity, e.origin_sensor, e.n_sensors,
                 fmt_num(e.max_kpa), fmt_num(e.min_kpa), e.reason or ""] for e in events]
        print(format_table(["id", "start (UTC)", "system", "kind", "severity", "first sensor", "sensors",
                            "max kPa", "min kPa", "why"], rows, right=(0, 6, 7, 8)))
        if args.details:
            for e in events:
                _print_event_details(session, e)
    print(CAUTION)
    return 0


def _print_event_details(session, event: Event) -> None:
    print(f"\nevent {event.id}: {event.kind} ({event.severity}) on {event.system_id} at {fmt_time(event.start_time)} UTC")
    obs = session.scalars(select(EventObservation).where(EventObservation.event_id == event.id)
                          .order_by(EventObservation.onset_time)).all()
    cycles: dict[str, list] = {}
    for c in session.scalars(select(PressureCycleBin).where(PressureCycleBin.event_id == event.id)):
        cycles.setdefault(c.sensor_id, []).append(c)
    rows = [[o.sensor_id, fmt_time(o.onset_time), fmt_num(o.baseline_kpa), fmt_num(o.max_kpa), fmt_num(o.min_kpa),
             fmt_num(o.max_rate_kpa_s), fmt_num(o.dominant_period_s, 2), _cycle_text(cycles.get(o.sensor_id, [])),
             "yes" if o.clipped else "", o.notes or ""]
            for o in obs]
    print(format_table(["sensor", "onset (UTC)", "baseline kPa", "max kPa", "min kPa", "max rate kPa/s",
                        "period s", "cycles (largest kPa)", "clipped", "notes"], rows, right=(2, 3, 4, 5, 6)))
    for f in session.scalars(select(Flag).where(Flag.event_id == event.id)):
        print(f"  {f.severity.upper()} {f.kind} [{f.asset_id}]: {f.message}")


def _cycle_text(bins: list) -> str:
    """Rainflow cycles above the gate and the largest range, e.g. ``8.5 (531)``."""
    if not bins:
        return ""
    return f"{sum(b.cycles for b in bins):g} ({bins[0].largest_range_kpa:.0f})"


def cmd_wavespeed(config: Config, args: Namespace) -> int:
    from .wavespeed_report import show_wave_speeds

    return show_wave_speeds(config, args)


def cmd_simulate(config: Config, args: Namespace) -> int:
    from .simulate import run_scenario

    from .analysis import latest_calibrations

    system = config.system(args.system)
    speeds = {}
    try:
        _, factory = open_store(args.database_url or config.database_url)
        with factory() as session:
            speeds = {k: v.wave_speed_m_s for k, v in latest_calibrations(session, system.id).items()}
    except StoreError as exc:
        print(f"note: no calibrations read ({exc}); using the configured wave speeds")
    paths = run_scenario(system, args.scenario, args.out, wave_speeds_m_s=speeds)
    print(f"simulated {system.id} scenario {args.scenario!r}:")
    if speeds:
        print("  wave speeds from the newest calibration: "
              + ", ".join(f"{k} {v:.0f} m/s" for k, v in sorted(speeds.items())))
    warnings = paths.pop("warnings", [])
    for label, path in paths.items():
        print(f"  {label}: {path}")
    for warning in warnings:
        print(f"  WARNING: {warning}")
    print(CAUTION)
    return 0


def cmd_report(config: Config, args: Namespace) -> int:
    from .report import write_report

    out = args.out or config.report_path
    paths = write_report(config, args.database_url or config.database_url, out,
                         since=parse_time(args.since), until=parse_time(args.until), system_id=args.system)
    for label, path in paths.items():
        print(f"{label}: {path}")
    return 0
