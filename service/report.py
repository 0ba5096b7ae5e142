"""The morning report: an HTML page with plots, and CSV exports of the findings for a period.

Written to ``<report folder>/<period>/``: ``report.html`` (self-contained: plots embedded as
PNG), ``events.csv``, ``observations.csv``, ``flags.csv``, ``wave_speeds.csv``,
``comparisons.csv``, ``cycles.csv`` (pressure cycles per range bin). Each event gets a plot of every sensor's pressure around it (from the
sample archive), with the pipe's allowable and minimum pressure drawn where they are in view.
"""

from __future__ import annotations

import base64
import datetime as dt
import html
import io
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import pandas as pd  # noqa: E402
from sqlalchemy import select  # noqa: E402

from .archive import SampleArchive  # noqa: E402
from .config import Config, system_layout  # noqa: E402
from .findings import utc_to_ns  # noqa: E402
from .store import (  # noqa: E402
    Event, EventObservation, Flag, ModelComparison, PressureCycleBin, WaveSpeedCalibration, WaveSpeedEstimate,
    open_store, utc_now,
)
from .tables import CAUTION  # noqa: E402

__all__ = ["write_report"]

KPA = 1000.0
PLOT_BEFORE_S, PLOT_AFTER_S = 10.0, 60.0
MAX_EVENT_PLOTS = 40


def _cycle_summary(cycles: pd.DataFrame, event_id: int) -> str:
    """Per sensor: cycles above the gate and the largest range, e.g. ``BRK-PT1 12 (531 kPa)``."""
    if cycles.empty:
        return ""
    mine = cycles[cycles["event_id"] == event_id]
    parts = [f"{sensor} {group['cycles'].sum():g} ({group['largest_range_kpa'].iloc[0]:.0f} kPa largest)"
             for sensor, group in mine.groupby("sensor_id")]
    return "; ".join(parts)


def _frame(session, model, condition) -> pd.DataFrame:
    rows = session.scalars(select(model).where(condition)).all()
    columns = [c.name for c in model.__table__.columns]
    return pd.DataFrame([{c: getattr(r, c) for c in columns} for r in rows], columns=columns)


def _png(fig) -> str:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=90, bbox_inches="tight")
    plt.close(fig)
    return base64.b64encode(buffer.getvalue()).decode("ascii")


def _event_plot(config: Config, archive: SampleArchive, event: Event) -> str | None:
    system = config.systems.get(event.system_id)
    if system is None:
        return None
    layout = system_layout(system)
    start_ns = utc_to_ns(event.start_time) - int(PLOT_BEFORE_S * 1e9)
    end_ns = utc_to_ns(event.start_time) + int(PLOT_AFTER_S * 1e9)
    fig, ax = plt.subplots(figsize=(9, 3.6))
    limits = set()
    plotted = 0
    for sensor in layout.pressure_sensors():
        frame = archive.load_sensor(system.id, sensor.id, start_ns, end_ns)
        if frame.empty:
            continue
        t_s = (frame["time_ns"].to_numpy() - utc_to_ns(event.start_time)) / 1e9
        ax.plot(t_s, frame["value"].to_numpy() / KPA, lw=0.8, label=sensor.id)
        pipe = layout.pipe(sensor.pipe_id)
        limits.add((pipe.id, pipe.allowable_pressure_pa, pipe.minimum_pressure_pa))
        plotted += 1
    if not plotted:
        plt.close(fig)
        return None
    low, high = ax.get_ylim()
    lines: dict[tuple[float, str], list[str]] = {}
    for pipe_id, allowable, minimum in limits:
        for value, label in ((allowable, "allowable"), (minimum, "minimum")):
            if value is not None:
                lines.setdefault((value / KPA, label), []).append(pipe_id)
    span = high - low
    for (value_kpa, label), pipes in sorted(lines.items()):
        if low - 0.2 * span <= value_kpa <= high + 0.2 * span:
            ax.axhline(value_kpa, color="crimson", ls="--" if label == "allowable" else ":", lw=0.8)
            ax.annotate(f"{', '.join(sorted(pipes))} {label}", (ax.get_xlim()[0], value_kpa),
                        fontsize=7, color="crimson", va="bottom")
    ax.set_xlabel(f"time from onset {event.start_time:%Y-%m-%d %H:%M:%S} UTC [s]")
    ax.set_ylabel("gauge pressure [kPa]")
    ax.set_title(f"event {event.id}: {event.kind} ({event.severity}), {event.system_id}")
    ax.grid(alpha=0.3)
    ax.legend(fontsize=7, ncol=4, loc="best")
    return _png(fig)


