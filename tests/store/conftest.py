"""Both back ends for the store tests: a SQLite file, and a schema of a real PostgreSQL server.

The server is the one named by ``BENCHGATE_TEST_PG_URL`` (``.ci/run`` starts one and sets it),
or a throw-away cluster started here (tests/pg_cluster.py). Outside CI, tests that need it are
skipped with the reason when no server can be started; in CI (``CI=true``) that is a failure.
"""

from __future__ import annotations

import os
import uuid
from urllib.parse import quote

import pytest

import pg_cluster

IN_CI = os.environ.get("CI", "").lower() in ("1", "true", "yes")  # read before tests unset it
BACKENDS = ("sqlite", "postgresql")


class PGServer:
    def __init__(self, base_url: str, cluster: pg_cluster.Cluster | None):
        self.base_url = base_url
        self.cluster = cluster

    def new_schema(self) -> tuple[str, str]:
        """A fresh, empty schema: (name, URL whose search_path is that schema)."""
        import psycopg

        name = f"t_{uuid.uuid4().hex[:12]}"
        with psycopg.connect(self.base_url, autocommit=True) as conn:
            conn.execute(f'CREATE SCHEMA "{name}"')
        sep = "&" if "?" in self.base_url else "?"
        return name, f"{self.base_url}{sep}options={quote(f'-c search_path={name}')}"

    def drop_schema(self, name: str) -> None:
        import psycopg

        try:
            with psycopg.connect(self.base_url, autocommit=True) as conn:
                conn.execute(f'DROP SCHEMA IF EXISTS "{name}" CASCADE')
        except psycopg.Error:
            pass  # the server may be stopped by the test itself


def _start_or_skip() -> pg_cluster.Cluster:
    """A throw-away cluster; without one the test skips with the reason (in CI it fails)."""
    try:
        return pg_cluster.start()
    except pg_cluster.NoServer as exc:
        if IN_CI:
            pytest.fail(f"CI must test PostgreSQL, but no server could be started: {exc}")
        pytest.skip(f"PostgreSQL tests skipped: {exc}")


@pytest.fixture(scope="session")
def pg_server():
    url = os.environ.get("BENCHGATE_TEST_PG_URL")
    if url:
        yield PGServer(url, None)
        return
    cluster = _start_or_skip()
    try:
        yield PGServer(cluster.url(), cluster)
    finally:
        cluster.destroy()


@pytest.fixture
def pg_url(pg_server):
    name, url = pg_server.new_schema()
    yield url
    pg_server.drop_schema(name)


@pytest.fixture(params=BACKENDS)
def target(request, tmp_path):
    """Where a fresh results database lives: a SQLite path, or a PostgreSQL URL."""
    if request.param == "sqlite":
        yield str(tmp_path / "r.sqlite")
    else:
        yield request.getfixturevalue("pg_url")


@pytest.fixture
def own_server():
    """A cluster of the test's own, so that stopping it disturbs no other test."""
    cluster = _start_or_skip()
    yield cluster
    cluster.destroy()
