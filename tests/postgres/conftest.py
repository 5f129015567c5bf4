"""A throwaway PostgreSQL server for the shared-search tests, and one new database per test.

The server is started from the PostgreSQL binaries on the machine (``/usr/lib/postgresql/*/bin``,
or the folder in ``LABBENCH_PG_BIN``, or ``pg_ctl`` on PATH) with ``initdb`` + ``pg_ctl`` in a
temporary folder, listening on 127.0.0.1 only, and stopped and removed at the end of the session.
initdb and the server refuse to run as root, so as root they run as the ``postgres`` user
(``runuser``). pytest-postgresql's process fixture starts the server as the current user and has
no such switch, so the server is started here; its ``DatabaseJanitor`` creates and drops the
database of each test.

No server, no silence: if the server cannot start these tests fail (``.ci/run`` installs the
server package on a fresh machine). A developer without PostgreSQL may set
``LABBENCH_SKIP_POSTGRES=1`` to skip them instead.
"""

from __future__ import annotations

import glob
import os
import shutil
import socket
import subprocess
import sys
import tempfile
import uuid
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "search"))   # runner_support

SKIP_ENV = "LABBENCH_SKIP_POSTGRES"


def _bin_dir() -> Path | None:
    given = os.environ.get("LABBENCH_PG_BIN")
    candidates = [given] if given else sorted(
        glob.glob("/usr/lib/postgresql/*/bin"), key=lambda p: int(Path(p).parent.name)
        if Path(p).parent.name.isdigit() else 0, reverse=True)
    on_path = shutil.which("pg_ctl")
    if on_path and not given:
        candidates.append(str(Path(on_path).parent))
    for folder in candidates:
        if folder and (Path(folder) / "initdb").exists() and (Path(folder) / "pg_ctl").exists():
            return Path(folder)
    return None


def _unavailable(why: str):
    if os.environ.get(SKIP_ENV, "").strip() in ("1", "yes", "true"):
        pytest.skip(f"PostgreSQL tests skipped ({SKIP_ENV} is set): {why}")
    pytest.fail(f"no PostgreSQL server for the shared-search tests: {why}; install the "
                f"PostgreSQL server (.ci/run does) or set {SKIP_ENV}=1 to skip them",
                pytrace=False)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Server:
    def __init__(self, host: str, port: int, user: str):
        self.host, self.port, self.user = host, port, user

    def url(self, dbname: str) -> str:
        return f"postgresql+psycopg://{self.user}@{self.host}:{self.port}/{dbname}"


@pytest.fixture(scope="session")
def pg_server():
    bindir = _bin_dir()
    if bindir is None:
        _unavailable("initdb and pg_ctl were not found (/usr/lib/postgresql/*/bin, "
                     "LABBENCH_PG_BIN or PATH)")
    as_user: list[str] = []
    if os.geteuid() == 0:
        if shutil.which("runuser") is None:
            _unavailable("running as root and runuser is missing")
        as_user = ["runuser", "-u", "postgres", "--"]
    folder = Path(tempfile.mkdtemp(prefix="labbench-pg-"))
    data = folder / "data"
    if as_user:
        shutil.chown(folder, "postgres")
    port = _free_port()
    env = {**os.environ, "LC_ALL": "C"}

    def run(*args: str, timeout: float = 60):
        return subprocess.run([*as_user, *args], capture_output=True, text=True, env=env,
                              timeout=timeout, cwd=folder)

    done = run(str(bindir / "initdb"), "-D", str(data), "-U", "postgres", "--auth=trust",
               "-E", "UTF8", "--no-sync")
    if done.returncode != 0:
        shutil.rmtree(folder, ignore_errors=True)
        _unavailable(f"initdb failed: {(done.stderr or done.stdout).strip()[-300:]}")
    options = (f"-c listen_addresses=127.0.0.1 -p {port} -k {folder} -c fsync=off "
               "-c max_connections=100")
    done = run(str(bindir / "pg_ctl"), "-D", str(data), "-l", str(folder / "log"), "-o", options,
               "-w", "-t", "60", "start", timeout=90)
    if done.returncode != 0:
        log = (folder / "log").read_text(errors="replace")[-300:] if (folder / "log").exists() \
            else done.stderr
        shutil.rmtree(folder, ignore_errors=True)
        _unavailable(f"the server did not start: {log.strip()}")
    try:
        yield Server("127.0.0.1", port, "postgres")
    finally:
        run(str(bindir / "pg_ctl"), "-D", str(data), "-m", "immediate", "-w", "stop")
        shutil.rmtree(folder, ignore_errors=True)


@pytest.fixture()
def pg_url(pg_server):
    """A new, empty database on the session's server (dropped after the test)."""
    from pytest_postgresql.janitor import DatabaseJanitor

    name = f"lb_{uuid.uuid4().hex[:12]}"
    with DatabaseJanitor(user=pg_server.user, host=pg_server.host, port=pg_server.port,
                         dbname=name):
        yield pg_server.url(name)
