"""Every action of the desk, declared once.

One table (:data:`ACTIONS`) gives each action its id, text, keys, icon and
slot; :data:`MENUS` and :data:`TOOLBAR` place them by id.  The menus, the
toolbar, the F1 key sheet and the README's key table are all made from it
(``python -m phasewise.app.desk.actions`` prints the README table;
``tests/app/test_desk_actions.py`` checks the README holds it).

A slot is a dotted path from the window (``"desk.session.halve"``) called
with ``args``; a checkable action's slot gets the new state instead.  Keys
are key strings, or ``"std:Name"`` for a platform's standard key
(``QKeySequence.StandardKey.Name``).
"""

from __future__ import annotations

import operator
from dataclasses import dataclass

from phasewise.core.classes import CLASS_CODES

__all__ = ["ActionSpec", "ACTIONS", "MENUS", "TOOLBAR", "build_actions", "key_table"]


@dataclass(frozen=True)
class ActionSpec:
    """One action: ``id``, menu ``text``, ``slot`` (dotted path from the window)."""

    id: str
    text: str
    slot: str
    keys: tuple[str, ...] = ()
    icon: str | None = None
    args: tuple = ()
    checkable: bool = False
    checked: bool = False
    tip: str = ""
    writes: bool = False  # needs a writable ledger


def _a(id, text, slot, keys=(), icon=None, **kw) -> ActionSpec:  # noqa: A002 - the action's id
    return ActionSpec(id, text, slot, (keys,) if isinstance(keys, str) else tuple(keys), icon, **kw)


#: The first ten classes of the registry have the digit keys 1 … 9, 0.
DIGIT_CLASSES = tuple(CLASS_CODES[:10])

