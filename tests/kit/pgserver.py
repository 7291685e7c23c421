"""A real PostgreSQL server for the tests: initdb in a temporary folder, started on a free
local port (and a unix socket in the same folder), stopped at the end of the test session.

PostgreSQL refuses to run as root: as root the server runs as the `postgres` user. The
binaries (and runuser) are found on PATH, in /usr/local/bin, in Debian's
/usr/lib/postgresql/*/bin or in /usr/sbin and /sbin.
"""

from __future__ import annotations

import glob
import os
import pwd
import shutil
import socket
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

SUPERUSER = "postgres"
LAPTOP_USER = "laptop"
LAPTOP_PASSWORD = "s3cret-wrench-71"  # a made-up password: the tests look for it in outputs


def find_binary(name: str) -> str | None:
    found = shutil.which(name)
    if found:
        return found
    places = [
        "/usr/local/bin",
        *sorted(glob.glob("/usr/lib/postgresql/*/bin")),
        "/usr/sbin",
        "/sbin",
    ]
    for candidate in places:
        path = Path(candidate) / name
        if path.is_file():
            return str(path)
    return None


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@dataclass
class PgServer:
    folder: Path
    port: int
    pg_ctl: str
    as_user: list[str]

    @property
    def admin_url(self) -> str:
        return f"postgresql://{SUPERUSER}@127.0.0.1:{self.port}/postgres?sslmode=disable"

    def url(
        self, database: str, user: str = LAPTOP_USER, password: str | None = LAPTOP_PASSWORD
    ) -> str:
        auth = f"{user}:{password}" if password else user
        return f"postgresql://{auth}@127.0.0.1:{self.port}/{database}?sslmode=disable"

    def admin(self, database: str = "postgres") -> str:
        return f"postgresql://{SUPERUSER}@127.0.0.1:{self.port}/{database}?sslmode=disable"

    def stop(self) -> None:
        subprocess.run(
            [
                *self.as_user,
                self.pg_ctl,
                "stop",
                "-D",
                str(self.folder / "data"),
                "-m",
                "immediate",
            ],
            capture_output=True,
            check=False,
        )
        shutil.rmtree(self.folder, ignore_errors=True)


TEST_SETTINGS = (
    "-c fsync=off -c synchronous_commit=off -c full_page_writes=off -c shared_buffers=32MB "
    "-c max_connections=40"
)


def start(settings: str = TEST_SETTINGS) -> PgServer:
    """A new server; `settings` are postgres -c options (the tests trade durability for
    speed; the benchmark keeps PostgreSQL's durable defaults)."""
    initdb, pg_ctl = find_binary("initdb"), find_binary("pg_ctl")
    if not initdb or not pg_ctl:
        raise RuntimeError("PostgreSQL's initdb/pg_ctl are not installed (see .ci/run)")
    # The server's unix socket lives in its folder, and a socket's path has at most 107
    # bytes: under a long TMPDIR (or one the postgres user cannot enter) it goes to /tmp.
    base = tempfile.gettempdir()
    if len(base) > 60 or not os.stat(base).st_mode & 0o001:
        base = "/tmp"
    folder = Path(tempfile.mkdtemp(prefix="sumpbook-pg-", dir=base))
    as_user: list[str] = []
    if os.geteuid() == 0:
        pw = pwd.getpwnam("postgres")
        os.chown(folder, pw.pw_uid, pw.pw_gid)
        runuser = find_binary("runuser")  # in sbin, which a root shell's PATH may leave out
        if not runuser:
            raise RuntimeError("runuser (util-linux) is needed to start PostgreSQL as root")
        as_user = [runuser, "-u", "postgres", "--"]
    folder.chmod(0o700)
    data = folder / "data"
    subprocess.run(
        [*as_user, initdb, "-D", str(data), "-U", SUPERUSER, "--auth-local=trust",
         "--auth-host=scram-sha-256", "-E", "UTF8", "--locale=C.UTF-8", "--no-sync"],
        capture_output=True, check=True,
    )  # fmt: skip
    # the superuser from 127.0.0.1 without a password (tests only); everyone else by password
    hba = data / "pg_hba.conf"
    rules = (
        "local all all trust\n"
        f"host all {SUPERUSER} 127.0.0.1/32 trust\n"
        "host all all 127.0.0.1/32 scram-sha-256\n"
    )
    subprocess.run([*as_user, "sh", "-c", f"printf '%s' '{rules}' > {hba}"], check=True)
    for _ in range(5):
        port = _free_port()
        options = f"-p {port} -k {folder} -c listen_addresses=127.0.0.1 {settings}"
        done = subprocess.run(
            [*as_user, pg_ctl, "start", "-w", "-t", "30", "-D", str(data), "-o", options,
             "-l", str(folder / "log")],
            capture_output=True, check=False,
        )  # fmt: skip
        if done.returncode == 0:
            return PgServer(folder, port, pg_ctl, as_user)
    log = (folder / "log").read_text(errors="replace") if (folder / "log").exists() else ""
    shutil.rmtree(folder, ignore_errors=True)
    raise RuntimeError(f"PostgreSQL did not start: {log[-500:]}")
