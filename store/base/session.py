"""What one run of sumpbook takes from its surroundings. The environment is read once, where a
run starts (the command line, or the app when it is started without one), and handed down as
a Session: the store itself never reads it.

- SUMPBOOK_DB      the logbook when no --db is given (else the user's data folder)
- SUMPBOOK_CONFIG  the laptop's preferences file (else the user's config folder)
- SUMPBOOK_NOW     a fixed clock, any ISO 8601 time (demos, tests, benchmarks)
- SUMPBOOK_DEBUG   an unexpected error shows its traceback
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from datetime import UTC, datetime
from pathlib import Path

from platformdirs import user_config_dir, user_data_dir

from store.base.errors import BookError
from store.base.records import frozen_record
from store.base.timeutil import parse_iso, to_utc, utc_now
from store.base.validate import one_line

ENV_DB = "SUMPBOOK_DB"
ENV_CONFIG = "SUMPBOOK_CONFIG"
ENV_NOW = "SUMPBOOK_NOW"
ENV_DEBUG = "SUMPBOOK_DEBUG"

Clock = Callable[[], datetime]


def user_book_path() -> Path:
    return Path(user_data_dir("sumpbook", appauthor=False)) / "logbook.db"


def user_config_path() -> Path:
    return Path(user_config_dir("sumpbook", appauthor=False)) / "prefs.json"


def fixed_clock(moment: datetime | str) -> Clock:
    """A clock that always says `moment` (an ISO 8601 text or an aware datetime)."""
    if isinstance(moment, str):
        moment = parse_iso(moment)
    utc = to_utc(moment, UTC)
    return lambda: utc


@frozen_record
class Session:
    db_path: Path  # the logbook when none is named on the command line
    db_named: bool  # SUMPBOOK_DB named it (not the user's default)
    config_path: Path
    clock: Clock = utc_now
    debug: bool = False


def _clock(text: str) -> Clock:
    try:
        return fixed_clock(text)
    except (ValueError, OverflowError) as exc:  # BookError is a ValueError
        raise BookError(
            f"{ENV_NOW}='{one_line(text, 40)}' is not a time: give an ISO 8601 time such as "
            "2026-06-01T06:00Z, or unset it"
        ) from exc


def from_environ(environ: Mapping[str, str]) -> Session:
    """The session the environment describes; a SUMPBOOK_NOW that is not a time raises
    BookError."""
    db = environ.get(ENV_DB)
    config = environ.get(ENV_CONFIG)
    now = environ.get(ENV_NOW)
    return Session(
        db_path=Path(db).expanduser() if db else user_book_path(),
        db_named=bool(db),
        config_path=Path(config).expanduser() if config else user_config_path(),
        clock=_clock(now) if now else utc_now,
        debug=bool(environ.get(ENV_DEBUG)),
    )
