"""Per-laptop preferences: who is signed in, units of measure, theme.

Kept in a small JSON file in the user's config folder (not in the logbook), because
they belong to the person and the laptop, not to the plant's history.
"""

from __future__ import annotations

import json
import re
from dataclasses import asdict, replace
from pathlib import Path

from store.base.errors import BookError
from store.base.records import frozen_record
from store.base.units import pressure_key, temperature_key, volume_key

THEMES = ("dark", "light", "contrast")


@frozen_record
class Prefs:
    tech: str = ""
    pressure: str = "bar"
    temperature: str = "C"
    volume: str = "L"
    theme: str = "dark"
    server: str = ""  # the central server's URL or conninfo, never with its password

    def unit_keys(self) -> dict[str, str]:
        """quantity -> the unit's key in CSV header names ('bar', 'c', 'l' ...)."""
        return {
            "pressure": pressure_key(self.pressure),
            "temperature": temperature_key(self.temperature),
            "volume": volume_key(self.volume),
        }


def load(path: Path) -> Prefs:
    """The preferences kept at `path` (a Session's config_path); defaults when there are none
    or they cannot be read."""
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
        known = {k: str(v) for k, v in data.items() if k in Prefs.__dataclass_fields__}
        return checked(Prefs(**known))
    except (OSError, ValueError, TypeError):
        return Prefs()


def checked(prefs: Prefs) -> Prefs:
    pressure_key(prefs.pressure)
    temperature_key(prefs.temperature)
    volume_key(prefs.volume)
    if prefs.theme not in THEMES:
        raise BookError(f"theme must be one of {', '.join(THEMES)}")
    if has_password(prefs.server):
        raise BookError(
            "the server address holds a password: it is not kept here; give the address "
            "without it and put the password in ~/.pgpass (or PGPASSWORD)"
        )
    return prefs


# password=secret in a key=value conninfo or as a URL parameter
_KEY_PASSWORD = re.compile(r"(^|[\s&?])password\s*=", re.IGNORECASE)
_SCHEME = re.compile(r"^[A-Za-z][A-Za-z0-9+.-]*:/*")


def has_password(conninfo: str) -> bool:
    """Whether a server address (URL or key=value conninfo) carries a password: as a
    setting, a URL parameter, or user:password@ (however mistyped the scheme before it)."""
    if _KEY_PASSWORD.search(conninfo):
        return True
    at = conninfo.rfind("@")
    if at < 0 or "=" in conninfo[:at].split("?")[0].split(" ")[0] and " " in conninfo:
        return False
    head = conninfo[:at]
    scheme = _SCHEME.match(head)
    return ":" in head[scheme.end() if scheme else 0 :]


def save(prefs: Prefs, path: Path, **changes: str) -> Prefs:
    prefs = checked(replace(prefs, **changes))
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(".tmp")
    tmp.write_text(json.dumps(asdict(prefs), indent=1), encoding="utf-8")
    tmp.replace(path)
    return prefs
