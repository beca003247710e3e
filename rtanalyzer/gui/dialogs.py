"""Small windows: the safety cautions, the keyboard shortcuts, the bench's truth."""

from __future__ import annotations

from PyQt6.QtCore import Qt
from PyQt6.QtGui import QFont
from PyQt6.QtWidgets import QDialog, QDialogButtonBox, QLabel, QPlainTextEdit, QVBoxLayout

from rtanalyzer.cli.cautions import CAUTIONS
from rtanalyzer.gui import style

SHORTCUTS = (
    ("Space", "pause / run the readouts"),
    ("S", "snapshot: picture and figures into the snapshots folder"),
    ("B", "best so far starts again from now"),
    ("M", "mute / unmute the generator"),
    ("F", "frame the spectrum on the plan"),
    ("L", "log / linear frequency"),
    ("P", "peak hold on / off"),
    ("Ctrl+E", "export the window as a picture"),
    ("F1", "safety cautions"),
    ("Ctrl+Q", "quit"),
)


class TextDialog(QDialog):
    """A non-modal window with some text and a close button."""

    def __init__(self, title: str, heading: str, text: str, parent=None, point_size: float = 12.0) -> None:
        super().__init__(parent)
        self.setWindowTitle(title)
        self.setModal(False)
        layout = QVBoxLayout(self)
        head = QLabel(heading)
        font = QFont()
        font.setPointSizeF(point_size + 3)
        font.setWeight(QFont.Weight.DemiBold)
        head.setFont(font)
        head.setWordWrap(True)
        layout.addWidget(head)
        body = QPlainTextEdit(text)
        body.setReadOnly(True)
        body.setObjectName("dialog_text")
        body_font = QFont()
        body_font.setPointSizeF(point_size)
        body.setFont(body_font)
        body.setStyleSheet(f"background: {style.PANEL}; color: {style.INK}; border: 1px solid {style.RULE};")
        layout.addWidget(body, 1)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.rejected.connect(self.close)
        buttons.accepted.connect(self.close)
        layout.addWidget(buttons)
        self.resize(760, 420)


def cautions_dialog(parent, first_time: bool) -> TextDialog:
    heading = ("Before you connect anything: shown once, and again from Help ▸ Safety cautions"
               if first_time else "Safety cautions")
    lines = CAUTIONS.strip().splitlines()
    if lines and lines[0].lower().startswith("safety"):
        lines = lines[1:]  # the heading says it
    items: list[str] = []
    for line in lines:  # join each point's continuation lines: the dialog wraps to its width
        if line.startswith(" ") and items:
            items[-1] += " " + line.strip()
        else:
            items.append(line.strip())
    body = "\n\n".join(items)
    dialog = TextDialog("rtanalyzer — safety cautions", heading, body, parent, 12.5)
    dialog.setObjectName("cautions_dialog")
    dialog.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose, False)
    return dialog


def shortcuts_dialog(parent) -> TextDialog:
    width = max(len(k) for k, _ in SHORTCUTS)
    text = "\n".join(f"{k:<{width}}   {what}" for k, what in SHORTCUTS)
    dialog = TextDialog("rtanalyzer — keyboard", "Keyboard shortcuts", text, parent)
    mono = QFont("monospace")
    mono.setStyleHint(QFont.StyleHint.Monospace)
    mono.setPointSizeF(12)
    dialog.findChild(QPlainTextEdit).setFont(mono)
    dialog.resize(560, 380)
    return dialog


def truth_text(truth: dict) -> str:
    """The simulated bench's exact figures, in words (for checking the readouts against)."""
    lines = [f"tones {', '.join(f'{t:g}' for t in truth.get('tones_hz', []))} Hz; "
             f"carrier at {truth.get('carrier_hz', 0):.1f} Hz, wanted sideband {truth.get('wanted_side')}"]
    if truth.get("worst_sideband_suppression_db") is not None:
        lines.append(f"opposite-sideband suppression (worst) {truth['worst_sideband_suppression_db']:.2f} dB")
    for p in truth.get("points", []):
        lines.append(f"  at {p['tone_hz']:g} Hz: wanted {p['wanted_dbfs']:.2f} dBFS, unwanted "
                     f"{p['unwanted_dbfs']:.2f} dBFS, suppression {p['sideband_suppression_db']:.2f} dB")
    if truth.get("carrier_suppression_db") is not None:
        lines.append(f"carrier suppression {truth['carrier_suppression_db']:.2f} dBc")
    twotone = truth.get("twotone")
    if twotone:
        lines.append(f"two-tone PEP {twotone['pep_dbfs']:.2f} dBFS")
        for product in twotone.get("imd", []):
            if product.get("worst_db_pep") is not None:
                lines.append(f"  IMD{product['order']}: {product['worst_db_pep']:.2f} dB PEP")
    return "\n".join(lines).replace("-", "\u2212")
