"""Command line: ``surgesift <command>`` (also ``python -m service``).

Exit codes: 0 when the command did its work (a screening pass that quarantined files still
completed); 2 for a bad configuration or bad arguments (also an archive folder that belongs to
another database); 3 when the database cannot be reached;
4 when another screening pass holds the lock; 1 for any other failure.
"""

from __future__ import annotations

import argparse
import logging
import sys
from pathlib import Path

from .archive import ArchiveOwnerError
from .config import ConfigError, load_config
from .locking import PassLockedError
from .store import StoreError

__all__ = ["main", "build_parser"]

EXIT_OK, EXIT_FAILED, EXIT_CONFIG, EXIT_DATABASE, EXIT_LOCKED = 0, 1, 2, 3, 4


def _common(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--config", type=Path, default=Path("config"), help="configuration folder (default: config/)")
    parser.add_argument("--db", dest="database_url", default=None, help="SQLAlchemy database URL (default: from service.toml)")
    parser.add_argument("--inbox", type=Path, default=None, help="folder of logger uploads (default: from service.toml)")
    parser.add_argument("-v", "--verbose", action="count", default=0, help="more log output (-vv for debug)")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="surgesift",
        description="Screen pressure-logger uploads from water mains for surge events.",
    )
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    p = sub.add_parser("screen", help="one screening pass over files not seen before")
    _common(p)

    p = sub.add_parser("serve", help="run the screening schedule until stopped")
    _common(p)

    p = sub.add_parser("events", help="list findings")
    _common(p)
    p.add_argument("--since", help="only events starting at or after this ISO 8601 time (UTC if no offset)")
    p.add_argument("--system", help="only this system id")
    p.add_argument("--kind", help="only this kind (pump_trip, pump_start, valve_closure, burst_suspected, sensor_fault, unclassified)")
    p.add_argument("--limit", type=int, default=200, help="at most this many events (default 200)")
    p.add_argument("--details", action="store_true", help="also list each sensor's observation and the flags")

    p = sub.add_parser("wavespeed", help="wave-speed estimates and calibration per pipe")
    _common(p)
    p.add_argument("--system", help="only this system id")
    p.add_argument("--recalibrate", action="store_true", help="write a new calibration from the accepted estimates")

    p = sub.add_parser("simulate", help="run the MOC model of a system for a scenario")
    _common(p)
    p.add_argument("system", help="system id")
    p.add_argument("--scenario", required=True, help="scenario name from the system's config")
    p.add_argument("--out", type=Path, default=Path("sim_out"), help="output folder (default: sim_out/)")

    p = sub.add_parser("report", help="write the HTML report and CSV exports for a period")
    _common(p)
    p.add_argument("--since", help="start of the period, ISO 8601 (default: 24 h before the newest event)")
    p.add_argument("--until", help="end of the period, ISO 8601 (default: now)")
    p.add_argument("--system", help="only this system id")
    p.add_argument("--out", type=Path, default=None, help="output folder (default: [report] folder)")
    return parser


def _configure_logging(verbose: int) -> None:
    level = logging.WARNING if verbose == 0 else logging.INFO if verbose == 1 else logging.DEBUG
    logging.basicConfig(level=level, format="%(levelname)s %(name)s: %(message)s", stream=sys.stderr)
    if verbose < 2:
        logging.getLogger("apscheduler").setLevel(max(level, logging.WARNING))
        logging.getLogger("numba").setLevel(logging.WARNING)


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    _configure_logging(args.verbose)
    try:
        config = load_config(args.config)
    except ConfigError as exc:
        print(f"surgesift: {exc}", file=sys.stderr)
        return EXIT_CONFIG
    from . import commands

    handler = getattr(commands, f"cmd_{args.command}")
    try:
        return handler(config, args)
    except ConfigError as exc:
        print(f"surgesift: {exc}", file=sys.stderr)
        return EXIT_CONFIG
    except (KeyError, ValueError) as exc:
        print(f"surgesift: {exc.args[0] if exc.args else exc}", file=sys.stderr)
        return EXIT_CONFIG
    except StoreError as exc:
        print(f"surgesift: {exc}", file=sys.stderr)
        return EXIT_DATABASE
    except PassLockedError as exc:
        print(f"surgesift: {exc}", file=sys.stderr)
        return EXIT_LOCKED
    except ArchiveOwnerError as exc:
        print(f"surgesift: {exc}", file=sys.stderr)
        return EXIT_CONFIG
    except Exception as exc:  # an unexpected failure: say what, keep the trace for -vv
        logging.getLogger("surgesift").debug("unexpected failure", exc_info=True)
        print(f"surgesift: {args.command} failed: {exc.__class__.__name__}: {exc} (run with -vv for details)",
              file=sys.stderr)
        return EXIT_FAILED


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
