"""The ledger commands of the command line, run in-process through ``main``."""

import numpy as np
import pytest
from astropy.table import Table

from phasewise.app.cli import main
from phasewise.core.ledger import Ledger
from phasewise.core.lightcurve import LightCurve


def _suggestion(cls, score, period):
    return {
        "status": "ok",
        "period": period,
        "amplitude": 0.8,
        "fap": 1e-10,
        "flags": [],
        "suggestions": [{"class": cls, "score": score, "reasons": [], "period": period}],
    }


@pytest.fixture
def ledger_path(tmp_path):
    path = tmp_path / "field.ledger.sqlite"
    with Ledger.create(path) as ledger:
        ledger.add_stars(
            LightCurve(f"QZ-{i}", np.arange(30.0), np.ones(30) * (14 + i)) for i in range(4)
        )
        ledger.set_analysis_settings({"m": "gls"}, "h1")
        ledger.store_results(
            [
                ("QZ-0", "h1", _suggestion("RRab", 0.95, 0.61)),
                ("QZ-1", "h1", _suggestion("RRc", 0.40, 0.33)),
                ("QZ-2", "h1", _suggestion("EW", 0.85, 0.29)),
            ]
        )
    return path


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_single_verdict_history_undo_redo(ledger_path, capsys):
    code, out, _ = run(
        capsys, "verdict", ledger_path, "QZ-1", "--status", "relabelled", "--class", "RRd",
        "--period", "0.35", "--note", "double mode",
    )  # fmt: skip
    assert code == 0 and "QZ-1: relabelled RRd P=0.35 d note 'double mode'" in out
    code, out, _ = run(capsys, "history", ledger_path, "QZ-1")
    assert "verdict: unreviewed -> relabelled RRd P=0.35 d" in out
    code, out, _ = run(capsys, "undo", ledger_path)
    assert code == 0 and "QZ-1: relabelled RRd P=0.35 d note 'double mode' -> unreviewed" in out
    with Ledger.open(ledger_path, readonly=True) as ledger:
        assert ledger.verdict("QZ-1").status == "unreviewed"
    code, out, _ = run(capsys, "redo", ledger_path)
    assert code == 0
    with Ledger.open(ledger_path, readonly=True) as ledger:
        assert ledger.verdict("QZ-1").class_code == "RRd"
    code, out, _ = run(capsys, "redo", ledger_path)
    assert code == 1 and "nothing to redo" in out


def test_errors_name_ledger_and_star(ledger_path, capsys):
    code, _, err = run(capsys, "verdict", ledger_path, "QZ-9", "--status", "confirmed")
    assert code == 2 and f"{ledger_path}: no star 'QZ-9' in this ledger" in err
    code, _, err = run(capsys, "verdict", ledger_path, "QZ-0", "--status", "relabelled")
    assert code == 2 and "star 'QZ-0': a relabelled verdict needs a class" in err
    code, _, err = run(capsys, "verdict", ledger_path, "QZ-0")
    assert code == 2 and "give a STAR_ID and --status" in err
    code, _, err = run(capsys, "history", ledger_path.with_name("nope.ledger.sqlite"))
    assert code == 2 and "nope.ledger.sqlite: no such ledger file" in err
    code, _, err = run(capsys, "verdict", ledger_path, "--confirm-above", "1.5")
    assert code == 2 and "between 0 and 1" in err


def test_confirm_above_dry_run_then_real(ledger_path, capsys):
    with Ledger.open(ledger_path) as ledger:
        ledger.set_verdict("QZ-2", "rejected")  # reviewed already: left alone
    code, out, _ = run(capsys, "verdict", ledger_path, "--confirm-above", "0.5", "--dry-run")
    assert code == 0
    assert "would confirm QZ-0: RRab P=0.61 d (score 0.950)" in out
    assert "QZ-1" not in out and "QZ-2" not in out
    with Ledger.open(ledger_path, readonly=True) as ledger:
        assert ledger.verdict("QZ-0").status == "unreviewed"  # the dry run changed nothing
    code, out, _ = run(capsys, "verdict", ledger_path, "--confirm-above", "0")
    assert "2 stars confirmed" in out
    with Ledger.open(ledger_path, readonly=True) as ledger:
        confirmed = {v.star_id: (v.class_code, v.period) for v in ledger.verdicts()}
        assert confirmed["QZ-0"] == ("RRab", 0.61)
        assert confirmed["QZ-1"] == ("RRc", 0.33)
        assert ledger.verdict("QZ-3").status == "unreviewed"  # no suggestion
    code, out, _ = run(capsys, "undo", ledger_path)  # the bulk confirm is one action
    with Ledger.open(ledger_path, readonly=True) as ledger:
        assert ledger.status_counts()["confirmed"] == 0


