"""A real frustumd for the tests: built from the repository, started on a
free loopback port with a temporary data directory, stopped at the end.

The binary is $FRUSTUMD when set (the Go test that runs these tests builds
it), otherwise `go build ./cmd/frustumd` into a temporary directory. Without
either the server tests are skipped, unless $CI is "true", where they fail.
"""

from __future__ import annotations

import os
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import unittest

HERE = os.path.dirname(os.path.abspath(__file__))
PYTHON_DIR = os.path.dirname(HERE)
REPO = os.path.dirname(os.path.dirname(PYTHON_DIR))
TESTDATA = os.path.join(REPO, "testdata")

if PYTHON_DIR not in sys.path:
    sys.path.insert(0, PYTHON_DIR)

_SERVING = re.compile(r"msg=serving addr=(\S+)")

_built = None  # (tempdir, path) of a binary built here


def _unavailable(reason: str):
    if os.environ.get("CI") == "true":
        raise RuntimeError(reason)
    raise unittest.SkipTest(reason)


def frustumd_binary() -> str:
    """The frustumd to run: $FRUSTUMD, or one built from the repository."""
    global _built
    path = os.environ.get("FRUSTUMD")
    if path:
        if not os.access(path, os.X_OK):
            raise RuntimeError(f"FRUSTUMD={path} is not an executable")
        return path
    if _built is not None:
        return _built[1]
    go = shutil.which("go") or ("/usr/local/go/bin/go" if os.access("/usr/local/go/bin/go", os.X_OK) else None)
    if go is None:
        _unavailable("no frustumd: set FRUSTUMD or put go on PATH")
    tmp = tempfile.mkdtemp(prefix="frustumd-bin-")
    out = os.path.join(tmp, "frustumd")
    proc = subprocess.run([go, "build", "-o", out, "./cmd/frustumd"], cwd=REPO, capture_output=True, text=True)
    if proc.returncode != 0:
        raise RuntimeError(f"go build ./cmd/frustumd failed:\n{proc.stderr}")
    _built = (tmp, out)
    return out


class Frustumd:
    """One frustumd process. start() waits until it serves and sets
    address; stop() ends it with SIGTERM, kill() with SIGKILL. A restart
    reuses the port and the data directory."""

    def __init__(self, *flags: str):
        self.flags = list(flags)
        self.binary = frustumd_binary()
        self.dir = tempfile.mkdtemp(prefix="frustumd-test-")
        self.data = os.path.join(self.dir, "data")
        self.port = 0
        self.address = None
        self.proc = None
        self.log_path = None
        self.starts = 0

    def start(self, timeout: float = 60.0) -> "Frustumd":
        self.starts += 1
        self.log_path = os.path.join(self.dir, f"frustumd-{self.starts}.log")
        log = open(self.log_path, "w")
        args = [self.binary, "--listen", f"127.0.0.1:{self.port}", "--data", self.data, "--grace", "1s", *self.flags]
        self.proc = subprocess.Popen(args, stdin=subprocess.DEVNULL, stdout=log, stderr=log)
        log.close()
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            with open(self.log_path) as f:
                m = _SERVING.search(f.read())
            if m:
                self.address = m.group(1)
                self.port = int(self.address.rsplit(":", 1)[1])
                return self
            if self.proc.poll() is not None:
                raise RuntimeError(f"frustumd exited with {self.proc.returncode}:\n{self.log()}")
            time.sleep(0.02)
        self.kill()
        raise RuntimeError(f"frustumd did not serve within {timeout} s:\n{self.log()}")

    def log(self) -> str:
        if not self.log_path:
            return ""
        with open(self.log_path) as f:
            return f.read()

    def stop(self, timeout: float = 30.0) -> None:
        if self.proc is None or self.proc.poll() is not None:
            return
        self.proc.send_signal(signal.SIGTERM)
        try:
            self.proc.wait(timeout)
        except subprocess.TimeoutExpired:
            self.kill()

    def kill(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.kill()
            self.proc.wait()

    def close(self) -> None:
        self.stop()
        shutil.rmtree(self.dir, ignore_errors=True)


def cleanup_build() -> None:
    global _built
    if _built is not None:
        shutil.rmtree(_built[0], ignore_errors=True)
        _built = None
