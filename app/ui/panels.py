"""The dock panels around the Canvas: Worklist, Owners, Ledger and Notes.

Each panel is a view over the item models of :mod:`app.ui.models` plus a few controls; it
emits what the user asked for and leaves the edits to the main window.
"""

from __future__ import annotations

from PySide6.QtCore import QEvent, QItemSelectionModel, QModelIndex, Qt, Signal
from PySide6.QtGui import QAction, QKeyEvent
from PySide6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QGridLayout,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QListView,
    QPushButton,
    QSizePolicy,
    QTableView,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from app.model.labels import FrameState
from app.ui.models import (
    STATE_TEXT,
    KeyRole,
    LedgerModel,
    NotesModel,
    PeopleModel,
    WorklistModel,
)
from app.wording import count, reason_label


def _table(model, stretch: int, widths: tuple[int, ...] | None = None) -> QTableView:
    """A read-only row table. With ``widths`` the columns have those fixed starting widths
    (resizable by hand), which keeps large models cheap: fitting columns to their contents
    would visit every row on each change."""
    view = QTableView()
    view.setModel(model)
    view.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
    view.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
    view.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
    view.setAlternatingRowColors(True)
    view.setShowGrid(False)
    view.setWordWrap(False)
    view.verticalHeader().hide()
    view.verticalHeader().setDefaultSectionSize(view.fontMetrics().height() + 6)
    header = view.horizontalHeader()
    header.setHighlightSections(False)
    if widths is None:
        header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
    else:
        header.setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        for i, w in enumerate(widths):
            header.resizeSection(i, w)
    header.setSectionResizeMode(stretch, QHeaderView.ResizeMode.Stretch)
    return view


def _tight(layout: QVBoxLayout | QHBoxLayout | QGridLayout) -> None:
    layout.setContentsMargins(4, 4, 4, 4)
    layout.setSpacing(4)


# ---------------------------------------------------------------------------------- Worklist

