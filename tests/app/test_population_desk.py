"""The population view docked into the real vetting desk (runs once app.desk is merged)."""

import pytest

pytest.importorskip("pytestqt")
desk = pytest.importorskip("phasewise.app.desk")

from PySide6.QtCore import QSettings  # noqa: E402

from phasewise.app.population import attach  # noqa: E402
from phasewise.app.population.dock import ListedStars, StarList  # noqa: E402

from .population_fakes import build_ledger  # noqa: E402


def test_population_view_in_the_desk(qtbot, tmp_path):
    w = desk.MainWindow(settings=QSettings(str(tmp_path / "l.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    # the desk's star list is what the population link declares it uses
    assert isinstance(w.star_list, StarList) and isinstance(w.star_list.model, ListedStars)
    view = attach(w)
    w.show()
    led = build_ledger(tmp_path / "n.ledger.sqlite")
    w.set_ledger(led)
    w.show_view("population")
    w.wait_idle()
    assert len(view.points) == len(led.star_ids())
    # list selection -> diagrams
    w.select_stars(["NX-C03", "NX-C04"])
    assert view.selected_stars() == {"NX-C03", "NX-C04"}
    # diagram click -> desk star
    view.plots["r21_logp"].star_clicked.emit("NX-AB11")
    assert w.current_star == "NX-AB11"
    # brushing -> list selection
    view.plots["r21_logp"].brushed.emit(["NX-AB01", "NX-AB02"])
    assert sorted(w.star_list.selected_star_ids()) == ["NX-AB01", "NX-AB02"]
    # outlier flag in the list
    assert "diagram outlier" in (w.star_list.model.value("NX-ODD", "flags") or "")
    # filter in the list -> diagrams
    w.star_list.filter_edit.setText("NX-C0")
    qtbot.waitUntil(
        lambda: (
            set(view.plots["period_amplitude"].shown_star_ids()) <= {f"NX-C0{i}" for i in range(10)}
        ),
        timeout=3000,
    )
    assert view.plots["period_amplitude"].shown_star_ids()
    # a verdict from the desk reaches the diagrams
    w.select_star("NX-AB05")
    w.relabel("RRc")
    view.link.flush()
    d = view.plots["period_amplitude"].diagram
    assert d.class_codes[d.star_ids.index("NX-AB05")] == "RRc"
    w.close()
    led.close()
