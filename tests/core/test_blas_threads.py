"""Programs that analyse run on one BLAS thread, whatever imported numpy first."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

PROBE = """
import json, sys
import numpy  # before core, as a user's script or the window may do
from phasewise.core.threads import limit_blas_threads
limit_blas_threads()  # what the command line, the window and the batch workers call
from threadpoolctl import threadpool_info
print(json.dumps([lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"]))
"""


def _blas_threads(env: dict) -> list[int]:
    out = subprocess.run(
        [sys.executable, "-c", PROBE], cwd=ROOT, env=env, capture_output=True, text=True, check=True
    )
    return json.loads(out.stdout)


def _clean_env() -> dict:
    env = {k: v for k, v in os.environ.items() if not k.endswith("_NUM_THREADS")}
    env["PYTHONPATH"] = str(ROOT)
    return env


needs_two_cores = pytest.mark.skipif(
    (os.cpu_count() or 1) < 2, reason="one core: BLAS has one thread anyway"
)


@needs_two_cores
def test_numpy_imported_first_still_gets_one_blas_thread():
    threads = _blas_threads(_clean_env())
    assert threads and all(n == 1 for n in threads)


@needs_two_cores
def test_the_users_own_setting_wins():
    env = _clean_env()
    env["OPENBLAS_NUM_THREADS"] = "2"
    threads = _blas_threads(env)
    # the user asked for two: the limit leaves the loaded library alone
    assert threads and all(n == 2 for n in threads)
