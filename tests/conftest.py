"""Shared test fixtures: a real mosquitto broker on a free loopback port.

Fixtures (usable by every test module):

``mqtt_broker``
    One anonymous broker for the whole session (module-independent); tests must use
    topic bases and client ids of their own (:func:`unique`) so they do not meet.
``make_broker``
    A factory for brokers of a test's own: ``make_broker(users={"board": "pw"},
    acl="user board\\ntopic readwrite ns/#", persistence=True, tls=False)``. Each one is
    stopped at the end of the test. :class:`Broker` can ``stop()``, ``start()`` (same
    port, same persistence folder), ``restart()`` and ``kill()``. ``tls=True`` makes a
    TLS listener with a throw-away CA and server certificate made at test time
    (:attr:`Broker.tls`, a :class:`TlsFiles`: CA in PEM for the host, in DER for the board).
``throwaway_ca``
    A factory for more throw-away CAs (``throwaway_ca("other")`` -> :class:`ThrowawayCA`),
    e.g. a CA the broker's certificate does not come from.

Under CI (``CI=true``, as ``.ci/run`` sets it) nothing may be skipped: a missing broker,
command-line tool or test-only library fails the test (hooks at the end of this file),
because a skip there would turn a broken set-up into a green run. Elsewhere a missing
tool still skips, with the reason.

Broker configuration notes (mosquitto 2.0, checked on Debian 2.0.11):

* a ``listener`` turns anonymous access off unless ``allow_anonymous true``;
* started as root, mosquitto drops to the ``mosquitto`` user, which cannot read files in
  a 0700 temporary folder: the config says ``user root`` when we are root;
* retained messages survive a restart only with ``persistence true`` and a
  ``persistence_location`` (written at shutdown and every ``autosave_interval``);
* TLS: the listener's ``cafile``, ``certfile`` and ``keyfile`` options (mosquitto.conf(5),
  "Certificate based SSL/TLS Support"); the certificates are made with the ``openssl``
  command line (EC P-256 keys, valid for two days).
"""

from __future__ import annotations

import base64
import hashlib
import itertools
import os
import shutil
import socket
import subprocess
import time
from dataclasses import dataclass
from pathlib import Path

import pytest

MOSQUITTO_CANDIDATES = ("/usr/sbin/mosquitto", "/usr/bin/mosquitto")
_counter = itertools.count(1)


def under_ci() -> bool:
    """True when running under CI (``CI=true``): skips become failures."""
    return os.environ.get("CI", "").strip().lower() in ("1", "true", "yes")


def unique(prefix: str) -> str:
    """A name unique to this test process (topic bases, client ids)."""
    return f"{prefix}-{os.getpid()}-{next(_counter)}"


def find_mosquitto() -> str | None:
    for path in MOSQUITTO_CANDIDATES:
        if os.access(path, os.X_OK):
            return path
    return shutil.which("mosquitto")


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def password_line(user: str, password: str) -> str:
    """One mosquitto password-file line in its salted SHA-512 form ``$6$salt$hash``.

    Format as mosquitto 2.0 reads it: base64 salt and base64 SHA-512(password + salt)
    (mosquitto_passwd(1), "-H sha512" form).
    """
    salt = os.urandom(12)
    digest = hashlib.sha512(password.encode() + salt).digest()
    return f"{user}:$6${base64.b64encode(salt).decode()}${base64.b64encode(digest).decode()}"


def openssl_exe() -> str:
    """The ``openssl`` command line (part of the machine); skips the test without it."""
    exe = shutil.which("openssl")
    if exe is None:
        pytest.skip("the openssl command line is not installed")
    return exe


def _openssl(*args: str | Path) -> None:
    done = subprocess.run([openssl_exe(), *map(str, args)], capture_output=True, text=True,
                          check=False, timeout=30)
    if done.returncode != 0:
        raise RuntimeError(f"openssl {args[0]} failed: {done.stderr.strip()[-800:]}")


#: EC P-256 keys: quick to make, and read by both OpenSSL (host, broker) and mbedTLS (board)
_EC_KEY = ("-newkey", "ec", "-pkeyopt", "ec_paramgen_curve:prime256v1", "-nodes")


