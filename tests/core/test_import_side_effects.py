"""Importing Phasewise changes nothing in the process (issue: imports without side effects)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

PROBE = r"""
import importlib, json, os, pkgutil, sys
import numpy
from astropy.utils import iers
from threadpoolctl import threadpool_info

def state():
    return {
        "env": dict(os.environ),
        "iers_auto_download": bool(iers.conf.auto_download),
        # scipy loads a BLAS of its own on import; what matters is that none is limited
        "blas": sorted({lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"}),
        "none_refs": sys.getrefcount(None) < (1 << 39),
        "numpy_err": numpy.geterr(),
    }

before = state()
import phasewise
import phasewise.core
names = [m.name for m in pkgutil.walk_packages(phasewise.core.__path__, "phasewise.core.")]
for name in names:
    importlib.import_module(name)
import phasewise.app, phasewise.app.cli
after = state()
print(json.dumps({"n": len(names), "same": before == after,
                  "diff": sorted(k for k in before if before[k] != after[k])}))
"""


@pytest.mark.slow  # a few seconds (subprocesses or a worker); run by the slow suite
def test_importing_every_module_changes_no_environment_or_global_configuration():
    env = {"PATH": "/usr/bin:/bin", "HOME": "/tmp"}  # no thread variables set by the user
    out = subprocess.run(
        [sys.executable, "-P", "-c", PROBE],
        cwd=ROOT,
        capture_output=True,
        text=True,
        env=env,
        check=True,
    )
    report = json.loads(out.stdout)
    assert report["n"] >= 20  # the walk really imported the modules
    assert report["same"], report["diff"]