def _wave_speed_plot(estimates: pd.DataFrame, calibrations: pd.DataFrame) -> str | None:
    accepted = estimates[estimates["accepted"].astype(bool)] if not estimates.empty else estimates
    if accepted.empty:
        return None
    fig, ax = plt.subplots(figsize=(9, 3.2))
    for pipe_id, group in accepted.groupby("pipe_id"):
        ax.errorbar(pd.to_datetime(group["event_time"]), group["wave_speed_m_s"], yerr=1.96 * group["uncertainty_m_s"],
                    fmt="o", ms=3, lw=0.8, label=f"{pipe_id} estimates (95 %)")
        cal = calibrations[calibrations["pipe_id"] == pipe_id] if not calibrations.empty else calibrations
        if not cal.empty:
            ax.axhline(cal.iloc[-1]["wave_speed_m_s"], ls="--", lw=0.8)
    ax.set_ylabel("wave speed [m/s]")
    ax.grid(alpha=0.3)
    ax.legend(fontsize=7)
    return _png(fig)


def _html_table(frame: pd.DataFrame, columns: list[str]) -> str:
    if frame.empty:
        return "<p>none</p>"
    shown = frame[[c for c in columns if c in frame.columns]]
    return shown.to_html(index=False, border=0, classes="t", float_format=lambda v: f"{v:,.1f}", na_rep="-")


