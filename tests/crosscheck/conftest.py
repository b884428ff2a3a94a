"""Shared fixtures: the trilane binary built by `cargo build`."""

import os
import pathlib
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]


@pytest.fixture(scope="session")
def trilane():
    exe = os.environ.get("TRILANE_BIN") or str(ROOT / "target" / "debug" / "trilane")
    if not pathlib.Path(exe).exists():
        subprocess.run(["cargo", "build", "--quiet"], cwd=ROOT, check=True)

    def run(*args, cwd=None):
        return subprocess.run([exe, *args], capture_output=True, text=True, cwd=cwd, env={**os.environ, "NO_COLOR": "1"})

    return run
