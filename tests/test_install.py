"""A non-editable install carries its migrations and demo data (issue: packaging).

Builds a wheel from this checkout into a fresh virtual environment (which sees the machine's
already-installed dependencies) and runs ``init --demo`` from another directory.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.slow
def test_wheel_install_runs_from_elsewhere(tmp_path):
    venv = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", "--system-site-packages", str(venv)],
                   check=True)
    py = venv / "bin" / "python"
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PARTSMATCH_DB")}
    build = subprocess.run([str(py), "-m", "pip", "install", "--no-deps", "--no-build-isolation",
                            "-q", str(ROOT)], capture_output=True, text=True, env=env)
    assert build.returncode == 0, build.stderr[-2000:]
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    where = subprocess.run([str(py), "-c", "import partsmatch; print(partsmatch.__file__)"],
                           cwd=elsewhere, capture_output=True, text=True, env=env, check=True)
    assert str(venv) in where.stdout, where.stdout  # the installed copy, not this checkout
    url = f"sqlite:///{tmp_path / 'cat.db'}"
    exe = venv / "bin" / "partsmatch"
    run = subprocess.run([str(exe), "--db", url, "init", "--demo", "--json"], cwd=elsewhere,
                         capture_output=True, text=True, env=env)
    assert run.returncode == 0, run.stderr
    out = json.loads(run.stdout)
    assert out["demo"]["parts_added"] >= 150
    listed = subprocess.run([str(exe), "--db", url, "parts", "list", "--json"], cwd=elsewhere,
                            capture_output=True, text=True, env=env, check=True)
    kinds = {p["kind"] for p in json.loads(listed.stdout)}
    assert kinds == {"capacitor", "diode", "fuse", "resistor"}
    demo = subprocess.run([str(exe), "demo", "--json"], cwd=elsewhere, capture_output=True,
                          text=True, env=env)
    assert demo.returncode == 0, demo.stderr
    assert json.loads(demo.stdout)["replace"]["candidates"]  # circuits travel with the wheel
