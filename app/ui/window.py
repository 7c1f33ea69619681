"""The main window: Worklist (left), Canvas (centre), Owners (right), Ledger and Notes (bottom).

The window keeps the docks, menus, dialogs, long jobs and the wiring. What the user asked for
becomes edits in the Qt-free session (:mod:`app.session`: the editing and settling keys, the
walk), which applies them through the window's :meth:`MainWindow.apply` (read-only and the
reviewer's version refuse; errors are shown) to :meth:`app.store.Project.apply`; undo, redo and
return-to stay here. Which actions are enabled and what the status bar and the strips say are
the session's too (:mod:`app.session.actions`, :mod:`app.session.status`); the window copies
them into its widgets. It learns about every committed change through :class:`ProjectEvents`,
which turns the store's listener calls into a Qt signal, and then refreshes the session, the
models and the Canvas; nothing polls. DEVELOPERS.md, "Where a behaviour lives", maps it all.

The same window serves three situations, each with a strip above the Canvas
(:mod:`app.ui.strips`) that names it and offers its actions:

- *Reviewing a packet* (a project opened from a review packet, :mod:`app.review.review`): a
  Review menu records a decision per frame and sends the packet back.
- *A disputed frame* in the main project, after a returned packet was merged: the Canvas marks
  where mine and the reviewer's version differ and can show the reviewer's instead of mine;
  taking the reviewer's or keeping mine works per joint, per person or for the whole frame
  (:mod:`app.review.settle`), and settling ends the dispute.
- *Region mode*: the mouse draws, selects, reshapes and deletes ignore regions.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable
from functools import partial
from pathlib import Path
from typing import Any

from PySide6.QtCore import QEvent, QObject, Qt, QTimer, Signal
from PySide6.QtGui import QAction, QCloseEvent, QKeyEvent, QKeySequence
from PySide6.QtWidgets import (
    QApplication,
    QDialog,
    QDockWidget,
    QFileDialog,
    QLabel,
    QMainWindow,
    QMenu,
    QMessageBox,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)
from shiboken6 import isValid as shiboken_is_valid

from app.errors import Cancelled, EditRefused, PosewrightError
from app.jobs import add_images, add_video_frames
from app.model.edits import (
    AddNote,
    AddRegion,
    Edit,
)
from app.model.labels import FrameLabels, FrameState, Person
from app.model.skeleton import Skeleton
from app.parallel import check_workers
from app.progress import Progress
from app.review.review import is_review
from app.session import Session, Stop
from app.session.actions import Circumstances, action_states
from app.session.editing import TAG_WAIT_MS
from app.session.owners import OwnerRanking
from app.session.settling import Dispute
from app.session.status import (
    difference_text,
    dispute_strip,
    flags_text,
    owners_note,
    people_text,
    region_strip,
    review_strip,
    selection_text,
    state_text,
)
from app.session.timeline import Timeline
from app.store.project import Applied, Project
from app.ui.canvas import Canvas
from app.ui.images import ImageCache, ImageLoader
from app.ui.keys import KEYS, sequences, sheet_html
from app.ui.models import (
    LedgerModel,
    NotesModel,
    WorklistModel,
    video_position,
)
from app.ui.overlay import flags_from_reasons, palette_colour
from app.ui.panels import LedgerPanel, NotesPanel, OwnersPanel, WorklistPanel
from app.ui.settings import cache_bytes, settings
from app.ui.strips import Strip
from app.ui.timeline import TrackTimeline
from app.ui.work import Background, Job, MapsShelf, after_paint, describe_error, run_job
from app.wording import count, plural

log = logging.getLogger(__name__)

#: How long a first digit waits for a second one when there are ten or more people (ms).
DIGIT_WAIT_MS = TAG_WAIT_MS
#: How often a hosted project's Worklist looks again at the claims, some of which run out (ms).
CLAIMS_REFRESH_MS = 30_000


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
        self._typed_timer = QTimer(self)
        self._typed_timer.setSingleShot(True)
        self._typed_timer.setInterval(DIGIT_WAIT_MS)
        self._typed_timer.timeout.connect(self._commit_typed)
        #: The maps of the frames shown last and of the walk's next frame (read ahead).
        self.maps_shelf = MapsShelf(parent=self)
        #: The shown frame's labels as read (hosted projects), and the frame claimed.
        self._seen: FrameLabels | None = None
        self._claimed: int | None = None
        self._jobs: list[Any] = []
        self._closed = False
        #: The walk's own accept is being applied (:meth:`session_accept`), and the frame's
        #: reading that it deferred is still to do.
        self._walk_accepting = False
        self._deferred_reload = False
        #: The walk is showing its stop's frame: the selection's panels wait for the stop's.
        self._holding_selection = False
        self._remember_layout = restore_layout
        self._layout_restored = True
        self._panels_for: int | None = None
        #: Opened from a review packet: the reviewer's side (decisions, return).
        self.review_mode = is_review(project)

        self.actions_by_name: dict[str, QAction] = {}
        self._build_actions()
        self._menu_escape = _MenuEscape(self)

        self.canvas = Canvas(self.skeleton, self)
        self.strips = self._build_strips()
        centre = QWidget(self)
        centre.setObjectName("CanvasArea")
        column = QVBoxLayout(centre)
        column.setContentsMargins(0, 0, 0, 0)
        column.setSpacing(0)
        for strip in self.strips.values():
            column.addWidget(strip)
        column.addWidget(self.canvas, 1)
        column.addWidget(self._build_timeline())
        self.setCentralWidget(centre)
        self.worklist_model = WorklistModel(project, self, review=self.review_mode)
        self.ledger_model = LedgerModel(project, self)
        self.notes_model = NotesModel(project, self)
        self.worklist = WorklistPanel(self.worklist_model)
        if self.review_mode:
            # The state column also carries the decision; a reviewer has no triage to run.
            self.worklist.view.horizontalHeader().resizeSection(2, 128)
            self.worklist.hint.setText("The frames of the packet. Ctrl+1 looks right, Ctrl+2 "
                                       "query, Ctrl+3 ready for training; Ctrl+Shift+R sends "
                                       "the packet back.")
        self.owners = OwnersPanel(self.actions_by_name)
        #: The Qt-free state (app/session): the frame's names, the selection the Canvas
        #: shows, the walk.
        #: Where the session computes a changed frame's findings again (a worker thread).
        self.background = Background(self)
        self.session = Session(project, order=self.worklist.ordered_ids, apply=self.apply,
                               background=self.background, attempt=self._attempt)
        self.session.events.connect("stop", self._show_stop)
        self.session.events.connect("message", self._message)
        self.session.events.connect("refreshed", self._refreshed)
        self.session.events.connect("selection", self.canvas.selection_moved)
        self.session.events.connect("reveal", self.canvas.ensure_visible)
        self.session.events.connect("show", self.show_frame)
        self.canvas.selection = self.session.selection
        self.canvas.use_view(self.session.view)
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
        self.canvas.ownerChosen.connect(self.give_to_person)
        self.canvas.viewChanged.connect(self._view_changed)
        self.canvas.regionChanged.connect(self._region_changed)
        self.worklist.frameChosen.connect(self.show_frame)
        self.owners.personChosen.connect(self._owner_person_chosen)
        self.ledger.returnRequested.connect(self._return_to)
        self.ledger.scopeChanged.connect(self._ledger_scope)
        self.notes.noteSubmitted.connect(self._add_note)
        # A trip to a note, a menu or Owners ends with the keys back on the Canvas (Tab, the
        # arrows and the region keys work only there).
        self.notes.done.connect(self._back_to_canvas)
        self.owners.people.clicked.connect(self._back_to_canvas)

        if project.hosted:
            # Colleagues' claims run out without a word from the server: look again now and
            # then (their new claims arrive at once, as notifications).
            self._claims_timer = QTimer(self)
            self._claims_timer.setInterval(CLAIMS_REFRESH_MS)
            self._claims_timer.timeout.connect(self.worklist_model.reload_claims)
            self._claims_timer.start()
        self._restore_layout(restore_layout)
        self._apply_read_only()
        first = self.worklist.first_id()
        if first is not None:
            self.show_frame(first)
        else:
            self._selection_changed()
            self._update_status()

    @property
    def frame_id(self) -> int | None:
        """The frame shown (the session's; None before one is, and while being built)."""
        session = self.__dict__.get("session")
        return None if session is None else session.frame_id

    @property
    def owner_ranking(self) -> OwnerRanking | None:
        """The selected joint's owner and candidates (the session's)."""
        return self.session.owner_ranking

    @property
    def dispute(self) -> Dispute | None:
        """The open differences of the frame shown, when it is disputed (the session's)."""
        return self.session.dispute

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
        # What an editing or settling key does is the session's (app/session/editing.py,
        # app/session/settling.py); the session exists once the actions are triggered.
        def editing(name: str, *args: Any) -> Callable[[], Any]:
            return lambda: getattr(self.session.editing, name)(*args)

        def settling(name: str, *args: Any) -> Callable[[], Any]:
            return lambda: getattr(self.session.settling, name)(*args)

        handlers: dict[str, Callable[[], Any]] = {
            "next_frame": lambda: self.step_frame(1),
            "prev_frame": lambda: self.step_frame(-1),
            "mark_disputed": editing("toggle_state", FrameState.DISPUTED),
            "sign_off": editing("toggle_state", FrameState.SIGNED_OFF),
            "write_note": self._focus_note,
            "next_person": editing("step_person", 1),
            "prev_person": editing("step_person", -1),
            "next_in_track": lambda: self.step_track(1),
            "prev_in_track": lambda: self.step_track(-1),
            "carry_forward": self.carry_forward,
            "carry_frame": lambda: self.carry_forward(whole_frame=True),
            "clear_selection": self._escape,
            "give_best": editing("give_to_best"),
            "next_finding": lambda: self.session.step(1),
            "prev_finding": lambda: self.session.step(-1),
            "accept_fix": self.session_accept,
            "dismiss_finding": self.session_dismiss,
            "next_part": lambda: self.session.focus_part(1),
            "prev_part": lambda: self.session.focus_part(-1),
            "leave_out_part": lambda: self.session.leave_out(),
            "mark_visible": editing("set_visibility", 2),
            "mark_occluded": editing("set_visibility", 1),
            "mark_unlabeled": editing("set_visibility", 0),
            "place_joint": lambda: self.session.editing.place_joint(
                self.canvas.pointer_image_position()),
            "new_person": editing("new_person"),
            "split_person": editing("split_person"),
            "swap_sides": editing("swap_sides"),
            "merge_people": editing("start_merge"),
            "delete_person": editing("delete_person"),
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
            "add_images": self._add_images,
            "add_video": self._add_video,
            "prelabel": self._prelabel,
            "export_packet": self._export_packet,
            "merge_packet": self._merge_packet,
            "region_mode": self._toggle_region_mode,
            "show_theirs": self._toggle_theirs,
            "next_difference": settling("step", 1),
            "prev_difference": settling("step", -1),
            "take_theirs_joint": settling("take_theirs", "joint"),
            "take_theirs_person": settling("take_theirs", "person"),
            "take_theirs_frame": settling("take_theirs", "frame"),
            "keep_ours_joint": settling("keep_ours", "joint"),
            "keep_ours_person": settling("keep_ours", "person"),
            "keep_ours_frame": settling("keep_ours", "frame"),
            "settle_frame": settling("settle"),
            "decide_agree": lambda: self.decide("looks-right"),
            "decide_needs_change": lambda: self.decide("query"),
            "decide_signed_off": lambda: self.decide("ready"),
            "return_packet": self._return_packet,
            "show_blurred": self._toggle_blurred,
            "shortcuts": self.show_shortcuts,
            "quit": self.close,
        }
        for n in range(1, 10):
            handlers[f"give_{n}"] = lambda n=n: self._type_digit(str(n))
        checkable = {"focus_mode", "show_unlabeled", "show_tags", "region_mode", "show_theirs",
                     "show_blurred", "decide_agree", "decide_needs_change", "decide_signed_off"}
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
        self.actions_by_name["show_blurred"].setChecked(True)
        for name, short in (("new_person", "New person (N)"), ("split_person", "Split off (X)"),
                            ("mark_visible", "Visible (V)"), ("mark_occluded", "Occluded (O)"),
                            ("mark_unlabeled", "Unlabelled (U)"), ("swap_sides", "Swap L/R (S)"),
                            ("merge_people", "Merge\u2026 (M)"),
                            ("delete_person", "Delete person"),
                            ("show_theirs", "Reviewer's (B)"),
                            ("next_difference", "Next (J)"),
                            ("take_theirs_joint", "Take (A)"),
                            ("keep_ours_joint", "Keep mine (K)"),
                            ("settle_frame", "Settle (Shift+\u21b5)"),
                            ("region_mode", "Leave region mode (R)"),
                            ("decide_agree", "Looks right (Ctrl+1)"),
                            ("decide_needs_change", "Query (Ctrl+2)"),
                            ("decide_signed_off", "Ready (Ctrl+3)"),
                            ("return_packet", "Send back\u2026")):
            self.actions_by_name[name].setIconText(short)

    def _build_menus(self) -> None:
        a = self.actions_by_name
        bar = self.menuBar()
        review = (["decide_agree", "decide_needs_change", "decide_signed_off", None,
                   "show_blurred", None, "return_packet"] if self.review_mode else
                  ["show_theirs", "next_difference", "prev_difference", None,
                   "take_theirs_joint", "take_theirs_person", "take_theirs_frame", None,
                   "keep_ours_joint", "keep_ours_person", "keep_ours_frame", None,
                   "settle_frame"])
        menus = {
            "&Project": ["open_project", None, "add_images", "add_video", "prelabel", None,
                         "import_labels", "import_maps", "run_triage", None, "export_labels",
                         "export_targets", None, "export_packet", "merge_packet", None, "quit"],
            "&Edit": ["undo", "redo", None, "give_best", "mark_visible", "mark_occluded",
                      "mark_unlabeled", "place_joint", None, "new_person", "split_person",
                      "swap_sides", "merge_people", "delete_person", None, "region_mode"],
            "&Frame": ["next_frame", "prev_frame", "next_in_track", "prev_in_track", None,
                       "mark_disputed", "sign_off", "write_note", "carry_forward",
                       "carry_frame", None,
                       "next_person", "prev_person", "clear_selection"],
            "&View": ["focus_mode", "show_unlabeled", "show_tags", None, "fit", "actual_size",
                      "zoom_in", "zoom_out"],
            "&Review": review,
            "&Help": ["shortcuts"],
        }
        for title, names in menus.items():
            menu = bar.addMenu(title)
            menu.installEventFilter(self._menu_escape)
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

    def _build_strips(self) -> dict[str, Strip]:
        a = self.actions_by_name
        return {
            "review": Strip("review", [a["decide_agree"], a["decide_needs_change"],
                                       a["decide_signed_off"], a["return_packet"]]),
            "dispute": Strip("dispute", [a["show_theirs"], a["next_difference"],
                                         a["take_theirs_joint"], a["keep_ours_joint"],
                                         a["settle_frame"]]),
            "regions": Strip("regions", [a["region_mode"]]),
        }

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
        self.background.shutdown()
        self.maps_shelf.shutdown()
        for job in list(self._jobs):
            if not shiboken_is_valid(job):  # finished and already deleted by Qt
                continue
            job.cancel()
            job.wait()
        if self._owns_project:
            try:
                self.project.release_claim()
            except PosewrightError as exc:  # the server may be gone; the claim runs out
                log.warning("%s", exc)
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
        people = self._read_people(frame.id)
        flags = self._flags(frame.id)
        # The session holds the frame, its people and the selection; the Canvas shows them.
        self.session.open_frame(frame.id, people, flags)
        if self.session.current is None:
            self.session.fold_frame(frame.id)  # for the walk's first card here, on the worker
        decoded = self.loader.request(frame.id, self.project.image_path(frame), urgent=True)
        self.canvas.set_frame(frame, decoded=decoded)
        self._load_frame_extras()
        # The neighbours are decoded once this frame is on screen (framePainted): on a busy
        # machine their decoding would compete with the frame the annotator is waiting for.
        self.owners.people_model.set_people(self.canvas.people, flags, self.canvas.colours)
        if self.dispute is not None:
            self.canvas.select_joint(*self.dispute.joints[0])  # where the settling starts
        self.worklist.show_frame(frame.id)
        self._selection_changed()
        self._update_status()
        # The Ledger and Notes follow a moment later, after the Canvas has shown the frame.
        self._panels_for = frame.id
        QTimer.singleShot(0, self._refresh_side_panels)

    def _read_people(self, frame_id: int) -> list[Person]:
        """The frame's people as the Canvas will show them. On a hosted project the labels
        read are kept as what this annotator saw: edits are planned from them, and refused if
        a colleague changed what they change meanwhile. Opening a frame there claims it."""
        if not self.project.hosted:
            self._seen = None
            return self.project.people(frame_id)
        self._seen = self.project.labels(frame_id)
        if frame_id != self._claimed and not self.project.read_only:
            self._claimed = frame_id
            try:
                self.project.claim(frame_id)
            except PosewrightError as exc:
                self._message(f"not claimed: {exc}")
        return list(self._seen.people.values())

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
        if not triage:
            return {}
        return flags_from_reasons(triage[1], grouping=self.project.frame(frame_id).grouping)

    def _reload_frame(self) -> None:
        """The current frame's labels changed: refresh the Canvas, Owners and Notes."""
        if self.frame_id is None:
            return
        frame = self.project.frame(self.frame_id)
        people = self._read_people(frame.id)
        flags = self._flags(frame.id)
        self.canvas.frame = frame
        self.session.reload_frame(people, flags)
        self._load_frame_extras()
        self.owners.people_model.set_people(self.canvas.people, flags, self.canvas.colours)
        self.notes_model.set_frame(frame.id, {p.id: n + 1 for n, p in enumerate(people)})
        self._selection_changed()
        self._update_status()

    def _load_frame_extras(self) -> None:
        """The shown frame's ignore regions and, when it is disputed, its differences."""
        frame = self.canvas.frame
        if frame is None:
            return
        self.canvas.set_regions([(rid, polys) for rid, polys, _ in
                                 self.project.regions(frame.id)])
        # The session hands the dispute to the view the Canvas draws (app/session/view.py).
        self.session.read_dispute(frame, self.canvas.ours, settles=not self.review_mode)
        self.actions_by_name["show_theirs"].setChecked(self.canvas.showing_theirs)
        self.canvas.blurred = self.session.read_blurred(frame.id) if self.review_mode else None
        self._update_strips()

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
            message = f"image {status}: {self.project.image_path(frame)}"
            if self.review_mode and status == "missing":
                message = "the packet came without this frame's image (labels only)"
            self.canvas.set_image(None, message)
            self._prefetch(frame_id)

    # ------------------------------------------------------------------ store changes

    def _on_changed(self, kind: str, frame_ids: frozenset[int]) -> None:
        if self._closed:
            return
        if kind == "claims":
            self.worklist_model.reload_claims()
            return
        if kind in ("import", "frames", "triage"):
            self.session.findings_changed(labels=kind != "triage")
            self.worklist_model.reload()
            if self.frame_id is not None:
                self.worklist.show_frame(self.frame_id)
        else:
            self.session.labels_changed(sorted(frame_ids))
            self.worklist_model.refresh_states(sorted(frame_ids))
        if self.frame_id is None:
            first = self.worklist.first_id()
            if first is not None:
                self.show_frame(first)
                return
        current = self.frame_id in frame_ids or kind in ("import", "frames")
        if current and self._walk_accepting and kind == "edit":
            # The walk's own accept: the step that follows shows the next stop, in this
            # frame (then it is read again, :meth:`_show_stop`) or in another (which is
            # read instead); reading this one now would be work thrown away.
            self._deferred_reload = True
            self._update_actions()
            return
        if current:
            if kind in ("import", "frames"):  # maps come only with an import
                self.maps_shelf.clear()
            self._reload_frame()
        if current or self.ledger_model.whole_project or kind == "import":
            self.ledger_model.reload()
        self._update_actions()
        self._update_status()

    # ------------------------------------------------------------------ applying edits

    def apply(self, edit: Edit) -> Applied | None:
        """Apply an edit through the store; a refusal goes to the status bar, any other error
        to a message box. Returns what the store did, or None."""
        refused = self.session.refuses(edit)  # read-only, or the reviewer's version shown
        if refused:
            self._message(refused)
            return None
        try:
            done = self.project.apply(edit, seen=self._seen)
            self._propose_carry(done)
            return done
        except EditRefused as exc:
            self._message(f"not done: {exc}")
        except PosewrightError as exc:
            self._error(str(exc))
        return None

    def _attempt(self, fn: Callable[[], Any]) -> tuple[bool, Any]:
        """Run a back-end call that changes the project (settling, decisions) as the window
        runs an edit: read-only and refusals go to the status bar, other errors to a box."""
        if self.project.read_only:
            self._message(f"read-only: {self.project.read_only_reason}")
            return False, None
        try:
            return True, fn()
        except EditRefused as exc:
            self._message(f"not done: {exc}")
        except PosewrightError as exc:
            self._error(str(exc))
        return False, None

    def _canvas_edit(self, edit: Edit) -> None:
        done = self.apply(edit)
        if done is not None and isinstance(done.edit, AddRegion):
            self.canvas.select_region(done.edit.region_id)
            self._message("ignore region added (Ctrl+Z takes it back)")

    def _selection(self) -> tuple[int | None, list[tuple[int, int]], int | None]:
        return self.frame_id, self.canvas.selected_joints, self.canvas.selected_person

    def give_to_person(self, target: int) -> None:
        """Give the selected joint(s) to person ``target`` (the session's intent)."""
        self.session.editing.give_to(target)

    def _merge_picked(self, other: int) -> None:
        self.statusBar().clearMessage()
        self.session.editing.merge_with(other)

    def _add_note(self, text: str) -> None:
        if self.frame_id is None:
            return
        person = self.canvas.selected_person
        if self.apply(AddNote(self.frame_id, text, person_id=person)) is not None:
            self.notes.entry.clear()
            self.notes.view.scrollToBottom()
            self._back_to_canvas()

    def _back_to_canvas(self, *_args: Any) -> None:
        self.canvas.setFocus(Qt.FocusReason.OtherFocusReason)

    def undo(self) -> None:
        self.session.undo()  # shows the frame it changed (the session's show event)
        self._update_actions()

    def redo(self) -> None:
        self.session.redo()
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
                      f"rewound to ledger entry {seq} (Undo takes it back)")

    # ------------------------------------------------------------------ digits

    def _type_digit(self, digit: str) -> None:
        """A tag's digit (the session's rule, :meth:`app.session.editing.Editing.type_digit`);
        the window's timer waits for the next one."""
        if self.session.editing.type_digit(digit):
            self._typed_timer.start()
        else:
            self._typed_timer.stop()

    def _commit_typed(self) -> None:
        self._typed_timer.stop()
        self.session.editing.commit_typed()

    def _cancel_typing(self) -> None:
        self._typed_timer.stop()
        self.session.editing.cancel_typing()

    def _fit_or_digit(self) -> None:
        if self.session.editing.typed:
            self._type_digit("0")
        else:
            self.canvas.fit()

    # ------------------------------------------------------------------ selection

    def step_track(self, step: int) -> None:
        """Go to the next (1) or previous (-1) frame of the selected person's track, with the
        same track's person selected there."""
        from app.jobs_tracks import track_step

        pid = self.canvas.selected_person
        if self.frame_id is None or pid is None:
            self._message("select a person on a track first (run `posewright track`)")
            return
        found = track_step(self.project, self.frame_id, pid, step)
        if found is None:
            self._message("no later frame on this track" if step > 0 else
                          "no earlier frame on this track")
            return
        fid, there, place, length = found
        self.show_frame(fid)
        self.canvas.select_person(there)
        track = next((p.track for p in self.canvas.people if p.id == there), None)
        self._message(f"track {track}: frame {place} of {length}")

    def carry_forward(self, whole_frame: bool = False) -> None:
        """Carry the newest correction (with ``whole_frame``: every correction of its frame)
        to the frames around it that show the same error, as one undo step, and say where
        the batch ends."""
        from app.jobs_tracks import last_correction, propose_carry, take_batch

        ok, batch = self._attempt(lambda: propose_carry(
            self.project, *last_correction(self.project)[1:], whole_frame=whole_frame))
        if not ok:
            return
        what = "corrections" if whole_frame else "correction"
        if not batch.edits:
            self._message(f"the {what} of frame {batch.origin} "
                          f"{'show' if whole_frame else 'shows'} in no frame around it")
            return
        ok, _ = self._attempt(lambda: take_batch(self.project, batch))
        if ok:
            self._show_carry(batch, taken=True)
            ends = [str(f) for f in (batch.stopped_backward, batch.stopped_forward)
                    if f is not None]
            self._message(f"carried the {what} of frame {batch.origin} to "
                          f"{count(len(batch.edits), 'frames')}"
                          + (f"; the error is absent from frame {' and '.join(ends)}"
                             if ends else ""))

    # ------------------------------------------------------------------ the timeline

    def _build_timeline(self) -> TrackTimeline:
        """The timeline under the Canvas (:mod:`app.ui.timeline`) over its Qt-free state
        (:mod:`app.session.timeline`), and its wiring: a click goes to a frame of the track,
        the wheel and the chevrons scroll, the store's changes are read again."""
        self.timeline = Timeline(self.project)
        self.track_timeline = TrackTimeline(self)
        #: The track the timeline follows while no one is selected (a frame where the track
        #: has no one, reached from the timeline).
        self._followed_track: int | None = None
        self.track_timeline.cellChosen.connect(self._timeline_chosen)
        self.track_timeline.scrollRequested.connect(self._timeline_scrolled)
        self.track_timeline.resized.connect(self._update_timeline)
        self.events.changed.connect(self._timeline_changed)
        return self.track_timeline

    def _update_timeline(self) -> None:
        """Show the selected person's track (or the track followed) around the frame."""
        if not hasattr(self, "worklist_model") or self._closed:
            return  # still being built
        pid = self.canvas.selected_person
        span = self.track_timeline.cells_that_fit()
        strip = None
        try:
            if pid is not None:
                strip = self.timeline.strip(self.frame_id, pid, span)
            elif self._followed_track is not None and self.frame_id is not None:
                strip = self.timeline.strip(self.frame_id, None, span,
                                            track=self._followed_track)
        except PosewrightError:
            log.exception("building the timeline failed")
        if strip is not None:
            self._followed_track = strip.track
        colour = None
        if pid is not None and pid in self.canvas.colours:
            colour = palette_colour(self.canvas.colours[pid])
        hint = ("select a person to see their track here (Alt+Left and Alt+Right step "
                "along it)" if pid is None else
                "this person is on no track (the command posewright track links them)")
        self.track_timeline.show_strip(strip, colour, hint)
        self.worklist_model.set_marks(self.timeline.carry.worklist_marks())

    def _timeline_chosen(self, frame_id: int, person_id: int) -> None:
        """A cell was clicked: show its frame, with the track's person there selected."""
        if frame_id != self.frame_id:
            self.show_frame(frame_id)
        if person_id >= 0:
            self.canvas.select_person(person_id)
        else:
            self.canvas.clear_selection()
            self._message(f"track {self._followed_track} has no one in frame {frame_id}")

    def _timeline_scrolled(self, cells: int) -> None:
        self.timeline.scroll(cells)
        self._update_timeline()

    def _timeline_changed(self, kind: str, frame_ids: frozenset[int]) -> None:
        """The store changed: read the frames again; an edit ends the marks of a carried
        batch (the next correction proposes its own)."""
        if self._closed or kind == "claims":
            return
        if kind in ("import", "frames", "meta"):
            self.timeline.forget_all()
        else:
            self.timeline.forget(frame_ids)
        if kind != "triage":
            self.timeline.drop_carry()
        if not self._walk_accepting:  # else the step that follows shows it
            self._update_timeline()

    def _propose_carry(self, done: Applied | None) -> None:
        """After a correction of one frame, work out where carrying it would go on a worker
        thread (a batch can reach a hundred frames), then mark it and say so (Ctrl+Shift+C
        takes it); an edit made meanwhile makes the answer stale. The thread starts once the
        event loop turns again, after the repaint that shows the edit (:func:`after_paint`):
        running Python beside the UI thread, it shares the interpreter's lock, and started
        at once it slowed the walk's step that accepted a fix (into the next frame, tracks
        linked, the process's CPU, median: 52-53 ms against 29-30 ms deferred in alternated
        pairs; 54 against 23 ms in the walk bench, 3 December 2026)."""
        if done is None or done.group_id is None or not done.edit.changes_labels:
            return
        try:
            work = self.timeline.propose_work(done.edit.frame_id, done.changes)
        except PosewrightError:
            log.exception("proposing to carry a correction failed")
            return
        if work is None:
            return
        token = self.timeline.begin_proposal()
        job = Job(lambda _progress: work(), self)
        job.succeeded.connect(lambda batch: self._carry_proposed(token, batch))
        job.failed.connect(lambda exc: log.warning("proposing to carry failed: %s", exc))
        self._jobs.append(job)
        job.finished.connect(lambda: self._jobs.remove(job) if job in self._jobs else None)
        job.finished.connect(job.deleteLater)
        after_paint(self.background, lambda: None if self._closed else job.start())

    def _carry_proposed(self, token: int, batch: Any) -> None:
        if not self._closed and self.timeline.offer(token, batch) and \
                self.timeline.carry.batch is not None:
            self._show_carry(self.timeline.carry.batch, taken=False)

    def _show_carry(self, batch: Any, taken: bool) -> None:
        self.timeline.carry.show(batch, taken)
        text = self.timeline.carry.text()
        if text and not taken:
            self._message(text)
        self._update_timeline()

    def _escape(self) -> None:
        self._cancel_typing()
        if self.session.editing.cancel_pick():
            return
        if self.canvas.region_mode:
            self.canvas.region_escape()
            return
        self.canvas.clear_selection()

    def _owner_person_chosen(self, pid: int) -> None:
        if self.canvas.pick_mode == "merge":
            self.statusBar().clearMessage()
        self.session.editing.choose_person(pid)

    def _selection_changed(self) -> None:
        if self._holding_selection:
            return  # the walk selects its stop next (_show_stop)
        pid = self.canvas.selected_person
        self.owners.show_person(pid)
        self.canvas.set_owners(self.session.rank_owners(self._frame_maps))
        self.owners.note.setText(owners_note(self.session))
        text = selection_text(self.session)
        differs = difference_text(self.session)
        if differs:
            text += f"<br><span style='color:#8a4b00'><b>differs</b> \u2014 {differs}</span>"
        self.owners.selection.setText(text)
        self._update_actions()
        self._update_timeline()

    # ------------------------------------------------------------------ the walk

    def session_accept(self) -> None:
        """Accept the shown card; the frame's labels are read again once, by the step that
        follows (:meth:`_on_changed` defers it), or here when the walk did not move."""
        self._cancel_typing()
        self._walk_accepting, self._deferred_reload = True, False
        try:
            self.session.accept()
        finally:
            self._walk_accepting = False
            self._catch_up()

    def _catch_up(self) -> None:
        """Read the frame shown again after the walk's own accept, if it is still shown
        (:meth:`_on_changed` deferred it); the Ledger too."""
        if self._deferred_reload and not self._closed:
            self._deferred_reload = False
            self._reload_frame()
            self.ledger_model.reload()

    def session_dismiss(self) -> None:
        self._cancel_typing()
        self.session.dismiss()

    def _refreshed(self, frame_id: int) -> None:
        """A changed frame's findings came back from the worker: say the shown frame's
        count again."""
        if frame_id == self.frame_id and not self._closed:
            self._update_status()

    def _show_stop(self, stop: Stop | None) -> None:
        """The walk arrived at a stop: show its frame, select what it is about, centre on it
        and say the finding beside it, with the fix previewed (None: nothing left to show)."""
        if stop is None:
            self.canvas.show_stop(None)
            self._update_actions()
            return
        if stop.frame_id == self.frame_id:
            self._catch_up()
        else:
            self._deferred_reload = False  # the frame accepted in is left: nothing to read
            # The stop's selection follows at once (select_stop): the panels that show the
            # selection are updated once, then, not for the new frame's empty one before.
            self._holding_selection = True
            try:
                self.show_frame(stop.frame_id)
            finally:
                self._holding_selection = False
        self.session.select_stop(stop)
        self.canvas.show_stop(stop, self.session.stop_place(stop))
        self._update_actions()
        self._update_status()
        self._read_ahead(stop.frame_id)

    def _frame_maps(self) -> Any:
        if self.frame_id is None:
            return None
        return self.maps_shelf.get(self.frame_id, partial(self._read_maps, self.frame_id))

    def _read_maps(self, frame_id: int) -> Any:
        if self.project.maps_path(frame_id) is None:
            return None
        try:
            from app.jobs_analysis import load_maps
        except ImportError:
            return None
        return load_maps(self.project, self.project.frame(frame_id))

    def _read_ahead(self, frame_id: int) -> None:
        """Read the maps of the frame the walk goes to next on a worker, so that its Owners
        ranking finds them in memory (the paths are read here, the file there)."""
        nxt = self.session.walk.following(frame_id)
        if nxt is None or not self.maps_shelf.wants(nxt):
            return
        where = self.project.maps_path(nxt)
        if where is None:
            return
        try:
            from app.jobs_analysis import _usable_maps
        except ImportError:
            return
        self.maps_shelf.ahead(nxt, partial(_usable_maps, str(where[0]),
                                           self.project.frame(nxt), self.skeleton))

    # ------------------------------------------------------------------ ignore regions

    def _toggle_region_mode(self) -> None:
        on = self.actions_by_name["region_mode"].isChecked()
        self._cancel_typing()
        self.canvas.set_region_mode(on)
        if on:
            self.canvas.setFocus()

    def _region_changed(self) -> None:
        self.actions_by_name["region_mode"].setChecked(self.canvas.region_mode)
        self._update_strips()
        self._update_status()

    # ------------------------------------------------------------------ settling a dispute

    def _toggle_theirs(self) -> None:
        want = self.actions_by_name["show_theirs"].isChecked()
        shown = self.canvas.show_theirs(want)  # leaves region mode (the view's rule)
        if want and not shown:
            self._message("this frame has no reviewer's version to show")
        self.owners.people_model.set_people(self.canvas.people, self.canvas.flags,
                                            self.canvas.colours)
        self._selection_changed()
        self._update_strips()

    # ------------------------------------------------------------------ reviewing a packet

    def decide(self, decision: str) -> None:
        """Record the reviewer's decision on the frame (the session's), then show it."""
        self.session.decide(decision)
        self._update_actions()
        self._update_status()

    def _return_packet(self) -> None:
        from app.review.review import return_packet

        if not self.review_mode:
            return
        self.run_long("Sending the packet back", lambda _pr: return_packet(self.project),
                      self._packet_returned)

    def _packet_returned(self, path: Any) -> None:
        self._message(f"wrote {path}", 0)
        self._inform(f"Wrote the reviewed packet:\n\n{path}\n\nSend it to whoever sent you "
                     "the packet; they merge it with Project \u25b8 Merge a packet sent back.")

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

    def _toggle_blurred(self) -> None:
        self.canvas.show_blurred = self.actions_by_name["show_blurred"].isChecked()
        blurred = self.canvas.blurred
        if self.canvas.show_blurred:
            self._message(blurred.line() if blurred is not None else
                          "the packet's image of this frame was not blurred")
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
        """Enable the actions and set the toggles as the session's rules say
        (:func:`app.session.actions.action_states`)."""
        ranking = self.session.owner_ranking
        frame = self.canvas.frame
        states = action_states(self.session, Circumstances(
            read_only=self.project.read_only, review=self.review_mode,
            can_undo=not self.project.read_only and self.project.can_undo(),
            can_redo=not self.project.read_only and self.project.can_redo(),
            has_frames=bool(self.worklist_model.total()),
            best_owner=ranking is not None and ranking.best is not None,
            frame_state=frame.state if frame is not None and self.frame_id is not None
            else None,
            decision=self._decision()))
        a = self.actions_by_name
        for name, on in states.enabled.items():
            a[name].setEnabled(on)
        for name, on in states.checked.items():
            a[name].setChecked(on)

    def _decision(self) -> str | None:
        """The reviewer's decision on the frame shown (review mode), else None."""
        return self.session.decision()

    def _update_strips(self) -> None:
        """The strips over the Canvas say what the session says (:mod:`app.session.status`)."""
        frame = self.canvas.frame
        if self.review_mode and frame is not None:
            packet = self.project.folder.name.removesuffix(".review") + ".zip"
            self.strips["review"].say(*review_strip(packet, self._decision()))
        else:
            self.strips["review"].say("")
        self.strips["dispute"].say(*dispute_strip(
            self.session, frame.state if frame is not None else None, self.review_mode))
        c = self.canvas
        self.strips["regions"].say(region_strip(c.region_mode, len(c.regions), c.drafting,
                                                c.selected_region))

    def _update_status(self) -> None:
        shown = self.worklist_model.rowCount()
        total = self.worklist_model.total()
        if self.frame_id is None:
            self.status_frame.setText(f"no frame (0 of {total})")
        else:
            frame = self.canvas.frame
            row = self.worklist_model.position_in_all(self.frame_id)
            pos = (row + 1) if row is not None else 0
            name = frame.file_name if frame is not None else ""
            video = video_position(frame) if frame is not None else ""
            self.status_frame.setText(f"frame {pos} of {total} \u00b7 {name}"
                                      + (f" \u00b7 {video}" if video else ""))
            self.status_frame.setToolTip(
                f"{count(shown, 'frames')} shown by the Worklist filters" if shown != total
                else "")
        self.status_people.setText(people_text(len(self.session.people),
                                               len(self.canvas.regions)))
        stops = None if self.frame_id is None else self.session.known_stops(self.frame_id)
        self.status_flags.setText(flags_text(self.session.view.flags, stops))
        frame = self.canvas.frame
        self.status_state.setText(state_text(
            frame.state if frame is not None else None, self.review_mode,
            self._decision() if self.review_mode and frame is not None else None))
        self._update_strips()
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
        box.setObjectName("ErrorBox")
        box.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        box.open()

    def _inform(self, text: str) -> None:
        box = QMessageBox(QMessageBox.Icon.Information, "Posewright", text,
                          QMessageBox.StandardButton.Ok, self)
        box.setObjectName("InfoBox")
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
            self.run_long("Importing network maps",
                          lambda pr: fn(self.project, folder, pr, workers=check_workers(None)),
                          lambda _r: self._message("network maps imported"))

    def _run_triage(self) -> None:
        fn = self._analysis_job("run_triage")
        if fn is not None:
            self.run_long("Running triage",
                          lambda pr: fn(self.project, progress=pr, workers=check_workers(None)),
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

            self.run_long("Exporting labels", job, lambda stats: self._exported(
                f"wrote {path}: {count(stats['images'], 'images')}, "
                f"{count(stats['people'], 'people')}", stats))

    def _export_targets(self) -> None:
        fn = self._analysis_job("export_targets")
        folder = fn and QFileDialog.getExistingDirectory(self, "Export training targets to",
                                                         str(self.project.folder))
        if fn and folder:
            self.run_long("Exporting training targets",
                          lambda pr: fn(self.project, folder, progress=pr,
                                        workers=check_workers(None)),
                          lambda stats: self._exported(
                              f"training targets of {count(stats['frames'], 'frames')} "
                              f"written to {folder}", stats))

    def _exported(self, text: str, stats: dict[str, Any]) -> None:
        """Say what an export wrote and what it left out (corrected and signed-off frames are
        exported, the command line's default); warn about what nobody checked."""
        from app.jobs import export_warnings, left_out_note

        note = left_out_note(stats)
        self._message(text + (f"; {note}" if note else ""), 0)
        warnings = export_warnings(stats)
        if warnings:
            self._inform("\n".join(line[:1].upper() + line[1:] + "." for line in warnings))

    def _frames_added(self, frames: Any, what: str) -> None:
        if not frames:
            self._message(f"no new frames: the project has every {what} already")
            return
        self._message(f"added {count(len(frames), 'frames')} from {what}")
        self.show_frame(frames[0].id)

    def _add_images(self) -> None:
        folder = QFileDialog.getExistingDirectory(self, "Add the images of a folder",
                                                  str(self.project.folder))
        if folder:
            self.run_long("Adding images", lambda pr: add_images(self.project, folder, pr),
                          lambda frames: self._frames_added(frames, f"image of {folder}"))

    def _add_video(self) -> None:
        from app.ui.dialogs import VideoDialog

        dialog = VideoDialog(self.project.folder, self)
        dialog.setObjectName("VideoDialog")
        dialog.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)

        def go() -> None:
            video, every, start, end = dialog.values()
            name = Path(video).name
            self.run_long(f"Adding frames of {name}",
                          lambda pr: add_video_frames(self.project, video, every, start, end,
                                                      progress=pr),
                          lambda frames: self._frames_added(frames, f"frame of {name} asked "
                                                                    "for"))

        dialog.accepted.connect(go)
        dialog.open()

    def _prelabel(self) -> None:
        from app.ui.dialogs import PrelabelDialog

        frames = self.project.frames()
        counts = {"all": len(frames),
                  "untouched": sum(f.state is FrameState.UNTOUCHED for f in frames),
                  "this": int(self.frame_id is not None)}
        dialog = PrelabelDialog(self.project.folder, counts, self)
        dialog.setObjectName("PrelabelDialog")
        dialog.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)

        def go() -> None:
            from app.inference import prelabel

            model, config, which = dialog.values()
            chosen: list[int] | None = None
            if which == "untouched":
                chosen = [f.id for f in self.project.frames()
                          if f.state is FrameState.UNTOUCHED]
            elif which == "this" and self.frame_id is not None:
                chosen = [self.frame_id]
            self.run_long(f"Pre-labelling with {Path(model).name}",
                          lambda pr: prelabel(self.project, model, config, chosen, pr,
                                              workers=check_workers(None)),
                          self._prelabelled)

        dialog.accepted.connect(go)
        dialog.open()

    def _prelabelled(self, stats: dict[str, Any]) -> None:
        parts = [f"pre-labelled {count(stats.get('frames', 0), 'frames')}: "
                 f"{count(stats.get('people', 0), 'people')} found"]
        if stats.get("frames kept"):
            parts.append(f"{count(stats['frames kept'], 'frames')} kept their people")
        if stats.get("unreadable"):
            parts.append(f"{count(stats['unreadable'], 'unreadable image')} skipped")
        self._message("; ".join(parts) + " (Ctrl+T ranks the frames)", 0)

    def _export_packet(self) -> None:
        from app.ui.dialogs import PacketDialog

        frames = self.project.frames()
        counts: dict[str, int] = {}
        for f in frames:
            counts[f.state.value] = counts.get(f.state.value, 0) + 1
        current = self.frame_id

        def chosen(which: str) -> list[Any]:
            from app.review.packet import select_frames

            return [self.project.frame(current)] if which == "this" and current is not None \
                else select_frames(self.project, which)

        def risks(which: str, images: str) -> list[str]:
            from app.review.packet import blur_risks

            return blur_risks(self.project, chosen(which), images)

        dialog = PacketDialog(self.project.folder, counts, self.frame_id, self, risks)
        dialog.setObjectName("PacketDialog")
        dialog.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)

        def go() -> None:
            from app.review.packet import export_packet

            which, images, reviewer, out, accept_risk = dialog.values()

            def job(pr: Progress) -> dict[str, Any]:
                return export_packet(self.project, out, chosen(which), images=images,
                                     reviewer=reviewer, progress=pr, accept_risk=accept_risk)

            self.run_long("Writing the review packet", job,
                          lambda stats: self._packet_written(out, stats))

        dialog.accepted.connect(go)
        dialog.open()

    def _packet_written(self, out: str, stats: dict[str, Any]) -> None:
        text = (f"Wrote the review packet:\n\n{out}\n\n{count(stats['frames'], 'frames')}, "
                f"{count(stats['people'], 'people')}, {count(stats['images'], 'images')}.")
        if stats.get("missing_images"):
            text += f"\n{count(stats['missing_images'], 'frames')} went without their image."
        if stats.get("outside_images"):
            text += (f"\n{count(stats['outside_images'], 'frames')} went without their image: "
                     "it is a link to a file outside the images folder.")
        if stats.get("unplaced_heads"):
            text += (f"\n{count(stats['unplaced_heads'], 'people')} with no labelled joint: "
                     "no head to blur.")
        if stats.get("risks"):
            text += "\nSent accepting the risk:\n" + "\n".join(stats["risks"][:6]) + \
                ("\n\u2026" if len(stats["risks"]) > 6 else "")
        self._message(f"wrote {out}")
        self._inform(text)

    def _merge_packet(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Merge a review packet sent back",
                                              str(self.project.folder),
                                              "Review packets sent back (*.zip)")
        if path:
            from app.review.merge import merge_packet

            self.run_long("Merging the packet sent back",
                          lambda pr: merge_packet(self.project, path, progress=pr),
                          self._packet_merged)

    def _packet_merged(self, report: Any) -> None:
        if report.already_merged:
            when = time.strftime("%Y-%m-%d %H:%M", time.localtime(report.merged_at or 0))
            self._inform(f"This packet was merged already, on {when}; nothing changed.")
            return
        text = (f"Merged the review by {report.reviewer}: {count(report.frames, 'frames')}, "
                f"{count(report.joints_taken, 'joints')} taken, "
                + (f"{count(report.tracks_taken, 'tracks')} taken, " if report.tracks_taken
                   else "")
                + f"{count(report.people_added, 'people')} added, "
                f"{report.people_deleted} deleted, {count(report.notes_added, 'notes')}.")
        if report.disputed:
            n = len(report.disputed)
            text += (f"\n\n{count(n, 'frame')} {plural(n, 'is', 'are')} disputed: "
                     + ", ".join(map(str, report.disputed[:12]))
                     + ("\u2026" if len(report.disputed) > 12 else "")
                     + ". The first is shown; B flips between mine and the reviewer's, A "
                       "takes the reviewer's, K keeps mine, Shift+Return settles.")
            self.show_frame(report.disputed[0])
        tracks = [c for c in report.conflicts if c["kind"] == "track"]
        if tracks:
            text += (f"\n\n{count(len(tracks), 'person', 'people')} kept my track where the "
                     "reviewer set another ("
                     + ("frame " if len(tracks) == 1 else "frames ")
                     + ", ".join(str(c["frame"]) for c in tracks[:12]) + ").")
        if not report.base_checked:
            text += ("\n\nThe packet was not recorded when it was sent, so its base labels "
                     "could not be checked.")
        self._message(f"merged the review by {report.reviewer}")
        self._inform(text)

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
        """Walk to the frame's first finding (for a first look): what W does. On a disputed
        frame the first difference stays selected instead, as opening it leaves it: settling
        comes first there."""
        if self.frame_id is not None and self.dispute is None:
            self.session.step(1)


