"""A real PostgreSQL server for the tests: initdb into a temporary folder, pg_ctl on a free
local port, stopped and removed at the end. The server refuses to run as root, so under
root it runs as the ``postgres`` user."""

from __future__ import annotations

import glob
import os
import pwd
import shlex
import shutil
import socket
import subprocess
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager


def _binaries() -> str | None:
    """The folder of initdb and pg_ctl (PATH first, then the Debian layout), or None."""
    found = shutil.which("initdb")
    if found and shutil.which("pg_ctl"):
        return os.path.dirname(os.path.realpath(found))
    for folder in sorted(glob.glob("/usr/lib/postgresql/*/bin"), reverse=True):
        if os.path.exists(os.path.join(folder, "initdb")):
            return folder
    return None


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


@contextmanager
def postgres_server() -> Iterator[str]:
    """A running server; yields its address (user ``postgres``, trusted, database
    ``postgres``). Raises ``LookupError`` where no PostgreSQL binaries exist."""
    binaries = _binaries()
    if binaries is None:
        raise LookupError("no PostgreSQL server binaries (initdb, pg_ctl) on this machine")
    folder = tempfile.mkdtemp(prefix="tidesplit-postgres-")
    as_root = os.geteuid() == 0
    if as_root:
        user = pwd.getpwnam("postgres")
        os.chown(folder, user.pw_uid, user.pw_gid)
    data, port = os.path.join(folder, "data"), _free_port()

    def run(*command: str) -> None:
        line = " ".join(shlex.quote(part) for part in command)
        full = ["su", "postgres", "-c", line] if as_root else ["sh", "-c", line]
        subprocess.run(full, check=True, capture_output=True, timeout=120)

    run(f"{binaries}/initdb", "-D", data, "-A", "trust", "-U", "postgres", "--no-sync")
    options = f"-p {port} -k {folder} -c listen_addresses=127.0.0.1 -c fsync=off"
    run(f"{binaries}/pg_ctl", "-D", data, "-o", options, "-l", f"{folder}/log", "start", "-w")
    try:
        yield f"postgresql://postgres@127.0.0.1:{port}/postgres"
    finally:
        run(f"{binaries}/pg_ctl", "-D", data, "stop", "-m", "fast", "-w")
        shutil.rmtree(folder, ignore_errors=True)
