"""Creating or upgrading the server's schema (`sumpbook server init URL`), as its owner."""

from __future__ import annotations

from store.base.errors import BookError
from store.server.address import connect, scrub, shown
from store.server.schema import LAPTOP_ROLE, META, MIGRATIONS, SERVER_VERSION


def initialise(conninfo: str) -> tuple[int, int]:
    """Bring the server's schema to this version: (version before, version now). All
    pending steps run in one transaction (a failed step changes nothing)."""
    import psycopg  # deferred: the server tier only

    conn = connect(conninfo, autocommit=False)
    try:
        with conn.transaction():
            conn.execute("SELECT pg_advisory_xact_lock(hashtext('sumpbook schema'))")
            conn.execute(META)
            before = int(
                conn.execute("SELECT value FROM sumpbook_meta WHERE key = 'version'").fetchone()[0]
            )
            if before > SERVER_VERSION:
                raise BookError(
                    f"the server's schema is version {before}, newer than this sumpbook "
                    f"knows ({SERVER_VERSION}): nothing was changed"
                )
            for script in MIGRATIONS[before:]:
                conn.execute(script)
            conn.execute(
                "UPDATE sumpbook_meta SET value = %s WHERE key = 'version'", [str(SERVER_VERSION)]
            )
        return before, SERVER_VERSION
    except psycopg.Error as exc:
        raise BookError(
            f"the schema on {shown(conninfo)} could not be made: {scrub(str(exc), conninfo)}; "
            "nothing was changed (it needs the database's owner)"
        ) from None
    finally:
        conn.close()


def laptop_role_hint() -> str:
    return (
        f"give each laptop a login in the role {LAPTOP_ROLE} (read and add only), e.g. "
        f"CREATE ROLE plant1_laptop LOGIN PASSWORD '…' IN ROLE {LAPTOP_ROLE}"
    )
