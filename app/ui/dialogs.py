"""The small forms behind Project-menu actions that need more than one file name: pre-labelling
with a model, adding frames of a video, and sending frames for review.

Each dialog only gathers and checks what the user typed; the window runs the job (on a
worker, with progress and Cancel) once the dialog is accepted. They open window-modal with
``open()``, so the event loop keeps running while they show.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QFormLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QSpinBox,
    QVBoxLayout,
    QWidget,
)

from app.errors import BadInput
from app.formats.video import parse_time
from app.review import DEFAULT_IMAGES
from app.wording import count, plural


class PathField(QWidget):
    """A file name typed or chosen with Browse."""

    def __init__(self, title: str, folder: Path, filter: str, save: bool = False,
                 placeholder: str = "", parent: QWidget | None = None):
        super().__init__(parent)
        self._title, self._folder, self._filter, self._save = title, folder, filter, save
        self.edit = QLineEdit()
        self.edit.setPlaceholderText(placeholder)
        self.edit.setMinimumWidth(360)
        browse = QPushButton("Browse\u2026")
        browse.clicked.connect(self._browse)
        row = QHBoxLayout(self)
        row.setContentsMargins(0, 0, 0, 0)
        row.addWidget(self.edit, 1)
        row.addWidget(browse)

    def _browse(self) -> None:
        start = self.text() or str(self._folder)
        if self._save:
            path, _ = QFileDialog.getSaveFileName(self, self._title, start, self._filter)
        else:
            path, _ = QFileDialog.getOpenFileName(self, self._title, start, self._filter)
        if path:
            self.edit.setText(path)

    def text(self) -> str:
        return self.edit.text().strip()

    def set_text(self, text: str) -> None:
        self.edit.setText(text)


class _Form(QDialog):
    """A titled form with OK/Cancel and a line for what is wrong with the input."""

    def __init__(self, title: str, intro: str, parent: QWidget | None = None,
                 verb: str = "OK"):
        super().__init__(parent)
        self.setWindowTitle(title)
        self.form = QFormLayout()
        self.problem = QLabel()
        self.problem.setWordWrap(True)
        self.problem.setStyleSheet("color: #b00020;")
        self.problem.hide()
        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                        | QDialogButtonBox.StandardButton.Cancel)
        self.buttons.button(QDialogButtonBox.StandardButton.Ok).setText(verb)
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        text = QLabel(intro)
        text.setWordWrap(True)
        layout = QVBoxLayout(self)
        layout.addWidget(text)
        layout.addLayout(self.form)
        layout.addWidget(self.problem)
        layout.addWidget(self.buttons)

    def refuse(self, text: str) -> None:
        self.problem.setText(text)
        self.problem.show()

    def problems(self) -> str:
        """What is wrong with the input ("" when nothing)."""
        return ""

    def accept(self) -> None:
        wrong = self.problems()
        if wrong:
            self.refuse(wrong)
            return
        super().accept()


class PrelabelDialog(_Form):
    """Which model, which config, which frames."""

    def __init__(self, folder: Path, counts: dict[str, int], parent: QWidget | None = None):
        super().__init__("Pre-label with a model", (
            "Runs your ONNX pose model on the CPU and stores what it finds as auto-labels "
            "with scores. Frames that already have people keep them (their maps are still "
            "kept for triage). Nothing changes unless the whole run succeeds."), parent,
            "Pre-label")
        self.model = PathField("Choose the model", folder, "ONNX models (*.onnx)")
        self.config = PathField("Choose the config", folder, "Config (*.json)",
                                placeholder="optional: MODEL.json beside it, else built-in")
        self.frames = QComboBox()
        self.frames.addItem(f"all {count(counts.get('all', 0), 'frames')}", "all")
        untouched = count(counts.get("untouched", 0), "untouched frames")
        self.frames.addItem(f"the {untouched}", "untouched")
        if counts.get("this"):
            self.frames.addItem("this frame only", "this")
        self.form.addRow("Model (.onnx)", self.model)
        self.form.addRow("Config (.json)", self.config)
        self.form.addRow("Frames", self.frames)

    def problems(self) -> str:
        model = self.model.text()
        if not model:
            return "Choose the model file (.onnx)."
        if not Path(model).is_file():
            return f"No such model file: {model}"
        config = self.config.text()
        if config and not Path(config).is_file():
            return f"No such config file: {config}"
        return ""

    def values(self) -> tuple[str, str | None, str]:
        """Model path, config path (None: the default), and ``all``, ``untouched`` or
        ``this``."""
        return self.model.text(), self.config.text() or None, str(self.frames.currentData())


class VideoDialog(_Form):
    """Which video, every how many frames, from when to when."""

    def __init__(self, folder: Path, parent: QWidget | None = None):
        super().__init__("Add video", (
            "Extracts frames of a video into the project folder (JPEG, named by their index) "
            "and adds those the project does not have yet; each keeps its index and time."),
            parent, "Add frames")
        self.video = PathField("Choose the video", folder,
                               "Videos (*.mp4 *.avi *.mov *.mkv *.webm *.m4v);;All files (*)")
        self.every = QSpinBox()
        self.every.setRange(1, 100_000)
        self.every.setValue(1)
        self.every.setSuffix(" frame")
        self.every.valueChanged.connect(lambda n: self.every.setSuffix(f" {plural(n, 'frame')}"))
        self.start = QLineEdit()
        self.start.setPlaceholderText("the beginning (seconds, m:ss or h:mm:ss)")
        self.end = QLineEdit()
        self.end.setPlaceholderText("the end (not included)")
        self.form.addRow("Video", self.video)
        self.form.addRow("Keep one in every", self.every)
        self.form.addRow("From", self.start)
        self.form.addRow("To", self.end)

    def _time(self, edit: QLineEdit, name: str) -> float | None:
        text = edit.text().strip()
        return parse_time(text, where=name) if text else None

    def problems(self) -> str:
        path = self.video.text()
        if not path:
            return "Choose the video file."
        if not Path(path).is_file():
            return f"No such video file: {path}"
        try:
            start, end = self._time(self.start, "From"), self._time(self.end, "To")
        except BadInput as exc:
            return str(exc)
        if start is not None and end is not None and end <= start:
            return "The end must come after the start."
        return ""

    def values(self) -> tuple[str, int, float | None, float | None]:
        """Video path, every N-th frame, start and end in seconds (None: not limited)."""
        return (self.video.text(), int(self.every.value()), self._time(self.start, "From"),
                self._time(self.end, "To"))


#: How a packet carries images, as the packet format names them and as the form says it.
IMAGE_CHOICES = (("blurred-heads", "images with every head blurred"),
                 ("blurred-people", "images with every person blurred whole"),
                 ("full", "images as they are"), ("none", "no images (labels only)"))

#: How many of the frames at risk the form names one by one.
RISK_LINES = 6


class PacketDialog(_Form):
    """Which frames go to which reviewer, with or without images, into which file.

    ``risks(frames, images)`` gives the lines of :func:`app.review.packet.blur_risks` for a
    choice (the frames as :meth:`values` gives them); when there are any, the form shows them
    and sends blurred images only once "Send anyway" is ticked, as the command line does with
    ``--accept-risk``.
    """

    def __init__(self, folder: Path, counts: dict[str, int], current: int | None,
                 parent: QWidget | None = None,
                 risks: Callable[[str, str], list[str]] | None = None):
        super().__init__("Send frames for review", (
            "Writes a review packet: the frames' labels and notes as they are now, for a "
            "colleague to open with `posewright open FILE.zip`. Frames of people are personal "
            "data: share packets only with people entitled to see them."), parent,
            "Write the packet")
        self.frames = QComboBox()
        if current is not None:
            self.frames.addItem(f"this frame ({current})", "this")
        for state in ("disputed", "untouched", "corrected"):
            if counts.get(state):
                self.frames.addItem(f"the {count(counts[state], f'{state} frame')}", state)
        self.frames.addItem("frames by id\u2026", "ids")
        self.ids = QLineEdit()
        self.ids.setPlaceholderText("frame ids, e.g. 3, 7, 12")
        self.ids.setEnabled(False)
        self.frames.currentIndexChanged.connect(
            lambda _i: self.ids.setEnabled(self.frames.currentData() == "ids"))
        self.images = QComboBox()
        for value, text in IMAGE_CHOICES:
            self.images.addItem(text, value)
        self.images.setCurrentIndex(self.images.findData(DEFAULT_IMAGES))
        self.reviewer = QLineEdit()
        self.reviewer.setPlaceholderText("who is to review (optional)")
        self.out = PathField("Write the packet to", folder, "Review packets (*.zip)",
                             save=True)
        self.out.set_text(str(folder / "review-packet.zip"))
        self._risks = risks
        self.risk_lines: list[str] = []
        self.warning = QLabel()
        self.warning.setObjectName("BlurWarning")
        self.warning.setStyleSheet("color: #8a4b00;")
        self.warning.hide()
        self.accept_risk = QCheckBox("Send anyway: I accept that these people may be "
                                     "recognisable")
        self.accept_risk.hide()
        self.form.addRow("Frames", self.frames)
        self.form.addRow("", self.ids)
        self.form.addRow("Images", self.images)
        self.form.addRow("Reviewer", self.reviewer)
        self.form.addRow("Packet file", self.out)
        below = self.layout()
        assert isinstance(below, QVBoxLayout)
        below.insertSpacing(2, 6)
        below.insertWidget(3, self.warning)
        below.insertWidget(4, self.accept_risk)
        self.frames.currentIndexChanged.connect(lambda _i: self.check_risks())
        self.images.currentIndexChanged.connect(lambda _i: self.check_risks())
        self.ids.editingFinished.connect(self.check_risks)
        self.check_risks()

    def check_risks(self) -> None:
        """Show the frames whose blurred images may leave people recognisable."""
        frames, images = self.values()[:2]
        lines: list[str] = []
        if self._risks is not None and images.startswith("blurred") and frames:
            try:
                lines = self._risks(frames, images)
            except BadInput:
                lines = []  # frame ids still being typed: problems() says what is wrong
        self.risk_lines = lines
        if lines:
            shown_lines = lines[:RISK_LINES]
            if len(lines) > RISK_LINES:
                shown_lines.append(f"and {count(len(lines) - RISK_LINES, 'more frames')}")
            self.warning.setText("Without network maps only the face detector looks for people "
                                 "the labels miss:\n" + "\n".join(shown_lines))
        self.warning.setVisible(bool(lines))
        self.accept_risk.setVisible(bool(lines))
        self.adjustSize()

    def problems(self) -> str:
        if self.frames.currentData() == "ids" and not self.ids.text().strip():
            return "Give the frame ids to send."
        self.check_risks()
        if self.risk_lines and not self.accept_risk.isChecked():
            return (f"{count(len(self.risk_lines), 'frames')} may show people unblurred: add "
                    "their maps, send no images, or tick \u201cSend anyway\u201d.")
        out = self.out.text()
        if not out.lower().endswith(".zip"):
            return "The packet file must end in .zip."
        if not Path(out).parent.is_dir():
            return f"No such folder: {Path(out).parent}"
        return ""

    def values(self) -> tuple[str, str, str | None, str, bool]:
        """Frames (``this``, a state, or the typed ids), images mode, reviewer, packet path,
        and whether the risk shown is accepted."""
        frames = str(self.frames.currentData())
        if frames == "ids":
            frames = self.ids.text().strip()
        return frames, str(self.images.currentData()), self.reviewer.text().strip() or None, \
            self.out.text(), bool(self.risk_lines) and self.accept_risk.isChecked()
