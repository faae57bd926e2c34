"""Shared fixtures: the command built from this checkout, and the demo's
files written by it (the invented scenario of `regionkey demo`)."""

import os
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def binary() -> Path:
    """The regionkey command: $REGIONKEY_BIN, else the debug build of this checkout."""
    env = os.environ.get("REGIONKEY_BIN")
    path = Path(env) if env else ROOT / "target" / "debug" / "regionkey"
    if not path.exists():
        pytest.fail(f"{path} does not exist: build the command first (cargo build)")
    return path


def run(*args, check=True):
    """Runs the command; returns the finished process (text output)."""
    return subprocess.run(
        [str(binary()), *map(str, args)], capture_output=True, text=True, check=check
    )


@pytest.fixture(scope="session")
def demo(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("demo")
    run("demo", "--out", out, "--quiet")
    return out
