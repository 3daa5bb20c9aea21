"""pytest fixtures for the Python checks.

- `icefold_bin`: path of the icefold binary: env ICEFOLD_BIN, else <repo>/target/release/icefold;
  a test that needs it fails with a clear message when it is missing.
- `run_icefold`: runs `icefold ARGS...` in a fresh temporary directory and returns the completed
  process (stdout/stderr as text); fails the test on a non-zero exit status unless told not to.
"""

from __future__ import annotations

import os
import subprocess
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="session")
def repo_root() -> Path:
    """The repository root (two levels above tests/python)."""
    return REPO


@pytest.fixture(scope="session")
def icefold_bin() -> Path:
    """The icefold binary to test (ICEFOLD_BIN or <repo>/target/release/icefold)."""
    env = os.environ.get("ICEFOLD_BIN")
    path = Path(env) if env else REPO / "target" / "release" / "icefold"
    if not path.is_file() or not os.access(path, os.X_OK):
        how = "ICEFOLD_BIN" if env else "the default <repo>/target/release/icefold"
        pytest.fail(
            f"icefold binary not found at {path} (from {how}); build it with "
            "`cargo build --release` or set ICEFOLD_BIN to its path",
            pytrace=False,
        )
    return path


class IcefoldRunner:
    """Runs the binary in one working directory (`cwd`)."""

    def __init__(self, binary: Path, cwd: Path):
        self.binary = binary
        self.cwd = cwd

    def __call__(self, *args, check: bool = True, timeout: float = 600.0):
        cmd = [str(self.binary), *map(str, args)]
        proc = subprocess.run(cmd, cwd=self.cwd, capture_output=True, text=True, timeout=timeout)
        if check and proc.returncode != 0:
            pytest.fail(
                f"`{' '.join(cmd)}` exited with {proc.returncode}\n"
                f"stdout:\n{proc.stdout}\nstderr:\n{proc.stderr}",
                pytrace=False,
            )
        return proc


@pytest.fixture
def run_icefold(icefold_bin, tmp_path) -> IcefoldRunner:
    """Run icefold in this test's temporary directory: run_icefold("run", cfg, "-o", "out.nc")."""
    return IcefoldRunner(icefold_bin, tmp_path)


@pytest.fixture(scope="module")
def run_icefold_module(icefold_bin, tmp_path_factory) -> IcefoldRunner:
    """Like `run_icefold`, with one temporary directory shared by a test module."""
    return IcefoldRunner(icefold_bin, tmp_path_factory.mktemp("icefold"))