def test_confirm_above_skips_stale(ledger_path, capsys):
    with Ledger.open(ledger_path) as ledger:
        ledger.set_analysis_settings({"m": "pdm"}, "h2")
    code, out, _ = run(capsys, "verdict", ledger_path, "--confirm-above", "0")
    assert "0 stars confirmed" in out and "skipped 3 stars whose analysis is stale" in out


def test_export_command(ledger_path, tmp_path, capsys):
    run(capsys, "verdict", ledger_path, "--confirm-above", "0.9")
    target = tmp_path / "vetted.fits"
    code, out, _ = run(capsys, "export", ledger_path, "-o", target)
    assert code == 0 and "1 star (confirmed, relabelled)" in out
    assert list(Table.read(target)["star_id"]) == ["QZ-0"]
    code, out, _ = run(
        capsys, "export", ledger_path, "-o", tmp_path / "all.dat", "--format", "csv",
        "--status", "unreviewed,confirmed",
    )  # fmt: skip
    assert code == 0
    table = Table.read(tmp_path / "all.dat", format="ascii.csv", comment="#")
    assert list(table["star_id"]) == ["QZ-0", "QZ-1", "QZ-2", "QZ-3"]


def test_info_and_locked_message(ledger_path, capsys):
    with Ledger.open(ledger_path):
        code, _, err = run(capsys, "verdict", ledger_path, "QZ-0", "--status", "deferred")
        assert code == 2 and "held for writing by process" in err
        code, out, _ = run(capsys, "ledger", "info", ledger_path)
        assert "4 stars" in out and "open for writing by process" in out


def test_ledger_new_imports_files(tmp_path, capsys):
    pytest.importorskip("phasewise.core.io")
    from phasewise.core.io import write_stars

    rng = np.random.default_rng(4)
    stars = [
        LightCurve(f"VV-{i}", np.sort(rng.uniform(0, 50, 40)), rng.normal(15, 0.1, 40),
                   np.full(40, 0.02), time_scale="HJD")
        for i in range(3)
    ]  # fmt: skip
    source = tmp_path / "field.csv"
    write_stars(stars, source)
    path = tmp_path / "new.ledger.sqlite"
    code, out, _ = run(capsys, "ledger", "new", path, source)
    assert code == 0 and "3 stars imported" in out
    with Ledger.open(path, readonly=True) as ledger:
        assert ledger.star_ids() == ["VV-0", "VV-1", "VV-2"]
        back = ledger.lightcurve("VV-1")
        np.testing.assert_allclose(back.mag, stars[1].mag, rtol=1e-12)
        from phasewise.core.ledger import file_checksum

        assert ledger.star_info("VV-1")["source_checksum"] == file_checksum(source)
    code, _, err = run(capsys, "ledger", "new", path, source)
    assert code == 2 and "exists" in err
    bad = tmp_path / "missing.csv"
    code, _, err = run(capsys, "ledger", "new", tmp_path / "other.ledger.sqlite", bad)
    assert code == 2 and "missing.csv" in err
    assert not (tmp_path / "other.ledger.sqlite").exists()


def test_subprocess_exit_code_and_message_when_locked(ledger_path):
    import subprocess
    import sys
    from pathlib import Path

    root = Path(__file__).resolve().parents[2]
    with Ledger.open(ledger_path):
        proc = subprocess.run(
            [
                sys.executable,
                "-m",
                "phasewise",
                "verdict",
                str(ledger_path),
                "QZ-0",
                "--status",
                "rejected",
            ],
            cwd=root,
            capture_output=True,
            text=True,
        )
    assert proc.returncode == 2
    assert f"phasewise: error: {ledger_path}: held for writing by process" in proc.stderr


def test_verdict_stores_final_numbers_and_finalise(tmp_path, capsys):
    import csv

    from tests.core.catalogue_fixtures import build

    path = tmp_path / "seeded.ledger.sqlite"
    ledger, roles, _ = build(path)
    ledger.close()
    star = roles["ew_as_rrc"]
    code, out, _ = run(capsys, "verdict", path, star, "--status", "relabelled", "--class", "EW")
    assert code == 0 and "final numbers: EW P=" in out and "primary minimum" in out
    code, out, _ = run(capsys, "finalise", path)
    assert code == 0 and "final numbers of 0 stars computed" in out
    code, out, _ = run(capsys, "finalise", path, "--all")
    assert code == 0 and "final numbers of 1 star computed" in out
    target = tmp_path / "vetted.csv"
    code, out, _ = run(capsys, "export", path, "-o", target)
    assert code == 0
    with open(target, newline="", encoding="utf-8") as handle:
        (row,) = list(csv.DictReader(handle))
    assert (row["star_id"], row["class"], row["suggested_class"]) == (star, "EW", "RRc")
    assert float(row["R21"]) > 1.0 and row["feh_zw"] == ""
