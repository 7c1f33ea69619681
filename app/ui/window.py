"""The main window: Worklist (left), Canvas (centre), Owners (right), Ledger and Notes (bottom).

The window is the one place that turns what the user asked for into edits and hands them to
:meth:`app.store.Project.apply` (or undo, redo, return-to). It learns about every committed
change through :class:`ProjectEvents`, which turns the store's listener calls into a Qt signal,
and then refreshes the models and the Canvas; nothing polls.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
from PySide6.QtCore import QObject, Qt, QTimer, Signal
from PySide6.QtGui import QAction, QCloseEvent, QKeySequence
from PySide6.QtWidgets import (
    QDialog,
    QDockWidget,
    QFileDialog,
    QLabel,
    QMainWindow,
    QMessageBox,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)

from app.errors import Cancelled, EditRefused, PosewrightError
from app.model.edits import (
    AddNote,
    DeletePerson,
    Edit,
    MergePeople,
    MoveJoint,
    NewPerson,
    ReassignJoint,
    SetFrameState,
    SetVisibility,
    SplitPerson,
    SwapSides,
)
from app.model.labels import FrameState
from app.model.skeleton import Skeleton
from app.progress import Progress
from app.store.project import Applied, Project
from app.ui.batch import Batch
from app.ui.canvas import Canvas
from app.ui.images import ImageCache, ImageLoader
from app.ui.keys import KEYS, sequences, sheet_html
from app.ui.models import STATE_TEXT, LedgerModel, NotesModel, WorklistModel
from app.ui.overlay import WHOLE_PERSON, flags_from_reasons
from app.ui.panels import LedgerPanel, NotesPanel, OwnersPanel, WorklistPanel
from app.ui.settings import cache_bytes, settings
from app.ui.suggestions import rank_owners
from app.ui.work import describe_error, run_job

log = logging.getLogger(__name__)

_VISIBILITY_WORD = {0: "unlabeled", 1: "occluded", 2: "visible"}
#: How long a first digit waits for a second one when there are ten or more people (ms).
DIGIT_WAIT_MS = 700


class ProjectEvents(QObject):
    """The store's change notifications as a Qt signal ``changed(kind, frame_ids)``.

    Emitted with Qt's automatic connection: delivered at once when the change was made on the
    UI thread (so the screen is current when an action returns), queued to the UI thread when
    a worker made it (imports, triage).
    """

    changed = Signal(str, object)

    def __init__(self, project: Project, parent: QObject | None = None):
        super().__init__(parent)
        self._live = True
        project.subscribe(self._relay)

    def _relay(self, kind: str, frame_ids: frozenset[int]) -> None:
        if self._live:
            self.changed.emit(kind, frame_ids)

    def detach(self) -> None:
        """Stop relaying (the store has no unsubscribe; the window is going away)."""
        self._live = False


class MainWindow(QMainWindow):
    """Posewright's main window over one open project."""

    def __init__(self, project: Project, owns_project: bool = False,
                 cache: ImageCache | None = None, restore_layout: bool = True,
                 parent: QWidget | None = None):
        super().__init__(parent)
        self.project = project
        self.skeleton: Skeleton = project.skeleton
        self._owns_project = owns_project
        self.setObjectName("PosewrightMain")
        name = project.meta("name") or project.folder.name
        self.setWindowTitle(f"{name} \u2014 Posewright")

        self.events = ProjectEvents(project, self)
        self.loader = ImageLoader(cache or ImageCache(cache_bytes()), parent=self)
        self.frame_id: int | None = None
        self._typed = ""
        self._typed_timer = QTimer(self)
        self._typed_timer.setSingleShot(True)
        self._typed_timer.setInterval(DIGIT_WAIT_MS)
        self._typed_timer.timeout.connect(self._commit_typed)
        self._maps: tuple[int, Any] | None = None
        self._jobs: list[Any] = []
        self._closed = False
        self._remember_layout = restore_layout
        self._layout_restored = True
        self._panels_for: int | None = None

        self.actions_by_name: dict[str, QAction] = {}
        self._build_actions()

        self.canvas = Canvas(self.skeleton, self)
        self.setCentralWidget(self.canvas)
        self.worklist_model = WorklistModel(project, self)
        self.ledger_model = LedgerModel(project, self)
        self.notes_model = NotesModel(project, self)
        self.worklist = WorklistPanel(self.worklist_model)
        self.owners = OwnersPanel(self.actions_by_name)
        self.ledger = LedgerPanel(self.ledger_model, self.actions_by_name)
        self.notes = NotesPanel(self.notes_model)
        self.docks = {
            "worklist": self._dock("Worklist", self.worklist, Qt.DockWidgetArea.LeftDockWidgetArea),
            "owners": self._dock("Owners", self.owners, Qt.DockWidgetArea.RightDockWidgetArea),
            "ledger": self._dock("Ledger", self.ledger, Qt.DockWidgetArea.BottomDockWidgetArea),
            "notes": self._dock("Notes", self.notes, Qt.DockWidgetArea.BottomDockWidgetArea),
        }
        self.splitDockWidget(self.docks["ledger"], self.docks["notes"], Qt.Orientation.Horizontal)
        self.setCorner(Qt.Corner.BottomLeftCorner, Qt.DockWidgetArea.LeftDockWidgetArea)
        self.setCorner(Qt.Corner.BottomRightCorner, Qt.DockWidgetArea.RightDockWidgetArea)
        self._default_layout = self.saveState()
        self._build_menus()
        self._build_status()

        self.events.changed.connect(self._on_changed)
        self.loader.ready.connect(self._image_ready)
        self.loader.failed.connect(self._image_failed)
        self.loader.refined.connect(self._image_refined)
        self.canvas.framePainted.connect(self._frame_painted, Qt.ConnectionType.QueuedConnection)
        self.canvas.selectionChanged.connect(self._selection_changed)
        self.canvas.editRequested.connect(self._canvas_edit)
        self.canvas.personPicked.connect(self._merge_picked)
        self.canvas.viewChanged.connect(self._view_changed)
        self.worklist.frameChosen.connect(self.show_frame)
        self.owners.personChosen.connect(self._owner_person_chosen)
        self.owners.candidateChosen.connect(self.give_to_person)
        self.ledger.returnRequested.connect(self._return_to)
        self.ledger.scopeChanged.connect(self._ledger_scope)
        self.notes.noteSubmitted.connect(self._add_note)

        self._restore_layout(restore_layout)
        self._apply_read_only()
        ids = self.worklist.ordered_ids()
        if ids:
            self.show_frame(ids[0])
        else:
            self._selection_changed()
            self._update_status()

    # ------------------------------------------------------------------ building

    def _dock(self, title: str, widget: QWidget, area: Qt.DockWidgetArea) -> QDockWidget:
        dock = QDockWidget(title, self)
        dock.setObjectName(f"{title}Dock")
        dock.setWidget(widget)
        dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                         | QDockWidget.DockWidgetFeature.DockWidgetFloatable
                         | QDockWidget.DockWidgetFeature.DockWidgetClosable)
        self.addDockWidget(area, dock)
        return dock

    def _build_actions(self) -> None:
        handlers: dict[str, Callable[[], Any]] = {
            "next_frame": lambda: self.step_frame(1),
            "prev_frame": lambda: self.step_frame(-1),
            "mark_disputed": lambda: self.toggle_state(FrameState.DISPUTED),
            "sign_off": lambda: self.toggle_state(FrameState.SIGNED_OFF),
            "write_note": self._focus_note,
            "next_person": lambda: self.step_person(1),
            "prev_person": lambda: self.step_person(-1),
            "clear_selection": self._escape,
            "give_best": self.give_to_best,
            "mark_visible": lambda: self.set_visibility(2),
            "mark_occluded": lambda: self.set_visibility(1),
            "mark_unlabeled": lambda: self.set_visibility(0),
            "place_joint": self.place_joint,
            "new_person": self.new_person,
            "split_person": self.split_person,
            "swap_sides": self.swap_sides,
            "merge_people": self.start_merge,
            "delete_person": self.delete_person,
            "focus_mode": self._toggle_focus,
            "show_unlabeled": self._toggle_unlabeled,
            "show_tags": self._toggle_tags,
            "fit": self._fit_or_digit,
            "actual_size": lambda: self.canvas.actual_size(),
            "zoom_in": lambda: self.canvas.zoom_in(),
            "zoom_out": lambda: self.canvas.zoom_out(),
            "undo": self.undo,
            "redo": self.redo,
            "open_project": self._open_other,
            "import_labels": self._import_labels,
            "import_maps": self._import_maps,
            "run_triage": self._run_triage,
            "export_labels": self._export_labels,
            "export_targets": self._export_targets,
            "shortcuts": self.show_shortcuts,
            "quit": self.close,
        }
        for n in range(1, 10):
            handlers[f"give_{n}"] = lambda n=n: self._type_digit(str(n))
        checkable = {"focus_mode", "show_unlabeled", "show_tags"}
        for key in KEYS:
            if not key.name:
                continue
            action = QAction(key.text, self)
            action.setObjectName(key.name)
            seqs = sequences(key)
            action.setShortcuts(seqs)
            shown = ", ".join(s.toString(QKeySequence.SequenceFormat.NativeText) for s in seqs)
            action.setToolTip(f"{key.help} ({shown})" if shown else key.help)
            action.setCheckable(key.name in checkable)
            action.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
            action.triggered.connect(lambda _checked=False, h=handlers[key.name]: h())
            self.addAction(action)
            self.actions_by_name[key.name] = action
        self.actions_by_name["show_tags"].setChecked(True)
        for name, short in (("new_person", "New person (N)"), ("split_person", "Split off (X)"),
                            ("mark_visible", "Visible (V)"), ("mark_occluded", "Occluded (O)"),
                            ("mark_unlabeled", "Unlabeled (U)"), ("swap_sides", "Swap L/R (S)"),
                            ("merge_people", "Merge\u2026 (M)"),
                            ("delete_person", "Delete person")):
            self.actions_by_name[name].setIconText(short)

    def _build_menus(self) -> None:
        a = self.actions_by_name
        bar = self.menuBar()
        menus = {
            "&Project": ["open_project", None, "import_labels", "import_maps", "run_triage",
                         None, "export_labels", "export_targets", None, "quit"],
            "&Edit": ["undo", "redo", None, "give_best", "mark_visible", "mark_occluded",
                      "mark_unlabeled", "place_joint", None, "new_person", "split_person",
                      "swap_sides", "merge_people", "delete_person"],
            "&Frame": ["next_frame", "prev_frame", None, "mark_disputed", "sign_off",
                       "write_note", None, "next_person", "prev_person", "clear_selection"],
            "&View": ["focus_mode", "show_unlabeled", "show_tags", None, "fit", "actual_size",
                      "zoom_in", "zoom_out"],
            "&Help": ["shortcuts"],
        }
        for title, names in menus.items():
            menu = bar.addMenu(title)
            for name in names:
                if name is None:
                    menu.addSeparator()
                else:
                    menu.addAction(a[name])
            if title == "&View":
                menu.addSeparator()
                for dock in self.docks.values():
                    menu.addAction(dock.toggleViewAction())
                reset = menu.addAction("Reset panel layout")
                reset.triggered.connect(self._reset_layout)

    def _build_status(self) -> None:
        bar = self.statusBar()
        self.status_frame = QLabel()
        self.status_people = QLabel()
        self.status_flags = QLabel()
        self.status_state = QLabel()
        self.status_zoom = QLabel()
        self.status_author = QLabel()
        self.status_lock = QLabel()
        self.status_lock.setStyleSheet("color: #b00020; font-weight: bold;")
        for w in (self.status_frame, self.status_people, self.status_flags, self.status_state,
                  self.status_zoom, self.status_author, self.status_lock):
            bar.addPermanentWidget(w)

    # ------------------------------------------------------------------ layout memory

    def _restore_layout(self, remembered: bool) -> None:
        s = settings()
        geometry = s.value("window/geometry") if remembered else None
        state = s.value("window/state") if remembered else None
        self._layout_restored = geometry is not None
        if geometry is not None:
            self.restoreGeometry(geometry)
        else:
            self.resize(1500, 900)
            self._default_dock_sizes()
        if state is not None:
            self.restoreState(state)

    def _reset_layout(self) -> None:
        self.restoreState(self._default_layout)
        for dock in self.docks.values():
            dock.show()
        self._default_dock_sizes()

    def _default_dock_sizes(self) -> None:
        """Side panels as narrow as their tables allow; the bottom panels take the height a
        landscape frame leaves over once the Canvas has the width."""
        self.resizeDocks([self.docks["worklist"], self.docks["owners"]], [330, 330],
                         Qt.Orientation.Horizontal)
        canvas_w = max(400, self.width() - 660 - 12)
        canvas_h = int(canvas_w * 9 / 16) + 24
        bottom = max(150, self.height() - canvas_h - 110)
        self.resizeDocks([self.docks["ledger"]], [bottom], Qt.Orientation.Vertical)

    def resizeEvent(self, event: Any) -> None:
        super().resizeEvent(event)
        if not self._layout_restored:
            self._default_dock_sizes()

    def save_layout(self) -> None:
        """Remember the window's geometry and panel layout (QSettings)."""
        if not self._remember_layout:
            return
        s = settings()
        s.setValue("window/geometry", self.saveGeometry())
        s.setValue("window/state", self.saveState())
        s.sync()

    def closeEvent(self, event: QCloseEvent) -> None:
        self.shutdown()
        super().closeEvent(event)

    def shutdown(self) -> None:
        """Save the layout, stop the decoders, let go of the project (if this window owns it)."""
        if self._closed:
            return
        self._closed = True
        self.save_layout()
        self.events.detach()
        self.loader.shutdown()
        for job in list(self._jobs):
            job.cancel()
            job.wait()
        if self._owns_project:
            self.project.close()

    # ------------------------------------------------------------------ frames

    def show_frame(self, frame_id: int) -> None:
        """Show a frame: its labels at once, its image as soon as it is decoded."""
        try:
            frame = self.project.frame(frame_id)
        except PosewrightError as exc:
            self._message(str(exc))
            return
        self._cancel_typing()
        self.frame_id = frame.id
        people = self.project.people(frame.id)
        flags = self._flags(frame.id)
        decoded = self.loader.request(frame.id, self.project.image_path(frame), urgent=True)
        self.canvas.set_frame(frame, people, flags, decoded)
        # The neighbours are decoded once this frame is on screen (framePainted): on a busy
        # machine their decoding would compete with the frame the annotator is waiting for.
        self.owners.people_model.set_people(people, flags, self.canvas.colours)
        self.worklist.show_frame(frame.id)
        self._selection_changed()
        self._update_status()
        # The Ledger and Notes follow a moment later, after the Canvas has shown the frame.
        self._panels_for = frame.id
        QTimer.singleShot(0, self._refresh_side_panels)

    def _refresh_side_panels(self) -> None:
        if self._closed or self.frame_id is None or self._panels_for != self.frame_id:
            return
        self.notes_model.set_frame(self.frame_id,
                                   {p.id: n + 1 for n, p in enumerate(self.canvas.people)})
        self.ledger_model.set_scope(self.frame_id, self.ledger_model.whole_project)

    def _prefetch(self, frame_id: int) -> None:
        """Decode the frames the annotator is likely to want next: the next two of the
        Worklist and the previous one."""
        nxt = self.worklist.neighbour(frame_id, 1)
        wanted = [nxt, self.worklist.neighbour(frame_id, -1),
                  self.worklist.neighbour(nxt, 1) if nxt is not None else None]
        for nid in wanted:
            if nid is not None and nid != frame_id:
                self.loader.request(nid, self.project.image_path(self.project.frame(nid)))

    def step_frame(self, step: int) -> None:
        """Go to the next (1) or previous (-1) frame of the Worklist as filtered."""
        nid = self.worklist.neighbour(self.frame_id, step)
        if nid is None:
            self._message("no more frames in the Worklist" if step > 0 else
                          "this is the first frame of the Worklist")
            return
        self.show_frame(nid)

    def _flags(self, frame_id: int) -> dict[int, frozenset[int]]:
        triage = self.project.triage(frame_id)
        return flags_from_reasons(triage[1] if triage else None)

    def _reload_frame(self) -> None:
        """The current frame's labels changed: refresh the Canvas, Owners and Notes."""
        if self.frame_id is None:
            return
        frame = self.project.frame(self.frame_id)
        people = self.project.people(frame.id)
        flags = self._flags(frame.id)
        self.canvas.frame = frame
        self.canvas.set_people(people, flags)
        self.owners.people_model.set_people(people, flags, self.canvas.colours)
        self.notes_model.set_frame(frame.id, {p.id: n + 1 for n, p in enumerate(people)})
        self._selection_changed()
        self._update_status()

    def _image_ready(self, frame_id: int) -> None:
        if frame_id == self.frame_id and not self.canvas.has_image:
            self.canvas.set_image(self.loader.cache.get(frame_id))

    def _frame_painted(self, frame_id: int) -> None:
        """The frame is on screen: now improve its picture and prepare the next ones."""
        if frame_id == self.frame_id and not self._closed:
            self.loader.refine(frame_id)
            self._prefetch(frame_id)

    def _image_refined(self, frame_id: int) -> None:
        if frame_id == self.frame_id and self.canvas.has_image:
            self.canvas.set_image(self.loader.cache.get(frame_id))

    def _image_failed(self, frame_id: int, status: str) -> None:
        frame = self.project.frame(frame_id)
        if frame.status != status:
            self.project.mark_image_status(frame_id, status)
        if frame_id == self.frame_id:
            self.canvas.set_image(None, f"image {status}: {self.project.image_path(frame)}")
            self._prefetch(frame_id)

    # ------------------------------------------------------------------ store changes

    def _on_changed(self, kind: str, frame_ids: frozenset[int]) -> None:
        if self._closed:
            return
        if kind in ("import", "frames", "triage"):
            self.worklist_model.reload()
            if self.frame_id is not None:
                self.worklist.show_frame(self.frame_id)
        else:
            self.worklist_model.refresh_states(sorted(frame_ids))
        if self.frame_id is None:
            ids = self.worklist.ordered_ids()
            if ids:
                self.show_frame(ids[0])
                return
        current = self.frame_id in frame_ids or kind in ("import", "frames")
        if current:
            self._maps = None
            self._reload_frame()
        if current or self.ledger_model.whole_project or kind == "import":
            self.ledger_model.reload()
        self._update_actions()
        self._update_status()

    # ------------------------------------------------------------------ applying edits

    def apply(self, edit: Edit) -> Applied | None:
        """Apply an edit through the store; a refusal goes to the status bar, any other error
        to a message box. Returns what the store did, or None."""
        if self.project.read_only:
            self._message(f"read-only: {self.project.read_only_reason}")
            return None
        try:
            return self.project.apply(edit)
        except EditRefused as exc:
            self._message(f"not done: {exc}")
        except PosewrightError as exc:
            self._error(str(exc))
        return None

    def _canvas_edit(self, edit: Edit) -> None:
        self.apply(edit)

    def _selection(self) -> tuple[int | None, list[tuple[int, int]], int | None]:
        return self.frame_id, self.canvas.selected_joints, self.canvas.selected_person

    def give_to_person(self, target: int) -> None:
        """Give the selected joint(s) to person ``target``; the selection follows them."""
        frame_id, joints, _ = self._selection()
        if frame_id is None or not joints:
            self._message("select a joint first (click it on the Canvas)")
            return
        edits = [ReassignJoint(frame_id, p, j, target) for p, j in joints if p != target]
        if not edits:
            self._message(f"the selected joint already belongs to person {target}")
            return
        names = ", ".join(self.skeleton.joints[e.joint] for e in edits)
        edit: Edit = edits[0] if len(edits) == 1 else Batch(
            frame_id, tuple(edits), f"give {names} to person {target}")
        if self.apply(edit) is not None:
            moved = [(target, e.joint) for e in edits]
            for n, (p, j) in enumerate(moved):
                self.canvas.select_joint(p, j, add=n > 0)

    def give_to_number(self, number: int) -> None:
        people = self.canvas.people
        if not 1 <= number <= len(people):
            self._message(f"there is no person {number} in this frame")
            return
        self.give_to_person(people[number - 1].id)

    def give_to_best(self) -> None:
        choices = self.owners.candidates_model.choices()
        if not choices:
            self._message("no suggestion for the selection")
            return
        self.give_to_person(choices[0].person_id)

    def set_visibility(self, v: int) -> None:
        frame_id, joints, _ = self._selection()
        if frame_id is None or not joints:
            self._message("select a joint first")
            return
        edits = [SetVisibility(frame_id, p, j, v) for p, j in joints]
        word = _VISIBILITY_WORD[v]
        edit: Edit = edits[0] if len(edits) == 1 else Batch(
            frame_id, tuple(edits), f"mark {len(edits)} joints {word}")
        self.apply(edit)

    def place_joint(self) -> None:
        frame_id, _, _ = self._selection()
        joint = self.canvas.selected_joint
        xy = self.canvas.pointer_image_position()
        if frame_id is None or joint is None:
            self._message("select a joint first (Tab walks a person's joints)")
            return
        if xy is None:
            self._message("point at the place on the Canvas, then press P")
            return
        self.apply(MoveJoint(frame_id, joint[0], joint[1], round(xy[0], 2), round(xy[1], 2)))

    def new_person(self) -> None:
        frame_id, joints, _ = self._selection()
        if frame_id is None:
            return
        if not joints:
            done = self.apply(NewPerson(frame_id))
            if done is not None:
                self.canvas.select_person(done.edit.person_id)  # type: ignore[attr-defined]
            return
        self.split_person()

    def split_person(self) -> None:
        frame_id, joints, _ = self._selection()
        if frame_id is None or not joints:
            self._message("select the joints to split off (Ctrl+click adds joints)")
            return
        owners = {p for p, _ in joints}
        if len(owners) != 1:
            self._message("the selected joints belong to different people; select joints of "
                          "one person")
            return
        pid = owners.pop()
        done = self.apply(SplitPerson(frame_id, pid, tuple(j for _, j in joints)))
        if done is not None:
            new_id = done.edit.new_person_id  # type: ignore[attr-defined]
            for n, (_, j) in enumerate(joints):
                self.canvas.select_joint(new_id, j, add=n > 0)

    def swap_sides(self) -> None:
        frame_id, _, pid = self._selection()
        if frame_id is None or pid is None:
            self._message("select a person first")
            return
        self.apply(SwapSides(frame_id, pid))

    def start_merge(self) -> None:
        frame_id, _, pid = self._selection()
        if frame_id is None or pid is None:
            self._message("select the person to keep first, then press M")
            return
        self.canvas.set_pick_mode("merge")
        n = self.canvas.number_of(pid)
        self._message(f"merge: click the person (on the Canvas or in Owners) to merge into "
                      f"person {pid} (tag {n}); Esc cancels", 0)

    def _merge_picked(self, other: int) -> None:
        frame_id, _, keep = self._selection()
        self.statusBar().clearMessage()
        if frame_id is None or keep is None:
            return
        if other == keep:
            self._message("that is the same person; merge cancelled")
            return
        if self.apply(MergePeople(frame_id, keep, other)) is not None:
            self.canvas.select_person(keep)

    def delete_person(self) -> None:
        frame_id, _, pid = self._selection()
        if frame_id is None or pid is None:
            self._message("select a person first")
            return
        self.apply(DeletePerson(frame_id, pid))

    def toggle_state(self, state: FrameState) -> None:
        if self.frame_id is None:
            return
        now = self.project.frame(self.frame_id).state
        target = FrameState.CORRECTED if now is state else state
        if self.apply(SetFrameState(self.frame_id, target)) is not None:
            self._message(f"frame marked {STATE_TEXT[target]}")

    def _add_note(self, text: str) -> None:
        if self.frame_id is None:
            return
        person = self.canvas.selected_person
        if self.apply(AddNote(self.frame_id, text, person_id=person)) is not None:
            self.notes.entry.clear()
            self.notes.view.scrollToBottom()

    def undo(self) -> None:
        self._unwind(self.project.undo, "undone", "nothing to undo")

    def redo(self) -> None:
        self._unwind(self.project.redo, "redone", "nothing to redo")

    def _unwind(self, fn: Callable[[], int | None], done: str, nothing: str) -> None:
        if self.project.read_only:
            self._message(f"read-only: {self.project.read_only_reason}")
            return
        try:
            group = fn()
        except EditRefused as exc:
            self._message(f"not done: {exc}")
            return
        except PosewrightError as exc:
            self._error(str(exc))
            return
        if group is None:
            self._message(nothing)
            return
        entries = [e for e in self.project.history(limit=512) if e.group_id == group]
        frames = sorted({e.frame_id for e in entries if e.frame_id is not None})
        if frames and self.frame_id not in frames:
            self.show_frame(frames[0])  # show the annotator what just changed
        if entries:
            self._message(f"{done}: {entries[0].summary.split(': ', 1)[-1]}")
        self._update_actions()

    def _return_to(self, seq: int, whole_project: bool) -> None:
        if self.project.read_only:
            return
        try:
            group = self.project.return_to(seq, None if whole_project else self.frame_id)
        except EditRefused as exc:
            self._message(f"not done: {exc}")
            return
        except PosewrightError as exc:
            self._error(str(exc))
            return
        self._message("already there" if group is None else
                      f"returned to ledger entry {seq} (Undo takes it back)")

    # ------------------------------------------------------------------ digits

    def _type_digit(self, digit: str) -> None:
        if not self.canvas.selected_joints:
            self._message("select a joint first, then press the number of its owner")
            return
        self._typed += digit
        value = int(self._typed)
        if value * 10 <= len(self.canvas.people) and len(self._typed) < 3:
            self._typed_timer.start()
            self._message(f"give to person {value}\u2026", DIGIT_WAIT_MS)
            return
        self._commit_typed()

    def _commit_typed(self) -> None:
        self._typed_timer.stop()
        typed, self._typed = self._typed, ""
        if typed:
            self.give_to_number(int(typed))

    def _cancel_typing(self) -> None:
        self._typed_timer.stop()
        self._typed = ""

    def _fit_or_digit(self) -> None:
        if self._typed:
            self._type_digit("0")
        else:
            self.canvas.fit()

    # ------------------------------------------------------------------ selection

    def step_person(self, step: int) -> None:
        people = self.canvas.people
        if not people:
            return
        ids = [p.id for p in people]
        pid = self.canvas.selected_person
        i = ids.index(pid) if pid in ids else (-1 if step > 0 else 0)
        self.canvas.select_person(ids[(i + step) % len(ids)])

    def _escape(self) -> None:
        self._cancel_typing()
        if self.canvas.pick_mode:
            self.canvas.set_pick_mode(None)
            self._message("merge cancelled")
            return
        self.canvas.clear_selection()

    def _owner_person_chosen(self, pid: int) -> None:
        if self.canvas.pick_mode == "merge":
            self.canvas.set_pick_mode(None)
            self._merge_picked(pid)
            return
        if pid != self.canvas.selected_person or self.canvas.selected_joints:
            self.canvas.select_person(pid)

    def _selection_changed(self) -> None:
        pid = self.canvas.selected_person
        joint = self.canvas.selected_joint
        self.owners.show_person(pid)
        if joint is None or self.frame_id is None:
            self.owners.candidates_model.set_choices([])
            self.owners.note.setText("Select a joint to see who it could belong to."
                                     if pid is None or joint is None else "")
            self.owners.note.setVisible(True)
        else:
            try:
                choices, note = rank_owners(self.canvas.people, joint[0], joint[1],
                                            self.skeleton, self._frame_maps())
            except Exception:  # a ranking failure must not stop the annotator
                log.exception("ranking candidate owners failed")
                choices, note = [], "suggestions unavailable for this joint"
            self.owners.candidates_model.set_choices(choices, note, self.canvas.colours)
            self.owners.note.setText(note)
            self.owners.note.setVisible(bool(note))
        self.owners.selection.setText(self._selection_text())
        self._update_actions()

    def _frame_maps(self) -> Any:
        if self.frame_id is None:
            return None
        if self._maps is not None and self._maps[0] == self.frame_id:
            return self._maps[1]
        maps = None
        if self.project.maps_path(self.frame_id) is not None:
            try:
                from app.jobs_analysis import load_maps

                maps = load_maps(self.project, self.project.frame(self.frame_id))
            except ImportError:
                maps = None
        self._maps = (self.frame_id, maps)
        return maps

    def _selection_text(self) -> str:
        pid = self.canvas.selected_person
        if pid is None:
            return "Nothing selected."
        n = self.canvas.number_of(pid)
        person = self.canvas.person(pid)
        head = f"<b>person {pid}</b> (tag {n})"
        joints = self.canvas.selected_joints
        if not joints or person is None:
            labelled = 0 if person is None else person.num_labelled
            return f"{head}: {labelled} labelled joints"
        if len(joints) > 1:
            return f"{head}: {len(joints)} joints selected"
        j = joints[0][1]
        x, y, v = person.keypoints[j]
        name = self.skeleton.joints[j]
        if not np.isfinite([x, y]).all():
            return f"{head} \u00b7 {name}: not placed (P places it at the pointer)"
        score = person.scores[j]
        extra = f", model score {score:.2f}" if np.isfinite(score) else ""
        flagged = j in self.canvas.flags.get(pid, ()) or \
            WHOLE_PERSON in self.canvas.flags.get(pid, ())
        flag = ", <b>flagged by triage</b>" if flagged else ""
        return (f"{head} \u00b7 {name} \u00b7 {_VISIBILITY_WORD[int(v)]} at ({x:.1f}, {y:.1f})"
                f"{extra}, by {person.sources[j] or 'unknown'}{flag}")

    # ------------------------------------------------------------------ view toggles

    def _toggle_focus(self) -> None:
        self.canvas.focus_mode = self.actions_by_name["focus_mode"].isChecked()
        if self.canvas.focus_mode and self.canvas.selected_person is None:
            self._message("focus mode: select a person to focus on")
        self.canvas.update()

    def _toggle_unlabeled(self) -> None:
        self.canvas.show_unlabeled = self.actions_by_name["show_unlabeled"].isChecked()
        self.canvas.update()

    def _toggle_tags(self) -> None:
        self.canvas.show_tags = self.actions_by_name["show_tags"].isChecked()
        self.canvas.update()

    def _focus_note(self) -> None:
        self.docks["notes"].show()
        self.docks["notes"].raise_()
        self.notes.entry.setFocus()

    def _ledger_scope(self, whole: bool) -> None:
        self.ledger_model.set_scope(self.frame_id, whole)

    def show_shortcuts(self) -> None:
        dialog = QDialog(self)
        dialog.setObjectName("ShortcutSheet")
        dialog.setWindowTitle("Posewright keys")
        text = QTextBrowser(dialog)
        text.setHtml(sheet_html())
        layout = QVBoxLayout(dialog)
        layout.addWidget(text)
        dialog.resize(620, 720)
        dialog.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        dialog.show()

    # ------------------------------------------------------------------ state of the UI

    def _apply_read_only(self) -> None:
        ro = self.project.read_only
        self.canvas.read_only = ro
        self.notes.set_editable(not ro)
        self.ledger.set_editable(not ro)
        self.status_lock.setText(f"read-only: {self.project.read_only_reason}" if ro else "")
        self.status_lock.setVisible(ro)
        self._update_actions()

    def _update_actions(self) -> None:
        a = self.actions_by_name
        editable = not self.project.read_only and self.frame_id is not None
        joints = bool(self.canvas.selected_joints)
        person = self.canvas.selected_person is not None
        for n in range(1, 10):
            a[f"give_{n}"].setEnabled(editable and joints)
        for name in ("give_best", "mark_visible", "mark_occluded", "mark_unlabeled",
                     "place_joint", "split_person"):
            a[name].setEnabled(editable and joints)
        a["give_best"].setEnabled(editable and joints
                                  and self.owners.candidates_model.rowCount() > 0)
        a["new_person"].setEnabled(editable)
        for name in ("swap_sides", "merge_people", "delete_person"):
            a[name].setEnabled(editable and person)
        for name in ("mark_disputed", "sign_off", "write_note"):
            a[name].setEnabled(editable)
        writable = not self.project.read_only
        a["undo"].setEnabled(writable and self.project.can_undo())
        a["redo"].setEnabled(writable and self.project.can_redo())
        for name in ("import_labels", "import_maps", "run_triage"):
            a[name].setEnabled(writable)

    def _update_status(self) -> None:
        shown = self.worklist.proxy.rowCount()
        total = self.worklist_model.rowCount()
        if self.frame_id is None:
            self.status_frame.setText(f"no frame (0 of {total})")
        else:
            frame = self.canvas.frame
            row = self.worklist_model.row_of(self.frame_id)
            pos = (row + 1) if row is not None else 0
            name = frame.file_name if frame is not None else ""
            self.status_frame.setText(f"frame {pos} of {total} \u00b7 {name}")
            self.status_frame.setToolTip(
                f"{shown} frames shown by the Worklist filters" if shown != total else "")
        self.status_people.setText(f"{len(self.canvas.people)} people")
        flagged = sum(1 for v in self.canvas.flags.values() if v)
        self.status_flags.setText(f"flags on {flagged} people" if flagged else "no flags")
        frame = self.canvas.frame
        self.status_state.setText(STATE_TEXT[frame.state] if frame is not None else "")
        self.status_author.setText(f"author: {self.project.author}")
        self._update_zoom()

    def _update_zoom(self) -> None:
        self.status_zoom.setText(f"{self.canvas.scale * 100:.0f}%")

    def _view_changed(self) -> None:
        # Frames decoded from now on come shrunk to this zoom, ready to draw.
        self.loader.display_scale = self.canvas.scale
        self._update_zoom()

    def _message(self, text: str, msecs: int = 6000) -> None:
        self.statusBar().showMessage(text, msecs)

    def _error(self, text: str) -> None:
        box = QMessageBox(QMessageBox.Icon.Warning, "Posewright", text,
                          QMessageBox.StandardButton.Ok, self)
        box.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        box.open()

    # ------------------------------------------------------------------ long work

    def run_long(self, title: str, fn: Callable[[Progress], Any],
                 done: Callable[[Any], None] | None = None) -> None:
        """Run ``fn(progress)`` on a worker with progress and Cancel (see :mod:`app.ui.work`)."""
        def ok(result: Any) -> None:
            if done is not None:
                done(result)

        def failed(exc: BaseException) -> None:
            if isinstance(exc, Cancelled):
                self._message(describe_error(exc))
            else:
                self._error(describe_error(exc))

        job = run_job(self, title, fn, ok, failed)
        self._jobs.append(job)
        # Forget the job when it ends (it deletes itself right after).
        job.finished.connect(lambda: self._jobs.remove(job) if job in self._jobs else None)

    def _analysis_job(self, name: str) -> Callable[..., Any] | None:
        try:
            import app.jobs_analysis as jobs
        except ImportError:
            jobs = None
        fn = getattr(jobs, name, None) if jobs is not None else None
        if fn is None:
            self._error(f"{name.replace('_', ' ')} is not available in this build")
        return fn

    def _import_labels(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Import COCO keypoints labels",
                                              str(self.project.folder), "COCO JSON (*.json)")
        if path:
            from app.jobs import import_coco

            self.run_long("Importing labels", lambda pr: import_coco(self.project, path, pr),
                          lambda stats: self._message(
                              "imported " + ", ".join(f"{v} {k}" for k, v in stats.items())))

    def _import_maps(self) -> None:
        fn = self._analysis_job("import_maps")
        folder = fn and QFileDialog.getExistingDirectory(self, "Import network maps",
                                                         str(self.project.folder))
        if fn and folder:
            self.run_long("Importing network maps", lambda pr: fn(self.project, folder, pr),
                          lambda _r: self._message("network maps imported"))

    def _run_triage(self) -> None:
        fn = self._analysis_job("run_triage")
        if fn is not None:
            self.run_long("Running triage", lambda pr: fn(self.project, progress=pr),
                          lambda _r: self._message("triage done; the Worklist is re-ranked"))

    def _export_labels(self) -> None:
        path, _ = QFileDialog.getSaveFileName(self, "Export COCO keypoints dataset",
                                              str(self.project.folder / "labels.json"),
                                              "COCO JSON (*.json)")
        if path:
            from app.jobs import export_coco

            def job(pr: Progress) -> dict[str, int]:
                pr.step(0, 1, "writing")
                return export_coco(self.project, path)

            self.run_long("Exporting labels", job, lambda stats: self._message(
                f"wrote {path}: {stats['images']} images, {stats['people']} people"))

    def _export_targets(self) -> None:
        fn = self._analysis_job("export_targets")
        folder = fn and QFileDialog.getExistingDirectory(self, "Export training targets to",
                                                         str(self.project.folder))
        if fn and folder:
            self.run_long("Exporting training targets",
                          lambda pr: fn(self.project, folder, progress=pr),
                          lambda _r: self._message(f"training targets written to {folder}"))

    def _open_other(self) -> None:
        folder = QFileDialog.getExistingDirectory(self, "Open project",
                                                  str(self.project.folder.parent))
        if not folder:
            return
        from app.jobs import open_project

        author = self.project.author

        def build(pr: Progress) -> None:
            # Build from sources if needed, on the worker; the UI thread opens it afterwards
            # (the project lock belongs to the thread that takes it).
            open_project(Path(folder), author=author, read_only=True, progress=pr).close()

        def opened(_result: Any) -> None:
            try:
                project = Project.open(folder, author=author)
            except PosewrightError as exc:
                self._error(str(exc))
                return
            window = MainWindow(project, owns_project=True)
            keep_open(window)
            window.show()
            self.close()

        self.run_long("Opening project", build, opened)

    def select_first_flag(self) -> None:
        """Select the joint of the frame's weightiest triage reason (for a first look)."""
        if self.frame_id is None:
            return
        triage = self.project.triage(self.frame_id)
        reasons = sorted(triage[1] if triage else [], key=lambda r: -float(r.get("weight") or 0))
        ids = {p.id for p in self.canvas.people}
        for r in reasons:
            pid, joints = r.get("person"), r.get("joints") or []
            if pid in ids and joints:
                self.canvas.select_joint(int(pid), int(joints[0]))
                return
            if pid in ids:
                self.canvas.select_person(int(pid))
                return


_OPEN_WINDOWS: set[MainWindow] = set()


def keep_open(window: MainWindow) -> None:
    """Hold a reference to a top-level window until it closes (Qt does not own it)."""
    _OPEN_WINDOWS.add(window)
    window.destroyed.connect(lambda *_: _OPEN_WINDOWS.discard(window))
    window.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
