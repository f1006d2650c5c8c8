"""Star sheet: the numbers, the ranked suggestions and the verdict controls."""

from __future__ import annotations

import html
import math

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QComboBox,
    QGridLayout,
    QGroupBox,
    QLabel,
    QLineEdit,
    QPushButton,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)

from phasewise.core.results import StarResult, Suggestion
from phasewise.core.vetting import NON_PERIODIC_CLASSES

from .style import STATUS_COLOURS, fmt, fmt_period, fmt_pm

__all__ = ["StarSheet", "CLASS_CODES", "CAUTION"]


def _class_codes() -> tuple[str, ...]:
    """The registry's class codes (core.classes), in its order."""
    from phasewise.core.classes import CLASS_CODES

    return tuple(CLASS_CODES)


#: The classes offered in the picker; the first ten have digit keys 1…9, 0.
CLASS_CODES = _class_codes()


def suggestion_class(suggestion: dict) -> str | None:
    """The class code of a stored suggestion dict (read through core's result model)."""
    return Suggestion.from_dict(suggestion).class_code


CAUTION = (
    "Classes, [Fe/H], absolute magnitudes and distances come from published empirical "
    "relations with known scatter and limited calibration ranges. They are suggestions "
    "to be checked, not measurements."
)


def _e(text) -> str:
    return html.escape(str(text))


def _num(x):
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


