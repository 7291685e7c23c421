"""One real PostgreSQL server per test process (each xdist worker starts its own), a fresh
database with the sumpbook schema per test, and a laptop login in the laptop role."""

from __future__ import annotations

import itertools

import psycopg  # in the test extra: a missing driver fails the tests, never skips them
import pytest

from tests.kit import pgserver

_numbers = itertools.count()


@pytest.fixture(scope="session")
def pg():
    server = pgserver.start()
    try:
        with psycopg.connect(server.admin(), autocommit=True) as conn:
            conn.execute("CREATE ROLE sumpbook_laptop NOLOGIN")
            conn.execute(
                f"CREATE ROLE {pgserver.LAPTOP_USER} LOGIN PASSWORD "
                f"'{pgserver.LAPTOP_PASSWORD}' IN ROLE sumpbook_laptop"
            )
        yield server
    finally:
        server.stop()


@pytest.fixture
def server(pg):
    """A new database holding the server schema: `.url` for the laptop (with its password),
    `.admin` for its owner."""
    from store.server.setup import initialise

    name = f"fleet{next(_numbers)}"
    with psycopg.connect(pg.admin(), autocommit=True) as conn:
        conn.execute(f"CREATE DATABASE {name}")
    initialise(pg.admin(name))

    class Server:
        url = pg.url(name)
        admin = pg.admin(name)
        port = pg.port
        database = name

    return Server
