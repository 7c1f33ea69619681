"""A throwaway PostgreSQL server for the tests and benchmarks: a cluster in a temporary folder,
reached only through a Unix socket there, stopped and removed at the end.

initdb refuses to run as root; as root the server runs as the ``postgres`` system user that
Debian's packages create (``runuser``). Without PostgreSQL's programs the hosted tests skip,
unless ``POSEWRIGHT_REQUIRE_POSTGRES=1`` (set by ``.ci/run``), which makes them fail instead.
"""

from __future__ import annotations

import itertools
import os
import shutil
import subprocess
import tempfile
import time
from pathlib import Path
from urllib.parse import quote

ADMIN = "pwadmin"
#: A role that must give a password (SCRAM), for the credential tests; the password is made up.
PASSWORD_ROLE, PASSWORD = "pwsecret", "correct-horse-battery"


def pg_bin() -> Path | None:
    """The folder of PostgreSQL's server programs (initdb, pg_ctl), or None."""
    found = shutil.which("pg_ctl")
    if found and shutil.which("initdb"):
        return Path(found).parent
    versions = sorted(Path("/usr/lib/postgresql").glob("*/bin/pg_ctl"),
                      key=lambda p: int(p.parent.parent.name) if p.parent.parent.name.isdigit()
                      else 0)
    return versions[-1].parent if versions else None


def required() -> bool:
    return os.environ.get("POSEWRIGHT_REQUIRE_POSTGRES") == "1"


class Server:
    """One cluster. ``url(dbname)`` names a database on it; :meth:`new_database` makes one."""

    def __init__(self, fsync: bool = False):
        binary = pg_bin()
        if binary is None:
            raise FileNotFoundError("PostgreSQL's programs (initdb, pg_ctl) are not installed")
        self.bin = binary
        # A short path: a Unix socket's path may not be longer than 107 bytes.
        self.root = Path(tempfile.mkdtemp(prefix="pwpg-"))
        self.data = self.root / "data"
        self._as = ["runuser", "-u", "postgres", "--"] if os.geteuid() == 0 else []
        if self._as:
            shutil.chown(self.root, "postgres", "postgres")
        os.chmod(self.root, 0o700 if not self._as else 0o755)
        self._run("initdb", "-D", str(self.data), "-U", ADMIN, "--auth=trust", "-E", "UTF8",
                  "--no-sync")
        hba = self.data / "pg_hba.conf"
        rules = hba.read_text()
        hba.write_text(f"local all {PASSWORD_ROLE} scram-sha-256\n" + rules)
        self._options = f"-k {self.root} -c listen_addresses=''" + (
            "" if fsync else " -c fsync=off -c synchronous_commit=off -c full_page_writes=off")
        self.start()
        self._names = itertools.count(1)
        self.admin(f"CREATE ROLE {PASSWORD_ROLE} LOGIN PASSWORD '{PASSWORD}'")

    def _run(self, program: str, *args: str) -> str:
        out = subprocess.run([*self._as, str(self.bin / program), *args], capture_output=True,
                             text=True, cwd=self.root)
        if out.returncode:
            raise RuntimeError(f"{program} failed: {out.stderr.strip() or out.stdout.strip()}")
        return out.stdout

    def start(self, attempts: int = 3) -> None:
        """Start the server and wait until it takes connections. Right after an immediate
        stop, a start on a loaded machine now and then fails before the server writes its
        PID file; it is tried again (at most ``attempts`` times), and a last failure says
        what the server's log ends with."""
        for attempt in range(attempts):
            try:
                self._run("pg_ctl", "-D", str(self.data), "-l", str(self.root / "log"), "-w",
                          "-o", self._options, "start")
                return
            except RuntimeError as e:
                if attempt == attempts - 1:
                    raise RuntimeError(f"{e}\nserver log ends:\n{self._log_tail()}") from e
                time.sleep(0.5 * (attempt + 1))

    def _log_tail(self, lines: int = 20) -> str:
        try:
            return "\n".join((self.root / "log").read_text().splitlines()[-lines:])
        except OSError:
            return "(no log)"

    def restart(self, mode: str = "fast") -> None:
        """Stop the server (``mode`` as pg_ctl's ``-m``) and start it again; a server that
        has already gone counts as stopped."""
        try:
            self._run("pg_ctl", "-D", str(self.data), "-m", mode, "-w", "stop")
        except RuntimeError as e:
            if "PID file" not in str(e) and "not running" not in str(e):
                raise
        self.start()

    def stop(self) -> None:
        try:
            self._run("pg_ctl", "-D", str(self.data), "-m", "immediate", "-w", "stop")
        finally:
            shutil.rmtree(self.root, ignore_errors=True)

    def url(self, dbname: str, user: str = ADMIN, password: str | None = None) -> str:
        secret = f":{quote(password, safe='')}" if password else ""
        return f"postgresql://{user}{secret}@{quote(str(self.root), safe='')}/{dbname}"

    def admin(self, sql: str, dbname: str = "postgres") -> None:
        import psycopg

        with psycopg.connect(self.url(dbname), autocommit=True) as conn:
            conn.execute(sql)

    def new_database(self) -> str:
        """A fresh, empty database; returns its URL (as the admin role)."""
        name = f"t{os.getpid()}_{next(self._names)}"
        # FILE_COPY: a plain copy of the template's files, the quickest way for a small
        # database (PostgreSQL 15 documentation, CREATE DATABASE).
        self.admin(f"CREATE DATABASE {name} STRATEGY = FILE_COPY")
        self.admin(f"GRANT ALL ON SCHEMA public TO {PASSWORD_ROLE}", name)
        return self.url(name)
