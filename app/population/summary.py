"""The field summary panel beside the diagrams.

Shows what :func:`core.diagrams.field_state` computed (through
:func:`core.physics.population_summary`): counts per class, the RR Lyrae
numbers, the distance modulus and distance of each standard-candle class, the
assumed extinction (editable) and the outlier rule with the stars it flags.
"""

from __future__ import annotations

import html
from collections.abc import Sequence

from PySide6 import QtCore, QtWidgets

from phasewise.core import diagrams as dg

from .style import class_style, symbol_glyph

__all__ = ["SummaryPanel"]


def _pm(value: float | None, err: float | None, fmt: str = ".3f") -> str:
    if value is None or value != value:
        return "—"
    if err is None:
        return f"{value:{fmt}}"
    return f"{value:{fmt}}\u00a0±\u00a0{err:{fmt}}"  # no break inside a value


class SummaryPanel(QtWidgets.QWidget):
    """Counts, RR Lyrae numbers, distances and the extinction assumed.

    Emits ``extinction_changed(float)`` when the person edits E(B−V).
    """

    extinction_changed = QtCore.Signal(float)

    def __init__(self, caution: str, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("field_summary")
        self.setMinimumWidth(300)
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(6, 4, 6, 4)
        title = QtWidgets.QLabel("<b>Field summary</b>")
        layout.addWidget(title)

        row = QtWidgets.QHBoxLayout()
        row.addWidget(QtWidgets.QLabel("E(B−V) assumed"))
        self.ebv_box = QtWidgets.QDoubleSpinBox(
            decimals=3, minimum=0.0, maximum=5.0, singleStep=0.01, suffix=" mag"
        )
        self.ebv_box.setObjectName("ebv")
        self.ebv_box.setKeyboardTracking(False)
        self.ebv_box.setToolTip(
            "Colour excess of the field. A_V = 3.1 E(B−V) (Cardelli, Clayton & Mathis 1989); "
            "changing it recomputes the distances and the guide lines."
        )
        row.addWidget(self.ebv_box)
        self.status = QtWidgets.QLabel("")
        self.status.setObjectName("summary_status")
        self.status.setStyleSheet("QLabel { color: #666666; }")
        row.addWidget(self.status)
        row.addStretch(1)
        layout.addLayout(row)

        self.text = QtWidgets.QTextBrowser()
        self.text.setObjectName("summary_text")
        self.text.setOpenLinks(False)
        layout.addWidget(self.text, 1)

        self.caution = QtWidgets.QLabel(caution, wordWrap=True)
        self.caution.setObjectName("caution")
        self.caution.setStyleSheet(
            "QLabel { background: #FFF6E0; border: 1px solid #E0C080; padding: 4px; }"
        )
        layout.addWidget(self.caution)
        self.ebv_box.valueChanged.connect(self.extinction_changed)

    def extinction(self) -> float:
        return float(self.ebv_box.value())

    def set_extinction(self, ebv: float) -> None:
        self.ebv_box.setValue(float(ebv))

    def show_field(
        self,
        state: dg.FieldState,
        outliers: Sequence[dg.OutlierFlag],
        rule: dg.OutlierRule,
    ) -> None:
        """Render the summary, the outlier rule and the flagged stars."""
        self.status.setText("")
        self.text.setHtml(_render(state, outliers, rule))

    def show_pending(self) -> None:
        """Say the summary is being computed (the previous one stays until then)."""
        self.status.setText("computing…")

    def show_error(self, message: str) -> None:
        self.ebv_box.setSuffix(" mag")
        self.setToolTip("")
        self.text.setHtml(
            f"<p><b>The field summary could not be computed</b></p><p>{html.escape(message)}</p>"
        )

    def plain_text(self) -> str:
        """The summary as text (non-breaking spaces as plain ones)."""
        return self.text.toPlainText().replace("\u00a0", " ")


def _render(state: dg.FieldState, outliers: Sequence[dg.OutlierFlag], rule: dg.OutlierRule) -> str:
    esc = html.escape
    summary = state.summary
    parts = ['<table cellspacing="0" cellpadding="1">']
    total = sum(state.counts.values())
    noun = "star" if total == 1 else "stars"
    parts.append(f"<tr><td colspan=2><b>{total} {noun}</b> by class used</td></tr>")
    for code, n in sorted(state.counts.items(), key=lambda kv: (-kv[1], kv[0])):
        style = class_style(code)
        glyph = f'<span style="color:{style.colour}">{symbol_glyph(style.symbol)}</span>'
        parts.append(f"<tr><td>{glyph} {esc(code)}</td><td align=right>&nbsp;{n}</td></tr>")
    parts.append("</table>")
    parts.append(
        "<small>Class used: the verdict class when decided, else the top suggestion.</small>"
    )

    parts.append("<p><b>RR Lyrae</b><br>")
    parts.append(
        f"mean RRab period: {_pm(summary.mean_rrab_period, summary.mean_rrab_period_err, '.4f')}"
        f" d ({summary.n_rrab} RRab)<br>"
    )
    parts.append(f"Oosterhoff type: <b>{esc(summary.oosterhoff or '—')}</b>")
    for flag in summary.oosterhoff_flags:
        parts.append(f" <i>({esc(flag)})</i>")
    fraction = summary.rrc_fraction
    parts.append(
        "<br>RRc fraction N<sub>c</sub>/(N<sub>ab</sub>+N<sub>c</sub>): "
        + ("—" if fraction is None else f"{fraction:.2f}")
        + f"<br><small>{esc(summary.oosterhoff_rule)}</small></p>"
    )

    parts.append(
        f"<p><b>Distance</b><br>E(B−V) = {state.ebv:.3f}, A_V = {state.a_v:.3f}, "
        f"E(V−I) = {state.e_v_i:.3f} mag</p>"
    )
    if summary.distances:
        parts.append(
            '<table cellspacing="0" cellpadding="1"><tr><th align=left>class</th>'
            "<th>μ₀ [mag]</th><th>d [kpc]</th></tr>"
        )
        for row in summary.distances:
            used = f"{row.n_used}" if row.n_used == row.n_stars else f"{row.n_used}/{row.n_stars}"
            parts.append(
                f"<tr><td>{esc(row.class_code)}</td>"
                f"<td nowrap>{_pm(row.mu0, row.mu0_err)}</td>"
                f"<td nowrap>{_pm(row.distance_pc / 1000, row.distance_err_pc / 1000, '.2f')}"
                "</td></tr>"
            )
            details = [f"N = {used}", f"scatter {row.scatter:.3f} mag"]
            if state.relations.get(row.class_code):
                details.append(state.relations[row.class_code])
            if row.outliers:
                details.append("left out: " + ", ".join(row.outliers))
            parts.append(
                f"<tr><td></td><td colspan=2><small>{esc('; '.join(details))}</small></td></tr>"
            )
        parts.append("</table>")
        parts.append(
            "<small>N: stars used (of the class's stars with a μ₀). "
            "Inverse-variance weighted mean of the members' μ₀ and its error; "
            f"stars left out: {esc(summary.distances[0].outlier_rule)}.</small>"
        )
    else:
        parts.append("<p>No standard-candle class with a distance modulus.</p>")
    for note in (state.pl_note, state.strip_note):
        if note:
            parts.append(f"<p><small>{esc(note)}</small></p>")

    n_flagged = len({f.star_id for f in outliers})
    parts.append(
        f"<p><b>Outliers in the diagrams</b> ({n_flagged} star{'' if n_flagged == 1 else 's'})"
    )
    parts.append(f"<br><small>{esc(rule.describe())}</small></p>")
    if outliers:
        parts.append("<ul>")
        for flag in outliers[:200]:
            parts.append(f"<li>{esc(flag.star_id)}: {esc(flag.reason())}</li>")
        parts.append("</ul>")
        if len(outliers) > 200:
            parts.append(f"<p>… and {len(outliers) - 200} more flags.</p>")
    return "".join(parts)
