"""Where the server is, and how to reach it without ever showing its password.

The address is a libpq URL or key=value conninfo (`--server`, or `server` in the laptop's
prefs, which never holds a password); an empty address leaves everything to libpq's own
PG* variables, service file (PGSERVICE, ~/.pg_service.conf) and password file (~/.pgpass).
TLS is libpq's too: `sslmode` in the address or PGSSLMODE is honoured as given.
Every message that could quote the address goes through `scrub` first.
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING, Any

from store.base.errors import BookError
from store.base.validate import one_line

if TYPE_CHECKING:
    import psycopg

CONNECT_TIMEOUT_S = 8
_URL = re.compile(r"postgres(?:ql)?://\S*", re.IGNORECASE)
_PASSWORD_KV = re.compile(r"(password\s*=\s*)('(?:[^'\\]|\\.)*'|\S+)", re.IGNORECASE)


def _psycopg() -> Any:
    try:
        import psycopg  # deferred: only the server commands need it
    except ImportError:
        raise BookError(
            "the server tier is not installed: pip install 'sumpbook[server]'"
        ) from None
    return psycopg


def shown(conninfo: str) -> str:
    """The address as it may be printed: no password, whatever form it came in (a URL's
    user:password@, password=... as a setting or a URL parameter), even a mistyped one."""
    if not conninfo:
        return "the server of the PG* environment / service file"
    text = _PASSWORD_KV.sub(r"\1***", conninfo)
    text = re.sub(r"([?&]password=)[^&]*", r"\1***", text, flags=re.IGNORECASE)
    at = text.rfind("@")
    if at >= 0:  # user:password@host, however the scheme before it is spelled
        head, tail = text[:at], text[at:]
        scheme = re.match(r"^[A-Za-z][A-Za-z0-9+.-]*:/*", head)
        start = scheme.end() if scheme else 0
        colon = head.find(":", start)
        if colon >= 0:
            head = head[: colon + 1] + "***"
        text = head + tail
    return one_line(text, 120)


def _secrets(conninfo: str) -> list[str]:
    found = [m.group(2).strip("'") for m in _PASSWORD_KV.finditer(conninfo)]
    found += re.findall(r"[?&]password=([^&]*)", conninfo, flags=re.IGNORECASE)
    at = conninfo.rfind("@")
    if at >= 0:
        head = conninfo[:at]
        scheme = re.match(r"^[A-Za-z][A-Za-z0-9+.-]*:/*", head)
        start = scheme.end() if scheme else 0
        colon = head.find(":", start)
        if colon >= 0:
            found.append(head[colon + 1 :])
    return [s for s in found if s]


def scrub(message: str, conninfo: str) -> str:
    """A library's message with the address's password (in any spelling) taken out."""
    for secret in _secrets(conninfo):
        message = message.replace(secret, "***")
    message = _URL.sub(lambda m: shown(m.group(0)), message)
    message = _PASSWORD_KV.sub(r"\1***", message)
    return one_line(" ".join(message.split()), 240)


def connect(conninfo: str, autocommit: bool = True) -> psycopg.Connection:
    """A connection to the server, or BookError with one line that names no password."""
    psycopg = _psycopg()
    try:
        params = psycopg.conninfo.conninfo_to_dict(conninfo) if conninfo else {}
    except psycopg.ProgrammingError:
        raise BookError(
            f"the server address '{shown(conninfo)}' cannot be read: give a URL "
            "(postgresql://user@host/db) or key=value settings"
        ) from None
    params.setdefault("connect_timeout", CONNECT_TIMEOUT_S)
    params.setdefault("application_name", "sumpbook")
    try:
        return psycopg.connect(autocommit=autocommit, **params)
    except psycopg.Error as exc:
        raise BookError(
            f"no server reached at {shown(conninfo)}: {scrub(str(exc), conninfo)}; "
            "nothing was changed"
        ) from None