class _MenuEscape(QObject):
    """Esc closes a menu of the window's menu bar and nothing more.

    Qt's own Esc leaves the menu bar holding the keyboard, title highlighted, so the next Tab
    or arrow meant for the Canvas would walk the menu bar or the panels instead. Here the keys
    go back to where they were before the menu opened (the Canvas when the menu bar had them).
    """

    def __init__(self, window: MainWindow):
        super().__init__(window)
        self._window = window

    def eventFilter(self, watched: QObject, event: QEvent) -> bool:
        if event.type() == QEvent.Type.KeyPress and isinstance(watched, QMenu) \
                and isinstance(event, QKeyEvent) and event.key() == Qt.Key.Key_Escape \
                and event.modifiers() == Qt.KeyboardModifier.NoModifier:
            watched.hide()
            if QApplication.focusWidget() is self._window.menuBar():
                self._window.canvas.setFocus(Qt.FocusReason.OtherFocusReason)
            return True
        return super().eventFilter(watched, event)


_OPEN_WINDOWS: set[MainWindow] = set()


def keep_open(window: MainWindow) -> None:
    """Hold a reference to a top-level window until it closes (Qt does not own it)."""
    _OPEN_WINDOWS.add(window)
    window.destroyed.connect(lambda *_: _OPEN_WINDOWS.discard(window))
    window.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)