class WorklistPanel(QWidget):
    """Frames by suspicion with filters; emits :attr:`frameChosen` when the user picks one.

    The filters are the model's (the database filters); the view asks the model only for the
    rows it shows."""

    frameChosen = Signal(int)

    def __init__(self, model: WorklistModel, parent: QWidget | None = None):
        super().__init__(parent)
        self.model = model
        self._quiet = False
        #: The frame highlighted (kept over a reload, which forgets the rows read).
        self._current: int | None = None

        self.state_filter = QComboBox()
        self.state_filter.addItem("all states", None)
        for state in FrameState:
            self.state_filter.addItem(STATE_TEXT[state], state.value)
        self.reason_filter = QComboBox()
        self.reason_filter.setSizeAdjustPolicy(
            QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
        self.reason_filter.setMinimumContentsLength(12)
        self.hint = QLabel("No triage yet: Project \u25b8 Run triage (Ctrl+T) ranks the frames "
                           "by suspicion.")
        self.hint.setWordWrap(True)
        self.view = _table(model, 0, (200, 46, 70))
        self.view.setObjectName("WorklistView")
        self.view.setTextElideMode(Qt.TextElideMode.ElideRight)
        self.view.verticalHeader().setDefaultSectionSize(2 * self.view.fontMetrics().height()
                                                         + 8)
        self.count = QLabel()

        filters = QHBoxLayout()
        filters.addWidget(self.state_filter, 1)
        filters.addWidget(self.reason_filter, 1)
        layout = QVBoxLayout(self)
        _tight(layout)
        layout.addLayout(filters)
        layout.addWidget(self.hint)
        layout.addWidget(self.view, 1)
        layout.addWidget(self.count)

        self.state_filter.currentIndexChanged.connect(self._filter)
        self.reason_filter.currentIndexChanged.connect(self._filter)
        self.view.selectionModel().currentRowChanged.connect(self._current_changed)
        model.modelReset.connect(self._after_reset)
        self._after_reset()

    def _after_reset(self) -> None:
        current = self.reason_filter.currentData()
        self.reason_filter.blockSignals(True)
        self.reason_filter.clear()
        self.reason_filter.addItem("all reasons", None)
        for kind, n in self.model.reason_kinds():
            self.reason_filter.addItem(f"{reason_label(kind)} \u00b7 {count(n, 'frame')}", kind)
        i = self.reason_filter.findData(current)
        self.reason_filter.setCurrentIndex(max(i, 0))
        self.reason_filter.blockSignals(False)
        self.hint.setVisible(not self.model.has_triage())
        self._update_count()
        if i < 0 and current is not None:
            self._filter()  # the kind is gone: every reason again
        elif self._current is not None:
            self.show_frame(self._current)

    def _filter(self) -> None:
        value = self.state_filter.currentData()
        self.model.set_filters(None if value is None else FrameState(value),
                               self.reason_filter.currentData())

    def _update_count(self) -> None:
        shown, total = self.model.rowCount(), self.model.total()
        self.count.setText(f"{shown} of {count(total, 'frames')}" if shown != total
                           else count(total, "frames"))

    def _current_changed(self, current: QModelIndex, _previous: QModelIndex) -> None:
        key = current.data(KeyRole) if current.isValid() else None
        if self._quiet or key is None:
            return
        self._current = int(key)
        self.frameChosen.emit(self._current)

    def ordered_ids(self) -> list[int]:
        """Frame ids in the order shown (filters applied), read from the store."""
        return self.model.frame_ids()

    def first_id(self) -> int | None:
        """The frame on the first row (None: no row)."""
        return self.model.frame_id_at(0)

    def neighbour(self, frame_id: int | None, step: int) -> int | None:
        """The frame ``step`` rows after (or before) ``frame_id`` in the shown order."""
        n = self.model.rowCount()
        if n == 0:
            return None
        row = self.model.row_of(frame_id) if frame_id is not None else None
        if row is not None:
            return self.model.frame_id_at(row + step)
        return self.model.frame_id_at(0 if step > 0 else n - 1)

    def show_frame(self, frame_id: int) -> None:
        """Highlight a frame's row without emitting :attr:`frameChosen`."""
        self._current = frame_id
        row = self.model.row_of(frame_id)
        self._quiet = True
        try:
            if row is not None:
                idx = self.model.index(row, 0)
                self.view.selectionModel().setCurrentIndex(
                    idx, QItemSelectionModel.SelectionFlag.ClearAndSelect
                    | QItemSelectionModel.SelectionFlag.Rows)
                self.view.scrollTo(idx)
            else:  # filtered out: the list from its top
                self.view.clearSelection()
                self.view.scrollToTop()
        finally:
            self._quiet = False


# ---------------------------------------------------------------------------------- Owners

class OwnersPanel(QWidget):
    """The frame's people (tag, labelled, occluded and flagged joints), what is selected, and
    whether anybody fits the selected joint better than its owner. The ranked owners
    themselves are listed beside the joint on the Canvas."""

    personChosen = Signal(int)

    def __init__(self, actions: dict[str, QAction], parent: QWidget | None = None):
        super().__init__(parent)
        self.people_model = PeopleModel(self)
        self._quiet = False

        self.people = _table(self.people_model, 3, (100, 62, 62))
        self.people.setObjectName("PeopleView")
        self.people.setToolTip("Click a person to select them; number keys give the selected "
                               "joint to the person with that tag")
        self.selection = QLabel("Nothing selected.")
        self.selection.setWordWrap(True)
        self.selection.setTextFormat(Qt.TextFormat.RichText)
        self.selection.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Minimum)
        self.note = QLabel()
        self.note.setWordWrap(True)
        self.note.setTextFormat(Qt.TextFormat.RichText)

        layout = QVBoxLayout(self)
        _tight(layout)
        layout.addWidget(self.selection)
        layout.addWidget(self.note)
        layout.addWidget(self.people, 1)

        self.people.selectionModel().currentRowChanged.connect(self._person_changed)
        self.people.clicked.connect(self._person_clicked)

    def _person_changed(self, current: QModelIndex, _previous: QModelIndex) -> None:
        if not self._quiet and current.isValid():
            self.personChosen.emit(int(current.data(KeyRole)))

    def _person_clicked(self, index: QModelIndex) -> None:
        if not self._quiet and index.isValid():
            self.personChosen.emit(int(index.data(KeyRole)))

    def show_person(self, person_id: int | None) -> None:
        """Highlight a person's row without emitting :attr:`personChosen`."""
        self._quiet = True
        try:
            row = None if person_id is None else self.people_model.row_of(person_id)
            if row is None:
                self.people.clearSelection()
                self.people.selectionModel().clearCurrentIndex()
            else:
                idx = self.people_model.index(row, 0)
                self.people.selectionModel().setCurrentIndex(
                    idx, QItemSelectionModel.SelectionFlag.ClearAndSelect
                    | QItemSelectionModel.SelectionFlag.Rows)
                self.people.scrollTo(idx)
        finally:
            self._quiet = False


