"""``phasewise analyse``: import and analyse, progress, summary, resume, errors."""

from __future__ import annotations

import io
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from phasewise.app.cli import main
from phasewise.app.cli.analyse import ProgressBar, progress_text, summary_text
from phasewise.core.batch import BatchSummary, Progress
from phasewise.core.errors import PhasewiseError
from phasewise.core.io import write_stars
from phasewise.core.ledger import Ledger
from phasewise.core.synthetic import synthetic_field

#: A small grid keeps the real analysis quick.
SETTINGS = "[periodogram]\nfmax = 3.0\noversampling = 3\n"


@pytest.fixture
def photometry(tmp_path):
    lcs = synthetic_field(3, n_epochs=80, seed=4).lightcurves()
    path = write_stars(lcs, tmp_path / "field.csv")
    settings = tmp_path / "fast.toml"
    settings.write_text(SETTINGS, encoding="utf-8")
    return path, settings, [lc.star_id for lc in lcs]


def test_import_then_analyse_then_nothing_left(tmp_path, photometry, capsys):
    csv, settings, ids = photometry
    ledger = tmp_path / "new.ledger.sqlite"
    code = main(
        [
            "analyse",
            str(csv),
            "--ledger",
            str(ledger),
            "--settings",
            str(settings),
            "--workers",
            "0",
        ]
    )
    out, err = capsys.readouterr()
    assert code == 0
    assert f"{csv}: 3 stars imported" in out
    assert "skipped 0" in out and "inline, 1 worker)" in out
    analysed = int(out.split("analysed ")[1].split(",")[0])
    failed = int(out.split("failed ")[1].split(",")[0])
    assert analysed + failed == 3
    assert "3/3 stars" in err  # stderr is not a terminal here: plain progress lines
    with Ledger.open(ledger, readonly=True) as book:
        assert book.star_ids() == ids
        assert all(book.result(s) is not None for s in ids)
    code = main(["analyse", str(ledger), "--settings", str(settings), "--json", "--workers", "0"])
    summary = json.loads(capsys.readouterr().out)
    assert code == 0 and summary["total"] == 0 and summary["skipped"] == 3


def test_quiet_prints_nothing(tmp_path, photometry, capsys):
    csv, settings, _ = photometry
    ledger = tmp_path / "q.ledger.sqlite"
    args = ["analyse", str(csv), "--ledger", str(ledger), "--settings", str(settings)]
    assert main([*args, "--workers", "0", "--quiet"]) == 0
    assert capsys.readouterr() == ("", "")


def test_errors_are_named(tmp_path, photometry, capsys):
    csv, _, _ = photometry
    bad = tmp_path / "bad.toml"
    bad.write_text("[fourier]\nmax_ordr = 3\n", encoding="utf-8")
    assert (
        main(
            [
                "analyse",
                str(csv),
                "--ledger",
                str(tmp_path / "x.ledger.sqlite"),
                "--settings",
                str(bad),
            ]
        )
        == 2
    )
    err = capsys.readouterr().err
    assert "bad.toml: field 'fourier.max_ordr': unknown setting" in err
    assert not (tmp_path / "x.ledger.sqlite").exists()
    assert main(["analyse", str(csv), str(csv)]) == 2
    assert "expected one ledger, got 2 paths" in capsys.readouterr().err
    assert main(["analyse", str(tmp_path / "none.ledger.sqlite")]) == 2
    assert "none.ledger.sqlite: no such ledger file" in capsys.readouterr().err


def test_progress_line_and_bar():
    p = Progress(done=120, failed=3, skipped=0, total=300, rate=12.0, eta=15.0, elapsed=10.0)
    assert (
        progress_text(p, width=10)
        == "[####......] 120/300 stars  3 failed  12.0 stars/s  00:15 left"
    )
    first = Progress(0, 0, 0, 300, 0.0, None)
    assert "--:-- left" in progress_text(first)

    class Terminal(io.StringIO):
        def isatty(self):
            return True

    screen = Terminal()
    bar = ProgressBar(screen)
    bar(first)
    bar(p)
    bar.close()
    assert screen.getvalue().count("\r") == 2 and screen.getvalue().endswith("left\n")
    plain = io.StringIO()
    bar = ProgressBar(plain)
    for done in range(0, 301, 30):
        bar(Progress(done, 0, 0, 300, 10.0, (300 - done) / 10))
    lines = plain.getvalue().splitlines()
    assert lines[0].startswith("[....") and "300/300" in lines[-1]
    assert len(lines) < 11  # plain lines are spaced out in time, the first and last always shown


def test_summary_lists_failures_and_what_is_left():
    summary = BatchSummary(
        ledger="f.ledger.sqlite",
        settings_hash="ab",
        engine="local",
        workers=2,
        total=10,
        analysed=6,
        failed=1,
        skipped=4,
        remaining=3,
        elapsed=2.0,
        interrupted=True,
        failures=(("CAL-V007", "RuntimeError: boom"),),
        stale_left=2,
    )
    text = summary_text(summary)
    assert "analysed 6, failed 1, skipped 4" in text and "3.5 stars/s, local, 2 workers" in text
    assert "interrupted: 3 stars left; run again" in text
    assert "failed CAL-V007: RuntimeError: boom" in text
    assert "2 stars have results of other settings" in text and "--only stale" in text


ROOT = Path(__file__).resolve().parents[2]


def _count_results(path):
    if not path.exists():
        return 0
    try:
        with Ledger.open(path, readonly=True) as book:
            return sum(book.result(s) is not None for s in book.star_ids())
    except PhasewiseError:
        return 0


@pytest.mark.slow
def test_ctrl_c_keeps_results_and_a_rerun_finishes(tmp_path):
    lcs = synthetic_field(30, n_epochs=80, seed=6).lightcurves()
    ledger = tmp_path / "c.ledger.sqlite"
    with Ledger.create(ledger) as book:
        book.add_stars(lcs)
    settings = tmp_path / "fast.toml"
    settings.write_text(SETTINGS, encoding="utf-8")
    command = [
        sys.executable,
        "-m",
        "phasewise",
        "analyse",
        str(ledger),
        "--settings",
        str(settings),
    ]
    proc = subprocess.Popen(
        [*command, "--workers", "1", "--chunk-size", "2"],
        cwd=ROOT,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,
    )
    deadline = time.monotonic() + 60
    while _count_results(ledger) == 0 and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.1)
    os.killpg(proc.pid, signal.SIGINT)  # what Ctrl-C sends: the whole process group
    out, err = proc.communicate(timeout=60)
    kept = _count_results(ledger)
    if proc.returncode == 0:
        pytest.skip("the run finished before Ctrl-C arrived")  # a very fast machine
    assert proc.returncode == 130, err
    assert f"interrupted: {30 - kept} stars left" in out
    with Ledger.open(ledger, readonly=True, check="full") as book:
        assert book.integrity_check()
    done = subprocess.run(
        [*command, "--workers", "0", "--json"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr
    summary = json.loads(done.stdout)
    assert summary["skipped"] == kept and summary["analysed"] + summary["failed"] == 30 - kept
    assert _count_results(ledger) == 30