@dataclass(frozen=True)
class ThrowawayCA:
    """A certificate authority made for one test: its certificate (PEM and DER) and key."""

    pem: Path
    der: Path
    key: Path

    def issue_server(self, folder: Path, ip: str = "127.0.0.1",
                     dns: str = "localhost") -> tuple[Path, Path]:
        """A server certificate and key signed by this CA, for ``ip`` and ``dns``.

        The names go in subjectAltName (RFC 5280 §4.2.1.6: iPAddress and dNSName
        entries), where TLS clients look for the host they connected to.
        """
        folder.mkdir(parents=True, exist_ok=True)
        key, csr, cert = folder / "server.key", folder / "server.csr", folder / "server.pem"
        ext = folder / "server.ext"
        ext.write_text(f"subjectAltName=IP:{ip},DNS:{dns}\n"
                       "basicConstraints=critical,CA:FALSE\n"
                       "keyUsage=critical,digitalSignature\n"
                       "extendedKeyUsage=serverAuth\n")
        _openssl("req", "-new", *_EC_KEY, "-keyout", key, "-out", csr, "-subj", f"/CN={dns}")
        _openssl("x509", "-req", "-in", csr, "-CA", self.pem, "-CAkey", self.key,
                 "-set_serial", str(int.from_bytes(os.urandom(8), "big")), "-days", "2",
                 "-extfile", ext, "-out", cert)
        return cert, key


def new_ca(folder: Path, name: str) -> ThrowawayCA:
    """Make a self-signed CA named ``name`` in ``folder`` (cA flag and keyCertSign usage as
    RFC 5280 §4.2.1.9 / §4.2.1.3 ask of a certificate that signs others)."""
    folder.mkdir(parents=True, exist_ok=True)
    pem, der, key = folder / "ca.pem", folder / "ca.der", folder / "ca.key"
    _openssl("req", "-x509", *_EC_KEY, "-keyout", key, "-out", pem, "-days", "2",
             "-subj", f"/CN={name}", "-addext", "basicConstraints=critical,CA:TRUE",
             "-addext", "keyUsage=critical,keyCertSign,cRLSign")
    _openssl("x509", "-in", pem, "-outform", "der", "-out", der)  # the board reads DER
    return ThrowawayCA(pem, der, key)


@dataclass(frozen=True)
class TlsFiles:
    """A TLS broker's files: its CA (PEM for the host, DER for the board), cert and key."""

    ca_pem: Path
    ca_der: Path
    certfile: Path
    keyfile: Path


