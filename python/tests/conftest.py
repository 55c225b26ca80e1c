"""Shared pieces of the Python tests: the repository's demo inputs and the
command-line binary they are checked against (built by `cargo test`, or
named by EVENTFENCE_BIN)."""

import json
import os
import subprocess
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
CALENDARS = [
    "calendars/demo-usd.ics",
    "calendars/demo-eur.csv",
    "calendars/demo-gbp-jpy.ics",
]
DEMO = dict(
    trades_tz="America/New_York+07:00",
    calendar_tz="Europe/Berlin",
    instrument_map_file="demo/instruments.json",
)
DEMO_FLAGS = [
    "--trades-tz", "America/New_York+07:00",
    "--calendar-tz", "Europe/Berlin",
    "--instrument-map-file", "demo/instruments.json",
]


def cli_binary() -> str:
    path = os.environ.get("EVENTFENCE_BIN", str(REPO / "target" / "debug" / "eventfence"))
    if not Path(path).exists():
        raise RuntimeError(f"{path} not found: run `cargo build` (or set EVENTFENCE_BIN)")
    return path


def cli(*args: str, cwd: Path = REPO) -> str:
    """Runs the command line and returns its stdout (exit 0 or 3 = warnings)."""
    p = subprocess.run([cli_binary(), *args], cwd=cwd, capture_output=True, text=True)
    assert p.returncode in (0, 3), p.stderr
    return p.stdout


def cli_json(*args: str, cwd: Path = REPO):
    return json.loads(cli(*args, cwd=cwd))


@pytest.fixture(autouse=True)
def in_repo(monkeypatch):
    """Every test runs in the repository root, as the CLI calls do, so that
    relative paths (and the file names in the JSON) agree."""
    monkeypatch.chdir(REPO)
