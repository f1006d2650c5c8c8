"""A demo ledger written by an older Phasewise is upgraded, not abandoned."""

import shutil
import sqlite3
from pathlib import Path

from phasewise.app.cli.gui import demo_needs_build
from phasewise.core.ledger import SCHEMA_VERSION, Ledger

V3 = Path(__file__).parents[1] / "core" / "data" / "schema_v3.ledger.sqlite"
DEMO = Path(__file__).parents[2] / "demo_data"


def _version(path):
    conn = sqlite3.connect(path)
    try:
        return conn.execute("PRAGMA user_version").fetchone()[0]
    finally:
        conn.close()


def test_an_older_demo_ledger_is_migrated_and_its_verdicts_kept(tmp_path):
    target = tmp_path / "demo.ledger.sqlite"
    shutil.copyfile(V3, target)
    assert _version(target) == 3 < SCHEMA_VERSION
    _, path, build = demo_needs_build(DEMO, ledger=target)
    assert _version(target) == SCHEMA_VERSION
    with Ledger.open(target, readonly=True) as ledger:
        decided = sum(n for s, n in ledger.status_counts().items() if s != "unreviewed")
    assert decided == 3
    # it holds verdicts (and other stars than the demo's): a fresh one is built beside it
    assert build and path != target and path.parent == target.parent


def test_a_newer_or_foreign_file_is_left_alone(tmp_path):
    target = tmp_path / "demo.ledger.sqlite"
    target.write_bytes(b"not a ledger at all")
    _, path, build = demo_needs_build(DEMO, ledger=target)
    assert target.read_bytes() == b"not a ledger at all"
    assert build and path != target
