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

from store.base.errors import BookError
from store.base.records import frozen_record
from store.base.timeutil import parse_iso, to_utc, utc_now
from store.base.validate import one_line

ENV_DB = "SUMPBOOK_DB"
ENV_CONFIG = "SUMPBOOK_CONFIG"
ENV_NOW = "SUMPBOOK_NOW"
ENV_DEBUG = "SUMPBOOK_DEBUG"

Clock = Callable[[], datetime]


# platformdirs is imported where a default folder is asked for: a run given its book and its
# preferences (--db, the variables; a script's `status --json`) never needs it (7 ms of imports).


def user_book_path() -> Path:
    from platformdirs import user_data_dir

    return Path(user_data_dir("sumpbook", appauthor=False)) / "logbook.db"


def user_config_path() -> Path:
    from platformdirs import user_config_dir

    return Path(user_config_dir("sumpbook", appauthor=False)) / "prefs.json"


def fixed_clock(moment: datetime | str) -> Clock:
    """A clock that always says `moment` (an ISO 8601 text or an aware datetime)."""
    if isinstance(moment, str):
        moment = parse_iso(moment)
    utc = to_utc(moment, UTC)
    return lambda: utc


@frozen_record
class Session:
    db_given: Path | None  # SUMPBOOK_DB: the logbook when none is named on the command line
    config_given: Path | None  # SUMPBOOK_CONFIG
    clock: Clock = utc_now
    debug: bool = False

    @property
    def db_path(self) -> Path:
        """The logbook when none is named on the command line: SUMPBOOK_DB, else the user's."""
        return self.db_given or user_book_path()

    @property
    def db_named(self) -> bool:
        """SUMPBOOK_DB named the logbook (it is not the user's default)."""
        return self.db_given is not None

    @property
    def config_path(self) -> Path:
        """The laptop's preferences file: SUMPBOOK_CONFIG, else the user's."""
        return self.config_given or user_config_path()


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
        db_given=Path(db).expanduser() if db else None,
        config_given=Path(config).expanduser() if config else None,
        clock=_clock(now) if now else utc_now,
        debug=bool(environ.get(ENV_DEBUG)),
    )