ACTIONS: tuple[ActionSpec, ...] = (
    # file
    _a("new", "&New ledger from files…", "files.new_ledger_dialog", "std:New", "new"),
    _a("open", "&Open ledger…", "files.open_ledger_dialog", "std:Open", "open"),
    _a("export", "&Export vetted catalogue…", "files.export_dialog", "Ctrl+E", "export"),
    _a("export_lc", "Light curve…", "files.export_plot_dialog", args=("lightcurve",)),
    _a("export_pg", "Periodogram…", "files.export_plot_dialog", args=("periodogram",)),
    _a("export_fold", "Folded curve…", "files.export_plot_dialog", args=("fold",)),
    _a("close", "&Close window", "close", ("std:Close", "std:Quit")),
    # edit
    _a("undo", "&Undo", "undo", "std:Undo", "undo", writes=True),
    _a("redo", "&Redo", "redo", "std:Redo", "redo", writes=True),
    _a("find", "&Filter the star list", "focus_filter", "std:Find"),
    # view
    _a("errors", "Error bars", "lightcurve.show_errors.setChecked", "E", checkable=True),
    _a(
        "select",
        "Select points to exclude",
        "lightcurve.select_box.setChecked",
        "S",
        "select",
        checkable=True,
        writes=True,
        tip="Drag a rectangle in the light curve to exclude points; Ctrl to restore",
    ),
    _a(
        "period_axis",
        "Periodogram against period",
        "periodogram.set_period_axis",
        "F",
        checkable=True,
    ),
    _a("log", "Periodogram log axis", "periodogram.log_box.setChecked", "G", checkable=True),
    _a("window", "Spectral window", "periodogram.window_box.setChecked", "W", checkable=True),
    _a(
        "pg_range",
        "Periodogram: whole grid / candidates",
        "periodogram.toggle_full_range",
        "Z",
        tip="Switch the periodogram between the candidates' zoom and the whole grid",
    ),
    _a("advance", "Go to next star after a verdict", "set_advance", checkable=True, checked=True),
    # star
    _a("next", "&Next star", "step_star", ("J", "Ctrl+Down"), "next", args=(+1,)),
    _a("prev", "&Previous star", "step_star", ("K", "Ctrl+Up"), "prev", args=(-1,)),
    _a("next_unreviewed", "Next &unreviewed star", "next_unreviewed", "U"),
    _a(
        "confirm",
        "&Confirm suggestion",
        "sheet.confirm",
        ("Y", "Ctrl+Return"),
        "confirm",
        writes=True,
    ),
    _a("relabel", "Re&label as any class…", "pick_class", "L", writes=True),
    _a("reject", "&Reject", "set_verdict", "X", "reject", args=("rejected",), writes=True),
    _a("defer", "&Defer", "set_verdict", "D", "defer", args=("deferred",), writes=True),
    _a("note", "Edit &note", "focus_note", "N", writes=True),
    *(
        _a(
            f"class_{code}",
            f"Relabel as {code}",
            "relabel",
            str((i + 1) % 10),
            args=(code,),
            writes=True,
        )
        for i, code in enumerate(DIGIT_CLASSES)
    ),
    # period
    _a("nudge_up", "Period: small step longer", "desk.session.nudge", ".", args=(+1,)),
    _a("nudge_down", "Period: small step shorter", "desk.session.nudge", ",", args=(-1,)),
    _a("nudge_up_large", "Period: large step longer", "desk.session.nudge", ">", args=(+1, True)),
    _a(
        "nudge_down_large", "Period: large step shorter", "desk.session.nudge", "<", args=(-1, True)
    ),
    _a("halve", "Halve period", "desk.session.halve", "/", "halve"),
    _a("double", "Double period", "desk.session.double", "*", "double"),
    _a("next_cand", "Next candidate", "desk.session.cycle_candidate", "]", "cand_next", args=(+1,)),
    _a(
        "prev_cand",
        "Previous candidate",
        "desk.session.cycle_candidate",
        "[",
        "cand_prev",
        args=(-1,),
    ),
    _a("reset_period", "Back to analysed period", "desk.session.reset_period", "Backspace"),
    _a("use_alt", "Use the alternative period", "desk.use_alternative", "A"),
    # analysis
    _a("settings", "Analysis &settings…", "settings_dialog", "std:Preferences"),
    _a("reanalyse", "Re-analyse this star", "reanalysis.star", "Ctrl+R", writes=True),
    _a(
        "analyse_stale",
        "Analyse stars without a fresh result",
        "reanalysis.run",
        "Ctrl+Shift+A",
        args=("stale",),
        writes=True,
    ),
    _a(
        "reanalyse_all",
        "Re-analyse all stars",
        "reanalysis.run",
        "Ctrl+Shift+R",
        args=("all",),
        writes=True,
    ),
    # help
    _a("shortcuts", "&Keyboard shortcuts", "show_shortcuts", "std:HelpContents"),
    _a("about", "&About Phasewise", "show_about"),
)

#: Menus by title: action ids, ``"-"`` a separator, ``(title, ids)`` a submenu,
#: ``"@recent"`` / ``"@views"`` the places the window fills itself.
MENUS: tuple[tuple[str, tuple], ...] = (
    (
        "&File",
        (
            "new",
            "open",
            "@recent",
            "-",
            "export",
            ("Export &plot (PNG/SVG)", ("export_lc", "export_pg", "export_fold")),
            "-",
            "close",
        ),
    ),
    ("&Edit", ("undo", "redo", "-", "find")),
    (
        "&View",
        (
            "errors",
            "select",
            "period_axis",
            "log",
            "window",
            "pg_range",
            "-",
            "advance",
            "-",
            "@views",
        ),
    ),
    (
        "&Star",
        (
            "next",
            "prev",
            "next_unreviewed",
            "-",
            "confirm",
            "relabel",
            "reject",
            "defer",
            "note",
            ("Relabel as", tuple(f"class_{c}" for c in DIGIT_CLASSES)),
        ),
    ),
    (
        "&Period",
        (
            "nudge_up",
            "nudge_down",
            "nudge_up_large",
            "nudge_down_large",
            "halve",
            "double",
            "next_cand",
            "prev_cand",
            "reset_period",
            "use_alt",
        ),
    ),
    ("&Analysis", ("settings", "reanalyse", "analyse_stale", "reanalyse_all")),
    ("&Help", ("shortcuts", "about")),
)

