"""Strips above the Canvas: one line each that says what situation the frame is in (reviewing
a packet, a disputed frame, region mode) and offers that situation's actions as buttons.

A strip shows only while its situation holds, so the annotator sees at a glance that the frame
needs settling or that the mouse now draws regions, and which keys do what there.
"""

from __future__ import annotations

from collections.abc import Sequence

from PySide6.QtCore import Qt
from PySide6.QtGui import QAction
from PySide6.QtWidgets import QFrame, QHBoxLayout, QLabel, QSizePolicy, QToolButton, QWidget

#: Background of each kind of strip: soft blue (reviewing), soft amber (a dispute), light
#: grey (region mode); the text stays near-black on all three.
STRIP_COLOURS = {"review": "#dce8f6", "dispute": "#fbe3b4", "regions": "#e4e4e4"}


class Strip(QFrame):
    """A line of text and a row of buttons bound to the window's actions."""

    def __init__(self, kind: str, actions: Sequence[QAction], parent: QWidget | None = None):
        super().__init__(parent)
        self.setObjectName(f"{kind.capitalize()}Strip")
        self.setFrameShape(QFrame.Shape.NoFrame)
        self.setAutoFillBackground(True)
        name = self.objectName()
        self.setStyleSheet(f"#{name} {{ background: {STRIP_COLOURS[kind]}; "
                           f"border-bottom: 1px solid #9a9a9a; }} "
                           f"#{name} QLabel {{ color: #141414; }}")
        self.text = QLabel()
        self.text.setTextFormat(Qt.TextFormat.RichText)
        self.text.setWordWrap(True)
        self.text.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Preferred)
        layout = QHBoxLayout(self)
        layout.setContentsMargins(8, 3, 6, 3)
        layout.setSpacing(4)
        layout.addWidget(self.text, 1)
        self.buttons: list[QToolButton] = []
        for action in actions:
            button = QToolButton()
            button.setDefaultAction(action)
            button.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextOnly)
            layout.addWidget(button)
            self.buttons.append(button)
        self.hide()

    def say(self, html: str, full: str = "") -> None:
        """Show the strip with this text (empty text hides it); ``full``, when given, is the
        whole sentence, shown as the line's tooltip so the line itself can stay short."""
        self.text.setText(html)
        self.text.setToolTip(full)
        self.setVisible(bool(html))
