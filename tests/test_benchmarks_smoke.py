"""Every benchmark script still runs: each in its tiny ``--smoke`` mode.

Benchmarks measure speed and memory (ratios printed in one run); here they are
only run, so that none of them rots unnoticed.  No timing is asserted.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SCRIPTS = sorted((ROOT / "benchmarks").glob("*.py"))


def test_the_benchmark_folder_is_found():
    assert len(SCRIPTS) >= 10


@pytest.mark.slow
@pytest.mark.parametrize("script", SCRIPTS, ids=lambda p: p.name)
def test_benchmark_runs_in_smoke_mode(script, tmp_path):
    env = {
        **os.environ,
        "QT_QPA_PLATFORM": "offscreen",
        "HOME": str(tmp_path),
        "XDG_CONFIG_HOME": str(tmp_path / ".config"),
        "XDG_DATA_HOME": str(tmp_path / ".local" / "share"),
    }
    proc = subprocess.run(
        # a crash prints every thread's Python stack (faulthandler)
        [sys.executable, "-X", "faulthandler", str(script), "--smoke"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        env=env,
        timeout=600,
    )
    assert proc.returncode == 0, (
        f"exit code {proc.returncode}\n--- stdout:\n{proc.stdout[-2000:]}\n"
        f"--- stderr:\n{proc.stderr[-6000:]}"
    )
    assert proc.stdout.strip(), "a benchmark prints its figures"
    assert "Traceback" not in proc.stderr