TOOLBAR: tuple[str, ...] = (
    "new", "open", "export", "-", "undo", "redo", "-", "prev", "next", "-", "confirm", "reject",
    "defer", "-", "halve", "double", "prev_cand", "next_cand", "-", "select",
)  # fmt: skip

SPECS = {spec.id: spec for spec in ACTIONS}


def _sequences(spec: ActionSpec) -> list:
    from PySide6.QtGui import QKeySequence

    out = []
    for key in spec.keys:
        if key.startswith("std:"):
            out.extend(QKeySequence.keyBindings(getattr(QKeySequence.StandardKey, key[4:])))
        else:
            out.append(QKeySequence(key))
    return out


def build_actions(window) -> dict:
    """A ``QAction`` per declaration, added to ``window`` and connected to its slot."""
    from PySide6.QtCore import Qt
    from PySide6.QtGui import QAction

    from .icons import icon

    actions = {}
    for spec in ACTIONS:
        action = QAction(spec.text, window)
        action.setObjectName(f"action_{spec.id}")
        if spec.icon:
            action.setIcon(icon(spec.icon))
        sequences = _sequences(spec)
        if sequences:
            action.setShortcuts(sequences)
            action.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
        if spec.tip:
            action.setStatusTip(spec.tip)
            action.setToolTip(spec.tip)
        slot = operator.attrgetter(spec.slot)
        if spec.checkable:
            action.setCheckable(True)
            action.setChecked(spec.checked)
            action.toggled.connect(lambda on, slot=slot: slot(window)(on))
        else:
            action.triggered.connect(
                lambda _checked=False, slot=slot, args=spec.args: slot(window)(*args)
            )
        window.addAction(action)
        actions[spec.id] = action
    return actions


def build_menus(window, actions: dict, places: dict) -> list[tuple[str, list]]:
    """The menu bar from :data:`MENUS`; returns ``(menu title, actions)`` for the key sheet.

    ``places`` maps ``"@recent"`` / ``"@views"`` to a callable ``(menu) -> None``.
    """
    bar = window.menuBar()
    groups = []

    def fill(menu, items) -> list:
        leaves = []
        for item in items:
            if item == "-":
                menu.addSeparator()
            elif isinstance(item, tuple):
                leaves.extend(fill(menu.addMenu(item[0]), item[1]))
            elif item.startswith("@"):
                places[item](menu)
            else:
                menu.addAction(actions[item])
                leaves.append(actions[item])
        return leaves

    for title, items in MENUS:
        groups.append((title.replace("&", ""), fill(bar.addMenu(title), items)))
    return groups


def build_toolbar(window, actions: dict):
    from PySide6.QtCore import Qt
    from PySide6.QtWidgets import QToolBar

    bar = QToolBar("Main toolbar")
    bar.setObjectName("main_toolbar")
    bar.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonIconOnly)
    for item in TOOLBAR:
        if item == "-":
            bar.addSeparator()
        else:
            bar.addAction(actions[item])
    window.addToolBar(bar)
    return bar


def shown_keys(spec: ActionSpec) -> list[str]:
    """An action's keys as this platform shows them (standard keys resolved)."""
    from .dialogs import _shown_keys

    return _shown_keys(_sequences(spec))


def key_table() -> str:
    """The README's key table (markdown), in menu order."""
    lines = ["| menu | keys | action |", "| --- | --- | --- |"]
    for title, items in MENUS:
        for spec in _menu_specs(items):
            keys = shown_keys(spec)
            if keys:
                shown = " or ".join(f"`{k}`" for k in keys)
                lines.append(
                    f"| {title.replace('&', '')} | {shown} | {spec.text.replace('&', '')} |"
                )
    return "\n".join(lines)


def _menu_specs(items) -> list[ActionSpec]:
    out = []
    for item in items:
        if isinstance(item, tuple):
            out.extend(_menu_specs(item[1]))
        elif item != "-" and not item.startswith("@"):
            out.append(SPECS[item])
    return out


if __name__ == "__main__":  # pragma: no cover - prints the README table
    import os

    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtWidgets import QApplication

    _app = QApplication([])
    print(key_table())
