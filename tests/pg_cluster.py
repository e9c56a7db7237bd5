"""A throw-away PostgreSQL cluster for the tests and benchmarks (test support, not product).

:func:`start` runs ``initdb`` in a new temporary folder and starts the server listening on a Unix
socket in that folder only (no TCP port at all), as an unprivileged user: the current user, or
``nobody`` through ``runuser`` when running as root (PostgreSQL refuses to run as root). Local
connections need the password of the one role, so tests exercise real credentials. ``.ci/run``
starts a cluster the same way in shell and exports its URL as ``BENCHGATE_TEST_PG_URL``.

    python tests/pg_cluster.py      # start one, print its URL, stop it on Enter
"""

from __future__ import annotations

import os
import secrets
import shutil
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path
from urllib.parse import quote

ROLE = "benchgate"


class NoServer(RuntimeError):
    """No PostgreSQL server can be started here (the reason is the message)."""


def find_bin() -> Path:
    """The folder of ``initdb`` and ``pg_ctl``: PATH first, then Debian's versioned folders."""
    found = shutil.which("initdb")
    if found:
        return Path(found).parent
    for d in sorted(Path("/usr/lib/postgresql").glob("*/bin"), reverse=True):
        if (d / "initdb").is_file() and (d / "pg_ctl").is_file():
            return d
    raise NoServer("no PostgreSQL server programs (initdb, pg_ctl) on PATH or under "
                   "/usr/lib/postgresql/*/bin (Debian: apt-get install postgresql)")


@dataclass
class Cluster:
    root: Path
    bindir: Path
    user: str | None  # the OS user the server runs as (None: the current user)
    password: str

    @property
    def socket_dir(self) -> Path:
        return self.root / "sock"

    def url(self, database: str = "postgres", **query: str) -> str:
        q = "&".join([f"host={quote(str(self.socket_dir))}"]
                     + [f"{k}={quote(v)}" for k, v in query.items()])
        return f"postgresql://{ROLE}:{quote(self.password)}@/{database}?{q}"

    def _run(self, *args: str, check: bool = True) -> subprocess.CompletedProcess:
        cmd = [str(a) for a in args]
        if self.user is not None:
            cmd = ["runuser", "-u", self.user, "--", *cmd]
        return subprocess.run(cmd, capture_output=True, text=True, check=check, timeout=120,
                              stdin=subprocess.DEVNULL)

    def pg_ctl(self, action: str, check: bool = True) -> subprocess.CompletedProcess:
        args = [self.bindir / "pg_ctl", "-D", self.root / "data", "-w", "-t", "60"]
        if action == "start":
            args += ["-l", self.root / "server.log", "-o",
                     f"-c listen_addresses='' -k {self.socket_dir} -c fsync=off"
                     " -c max_connections=60 -c shared_buffers=128MB"]
        elif action == "stop":
            args += ["-m", "fast"]
        return self._run(*args, action, check=check)

    def start(self) -> None:
        self.pg_ctl("start")

    def stop(self) -> None:
        self.pg_ctl("stop", check=False)

    def destroy(self) -> None:
        self.stop()
        shutil.rmtree(self.root, ignore_errors=True)


def start() -> Cluster:
    """Create and start a cluster; raises :class:`NoServer` with the reason when it cannot."""
    bindir = find_bin()
    user = None
    if os.geteuid() == 0:
        if shutil.which("runuser") is None:
            raise NoServer("running as root and no 'runuser' to start PostgreSQL as 'nobody'")
        user = "nobody"
    root = Path(tempfile.mkdtemp(prefix="benchgate-pg-"))
    password = secrets.token_urlsafe(12) + "'; x"  # quotes and ; in a password, on purpose
    try:
        (root / "sock").mkdir()
        pwfile = root / "pw"
        pwfile.write_text(password + "\n")
        if user is not None:
            shutil.chown(root, user)
            shutil.chown(root / "sock", user)
            shutil.chown(pwfile, user)
        os.chmod(root, 0o700)
        cluster = Cluster(root, bindir, user, password)
        cluster._run(bindir / "initdb", "-D", root / "data", "-U", ROLE, "--pwfile", pwfile,
                     "--auth=scram-sha-256", "-E", "UTF8", "--locale=C", "--no-sync")
        pwfile.unlink()
        cluster.start()
    except subprocess.CalledProcessError as exc:
        shutil.rmtree(root, ignore_errors=True)
        raise NoServer(f"could not start PostgreSQL: {exc.stderr.strip()[-300:]}") from None
    except (OSError, subprocess.TimeoutExpired) as exc:
        shutil.rmtree(root, ignore_errors=True)
        raise NoServer(f"could not start PostgreSQL: {exc}") from None
    return cluster


if __name__ == "__main__":
    c = start()
    print(c.url())
    try:
        input("running; Enter stops it\n")
    finally:
        c.destroy()
