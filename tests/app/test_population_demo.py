"""The population view on a ledger of the demo survey, analysed by core.analysis."""

import math
from pathlib import Path

import pytest

pytest.importorskip("pytestqt")

from phasewise.app.population import PopulationView  # noqa: E402
from phasewise.core.analysis import AnalysisSettings, analyse  # noqa: E402
from phasewise.core.io import open_photometry  # noqa: E402
from phasewise.core.ledger import Ledger  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
SURVEY = ROOT / "demo_data" / "caldera_survey.csv"
N_STARS = 24


@pytest.fixture(scope="module")
def demo_ledger(tmp_path_factory):
    if not SURVEY.exists():
        pytest.skip("demo survey not present")
    settings = AnalysisSettings()
    stars = []
    for lc in open_photometry(SURVEY).stars():
        stars.append(lc)
        if len(stars) == N_STARS:
            break
    ledger = Ledger.create(tmp_path_factory.mktemp("demo") / "caldera.ledger.sqlite")
    ledger.add_stars(stars)
    ledger.set_analysis_settings(settings.to_dict(), settings.hash)
    ledger.store_results(
        (lc.star_id, settings.hash, analyse(lc, settings).to_dict()) for lc in stars
    )
    yield ledger
    ledger.close()


def _finite(value):
    return value is not None and math.isfinite(value)


@pytest.mark.slow
def test_points_per_class_on_the_demo_ledger(qtbot, demo_ledger):
    # expected counts from the ledger's own list rows (its summary of the top
    # suggestion) and the stored result dicts, independently of core.diagrams
    rows = {row.star_id: row for row in demo_ledger.star_rows()}
    expected_pa: dict[str, int] = {}
    expected_pl: dict[str, int] = {}
    for star_id, row in rows.items():
        result = demo_ledger.result(star_id).result
        code = row.suggested_class or "UNKNOWN"
        period = result.get("period")
        if _finite(period) and period > 0:
            if _finite((result.get("amplitude_by_band") or {}).get("V")):
                expected_pa[code] = expected_pa.get(code, 0) + 1
            if _finite((result.get("mean_mag_by_band") or {}).get("V")):
                expected_pl[code] = expected_pl.get(code, 0) + 1
    assert sum(expected_pa.values()) >= N_STARS // 2  # the analysis measured most stars

    view = PopulationView(demo_ledger)
    qtbot.addWidget(view)
    view.show()
    qtbot.waitUntil(lambda: view.summary_ready, timeout=60000)
    assert view.band_box.currentText() == "V"
    assert view.plots["period_amplitude"].shown_counts() == expected_pa
    assert view.plots["period_luminosity"].shown_counts() == expected_pl
    assert sum(view.field.counts.values()) == N_STARS

    # recovery of the injected distance: the demo cluster has mu0 = 15.30 and
    # E(B-V) = 0.10 (demo_data/README.md); with that extinction the RRab
    # members give mu0 back within 0.15 mag (a handful of stars; photometric
    # [Fe/H] and the M_V relation each carry a few hundredths of scatter)
    with qtbot.waitSignal(view.summary_updated, timeout=60000):
        view.set_extinction(0.10)
    rrab = next(d for d in view.field.summary.distances if d.class_code == "RRab")
    assert rrab.n_used >= 3
    assert abs(rrab.mu0 - 15.30) < 0.15
    view.close()