class StarSheet(QWidget):
    """Numbers of the current star and the controls to decide on it.

    Signals
    -------
    verdictRequested(status, class_code, note)
        ``status`` is ``confirmed``, ``relabelled``, ``rejected`` or ``deferred``;
        ``class_code`` is the top suggestion for a confirmation, the picked
        class for a relabel, and empty otherwise.
    """

    verdictRequested = Signal(str, str, str)

    def __init__(self, desk=None, parent=None) -> None:
        super().__init__(parent)
        self.desk = desk
        self.browser = QTextBrowser()
        self.browser.setOpenLinks(False)
        self.trial_label = QLabel()
        self.trial_label.setTextFormat(Qt.TextFormat.RichText)
        self.verdict_label = QLabel()
        self.verdict_label.setWordWrap(True)
        self.verdict_label.setTextFormat(Qt.TextFormat.RichText)
        self.confirm_button = QPushButton("Confirm suggestion")
        self.relabel_button = QPushButton("Relabel as")
        self.class_box = QComboBox()
        for i, code in enumerate(CLASS_CODES):
            key = str((i + 1) % 10) if i < 10 else ""
            self.class_box.addItem(f"{code}   [{key}]" if key else code, code)
        self.reject_button = QPushButton("Reject")
        self.defer_button = QPushButton("Defer")
        self.note_edit = QLineEdit(placeholderText="Note kept with the verdict")
        for b in (self.confirm_button, self.relabel_button, self.reject_button, self.defer_button):
            b.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        box = QGroupBox("Verdict")
        grid = QGridLayout(box)
        grid.addWidget(self.trial_label, 0, 0, 1, 2)
        grid.addWidget(self.verdict_label, 1, 0, 1, 2)
        grid.addWidget(self.confirm_button, 2, 0, 1, 2)
        grid.addWidget(self.relabel_button, 3, 0)
        grid.addWidget(self.class_box, 3, 1)
        grid.addWidget(self.reject_button, 4, 0)
        grid.addWidget(self.defer_button, 4, 1)
        grid.addWidget(QLabel("Note:"), 5, 0, 1, 2)
        grid.addWidget(self.note_edit, 6, 0, 1, 2)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.addWidget(self.browser, 1)
        layout.addWidget(box)
        self.confirm_button.clicked.connect(self.confirm)
        self.relabel_button.clicked.connect(lambda: self.relabel(self.class_box.currentData()))
        self.reject_button.clicked.connect(lambda: self._verdict("rejected", ""))
        self.defer_button.clicked.connect(lambda: self._verdict("deferred", ""))
        self.result: dict | None = None
        self.star_id: str | None = None
        if desk is not None:
            desk.subscribe("star", self._star_shown)
            desk.subscribe("verdict", self._verdict_changed)
            desk.subscribe("ledger", self._ledger_shown)
            desk.session.subscribe("period", lambda _p, _source: self.show_trial())

    # ------------------------------------------------------ the desk model
    def _star_shown(self, star_id: str) -> None:
        desk = self.desk
        self.set_star(star_id, desk.result, desk.verdict, desk.session.period)
        self.set_writable(not desk.read_only)
        self.show_trial()

    def _verdict_changed(self, star_id: str) -> None:
        if star_id == self.desk.star_id:
            self.set_verdict(self.desk.verdict)
            self.show_trial()

    def _ledger_shown(self) -> None:
        self.set_writable(not self.desk.read_only)

    def set_writable(self, on: bool) -> None:
        """Verdict controls on (a writable ledger) or off."""
        for button in (self.relabel_button, self.reject_button, self.defer_button):
            button.setEnabled(on)
        self.confirm_button.setEnabled(on and bool(self.top_suggestion()))
        self.note_edit.setReadOnly(not on)

    def show_trial(self) -> None:
        """What a verdict would record, by the desk's verdict policy."""
        desk = self.desk
        code = desk.class_code()
        if code in NON_PERIODIC_CLASSES:
            self.trial_label.setText(f"A verdict of {_e(code)} records no period")
        else:
            self.show_trial_period(
                desk.session.period, desk.session.overridden, desk.suggested_period()
            )

    # ------------------------------------------------------------ verdicts
    def top_suggestion(self) -> str | None:
        top = StarResult.from_dict(self.result or {}).top
        return top.class_code if top is not None else None

    def confirm(self) -> None:
        code = self.top_suggestion()
        if code:
            self._verdict("confirmed", code)
        else:
            self.verdict_label.setText("<i>No suggestion to confirm: relabel instead.</i>")

    def relabel(self, class_code: str) -> None:
        index = self.class_box.findData(class_code)
        if index >= 0:
            self.class_box.setCurrentIndex(index)
        self._verdict("relabelled", class_code)

    def _verdict(self, status: str, class_code: str) -> None:
        if self.star_id is not None:
            self.verdictRequested.emit(status, class_code or "", self.note_edit.text().strip())

    # ------------------------------------------------------------- display
    def set_star(self, star_id: str, result: dict | None, verdict, trial_period=None) -> None:
        self.star_id = star_id
        self.result = result or {}
        self.note_edit.setText(_get(verdict, "note") or "")
        code = _get(verdict, "class_code")
        if code and self.class_box.findData(code) >= 0:
            self.class_box.setCurrentIndex(self.class_box.findData(code))
        elif self.top_suggestion() and self.class_box.findData(self.top_suggestion()) >= 0:
            self.class_box.setCurrentIndex(self.class_box.findData(self.top_suggestion()))
        self.set_verdict(verdict)
        self.render(trial_period)
        self.show_trial_period(trial_period, False)

    def show_trial_period(self, period, overridden: bool, suggested=None) -> None:
        """The period a verdict would record: the trial period, and the
        suggestion's own period for a confirmation when it differs."""
        if period is None:
            self.trial_label.setText("")
            return
        note = " <span style='color:#B03000'>(changed by hand)</span>" if overridden else ""
        text = f"Period for the verdict: <b>{fmt_period(period)} d</b>{note}"
        if suggested and not overridden and not math.isclose(suggested, period, rel_tol=1e-6):
            text += f"<br>Confirm records the suggestion's <b>{fmt_period(suggested)} d</b>"
        self.trial_label.setText(text)

    def set_verdict(self, verdict) -> None:
        status = _get(verdict, "status") or "unreviewed"
        colour = STATUS_COLOURS.get(status, "#333")
        parts = [f"<b style='color:{colour}'>{_e(status)}</b>"]
        if _get(verdict, "class_code"):
            parts.append(f"as <b>{_e(_get(verdict, 'class_code'))}</b>")
        if _num(_get(verdict, "period")):
            parts.append(f"at P = {fmt_period(_num(_get(verdict, 'period')))} d")
        self.verdict_label.setText(" ".join(parts))
        top = self.top_suggestion()
        self.confirm_button.setText(f"Confirm {top}" if top else "Confirm suggestion")
        self.confirm_button.setEnabled(bool(top))

    def render(self, trial_period=None) -> None:
        r = StarResult.from_dict(self.result or {})
        out = [f"<h3 style='margin:0'>{_e(self.star_id)}</h3>"]
        if r.status and r.status != "ok":
            out.append(f"<p style='color:#B03000'><b>{_e(r.status)}</b>: {_e(r.reason or '')}</p>")
        rows = []

        def add(name, value, unit=""):
            rows.append(
                f"<tr><td style='color:#444;padding-right:8px'>{name}</td>"
                f"<td>{value}{(' ' + unit) if unit and value != '–' else ''}</td></tr>"
            )

        period = r.number("period")
        add("Period", _e(fmt_pm(period, r.number("period_err"), 7)), "d")
        if trial_period and period and not math.isclose(trial_period, period):
            add("<b>Trial period</b>", f"<b>{fmt_period(trial_period)}</b>", "d")
        add("Frequency", _e(fmt_pm(r.number("frequency"), r.number("frequency_err"), 6)), "c/d")
        add("FAP", _e(fmt(r.number("fap"), 2)))
        add("Method", _e(r.method or "–"))
        scale = r.time_scale or ""
        epoch = r.number("epoch_max")
        add("Epoch of max.", f"{epoch:.5f}" if epoch is not None else "–", f"{scale} d".strip())
        n_good = "–" if r.n_good is None else r.n_good
        n_points = "–" if r.n_points is None else r.n_points
        add("Points", f"{n_good} good of {n_points}")
        bands = r.band_list
        means = r.band_numbers("mean_mag_by_band")
        imeans = r.band_numbers("intensity_mean_mag_by_band")
        amps = r.band_numbers("amplitude_by_band")
        add("Rise time", _e(fmt(r.number("rise_time"), 3)), "phase")
        add("O − C rms", _e(fmt(r.number("residual_std"), 3)), "mag")
        four = r.primary_fourier
        if four is not None and four.to_dict():
            order = "–" if four.order is None else four.order
            add("Fourier", f"order {order}, {_e(four.form or '')} series")
            for k in range(1, min(len(four.amplitudes or ()), 4) + 1):
                add(f"A{k}", _e(fmt_pm(four.amplitude(k), four.amplitude_err(k))), "mag")
            for key in ("R21", "R31"):
                add(key, _e(fmt_pm(four.value(key), four.value(f"{key}_err"))))
            for key, name in (("phi21", "φ21"), ("phi31", "φ31")):
                add(name, _e(fmt_pm(four.value(key), four.value(f"{key}_err"))), "rad")
        for second in r.secondary_list[:3]:
            add("Secondary", f"{fmt_period(_num(second.period))} d {_e(second.kind or '')}")
        if r.number("period_ratio") is not None:
            add("Period ratio", _e(fmt(r.number("period_ratio"), 4)))
        out.append("<table cellspacing=0 cellpadding=1>" + "".join(rows) + "</table>")
        if bands:
            head = "".join(
                f"<th align=right style='padding:0 4px'>{h}</th>"
                for h in ("Band", "mean", "int. mean", "peak-to-peak")
            )
            body = "".join(
                f"<tr><td align=right>{_e(b)}</td><td align=right>{fmt(means.get(b), 5)}</td>"
                f"<td align=right>{fmt(imeans.get(b), 5)}</td>"
                f"<td align=right>{fmt(amps.get(b), 3)}</td></tr>"
                for b in bands
            )
            out.append(
                "<p style='margin:4px 0 0 0'>Magnitudes (mag; int. = intensity):</p>"
                f"<table cellspacing=0 cellpadding=1><tr>{head}</tr>{body}</table>"
            )

        physics = r.physics_list
        out.append("<h4 style='margin-bottom:2px'>Physical values</h4>")
        out.append(f"<p style='color:#8A4B00;margin-top:0'><i>{_e(CAUTION)}</i></p>")
        if physics:
            prow = []
            for p in physics:
                value = fmt_pm(p.number(), p.error())
                relation = " — ".join(str(x) for x in (p.relation, p.citation) if x)
                flags = p.flags or []
                flag_text = (
                    f" <span style='color:#B03000'>[{_e(', '.join(map(str, flags)))}]</span>"
                    if flags
                    else ""
                )
                prow.append(
                    f"<tr><td style='padding-right:8px'>{_e(p.quantity or '?')}</td>"
                    f"<td>{_e(value)} {_e(p.unit or '')}"
                    f"{flag_text}<br><span style='color:#666;font-size:small'>{_e(relation)}</span>"
                    "</td></tr>"
                )
            out.append("<table cellspacing=0 cellpadding=1>" + "".join(prow) + "</table>")
        else:
            out.append("<p>None for this class.</p>")

        suggestions = r.suggestion_list
        out.append("<h4 style='margin-bottom:2px'>Suggestions</h4>")
        if not suggestions:
            out.append("<p>No suggestion.</p>")
        out.append("<ol style='margin-top:0'>")
        for s in suggestions:
            reasons = "".join(f"<li>{_e(x)}</li>" for x in (s.reasons or []))
            against = "".join(
                f"<li style='color:#B03000'>against: {_e(x)}</li>" for x in (s.against or [])
            )
            missing = "".join(
                f"<li style='color:#666'>not measured: {_e(x)}</li>" for x in (s.missing or [])
            )
            note = f"<br><i>{_e(s.note)}</i>" if s.note else ""
            subtype = f" ({_e(s.subtype)})" if s.subtype else ""
            out.append(
                f"<li><b>{_e(s.class_code)}</b>{subtype} score {fmt(_num(s.score), 2)}"
                f"{note}<ul>{reasons}{against}{missing}</ul></li>"
            )
        out.append("</ol>")
        flags = r.flag_list
        if flags:
            out.append(f"<p><b>Flags:</b> {_e(', '.join(flags))}</p>")
        self.browser.setHtml("".join(out))


def _get(obj, name):
    if obj is None:
        return None
    if isinstance(obj, dict):
        return obj.get(name)
    return getattr(obj, name, None)
