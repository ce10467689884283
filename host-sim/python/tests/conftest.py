"""Shared fixtures: the repository, the `sweepgate` program, a simulated recording, and a
record of the largest differences each check measured (printed at the end of the run)."""

import os
import subprocess
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[3]

# Largest differences measured by the checks: name -> (value, tolerance).
FIGURES = {}


def record(name, value, tolerance):
    """Keeps the largest difference a check measured, for the summary at the end."""
    old = FIGURES.get(name)
    if old is None or value > old[0]:
        FIGURES[name] = (float(value), float(tolerance))


def pytest_terminal_summary(terminalreporter):
    if not FIGURES:
        return
    terminalreporter.section("largest differences (measured / allowed)")
    for name in sorted(FIGURES):
        value, tol = FIGURES[name]
        terminalreporter.write_line(f"{name:<60} {value:10.3e} / {tol:.0e}")


def _program():
    given = os.environ.get("SWEEPGATE_BIN")
    candidates = [Path(given)] if given else [
        REPO / "target" / "release" / "sweepgate",
        REPO / "target" / "debug" / "sweepgate",
    ]
    for c in candidates:
        if c.is_file() and os.access(c, os.X_OK):
            return c
    raise RuntimeError(
        "the `sweepgate` program was not found: build it (cargo build -p sweepgate-host) "
        f"or set SWEEPGATE_BIN; looked at {', '.join(str(c) for c in candidates)}"
    )


@pytest.fixture(scope="session")
def sweepgate_bin():
    """The command-line program the Python results are compared with."""
    return _program()


def run_cli(program, *args, check=True):
    """Runs the program; returns the completed process (text output)."""
    p = subprocess.run(
        [str(program), *[str(a) for a in args]], capture_output=True, text=True
    )
    if check and p.returncode != 0:
        raise AssertionError(f"sweepgate {' '.join(map(str, args))} failed:\n{p.stderr}")
    return p


@pytest.fixture(scope="session")
def demo_recording(sweepgate_bin, tmp_path_factory):
    """A recording of the shipped demo lab made by `sweepgate simulate`."""
    path = tmp_path_factory.mktemp("rec") / "demo-lab.rec"
    run_cli(
        sweepgate_bin,
        "simulate",
        "--scenario",
        REPO / "host-sim" / "scenarios" / "demo-lab.toml",
        "--out",
        path,
        "--seed",
        "7",
    )
    return path
