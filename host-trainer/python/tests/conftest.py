"""Shared fixtures: the `linegate` binary (the outside reference for the in-process
package is the command line itself, run as a subprocess) and the demo's files."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path
from typing import List

import pytest

ROOT = Path(__file__).resolve().parents[3]


def _binary() -> Path | None:
    given = os.environ.get("LINEGATE_BIN")
    if given:
        return Path(given)
    for profile in ("debug", "release"):
        p = ROOT / "target" / profile / "linegate"
        if p.is_file():
            return p
    found = shutil.which("linegate")
    return Path(found) if found else None


def skipped(what: str) -> None:
    """A check that cannot run says so loudly, and fails under CI=true."""
    print(f"\n======== SKIPPED: {what} ========\n", file=sys.stderr)
    if os.environ.get("CI") == "true":
        pytest.fail(f"SKIPPED under CI=true: {what}")
    pytest.skip(what)


def read_toml(path: Path) -> dict:
    """A TOML file (a channel sheet) read by Python's tomllib (3.11+) or tomli."""
    try:
        import tomllib
    except ImportError:
        try:
            import tomli as tomllib  # type: ignore[no-redef]
        except ImportError:
            skipped("no TOML reader (Python 3.11's tomllib, or pip install tomli)")
    return tomllib.loads(path.read_text(encoding="utf-8"))


@pytest.fixture(scope="session")
def linegate_bin() -> Path:
    b = _binary()
    if b is None:
        skipped("no linegate binary (cargo build -p host-trainer, or set LINEGATE_BIN)")
    return b


@pytest.fixture(scope="session")
def cli(linegate_bin):
    """Runs the `linegate` binary in a folder; returns (exit code, stdout, stderr)."""

    def run(args: List[str], cwd: Path, check: bool = True) -> subprocess.CompletedProcess:
        p = subprocess.run([str(linegate_bin), *map(str, args)], cwd=cwd, capture_output=True, text=True)
        if check and p.returncode != 0:
            raise AssertionError(f"linegate {' '.join(map(str, args))}: exit {p.returncode}\n{p.stderr}")
        return p

    return run


@pytest.fixture(scope="session")
def demo(tmp_path_factory, cli) -> Path:
    """`linegate demo`'s folder (invented fan-module data, model, blob, audit)."""
    d = tmp_path_factory.mktemp("demo")
    cli(["-q", "demo", "--out-dir", "demo"], d)
    return d / "demo"


def replay_device(cli, cwd: Path, model, blob, log, *extra) -> List[str]:
    """`linegate replay --form device`'s lines (the model line first)."""
    p = cli(["-q", "replay", "--model", model, "--blob", blob, log, "--form", "device", *extra], cwd)
    return p.stdout.splitlines()
