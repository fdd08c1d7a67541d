"""Fixtures of the service tests: the umbrella executable, a running `stance serve` on a free
port with its own workspace, and a small sample GeoPackage made by `stance synth`.

Environment: STANCE_BIN (default target/debug/stance) runs the tools from the shell;
STANCE_SERVE_CMD (default "$STANCE_BIN serve") starts the service.
"""

import os
import re
import shlex
import signal
import subprocess
import time
from pathlib import Path

import pytest
import requests

ROOT = Path(__file__).resolve().parents[2]
STANCE = os.environ.get("STANCE_BIN", str(ROOT / "target" / "debug" / "stance"))
SERVE = shlex.split(os.environ.get("STANCE_SERVE_CMD", "")) or [STANCE, "serve"]
OUT = Path(os.environ.get("STANCE_TEST_OUT", ROOT / "target" / "test-output")) / "service"
RECORDS = "veldmark_records"


def cli(*args, cwd=None, check=True):
    """Runs `stance ARGS…` from the shell; returns the completed process."""
    return subprocess.run([STANCE, *map(str, args)], cwd=cwd, capture_output=True, text=True,
                          check=check, timeout=600)


class Server:
    """A `stance serve` process on 127.0.0.1 and a free port."""

    def __init__(self, workspace, *extra, token=None):
        self.workspace = Path(workspace)
        self.token = token
        args = [*SERVE, "--bind", "127.0.0.1:0", "--workspace", str(self.workspace), *extra]
        if token:
            args += ["--token", token]
        self.log = open(self.workspace.parent / f"{self.workspace.name}.server.log", "ab")
        self.process = subprocess.Popen(args, stdin=subprocess.DEVNULL, stdout=self.log,
                                        stderr=subprocess.PIPE)
        self.url = self._wait_for_address()

    def _wait_for_address(self):
        deadline = time.time() + 60
        while time.time() < deadline:
            line = self.process.stderr.readline().decode()
            if not line:
                break
            self.log.write(line.encode())
            found = re.search(r"listening on (http://\S+)", line)
            if found:
                return found.group(1)
        raise RuntimeError(f"stance serve did not start: exit code {self.process.poll()}")

    def headers(self):
        return {"Authorization": f"Bearer {self.token}"} if self.token else {}

    def get(self, path, **kw):
        return requests.get(self.url + path, headers=self.headers(), timeout=120, **kw)

    def post(self, path, json=None, asynchronous=False, **kw):
        headers = self.headers()
        if asynchronous:
            headers["Prefer"] = "respond-async"
        return requests.post(self.url + path, json=json, headers=headers, timeout=600, **kw)

    def delete(self, path):
        return requests.delete(self.url + path, headers=self.headers(), timeout=60)

    def wait(self, job_id, until=("successful", "failed", "dismissed"), timeout=600):
        """Polls /jobs/{id} until its status is one of `until`; returns the last statusInfo."""
        deadline = time.time() + timeout
        while time.time() < deadline:
            info = self.get(f"/jobs/{job_id}").json()
            if info["status"] in until:
                return info
            time.sleep(0.2)
        raise AssertionError(f"job {job_id} still {info['status']} after {timeout} s")

    def stop(self, sig=signal.SIGTERM):
        if self.process.poll() is None:
            self.process.send_signal(sig)
            self.process.wait(timeout=30)
        self.log.close()


@pytest.fixture(scope="session")
def sample(tmp_path_factory):
    """A 2,000-record synthetic GeoPackage (`stance synth --points 2000`, seed 1)."""
    path = tmp_path_factory.mktemp("sample") / "sample.gpkg"
    cli("synth", "--points", 2000, "--seed", 1, "--output", path, "-q")
    return path


def workspace_with(tmp_path, sample, name="ws"):
    """A fresh workspace holding the sample as files/sample.gpkg."""
    ws = tmp_path / name
    (ws / "files").mkdir(parents=True)
    (ws / "files" / "sample.gpkg").write_bytes(sample.read_bytes())
    return ws


@pytest.fixture
def server(tmp_path, sample):
    """A service with two workers on a workspace holding the sample."""
    s = Server(workspace_with(tmp_path, sample))
    yield s
    s.stop()


@pytest.fixture(scope="session")
def shared_server(tmp_path_factory, sample):
    """One service for the read-only client checks of a session."""
    s = Server(workspace_with(tmp_path_factory.mktemp("shared"), sample))
    yield s
    s.stop()
