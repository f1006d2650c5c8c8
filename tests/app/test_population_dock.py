"""The population view docked into a window with the desk's extension points."""

import pytest

pytest.importorskip("pytestqt")
from PySide6 import QtCore, QtGui, QtWidgets  # noqa: E402

from phasewise.app.population import VIEW_NAME, attach  # noqa: E402
from phasewise.core.desk import DeskModel  # noqa: E402

from .population_fakes import build_ledger  # noqa: E402


class StandInRows:
    """The star list model's ``row_of``, ``value`` and ``update_star``."""

    def __init__(self):
        self.flags = {}

    def row_of(self, star_id):
        return 0 if star_id in self.flags else None

    def value(self, star_id, field):
        return self.flags.get(star_id)

    def update_star(self, star_id, **fields):
        self.flags[star_id] = fields["flags"]

    def prefetch(self, star_ids):
        self.prefetched = set(star_ids)


class StandInStarList:
    """The star list's ``model`` (rows), ``view`` (a table) and ``selected_star_ids``."""

    def __init__(self):
        self.model = StandInRows()
        self.view = QtWidgets.QTableView()
        self.view.setModel(QtGui.QStandardItemModel(0, 1))

    def selected_star_ids(self):
        return []


class StandInDesk(QtWidgets.QMainWindow):
    """The extension points of ``app.desk.MainWindow`` that the population view uses."""

    starChanged = QtCore.Signal(str)
    ledgerChanged = QtCore.Signal()
    verdictChanged = QtCore.Signal(str)
    filterChanged = QtCore.Signal()

    def __init__(self):
        super().__init__()
        self.desk = DeskModel()
        self.current_star = None
        self.views = {}
        self.selected = []
        self.visible = None
        self.waited = 0
        self.star_list = StandInStarList()

    @property
    def ledger(self):
        return self.desk.ledger

    def add_view(self, name, widget, title=None, area=None, visible=False):
        dock = QtWidgets.QDockWidget(title or name, self)
        dock.setWidget(widget)
        self.addDockWidget(area, dock)
        dock.setVisible(visible)
        self.views[name] = dock
        return dock

    def select_star(self, star_id):
        self.current_star = star_id
        self.starChanged.emit(star_id)

    def select_stars(self, star_ids):
        self.selected = list(star_ids)

    def visible_star_ids(self):
        return self.visible

    def wait_idle(self, timeout_s=30.0):
        self.waited += 1


@pytest.fixture
def desk(qtbot, tmp_path):
    window = StandInDesk()
    qtbot.addWidget(window)
    window.resize(1400, 1000)
    view = attach(window, visible=True)
    window.show()
    qtbot.waitExposed(window)
    ledger = build_ledger(tmp_path / "nyx.ledger.sqlite")
    window.star_list.model.flags = dict.fromkeys(ledger.star_ids(), "")
    window.star_list.model.flags["NX-ODD"] = "low snr"
    window.desk.set_ledger(ledger)
    window.ledgerChanged.emit()
    window.wait_idle()
    yield window, view, ledger
    window.close()
    ledger.close()


def test_the_view_follows_the_desk(desk):
    window, view, ledger = desk
    assert VIEW_NAME in window.views and window.waited == 1
    assert view.summary_ready  # wait_idle waited for the field summary too
    assert len(view.points) == len(ledger.star_ids())
    window.select_star("NX-AB02")
    assert len(view.plots["r21_logp"].current_mark.data) == 1
    window.visible = ["NX-C02", "NX-C03"]
    window.filterChanged.emit()
    assert sorted(view.plots["period_amplitude"].shown_star_ids()) == ["NX-C02", "NX-C03"]


def test_verdicts_reach_the_diagrams_and_keep_the_zoom(desk):
    window, view, ledger = desk
    box = view.plots["period_amplitude"].getPlotItem().getViewBox()
    box.setRange(xRange=(-0.4, -0.1), yRange=(0.5, 1.0), padding=0)
    zoom = box.viewRange()
    ledger.set_verdict("NX-AB09", "relabelled", class_code="RRd")  # the ledger tells the view
    view.link.flush()
    diagram = view.plots["period_amplitude"].diagram
    assert diagram.class_codes[diagram.star_ids.index("NX-AB09")] == "RRd"
    assert box.viewRange() == zoom


def test_clicks_and_rectangles_reach_the_star_list(desk, qtbot):
    window, view, _ = desk
    view.plots["phi31_logp"].star_clicked.emit("NX-CEP3")
    assert window.current_star == "NX-CEP3"
    view.plots["phi31_logp"].brushed.emit(["NX-C01", "NX-C04"])
    assert window.selected == ["NX-C01", "NX-C04"]


def test_outliers_are_flagged_in_the_star_list(desk):
    window, view, ledger = desk
    flags = window.star_list.model.flags
    assert flags["NX-ODD"] == "low snr,diagram outlier"
    assert [s for s, f in flags.items() if "diagram outlier" in f] == ["NX-ODD"]
    # relabelled out of the RRab class, it is no longer an RRab outlier
    ledger.set_verdict("NX-ODD", "relabelled", class_code="EW")
    view.link.flush()
    assert flags["NX-ODD"] == "low snr"


def test_a_closed_dock_reads_the_ledger_only_when_opened(qtbot, tmp_path):
    window = StandInDesk()
    qtbot.addWidget(window)
    view = attach(window)  # docked closed, as the desk starts
    window.show()
    ledger = build_ledger(tmp_path / "nyx.ledger.sqlite")
    try:
        window.desk.set_ledger(ledger)
        window.ledgerChanged.emit()
        assert view.points == []  # opening a big ledger is not slowed by a closed view
        window.views[VIEW_NAME].show()
        qtbot.waitUntil(lambda: len(view.points) == len(ledger.star_ids()), timeout=5000)
    finally:
        window.close()
        ledger.close()
