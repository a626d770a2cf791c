"""Fixtures: a real mixd daemon, built from this repository and started on
127.0.0.1 port 0 (and one on a Unix socket), for the whole test session.

The daemon binary is built once per session with `go build` into a
temporary directory. Set MIXD_BIN to the path of an already built binary to
skip the build (developers re-running the suite on a shared machine).
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
import time
from pathlib import Path
from typing import Iterator, List

import pytest

import mixd

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[2]  # clients/python/tests -> repository root
TESTDATA = REPO / "testdata"

_LISTENING = re.compile(r"mixd: listening on (\S+)")


@pytest.fixture(scope="session")
def mixd_binary(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """Path of the mixd daemon binary (built once per session)."""
    given = os.environ.get("MIXD_BIN")
    if given:
        p = Path(given)
        if not p.is_file():
            pytest.fail(f"MIXD_BIN={given} is not a file")
        return p
    go = shutil.which("go")
    if go is None:
        pytest.fail("the Go toolchain (go) is needed to build the daemon under test")
    out = tmp_path_factory.mktemp("bin") / "mixd"
    res = subprocess.run(
        [go, "build", "-o", str(out), "./cmd/mixd"], cwd=REPO, capture_output=True, text=True, timeout=600
    )
    if res.returncode != 0:
        pytest.fail(f"go build ./cmd/mixd failed:\n{res.stdout}\n{res.stderr}")
    return out


class Daemon:
    """A running daemon process and the address it listens on."""

    def __init__(self, binary: Path, listen: str, workdir: Path, extra: List[str]) -> None:
        self.workdir = workdir
        self.log_path = workdir / "mixd.log"
        self._log = open(self.log_path, "wb")
        self.proc = subprocess.Popen(
            [str(binary), "serve", "--listen", listen, "--data-dir", str(workdir / "data"), *extra],
            stdout=subprocess.DEVNULL,
            stderr=self._log,
            stdin=subprocess.DEVNULL,
        )
        self.address = self._wait_address()

    def _wait_address(self) -> str:
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            text = self.log_path.read_text(errors="replace")
            m = _LISTENING.search(text)
            if m:
                return m.group(1)
            if self.proc.poll() is not None:
                break
            time.sleep(0.05)
        self.stop()
        raise RuntimeError(f"mixd did not start; its log:\n{self.log_path.read_text(errors='replace')}")

    def stop(self) -> None:
        if self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
        self._log.close()


@pytest.fixture(scope="session")
def daemon(mixd_binary: Path, tmp_path_factory: pytest.TempPathFactory) -> Iterator[Daemon]:
    """A daemon on 127.0.0.1, port chosen by the system."""
    d = Daemon(mixd_binary, "127.0.0.1:0", tmp_path_factory.mktemp("daemon"), [])
    yield d
    d.stop()


@pytest.fixture(scope="session")
def unix_daemon(mixd_binary: Path) -> Iterator[Daemon]:
    """A daemon on a Unix socket (short path: sun_path holds ~108 bytes)."""
    work = Path(tempfile.mkdtemp(prefix="mixd-py-"))
    d = Daemon(mixd_binary, f"unix:{work / 's.sock'}", work, [])
    yield d
    d.stop()
    shutil.rmtree(work, ignore_errors=True)


@pytest.fixture(scope="session")
def client(daemon: Daemon) -> Iterator[mixd.Client]:
    """A client of the TCP daemon."""
    with mixd.Client(daemon.address) as c:
        yield c


@pytest.fixture(scope="session")
def fitter_names(client: mixd.Client) -> List[str]:
    """Names of the fitters the daemon under test offers."""
    return [f.name for f in client.list_fitters()]


def pytest_report_header(config: pytest.Config) -> List[str]:
    """Which client and runtime versions the suite runs on."""
    import google.protobuf
    import grpc
    import numpy

    return [
        f"mixd client: {mixd.__version__} from {Path(mixd.__file__).parent}",
        f"grpcio {grpc.__version__}, protobuf {google.protobuf.__version__}, numpy {numpy.__version__}",
    ]
