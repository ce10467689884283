"""The README's Python section works as written: its install line is the one CI runs, and its
example runs and gates the echo away."""

import os
import re

import numpy as np
import pytest

from conftest import REPO


def python_section():
    text = (REPO / "README.md").read_text()
    start = text.index("\n## Python\n")
    end = text.index("\n## ", start + 1)
    return text[start:end]


def blocks(section, language):
    return re.findall(rf"```{language}\n(.*?)```", section, flags=re.S)


def test_install_line_is_the_one_ci_runs():
    sh = blocks(python_section(), "sh")[0]
    assert "pip install ./host-sim/python" in sh.splitlines()
    ci = (REPO / ".ci" / "run").read_text()
    assert re.search(r'bin/pip" install \./host-sim/python( |\n)', ci)


def test_example_runs_and_removes_the_echo(tmp_path, monkeypatch):
    pytest.importorskip("matplotlib")
    monkeypatch.setenv("MPLBACKEND", "Agg")
    monkeypatch.chdir(tmp_path)
    code = blocks(python_section(), "python")[0]
    scope = {}
    exec(compile(code, "README.md (Python example)", "exec"), scope)
    assert os.path.getsize(tmp_path / "gated.png") > 10_000
    k, level, sweeps, gated = scope["k"], scope["level"], scope["sweeps"], scope["gated"]
    # An echo of up to 0.35 against the direct path's cos^2(angle/2): several dB raw, within
    # 0.1 dB gated (two-path closed form: the echo adds at most 20log10((a+e)/a)).
    raw_err = np.max(np.abs(20 * np.log10(np.abs(sweeps[:, k]) / level)))
    gated_err = np.max(np.abs(20 * np.log10(np.abs(gated[:, k]) / level)))
    assert raw_err > 3.0
    assert gated_err < 0.1
