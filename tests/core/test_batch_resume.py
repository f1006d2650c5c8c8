"""A run killed with SIGKILL keeps what it wrote; the next run does only the rest."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from phasewise.core.analysis import AnalysisSettings
from phasewise.core.batch import analyse_ledger
from phasewise.core.ledger import Ledger
from phasewise.core.synthetic import synthetic_field
from tests.core.batch_helpers import DELAY_VARIABLE, LOG_VARIABLE

ROOT = Path(__file__).resolve().parents[2]
QUICK = "tests.core.batch_helpers:quick_analyse"
N_STARS = 60

RUN = textwrap.dedent(
    """
    import sys
    from phasewise.core.batch import analyse_ledger

    def said(p):
        print(f"done {p.done}", flush=True)

    analyse_ledger(sys.argv[1], workers=2, chunk_size=3, analyse_fn=sys.argv[2], progress=said)
    print("finished", flush=True)
    """
)


def _pids_alive(pids):
    alive = []
    for pid in pids:
        try:
            with open(f"/proc/{pid}/stat", encoding="ascii") as handle:
                if handle.read().rsplit(")", 1)[1].split()[0] != "Z":
                    alive.append(pid)
        except OSError:
            pass
    return alive


def _log(path):
    if not path.exists():
        return []
    return [line.split() for line in path.read_text().splitlines() if line.strip()]


@pytest.mark.slow
def test_sigkill_mid_run_then_resume(tmp_path):
    ledger_path = tmp_path / "field.ledger.sqlite"
    with Ledger.create(ledger_path) as ledger:
        ledger.add_stars(synthetic_field(N_STARS, n_epochs=40, seed=9).lightcurves())
        settings = AnalysisSettings()
        ledger.set_analysis_settings(settings.to_dict(), settings.hash)
    first_log = tmp_path / "first.log"
    env = {**os.environ, LOG_VARIABLE: str(first_log), DELAY_VARIABLE: "0.1"}
    proc = subprocess.Popen(
        [sys.executable, "-c", RUN, str(ledger_path), QUICK],
        cwd=ROOT,
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        deadline = time.monotonic() + 60
        for line in proc.stdout:
            # kill once a few chunks are written, well before the end
            if line.startswith("done") and 6 <= int(line.split()[1]) < N_STARS - 12:
                break
            assert time.monotonic() < deadline, "the run did not start"
        else:
            pytest.fail(f"the run ended before it was killed: {proc.stderr.read()}")
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=10)
    finally:
        if proc.poll() is None:
            proc.kill()
        proc.stdout.close()
        proc.stderr.close()
    assert proc.returncode == -signal.SIGKILL

    # the workers notice their parent is gone and leave
    workers = {int(pid) for pid, _ in _log(first_log)}
    assert workers
    deadline = time.monotonic() + 10
    while _pids_alive(workers) and time.monotonic() < deadline:
        time.sleep(0.2)
    assert not _pids_alive(workers), "worker processes outlived their parent"

    with Ledger.open(ledger_path, readonly=True, check="full") as ledger:
        assert ledger.integrity_check()
        written = {}
        for star_id in ledger.star_ids():
            stored = ledger.result(star_id)
            if stored is not None:
                written[star_id] = stored.computed_at
        assert 6 <= len(written) < N_STARS

    second_log = tmp_path / "second.log"
    os.environ[LOG_VARIABLE] = str(second_log)
    try:
        summary = analyse_ledger(ledger_path, workers=0, analyse_fn=QUICK, only="stale")
    finally:
        del os.environ[LOG_VARIABLE]
    redone = [star for _, star in _log(second_log)]
    assert len(redone) == len(set(redone))  # nothing analysed twice in the rerun
    assert not set(redone) & set(written)  # nor anything the killed run had written
    assert summary.analysed == N_STARS - len(written) and summary.skipped == len(written)
    with Ledger.open(ledger_path, readonly=True, check="full") as ledger:
        assert ledger.integrity_check()
        assert set(redone) == set(ledger.star_ids()) - set(written)  # none missing
        for star_id in ledger.star_ids():
            stored = ledger.result(star_id)
            assert stored is not None and not stored.failed and not stored.stale
            if star_id in written:
                assert stored.computed_at == written[star_id]