def write_report(config: Config, database_url: str, out: Path, since: dt.datetime | None = None,
                 until: dt.datetime | None = None, system_id: str | None = None) -> dict[str, Path]:
    """Write the HTML report and CSV exports; returns the paths written."""
    _, factory = open_store(database_url)
    until = until or utc_now()
    with factory() as session:
        if since is None:
            newest = session.scalar(select(Event.start_time).order_by(Event.start_time.desc()).limit(1))
            since = (newest or until) - dt.timedelta(hours=24)
        condition = (Event.start_time >= since) & (Event.start_time < until)
        if system_id:
            config.system(system_id)
            condition = condition & (Event.system_id == system_id)
        events = session.scalars(select(Event).where(condition).order_by(Event.start_time)).all()
        event_ids = [e.id for e in events]
        frames = {
            "events": _frame(session, Event, Event.id.in_(event_ids)),
            "observations": _frame(session, EventObservation, EventObservation.event_id.in_(event_ids)),
            "flags": _frame(session, Flag, Flag.event_id.in_(event_ids)),
            "wave_speeds": _frame(session, WaveSpeedEstimate, WaveSpeedEstimate.event_id.in_(event_ids)),
            "comparisons": _frame(session, ModelComparison, ModelComparison.event_id.in_(event_ids)),
            "cycles": _frame(session, PressureCycleBin, PressureCycleBin.event_id.in_(event_ids)),
        }
        calibrations = _frame(session, WaveSpeedCalibration, WaveSpeedCalibration.id > 0)
    folder = Path(out) / f"{since:%Y%m%dT%H%M}-{until:%Y%m%dT%H%M}"
    folder.mkdir(parents=True, exist_ok=True)
    paths = {}
    for name, frame in frames.items():
        paths[f"{name} (CSV)"] = folder / f"{name}.csv"
        frame.to_csv(paths[f"{name} (CSV)"], index=False)
    archive = SampleArchive(config.archive_path)
    sections = []
    for event in events[:MAX_EVENT_PLOTS]:
        png = _event_plot(config, archive, event)
        obs = frames["observations"][frames["observations"]["event_id"] == event.id]
        flags = frames["flags"][frames["flags"]["event_id"] == event.id]
        comps = frames["comparisons"][frames["comparisons"]["event_id"] == event.id]
        cycles = _cycle_summary(frames["cycles"], event.id)
        sections.append(
            f"<h3>Event {event.id}: {html.escape(event.kind)} ({html.escape(event.severity)}) "
            f"at {event.start_time:%Y-%m-%d %H:%M:%S} UTC, {html.escape(event.system_id)}</h3>"
            f"<p>{html.escape(event.reason or '')}</p>"
            + (f'<img src="data:image/png;base64,{png}" alt="pressure traces">' if png else "<p>(no archived samples to plot)</p>")
            + _html_table(obs, ["sensor_id", "onset_time", "baseline_kpa", "max_kpa", "min_kpa", "max_rate_kpa_s",
                                "first_front_kpa", "dominant_period_s", "clipped", "notes"])
            + (f"<p>Pressure cycles (rainflow, ASTM E1049-85) for fatigue screening: {html.escape(cycles)}</p>"
               if cycles else "")
            + ("<ul>" + "".join(f"<li><b>{html.escape(f.severity)}</b> {html.escape(f.kind)} "
                                f"[{html.escape(str(f.asset_id))}]: {html.escape(f.message)}</li>"
                                for f in flags.itertuples()) + "</ul>" if not flags.empty else "")
            + (_html_table(comps, ["sensor_id", "measured_max_kpa", "model_max_kpa", "measured_min_kpa", "model_min_kpa",
                                   "rmse_kpa", "wave_speed_m_s", "friction_factor", "fit_status"]) if not comps.empty else "")
        )
    wave_png = _wave_speed_plot(frames["wave_speeds"], calibrations)
    counts = frames["events"]["kind"].value_counts().to_dict() if not frames["events"].empty else {}
    critical = frames["flags"][frames["flags"]["severity"] == "critical"] if not frames["flags"].empty else frames["flags"]
    page = f"""<!doctype html><html><head><meta charset="utf-8"><title>surgesift report</title>
<style>body{{font-family:sans-serif;max-width:1100px;margin:auto}} table.t{{border-collapse:collapse;font-size:12px}}
table.t td,table.t th{{padding:2px 6px;border-bottom:1px solid #ddd}} .caution{{background:#fff3cd;padding:8px}}</style>
</head><body><h1>surgesift screening report</h1>
<p>Period {since:%Y-%m-%d %H:%M} to {until:%Y-%m-%d %H:%M} UTC{', system ' + html.escape(system_id) if system_id else ''};
written {utc_now():%Y-%m-%d %H:%M} UTC.</p>
<p class="caution">{html.escape(CAUTION)} A sensor can miss a peak (slow sampling, clipping, placement): the
absence of a finding is not proof that no surge happened.</p>
<h2>Summary</h2><p>{len(events)} event(s): {html.escape(', '.join(f'{k} {v}' for k, v in counts.items()) or 'none')};
{len(critical)} critical flag(s).</p>
{_html_table(frames['events'], ['id', 'system_id', 'kind', 'severity', 'start_time', 'origin_sensor', 'n_sensors', 'max_kpa', 'min_kpa', 'reason'])}
<h2>Critical flags</h2>{_html_table(critical, ['event_id', 'asset_id', 'kind', 'message'])}
<h2>Wave speeds</h2>{f'<img src="data:image/png;base64,{wave_png}" alt="wave speed trend">' if wave_png else '<p>no accepted estimates in the period</p>'}
{_html_table(frames['wave_speeds'], ['event_id', 'pipe_id', 'sensor_a', 'sensor_b', 'distance_m', 'delay_s', 'wave_speed_m_s', 'uncertainty_m_s', 'method', 'accepted', 'reason'])}
<h2>Events</h2>{''.join(sections) or '<p>none</p>'}
</body></html>"""
    paths["report (HTML)"] = folder / "report.html"
    paths["report (HTML)"].write_text(page, encoding="utf-8")
    return paths
