"""The ``phasewise read`` command."""

import json
import subprocess
import sys
from pathlib import Path

from phasewise.app.cli import main

ROOT = Path(__file__).resolve().parents[2]


def _csv(tmp_path, name="field.csv"):
    rows = ["star_id,hjd,mag,mag_err,band"]
    for s in range(2):
        for i in range(12):
            rows.append(f"CAV-{s},{2460000 + i},{15 + s},0.02,{'VI'[i % 2]}")
    rows.append("CAV-1,2460100,bad,0.02,V")
    rows.append("CAV-2,2460000,15,0.02,V")
    path = tmp_path / name
    path.write_text("\n".join(rows) + "\n")
    return path


def test_read_prints_stars_bands_scale_and_skips(tmp_path, capsys):
    assert main(["read", str(_csv(tmp_path))]) == 0
    out = capsys.readouterr().out
    assert "stars: 3" in out
    assert "points per band: V 13, I 12" in out
    assert "time scale: HJD" in out
    assert "skipped: 1" in out and "row 26: column 'mag': not a number: 'bad'" in out
    assert "too few points: 1 star(s): CAV-2" in out


def test_read_json_with_a_mapping(tmp_path, capsys):
    path = tmp_path / "odd.csv"
    path.write_text("name,obs,V\n" + "".join(f"X,{i},15\n" for i in range(10)))
    assert (
        main(["read", str(path), "--columns", "id=name,time=obs,mag=V,time_scale=MJD", "--json"])
        == 0
    )
    data = json.loads(capsys.readouterr().out)["sources"][0]
    assert data["n_stars"] == 1 and data["time_scale"] == "MJD"
    assert data["columns_used"] == {"star_id": "name", "time": "obs", "mag": "V"}
    assert data["points_per_band"] == {"V": 10}


def test_read_reports_a_bad_file_and_a_bad_role(tmp_path, capsys):
    path = tmp_path / "nomag.csv"
    path.write_text("jd,colour\n1,2\n")
    assert main(["read", str(path)]) == 2
    assert "no magnitude column; columns found: 'jd', 'colour'" in capsys.readouterr().err
    assert main(["read", str(path), "--columns", "hue=colour"]) == 2
    assert "unknown role 'hue'" in capsys.readouterr().err


def test_read_runs_as_a_module(tmp_path):
    result = subprocess.run(
        [sys.executable, "-m", "phasewise", "read", str(_csv(tmp_path)), "--json"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        check=True,
    )
    assert json.loads(result.stdout)["sources"][0]["rows_skipped"] == 1
    help_text = subprocess.run(
        [sys.executable, "-m", "phasewise", "--help"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        check=True,
    ).stdout
    assert "read" in help_text