class Broker:
    """A mosquitto process with a config written at test time.

    Parameters
    ----------
    folder : Path
        Working folder for the config, password/ACL files, persistence and the log.
    users : dict or None
        user -> password; with users, anonymous access is off.
    acl : str or None
        mosquitto ACL file text (``user NAME`` / ``topic read|write|readwrite FILTER``).
    persistence : bool
        Keep retained messages across restarts (stored in ``folder``).
    tls : bool
        A TLS listener instead of plain TCP, with a throw-away CA and a server certificate
        for 127.0.0.1/localhost made in ``folder`` (their paths: :attr:`tls`).
    """

    def __init__(self, folder: Path, users: dict[str, str] | None = None,
                 acl: str | None = None, persistence: bool = False,
                 tls: bool = False) -> None:
        exe = find_mosquitto()
        if exe is None:
            pytest.skip("mosquitto is not installed (make test installs it)")
        self.exe = exe
        self.folder = folder
        self.host = "127.0.0.1"
        self.port = free_port()
        self.proc: subprocess.Popen | None = None
        self.log_path = folder / "mosquitto.log"
        lines = [f"listener {self.port} {self.host}",
                 f"allow_anonymous {'false' if users else 'true'}",
                 "log_dest stderr", "log_type error", "log_type warning",
                 "log_type notice", "max_keepalive 600",
                 # small packets at once, as a home broker for interactive commands
                 # would be set up (mosquitto.conf(5), set_tcp_nodelay)
                 "set_tcp_nodelay true"]
        if os.geteuid() == 0:
            lines.append("user root")
        if users:
            pw = folder / "passwords"
            pw.write_text("".join(password_line(u, p) + "\n" for u, p in users.items()))
            pw.chmod(0o600)
            lines.append(f"password_file {pw}")
        if acl is not None:
            acl_path = folder / "acl"
            acl_path.write_text(acl if acl.endswith("\n") else acl + "\n")
            lines.append(f"acl_file {acl_path}")
        if persistence:
            lines += ["persistence true", f"persistence_location {folder}/",
                      "autosave_interval 1"]
        else:
            lines.append("persistence false")
        self.tls: TlsFiles | None = None
        if tls:
            ca = new_ca(folder / "ca", f"nullsteer test CA {os.getpid()}")
            cert, key = ca.issue_server(folder / "server", self.host, "localhost")
            self.tls = TlsFiles(ca.pem, ca.der, cert, key)
            # options of the listener above (mosquitto.conf(5)); the files stay readable
            # because a root-started broker runs on as root ("user root")
            lines += [f"cafile {self.tls.ca_pem}", f"certfile {self.tls.certfile}",
                      f"keyfile {self.tls.keyfile}"]
        self.config_path = folder / "mosquitto.conf"
        self.config_path.write_text("\n".join(lines) + "\n")

    def start(self, timeout_s: float = 5.0) -> Broker:
        """Start the broker and wait until its port accepts connections."""
        log = open(self.log_path, "ab")
        self.proc = subprocess.Popen([self.exe, "-c", str(self.config_path)],
                                     stdout=log, stderr=log)
        log.close()
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"mosquitto exited with {self.proc.returncode}: "
                                   f"{self.log_path.read_text()[-2000:]}")
            try:
                with socket.create_connection((self.host, self.port), timeout=0.2):
                    return self
            except OSError:
                time.sleep(0.02)
        raise RuntimeError("mosquitto did not open its port in time")

    def stop(self) -> None:
        """Stop cleanly (SIGTERM: persistence is written)."""
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(5)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(5)
        self.proc = None

    def kill(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.kill()
            self.proc.wait(5)
        self.proc = None

    def restart(self) -> Broker:
        self.stop()
        return self.start()

    def url(self, device_id: str, user: str | None = None, password: str | None = None,
            **query: str) -> str:
        """A link URL for ``device_id`` on this broker: ``mqtt://``, or ``mqtts://`` for a
        TLS broker (pass ``ca=`` yourself: the URL trusts only what it is told)."""
        cred = ""
        if user is not None:
            cred = user + (f":{password}" if password is not None else "") + "@"
        q = "&".join(f"{k}={v}" for k, v in query.items())
        scheme = "mqtts" if self.tls is not None else "mqtt"
        return (f"{scheme}://{cred}{self.host}:{self.port}/{device_id}"
                + (f"?{q}" if q else ""))


@pytest.fixture(scope="session")
def mqtt_broker(tmp_path_factory: pytest.TempPathFactory):
    """One anonymous broker shared by the whole session."""
    broker = Broker(tmp_path_factory.mktemp("mosquitto"))
    broker.start()
    yield broker
    broker.stop()


@pytest.fixture
def make_broker(tmp_path: Path):
    """Factory for brokers of a test's own (stopped at the end of the test)."""
    made: list[Broker] = []

    def make(**kwargs: object) -> Broker:
        folder = tmp_path / f"broker{len(made)}"
        folder.mkdir()
        b = Broker(folder, **kwargs)  # type: ignore[arg-type]
        made.append(b)
        return b.start()

    yield make
    for b in made:
        b.stop()


@pytest.fixture
def throwaway_ca(tmp_path: Path):
    """Factory for throw-away CAs of a test's own: ``throwaway_ca("name")``."""
    count = itertools.count()

    def make(name: str = "throw-away CA") -> ThrowawayCA:
        return new_ca(tmp_path / f"ca{next(count)}", f"{name} {os.getpid()}")

    return make


@pytest.fixture(autouse=True)
def _host_counter_dir(tmp_path_factory: pytest.TempPathFactory, monkeypatch: pytest.MonkeyPatch):
    """Signing hosts keep their frame counters in a folder of the test run, never in the
    user's own state folder."""
    monkeypatch.setenv("NULLSTEER_STATE_DIR", str(tmp_path_factory.mktemp("host-state")))


# -- under CI a skip is a failure ------------------------------------------------------
_CI_NOTE = "CI=true: a missing broker, tool or test library is a failure, not a skip"


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item: pytest.Item, call: pytest.CallInfo):
    outcome = yield
    report = outcome.get_result()
    if under_ci() and report.skipped and not hasattr(report, "wasxfail"):
        reason = report.longrepr[2] if isinstance(report.longrepr, tuple) else report.longrepr
        report.outcome = "failed"
        report.longrepr = f"{_CI_NOTE}: {reason}"


@pytest.hookimpl(hookwrapper=True)
def pytest_make_collect_report(collector: pytest.Collector):
    outcome = yield
    report = outcome.get_result()
    if under_ci() and report.skipped:   # e.g. a module-level importorskip
        reason = report.longrepr[2] if isinstance(report.longrepr, tuple) else report.longrepr
        report.outcome = "failed"
        report.longrepr = f"{_CI_NOTE}: {reason}"
