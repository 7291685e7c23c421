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
_URL_PASSWORD = re.compile(r"(://[^/@?#:]*:)([^/@?#]*)(@)")


def _psycopg() -> Any:
    try:
        import psycopg  # deferred: only the server commands need it
    except ImportError:
        raise BookError(
            "the server tier is not installed: pip install 'sumpbook[server]'"
        ) from None
    return psycopg


def shown(conninfo: str) -> str:
    """The address as it may be printed: no password, whatever form it came in."""
    if not conninfo:
        return "the server of the PG* environment / service file"
    text = _URL_PASSWORD.sub(r"\1***\3", conninfo)
    text = _PASSWORD_KV.sub(r"\1***", text)
    text = re.sub(r"([?&]password=)[^&]*", r"\1***", text, flags=re.IGNORECASE)
    return one_line(text, 120)


def scrub(message: str, conninfo: str) -> str:
    """A library's message with the address's password (in any spelling) taken out."""
    secrets = [m.group(2) for m in _URL_PASSWORD.finditer(conninfo)]
    secrets += [m.group(2).strip("'") for m in _PASSWORD_KV.finditer(conninfo)]
    secrets += re.findall(r"[?&]password=([^&]*)", conninfo, flags=re.IGNORECASE)
    for secret in secrets:
        if secret:
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
