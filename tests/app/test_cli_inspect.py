"""phasewise inspect: one star from a file, readable or JSON."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from phasewise.app.cli import main
from phasewise.core.io import write_stars
from phasewise.core.lightcurve import LightCurve
from tests.contract import INSPECT_JSON_KEYS

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture()
def one_star_csv(tmp_path):
    rng = np.random.default_rng(11)
    t = np.sort(rng.uniform(2460000, 2460120, 180))
    mag = 15 + 0.3 * np.sin(2 * np.pi * t / 0.61) + 0.01 * rng.standard_normal(t.size)
    path = tmp_path / "star.csv"
    # no errors and no band column: equal weights, band V by default
    path.write_text(
        "hjd,mag\n" + "".join(f"{a:.6f},{b:.4f}\n" for a, b in zip(t, mag, strict=True))
    )
    return path


def test_json_output_has_the_documented_keys(one_star_csv, capsys):
    assert main(["inspect", str(one_star_csv), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert INSPECT_JSON_KEYS <= data.keys()
    assert data["period"] == pytest.approx(0.61, rel=1e-3)
    assert data["time_scale"] == "HJD"


def test_readable_summary_and_method_choice(one_star_csv, capsys):
    assert main(["inspect", str(one_star_csv), "--method", "pdm"]) == 0
    out = capsys.readouterr().out
    assert "period: 0.61" in out
    assert "method pdm" in out
    assert "the astronomer decides" in out


def test_several_stars_need_a_choice(tmp_path, capsys):
    t = np.linspace(0, 50, 40)
    stars = [LightCurve(f"S{i}", t, 15 + np.sin(t * (i + 1)), np.full(40, 0.01)) for i in range(3)]
    path = write_stars(stars, tmp_path / "many.ecsv")
    assert main(["inspect", str(path)]) == 2
    assert "holds 3 stars (S0, S1, S2); choose one with --star ID" in capsys.readouterr().err
    assert main(["inspect", str(path), "--star", "S1", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["star_id"] == "S1"


def test_runs_as_a_subprocess_without_qt(one_star_csv):
    code = (
        "import sys; from phasewise.app.cli import main; rc = main(['inspect', sys.argv[1], '--json']);"
        "print(any(m.startswith('PySide6') for m in sys.modules), file=sys.stderr); sys.exit(rc)"
    )
    proc = subprocess.run(
        [sys.executable, "-c", code, str(one_star_csv)], cwd=ROOT, capture_output=True, text=True
    )
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr.strip().endswith("False")
    assert json.loads(proc.stdout)["status"] == "ok"


def test_period_range_and_settings_file(one_star_csv, tmp_path, capsys):
    # the range leaves out the true 0.61 d: the best period must lie inside it
    assert main(["inspect", str(one_star_csv), "--json", "--period-range", "1.5,20"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert all(1.5 <= c["period"] <= 20.0 for c in data["candidates"])
    settings = tmp_path / "s.toml"
    settings.write_text("[periodogram]\nmethod = 'pdm'\nfmax = 5.0\n")
    assert main(["inspect", str(one_star_csv), "--settings", str(settings)]) == 0
    out = capsys.readouterr().out
    assert "method pdm" in out and "period: 0.61" in out
    # the command-line method wins over the file's
    assert main(["inspect", str(one_star_csv), "--settings", str(settings), "--method", "gls"]) == 0
    assert "method gls" in capsys.readouterr().out


def test_period_range_is_checked(one_star_csv, capsys):
    assert main(["inspect", str(one_star_csv), "--period-range", "30,2"]) == 2
    assert "--period-range" in capsys.readouterr().err