# ---------------------------------------------------------------------------------- Ledger

class LedgerPanel(QWidget):
    """The ledger of this frame or of the whole project, with undo, redo and rewind."""

    returnRequested = Signal(int, bool)  # ledger seq, whole project
    scopeChanged = Signal(bool)

    def __init__(self, model: LedgerModel, actions: dict[str, QAction],
                 parent: QWidget | None = None):
        super().__init__(parent)
        self.model = model
        self.scope = QComboBox()
        self.scope.addItem("this frame", False)
        self.scope.addItem("whole project", True)
        self.view = _table(model, 3, (80, 70, 60))
        self.view.setObjectName("LedgerView")
        self.back = QPushButton("Rewind to this point")
        self.back.setToolTip("Bring the labels back to how they were right after the selected "
                             "action (recorded as a new, undoable action)")
        self.back.setEnabled(False)
        self.editable = True

        top = QHBoxLayout()
        top.addWidget(QLabel("Edits of"))
        top.addWidget(self.scope)
        top.addStretch(1)
        for name in ("undo", "redo"):
            b = QToolButton()
            b.setDefaultAction(actions[name])
            top.addWidget(b)
        top.addWidget(self.back)
        layout = QVBoxLayout(self)
        _tight(layout)
        layout.addLayout(top)
        layout.addWidget(self.view, 1)

        self.scope.currentIndexChanged.connect(
            lambda _i: self.scopeChanged.emit(bool(self.scope.currentData())))
        self.view.selectionModel().currentRowChanged.connect(lambda *_: self._update_back())
        model.modelReset.connect(self._update_back)
        self.back.clicked.connect(self._return)

    def set_editable(self, editable: bool) -> None:
        self.editable = editable
        self._update_back()

    def _update_back(self) -> None:
        self.back.setEnabled(self.editable and self.view.currentIndex().isValid())

    def _return(self) -> None:
        idx = self.view.currentIndex()
        if idx.isValid():
            self.returnRequested.emit(int(idx.data(KeyRole)), self.model.whole_project)


# ---------------------------------------------------------------------------------- Notes

class NoteEntry(QLineEdit):
    """The line a note is written in. Esc leaves it with the draft kept (instead of reaching
    the window's Esc, which would clear the Canvas's selection) and emits :attr:`left`."""

    left = Signal()

    def event(self, event: QEvent) -> bool:
        # Accepting the override keeps the window's Esc shortcut from firing while writing.
        if event.type() == QEvent.Type.ShortcutOverride and isinstance(event, QKeyEvent) \
                and event.key() == Qt.Key.Key_Escape \
                and event.modifiers() == Qt.KeyboardModifier.NoModifier:
            event.accept()
            return True
        return super().event(event)

    def keyPressEvent(self, event: QKeyEvent) -> None:
        if event.key() == Qt.Key.Key_Escape:
            self.left.emit()
            event.accept()
            return
        super().keyPressEvent(event)


class NotesPanel(QWidget):
    """The frame's note thread and a line to add to it.

    Writing a note is a short trip away from the Canvas: :attr:`done` says the writer is
    finished with the line without adding a note (Return on an empty line, or Esc), so that the
    window can give the keys back to the Canvas.
    """

    noteSubmitted = Signal(str)
    done = Signal()

    def __init__(self, model: NotesModel, parent: QWidget | None = None):
        super().__init__(parent)
        self.model = model
        self.view = QListView()
        self.view.setModel(model)
        self.view.setWordWrap(True)
        self.view.setAlternatingRowColors(True)
        self.view.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.view.setObjectName("NotesView")
        self.entry = NoteEntry()
        self.entry.setObjectName("NoteEntry")
        self.entry.setPlaceholderText("Write a note on this frame, then Return")
        self.add = QPushButton("Add note")
        row = QHBoxLayout()
        row.addWidget(self.entry, 1)
        row.addWidget(self.add)
        layout = QVBoxLayout(self)
        _tight(layout)
        layout.addWidget(self.view, 1)
        layout.addLayout(row)
        self.entry.returnPressed.connect(self._submit)
        self.entry.left.connect(self.done)
        self.add.clicked.connect(self._submit)

    def set_editable(self, editable: bool) -> None:
        self.entry.setEnabled(editable)
        self.add.setEnabled(editable)

    def _submit(self) -> None:
        text = self.entry.text().strip()
        if text:
            self.noteSubmitted.emit(text)
        else:
            self.done.emit()
