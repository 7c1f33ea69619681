"""One annotator's session over an open project, without Qt.

:class:`Session` holds what the window used to keep in widget attributes: the frame on
screen, its people (held once, by its :class:`~app.session.view.View`) and how they are named,
the selection, the owner ranking of the selected joint, the disputed frame's differences, the
stops of the walk and the cursor over them. It turns the annotator's intents into edits applied
through the store and into messages: the walk's (next finding, accept, dismiss, skip) here,
undo and redo, a reviewer's decision, the editing keys in :attr:`Session.editing`
(:mod:`app.session.editing`) and the settling keys in :attr:`Session.settling`
(:mod:`app.session.settling`); it tells whoever listens through plain :class:`Events`. The
window shows what it says; tests drive it without a window. DEVELOPERS.md, "Where a behaviour
lives", maps it all.

Speed: stepping to the next stop reads nothing but the frame's cached stops. Accepting a fix
keeps the frame's other stops that are about other people (their fixes still apply: the store
refuses an edit whose labels moved) and starts computing the frame's findings again in the
background (the ``background`` runner the window gives: a worker thread whose result comes
back on the UI thread). Each walk edit of a frame raises its revision; a result computed for
an older revision is dropped. When the walk reaches the end of a frame it changed, the fresh
findings not yet passed are offered before it moves on, if they are in; if they are not, the
walk moves on at once and the ones that arrive later join that frame's list, and the walk
comes back to the frame after the last frame of its order (:meth:`Walk.revisit`). Without a
runner the recompute runs at once, in the caller's thread (the command line, the tests).
"""

from __future__ import annotations

import logging
from collections import defaultdict
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import replace
from functools import partial
from typing import Any

from app.analysis.triage.findings import Finding, labels_digest
from app.analysis.triage.temporal import within_reach
from app.errors import EditRefused, PosewrightError
from app.jobs_findings import accept_label, finding_order, time_findings
from app.model.edits import AddNote, DismissFinding, Edit, EditGroup, SetFrameState
from app.model.labels import Frame, FrameState, Person
from app.model.naming import Names
from app.review.review import is_review
from app.session.blurred import BlurredFrame, load_blurred
from app.session.editing import Editing
from app.session.events import Events
from app.session.owners import OwnerRanking, rank_owners
from app.session.selection import Selection
from app.session.settling import Dispute, Settling, load_dispute
from app.session.view import View
from app.session.walk import Stop, Walk, card_text, fold, folded_ahead, group_findings, ride
from app.store.project import Project
from app.wording import DECISION_WORDS, count

log = logging.getLogger(__name__)


#: Runs ``job()`` away from the caller's thread and later calls ``deliver(result)`` on the
#: caller's thread (the window's event loop): the session's only way to work in the background.
Background = Callable[[Callable[[], Any], Callable[[Any], None]], None]


#: At most this many frames' findings over time are read ahead past frames without findings
#: (ours: the walk's order seldom holds more empty frames in a row).
AHEAD = 4


def run_here(job: Callable[[], Any], deliver: Callable[[Any], None]) -> None:
    """The default :data:`Background`: run the job now and deliver its result at once."""
    deliver(job())


class Session:
    """The walk and the frame it shows, over one project.

    Parameters
    ----------
    project
        The open project.
    order
        Gives the frame ids in Worklist order (filters applied); default: by suspicion, as
        the stored triage ranks them, then by id.
    apply
        Applies an edit and returns what the store did, or None when it was not done (the
        window passes its own, which reports refusals); default: the project's.
    background
        Where a changed frame's findings are computed again (:data:`Background`); default:
        at once, in the caller's thread (:func:`run_here`).
    attempt
        Runs a back-end call that changes the project other than by an edit (settling):
        returns ``(done, result)``; default :meth:`attempt`'s own (refusals said as
        messages). The window passes its own, which shows other errors in a box.

    Events
    ------
    ``stop(Stop | None)``
        The walk moved (None: it reached the end and the stop it was on is gone).
    ``message(str)``
        Something to tell the annotator.
    ``refreshed(int)``
        A frame the walk changed has its findings computed again (the result is in; its
        stops may have changed).
    ``show(int)``
        Show this frame (undo or redo changed a frame other than the one shown).
    ``reveal(x, y)``
        Bring this image point into view (a difference selected by the settling keys).
    ``selection()``
        An intent moved the selection (after an edit: onto a person split off, a joint
        given away, ...), or it forgot people no longer shown; the Canvas's own clicks
        change it without this event.
    """

    def __init__(self, project: Project, order: Callable[[], Sequence[int]] | None = None,
                 apply: Callable[[Edit], Any] | None = None,
                 background: Background | None = None,
                 attempt: Callable[[Callable[[], Any]], tuple[bool, Any]] | None = None):
        self.project = project
        self.skeleton = project.skeleton
        #: Opened from a review packet: the reviewer's side (decisions; no settling).
        self.review = is_review(project)
        self.events = Events()
        self.frame_id: int | None = None
        self.names = Names.of_frame(self.skeleton, [])
        #: What is selected in the frame (the Canvas shows and changes it).
        self.selection = Selection()
        #: The people the Canvas shows, their colours, and its modes (the Canvas is a view
        #: of this and turns gestures into its calls).
        self.view = View()
        #: The open differences of the frame shown, when it is disputed.
        self.dispute: Dispute | None = None
        #: What the editing keys do (app/session/editing.py) and the settling keys
        #: (app/session/settling.py).
        self.editing = Editing(self)
        self.settling = Settling(self)
        self._attempt = attempt
        #: The selected joint's owner and candidates (None without one joint selected, or
        #: while the reviewer's version shows): :meth:`rank_owners`.
        self.owner_ranking: OwnerRanking | None = None
        self.view.events.connect("people", self._forget_unshown)
        self._order = order or self._suspicion_order
        self._apply = apply or project.apply
        self.walk = Walk(lambda: self._order(), self.stops)
        self._stops: dict[int, list[Stop]] = {}
        #: Frames changed by the walk's own accepts since their findings were computed.
        self._dirty: set[int] = set()
        #: Per frame, the stops the walk went past (not offered again after a recompute).
        self._passed: dict[int, set[str]] = defaultdict(set)
        #: Per frame, the labels digest right after the walk's own last edit there.
        self._own: dict[int, str] = {}
        #: The frame shown, when an accept changed its labels and the step that follows
        #: reads them again only if it stays there (:meth:`_edited`).
        self._stale: int | None = None
        #: Frames the walk is editing right now (their change notices are its own).
        self._applying: set[int] = set()
        self._background = background or run_here
        #: Per frame, raised by every edit: a recompute's result for an older one is stale.
        self._revision: dict[int, int] = defaultdict(int)
        #: Per frame the walk changed, its stops computed again for the current revision.
        self._fresh: dict[int, list[Stop]] = {}
        #: Frames whose findings are being computed again for their current revision.
        self.pending: set[int] = set()
        #: Frames the walk left before their recompute came in.
        self._left: set[int] = set()
        #: Frames the walk comes back to after its last: their stops passed stay passed.
        self._revisits: set[int] = set()
        #: Whether anyone in the project is on a track (None: not read yet; read once, then
        #: set when a change of labels outside the walk puts someone on one); without
        #: tracks there are no findings over time to read.
        self._tracked: bool | None = None
        #: Per frame, its findings over time as last computed; they depend on the labels of
        #: the frames around, so the walk's own edit forgets those of the frames within its
        #: reach (:func:`app.analysis.triage.temporal.within_reach`) and any other change of
        #: labels forgets them all (triage run again, which changes no labels, keeps them).
        self._over_time: dict[int, list[Finding]] = {}
        #: The frame ids of each sequence in order, read when first needed (an import or
        #: new frames forget them).
        self._sequences: list[list[int]] | None = None
        #: Raised each time :attr:`_over_time` is forgotten: a read ahead computed before
        #: is stale.
        self._over_time_gen = 0
        #: The next frame's findings over time as they would be once the stop shown is
        #: accepted, read ahead on the worker (:meth:`_read_ahead_accept`): ``(token,
        #: findings)``, used by that accept if nothing changed meanwhile.
        self._ahead: tuple[tuple[Any, ...], list[Finding]] | None = None
        #: Per frame, cards folded ahead (:meth:`_fold_ahead`): ``(labels digest, {key of
        #: the card as found: the card folded})``.
        self._folds: dict[int, tuple[str, dict[str, Stop | None]]] = {}
        #: Frames whose cards are being folded ahead.
        self._folding: set[int] = set()
        #: How many such reads ahead are under way (the walk bench waits for them as for
        #: :attr:`pending`: a person reads the card meanwhile).
        self.reading_ahead = 0

    # ------------------------------------------------------------------ frame

    @property
    def people(self) -> list[Person]:
        """Our people of the frame shown, in tag order: the view holds them
        (:attr:`app.session.view.View.ours`; the people it shows may be the reviewer's)."""
        return self.view.ours

    def open_frame(self, frame_id: int, people: Sequence[Person] | None = None,
                   flags: Mapping[int, frozenset[int]] | None = None) -> None:
        """Show a frame: its people in tag order (read from the project unless given) with
        their triage flags (none unless given), nothing selected, no pick, colours given
        anew (:meth:`app.session.view.View.open`)."""
        self.frame_id = int(frame_id)
        people = list(self.project.people(frame_id) if people is None else people)
        self.names = Names.of_frame(self.skeleton, [p.id for p in people])
        self.selection.select_person(None)
        self.view.set_pick(None)
        self.view.open(people, flags or {})

    def reload_frame(self, people: Sequence[Person] | None = None,
                     flags: Mapping[int, frozenset[int]] | None = None) -> None:
        """The shown frame's labels changed (an edit, undo, a colleague): its people again
        (read from the project unless given), the flags kept unless given; those still shown
        keep their colours (:meth:`app.session.view.View.show`)."""
        if self.frame_id is None:
            return
        people = list(self.project.people(self.frame_id) if people is None else people)
        self.names = Names.of_frame(self.skeleton, [p.id for p in people])
        self.view.show(people, self.view.flags if flags is None else flags)

    def rank_owners(self, maps: Callable[[], Any] = lambda: None) -> OwnerRanking | None:
        """Rank the candidate owners of the joint selected last (:mod:`app.session.owners`),
        keep the ranking in :attr:`owner_ranking` and return it; ``maps`` gives the frame's
        network maps when a ranking needs them (None: judged by limb lengths). None without
        a joint, while the reviewer's version shows, or when the joint has no position; a
        failure is logged and gives None (it must not stop the annotator)."""
        joint = self.selection.joint
        ranking = None
        if joint is not None and self.frame_id is not None and not self.view.showing_theirs:
            try:
                ranking = rank_owners(self.view.people, joint[0], joint[1], self.skeleton,
                                      maps())
            except Exception:
                log.exception("ranking candidate owners failed")
        self.owner_ranking = ranking if ranking is not None and ranking.owner is not None \
            else None
        return self.owner_ranking

    def undo(self) -> int | None:
        """Undo the author's last action (one ledger group); see :meth:`_unwind`."""
        return self._unwind(self.project.undo, "undone", "nothing to undo")

    def redo(self) -> int | None:
        """Redo the action undone last; see :meth:`_unwind`."""
        return self._unwind(self.project.redo, "redone", "nothing to redo")

    def _unwind(self, fn: Callable[[], int | None], done: str, nothing: str) -> int | None:
        """Run undo or redo through :meth:`attempt`; when it changed a frame other than the
        one shown, ask for that frame (``show``), then say what was undone or redone. The
        ledger group, or None when nothing was done."""
        ok, group = self.attempt(fn)
        if not ok:
            return None
        if group is None:
            self.events.emit("message", nothing)
            return None
        entries = [e for e in self.project.history(limit=512) if e.group_id == group]
        frames = sorted({e.frame_id for e in entries if e.frame_id is not None})
        if frames and self.frame_id not in frames:
            self.events.emit("show", frames[0])  # show the annotator what just changed
        if entries:
            self.events.emit("message", f"{done}: {entries[0].summary.split(': ', 1)[-1]}")
        return group

    def decision(self) -> str | None:
        """The reviewer's decision on the frame shown (a review only; else None): one of
        :data:`app.wording.DECISION_WORDS`' keys."""
        if not self.review or self.frame_id is None:
            return None
        from app.review.review import decisions

        made = decisions(self.project).get(self.frame_id)
        return made.decision if made is not None else None

    def decide(self, decision: str) -> None:
        """Record the reviewer's decision on the frame shown (``looks-right``, ``query``,
        ``ready``); the same decision again withdraws it. Said as a message."""
        from app.review.review import set_decision

        if not self.review or self.frame_id is None:
            return
        fid = self.frame_id
        value = None if self.decision() == decision else decision
        ok, _ = self.attempt(lambda: set_decision(self.project, fid, value))
        if ok:
            self.events.emit("message", f"frame {fid}: " + (
                f"{DECISION_WORDS[decision]} (the same key again withdraws it)" if value
                else "decision withdrawn"))

    def refuses(self, edit: Edit) -> str | None:
        """Why an edit is not made here, or None: a read-only project takes none, and while
        the reviewer's version is shown only notes and the frame's state are edited."""
        if self.project.read_only:
            return f"read-only: {self.project.read_only_reason}"
        if self.view.showing_theirs and not isinstance(edit, (AddNote, SetFrameState)):
            return (f"showing {self.view.reviewer}'s version, which is not edited here: "
                    "B goes back to mine")
        return None

    def attempt(self, fn: Callable[[], Any]) -> tuple[bool, Any]:
        """Run a back-end call that changes the project (settling): ``(True, its result)``,
        or ``(False, None)`` when the project is read-only or the store refused it (said as
        a message)."""
        if self._attempt is not None:
            return self._attempt(fn)
        if self.project.read_only:
            self.events.emit("message", f"read-only: {self.project.read_only_reason}")
            return False, None
        try:
            return True, fn()
        except EditRefused as exc:
            self.events.emit("message", f"not done: {exc}")
            return False, None

    def _forget_unshown(self) -> None:
        """The view shows other people: the selection forgets those no longer shown."""
        if self.selection.keep_only(p.id for p in self.view.people):
            self.events.emit("selection")

    def select_joints(self, pairs: Sequence[tuple[int, int]]) -> None:
        """Select these joints (none: leave the selection) and tell the listeners."""
        if pairs:
            self.selection.select_joints(pairs)
            self.events.emit("selection")

    def select_person(self, person_id: int | None) -> None:
        """Select a person alone (None: nothing) and tell the listeners."""
        self.selection.select_person(person_id)
        self.events.emit("selection")

    def read_dispute(self, frame: Frame, ours: Sequence[Person],
                     settles: bool = True) -> Dispute | None:
        """Read the shown frame's open differences when it is disputed and ``settles`` (the
        main project settles; a reviewer does not), and give the view the reviewer's version
        and the marks (:meth:`app.session.view.View.set_dispute`). A damaged alternative is
        logged and read as none: it must not stop the annotator."""
        dispute = None
        if settles and frame.state is FrameState.DISPUTED:
            try:
                dispute = load_dispute(self.project, frame.id, ours)
            except PosewrightError:
                log.exception("reading the differences of frame %s failed", frame.id)
        self.dispute = dispute
        if dispute is None:
            self.view.set_dispute(None)
        else:
            self.view.set_dispute(dispute.theirs, dispute.ours_marks, dispute.theirs_marks,
                                  dispute.who)
        return dispute

    def read_blurred(self, frame_id: int) -> BlurredFrame | None:
        """Where the packet a review was opened from blurred a frame's image, and what placed
        each region (:mod:`app.session.blurred`); None outside a review or for an image not
        blurred. A record that does not read is logged and read as none."""
        try:
            return load_blurred(self.project, frame_id)
        except (PosewrightError, ValueError, TypeError):
            log.exception("reading the blurred regions of frame %s failed", frame_id)
            return None

    def _suspicion_order(self) -> list[int]:
        scores = {fid: t[0] for fid, t in self.project.triage_all().items()}
        return sorted((f.id for f in self.project.frames()),
                      key=lambda fid: (-scores.get(fid, float("-inf")), fid))

    # ------------------------------------------------------------------ stops

    def stops(self, frame_id: int) -> list[Stop]:
        """The frame's stops, worst first: its findings, or in a project without findings
        triage's reasons about people."""
        if frame_id not in self._stops:
            read = self._read_stops(frame_id)
            if frame_id in self._revisits:  # read again: still without the stops passed
                read = self._unpassed(frame_id, read)
            self._stops[frame_id] = read
        return self._stops[frame_id]

    def _read_stops(self, frame_id: int, fold: bool = False,
                    over_time: bool = True, riding: bool = True) -> list[Stop]:
        """The frame's stops read from the project: its stored findings (computed again when
        stale) and, in a project with tracks, its findings over time, grouped into stops.
        ``fold`` (on the worker only: it finds the frame's problems again up to
        :data:`~app.session.walk.FOLD_ROUNDS` times) folds into each person's card the
        fixes its own fixes expose (:func:`~app.session.walk.fold`); without it, the
        cards a fold read ahead for these very labels are used (:meth:`_fold_ahead`).
        ``over_time`` False uses only the findings over time already kept (computes none).
        ``riding`` (False: the stops as folded, keyed as :meth:`fold_frame` keeps them) lets
        a stop that only marks joints occluded ride on the frame's last card
        (:func:`~app.session.walk.ride`)."""
        digests = self.project.findings_digests()
        if not digests:
            return self._reason_stops(frame_id)
        labels = self.project.labels(frame_id)
        digest = labels_digest(labels)
        stored = self.project.findings(frame_id).get(frame_id)
        if stored is not None and digests.get(frame_id) == digest:
            found = [Finding.from_dict(d) for d in stored]
            if self._tracked is None:
                self._tracked = bool(self.project.tracks_by_frame())
            if self._tracked:
                # Findings over time are not stored (they depend on the frames around):
                # computed here for this frame alone, as current_findings adds them.
                if frame_id not in self._over_time and over_time:
                    self._over_time[frame_id] = time_findings(
                        self.project, [frame_id]).get(frame_id, [])
                kept = self._over_time.get(frame_id, [])
                if kept:
                    found = sorted(found + kept, key=finding_order)
        else:
            from app.jobs_findings import current_findings

            found = current_findings(self.project, [frame_id]).get(frame_id, [])
        stops = group_findings(frame_id, found)
        if fold:
            stops = self._fold(frame_id, stops, labels,
                               over_time=bool(self._tracked) and frame_id in self._over_time)
        else:
            memo = self._folds.get(frame_id)
            if memo is not None and memo[0] == digest:
                stops = folded_ahead(stops, memo[1])
        return ride(stops) if riding else stops

    def _fold(self, frame_id: int, stops: list[Stop], labels: Any,
              over_time: bool = False, places: bool = False) -> list[Stop]:
        """:func:`~app.session.walk.fold` on a frame's labels: each round applies the hosts'
        fixes to a copy of ``labels`` in memory and finds the frame's problems on it: its
        own findings, and (``over_time``: the stops hold the frame's findings over time)
        those over time when every edit keeps each person and track
        (:data:`~app.analysis.triage.temporal.JOINT_EDITS`; ``time_findings(...,
        instead=)``). ``places``: as :func:`~app.session.walk.fold` (None where a stop was
        merged into a card). A failure is logged and leaves the stops as they are."""
        from app.analysis.triage.temporal import JOINT_EDITS
        from app.jobs_findings import findings_of_frame

        try:
            frame = self.project.frame(frame_id)

            def find(edits: tuple[Edit, ...]) -> list[Finding]:
                after, _ = EditGroup(frame_id, edits).apply(labels)
                found = findings_of_frame(self.project, frame, after)
                if over_time and all(isinstance(e, JOINT_EDITS) for e in edits):
                    found += time_findings(self.project, [frame_id], instead={
                        frame_id: list(after.people.values())}).get(frame_id, [])
                return found

            known: list[Finding] = []
            if over_time:  # found before, whether or not the stops were read with them
                known = self._over_time.get(frame_id) or time_findings(
                    self.project, [frame_id]).get(frame_id, [])
            return fold(stops, find, known=known, places=places)
        except Exception:  # the cards stay as found; the log says why
            log.exception("folding the cards of frame %s failed", frame_id)
            return stops

    def _fold_ahead(self, frame_id: int) -> None:
        """Fold on the worker the cards of the frame the walk goes to after ``frame_id``
        (:meth:`_fold`), kept by the labels they were read from and by each card's key, so
        that the step into that frame shows them folded; a card whose key changed meanwhile
        (findings over time read again) is shown as found."""
        nxt = self.walk.following(frame_id)
        if nxt is not None:
            self.fold_frame(nxt)

    def fold_frame(self, nxt: int) -> None:
        """Fold a frame's cards on the worker (:meth:`_fold`) for the step that shows it
        (its findings over time read first, as :meth:`_read_ahead_over_time` does). The
        window asks it for a frame it shows before the walk starts there."""
        if nxt in self._folds or nxt in self._folding or not self.project.findings_digests():
            return
        current = self.walk.current
        if current is not None and current.frame_id == nxt:
            return  # shown already: its cards stay as they are until an accept
        self._folding.add(nxt)
        self.reading_ahead += 1
        token = self._revision[nxt]

        def job() -> tuple[str, dict[str, Stop | None]] | None:
            try:
                self._over_time_ahead(nxt)  # kept only if nothing changed since
                labels = self.project.labels(nxt)
                found = self._read_stops(nxt, over_time=False, riding=False)
                folded = self._fold(nxt, found, labels, over_time=bool(self._tracked)
                                    and nxt in self._over_time, places=True)
                if not found:  # the walk passes it: read the frames after it ahead
                    self._read_ahead_over_time(nxt)
            except Exception:  # the step reads them unfolded; the log says why
                log.exception("folding the cards of frame %s failed", nxt)
                return None
            return labels_digest(labels), {a.key: b for a, b in zip(found, folded)
                                           if a is not b}

        def deliver(result: tuple[str, dict[str, Stop | None]] | None) -> None:
            self.reading_ahead -= 1
            self._folding.discard(nxt)
            if result is None or token != self._revision[nxt]:
                return
            self._folds[nxt] = result
            current = self.walk.current
            if nxt in self._stops and nxt not in self._dirty and (
                    current is None or current.frame_id != nxt):
                self._stops.pop(nxt)  # read again, folded, when the walk gets there

        self._background(job, deliver)

    def _reason_stops(self, frame_id: int) -> list[Stop]:
        triage = self.project.triage(frame_id)
        if not triage:
            return []
        names = Names.of_frame(self.skeleton, [p.id for p in self.project.people(frame_id)])
        out = []
        for n, r in enumerate(triage[1]):
            pid = r.get("person")
            if pid is None or names.tag(int(pid)) is None:
                continue
            joints = tuple(int(j) for j in r.get("joints") or ())
            out.append(Stop(frame_id, f"R{n}", int(pid), joints,
                            f"{names.person(int(pid))}: {r.get('text', r.get('kind', ''))}"))
        return out

    def known_stops(self, frame_id: int) -> list[Stop] | None:
        """The frame's stops if they have been read (None: not yet; reading can take a
        frame's triage)."""
        return self._stops.get(frame_id)

    # ------------------------------------------------------------------ walking

    @property
    def current(self) -> Stop | None:
        return self.walk.current

    def step(self, step: int = 1) -> Stop | None:
        """Go to the next (1) or previous (-1) stop; tell the listeners."""
        was = self.walk.current
        if step > 0 and was is not None and was.frame_id == self.frame_id:
            self._passed[was.frame_id].update([was.key, *(f.id for f in was.findings)])
            self._refresh_at_end(was.frame_id)
        stop = self.walk.step(step, self.frame_id)
        stale, self._stale = self._stale, None
        if stale is not None and stale == self.frame_id and (
                stop is None or stop.frame_id == stale):
            self.reload_frame()  # an accept's labels, read once the walk stays here
        if stop is None:
            self.events.emit("message", "no more findings in the Worklist" if step > 0 else
                             "this is the first finding of the Worklist")
            here = self.walk.current
            if here is not None and here.key not in {s.key for s in self.stops(here.frame_id)}:
                self.walk.forget()  # its fix was accepted or it was dismissed: nothing to show
                self.events.emit("stop", None)
        else:
            self.events.emit("stop", stop)
            if stale is not None and stale == self.frame_id:
                self.reload_frame()  # nobody followed the walk to its frame
            self._read_ahead_accept(stop)
            self._fold_ahead(stop.frame_id)
        return stop

    def select_stop(self, stop: Stop) -> None:
        """Select what a stop on the frame shown is about: its labelled joints (a card's part
        under focus: that part's), else its person; a frame's group of findings selects
        nobody (what they are about is marked, not selected). Tells the listeners
        (``selection``)."""
        part = stop.focused
        about = [(stop.person_id, stop.joints)]
        if part is not None:  # the part's person first, else the card's
            about.insert(0, (part.person_id, part.joints))
        for pid, joints in about:
            person = None if pid is None else self.view.person(pid)
            if person is None:
                continue
            shown = [j for j in joints if person.keypoints[j, 2] > 0]
            if shown:
                self.select_joints([(pid, j) for j in shown])
            else:
                self.select_person(pid)
            return
        self.select_person(None)

    def stop_place(self, stop: Stop) -> str:
        """Where a stop is among its frame's: ``· stop 2 of 5`` ("" once it is gone)."""
        keys = [s.key for s in self.stops(stop.frame_id)]
        return (f"\u00b7 stop {keys.index(stop.key) + 1} of {len(keys)}" if stop.key in keys
                else "")

    def skip(self) -> Stop | None:
        """Leave the current stop as it is and go to the next."""
        return self.step(1)

    # ------------------------------------------------------------------ a card of fixes

    def _card_here(self) -> Stop | None:
        stop = self.walk.current
        if stop is None or stop.frame_id != self.frame_id or len(stop.parts) < 2:
            self.events.emit("message", "the card shown holds one fix: Y accepts it, W skips")
            return None
        return stop

    def _replace_current(self, stop: Stop) -> Stop:
        """The current stop changed in place (a part under focus, left out or dismissed):
        keep it in its frame's list under its key, and show it again (``stop``)."""
        held = self._stops.get(stop.frame_id)
        if held is not None:
            keys = [s.key for s in held]
            if stop.key in keys:
                held[keys.index(stop.key)] = stop
            else:
                held.insert(min(self.walk._index, len(held)), stop)
        self.walk.current = stop
        self.events.emit("stop", stop)
        self._read_ahead_accept(stop)
        return stop

    def focus_part(self, step: int = 1) -> Stop | None:
        """Put the focus on the next (1) or previous (-1) fix of the card shown, through the
        card as a whole; the Canvas selects that fix's joints. Said as a message."""
        stop = self._card_here()
        if stop is None:
            return None
        stop = self._replace_current(stop.refocus(step))
        part = stop.focused
        if part is None:
            self.events.emit("message", f"the whole card: Y takes "
                             f"{count(len(stop.taken), 'fix', 'fixes')}")
        else:
            state = "left out" if part.id in stop.left_out else "taken"
            self.events.emit("message", f"fix {stop.focus + 1} of {len(stop.parts)} ({state}): "
                             f"{part.fix.summary if part.fix else part.text}; D leaves it out "
                             "or puts it back, I says it is not a problem")
        return stop

    def leave_out(self) -> Stop | None:
        """Leave the fix under focus out of the card shown (or put it back): Y then takes the
        others. Without a focus, E chooses one first."""
        stop = self._card_here()
        if stop is None:
            return None
        part = stop.focused
        if part is None:
            self.events.emit("message", "E chooses a fix of the card first, then D leaves it "
                             "out")
            return None
        stop = self._replace_current(stop.leave_out())
        out = part.id in stop.left_out
        self.events.emit("message", f"{'left out' if out else 'put back'}: "
                         f"{part.fix.summary if part.fix else part.text}; Y takes "
                         f"{count(len(stop.taken), 'fix', 'fixes')}")
        return stop

    def _refresh_at_end(self, frame_id: int) -> None:
        """At the end of a frame the walk changed, offer its fresh findings not yet passed
        before moving on, if their recompute is in; if it is not, move on and let them
        join the frame's list when they arrive."""
        if frame_id not in self._dirty:
            return
        left = self._stops.get(frame_id, [])
        current = self.walk.current
        keys = [s.key for s in left]
        if current is not None and current.key in keys and keys.index(current.key) < len(keys) - 1:
            return
        if current is not None and current.key not in keys and self.walk._index < len(keys):
            return
        if frame_id not in self._fresh:
            self._left.add(frame_id)  # still computing: the walk does not wait
            return
        self._dirty.discard(frame_id)
        fresh = self._unpassed(frame_id, self._fresh.pop(frame_id))
        self._stops[frame_id] = fresh
        if fresh:
            self.walk.forget()

    def _unpassed(self, frame_id: int, stops: Sequence[Stop]) -> list[Stop]:
        passed = self._passed[frame_id]
        return [s for s in stops if s.key not in passed
                and not (s.findings and all(f.id in passed for f in s.findings))]

    def _recompute(self, frame_id: int) -> None:
        """Compute a changed frame's stops again in the background, for its revision now."""
        token = self._revision[frame_id]
        self.pending.add(frame_id)
        self._fresh.pop(frame_id, None)

        def job() -> list[Stop] | None:
            if self._revision[frame_id] != token:
                return None  # edited again before this started: a newer one follows
            try:
                stops = self._read_stops(frame_id, fold=True)
            except Exception:  # the walk goes on without them; the log says why
                log.exception("computing the findings of frame %s again failed", frame_id)
                return []
            self._read_ahead_over_time(frame_id)
            return stops

        self._background(job, partial(self.recomputed, frame_id, token))

    def _forget_over_time(self, edits: Sequence[Edit] | None = None,
                          frames: Iterable[int] = ()) -> None:
        """Forget the findings over time kept: of the frames within reach of ``edits``
        (:func:`~app.analysis.triage.temporal.within_reach`) and of ``frames``, or, given
        neither, of every frame. A read ahead under way is stale either way."""
        frames = set(frames)
        if edits is None and not frames:
            self._over_time.clear()
        elif self._over_time:
            if edits is not None:
                if self._sequences is None:
                    from app.jobs_tracks import project_sequences

                    self._sequences = [list(q.frame_ids)
                                       for q in project_sequences(self.project)]
                frames |= within_reach(self._sequences, edits)
            for fid in frames:
                self._over_time.pop(fid, None)
        self._over_time_gen += 1

    def _ahead_token(self, stop: Stop) -> tuple[Any, ...]:
        fid = stop.frame_id
        return (fid, stop.key, stop.left_out, self._revision[fid], self._over_time_gen)

    def _read_ahead_accept(self, stop: Stop) -> None:
        """In a project with tracks, when the stop shown is its frame's last (or every stop
        after it is about people its accept touches, which the accept drops), compute on the
        worker the findings over time of the frame the walk goes to next as they would be
        once the stop's fix is accepted (its edits applied to the frame's labels in memory),
        so that the accept's step into that frame finds them ready instead of computing
        them on the spot. Only a fix of joints of people already there (which keeps every
        person and track, :data:`~app.analysis.triage.temporal.JOINT_EDITS`) in one frame;
        the result is used only if that very fix is accepted on the labels it was read
        from with nothing else changed around (:meth:`_edited`)."""
        from app.analysis.triage.temporal import JOINT_EDITS

        self._ahead = None
        fix, fid = stop.fix, stop.frame_id
        if not self._tracked or fix is None or not fix.edits or fid != self.frame_id \
                or any(not isinstance(e, JOINT_EDITS) or e.frame_id != fid
                       for e in fix.edits):
            return
        held = self._stops.get(fid)
        nxt = self.walk.following(fid)
        keys = [s.key for s in held or ()]
        if stop.key not in keys or nxt is None:
            return
        touched = self._touched(stop, changes_labels=True)
        if any(not touched & set(s.people) for s in held[keys.index(stop.key) + 1:]):
            return  # the accept leaves a stop of this frame to show next
        token = (*self._ahead_token(stop), nxt)
        edits = fix.edits
        self.reading_ahead += 1

        def job() -> list[Finding] | None:
            try:
                after, _ = EditGroup(fid, edits).apply(self.project.labels(fid))
                return time_findings(self.project, [nxt], instead={
                    fid: list(after.people.values())}).get(nxt, [])
            except Exception:  # the step computes them itself; the log says why
                log.exception("reading ahead the findings over time of frame %s failed", nxt)
                return None

        def deliver(found: list[Finding] | None) -> None:
            self.reading_ahead -= 1
            if found is not None and self._revision[fid] == token[3] \
                    and self._over_time_gen == token[4]:
                self._ahead = (token, found)

        self._background(job, deliver)

    def _read_ahead_over_time(self, frame_id: int) -> None:
        """In a project with tracks, compute the findings over time of the frame the walk
        goes to after ``frame_id`` (on the recompute's worker, so the step that shows that
        frame does not); dropped if labels change meanwhile. A frame without findings is
        passed by that step, which reads the one after it too: up to :data:`AHEAD` frames
        are read ahead so."""
        nxt = self.walk.following(frame_id)
        for _ in range(AHEAD):
            if nxt is None:
                return
            self._over_time_ahead(nxt)
            if self._over_time.get(nxt) or self.project.findings(nxt).get(nxt):
                return  # the step stops there (or reads its stops again, stale)
            nxt = self.walk.following(nxt)

    def _over_time_ahead(self, nxt: int) -> None:
        """In a project with tracks, compute a frame's findings over time now (on the
        worker); kept only if no findings over time were forgotten meanwhile."""
        if not self._tracked or nxt in self._over_time:
            return
        gen = self._over_time_gen
        try:
            found = time_findings(self.project, [nxt]).get(nxt, [])
        except Exception:  # the step computes them itself; the log says why
            log.exception("reading ahead the findings over time of frame %s failed", nxt)
            return
        if gen == self._over_time_gen:
            self._over_time.setdefault(nxt, found)

    def recomputed(self, frame_id: int, token: int, stops: list[Stop] | None) -> bool:
        """A recompute's result, delivered on the session's thread; dropped (False) when the
        frame was edited since it started. When the walk has already left the frame, its
        stops not yet passed join the frame's list and the walk comes back to it at the end."""
        if stops is None or token != self._revision[frame_id] or frame_id not in self._dirty:
            return False
        self.pending.discard(frame_id)
        if frame_id in self._left:
            self._left.discard(frame_id)
            self._dirty.discard(frame_id)
            fresh = self._unpassed(frame_id, stops)
            self._stops[frame_id] = fresh
            if fresh:
                try:
                    name = self.project.frame(frame_id).file_name
                except PosewrightError:
                    name = "a frame the walk left"
                if self.walk.revisit(frame_id):
                    self._revisits.add(frame_id)
                    back = "the walk comes back to them after the last frame"
                else:
                    back = "W goes to them from there"
                self.events.emit("message", f"{name}: {count(len(fresh), 'more finding')} "
                                 f"after its fixes ({back})")
        else:
            self._fresh[frame_id] = stops
        self.events.emit("refreshed", frame_id)
        return True

    def accept(self) -> Stop | None:
        """Accept the current stop's fix (one ledger group, one undo step), then move on."""
        stop = self.walk.current
        if stop is None or stop.frame_id != self.frame_id:
            self.events.emit("message", "no finding chosen: W goes to the next one")
            return None
        fix = stop.fix
        if fix is None and stop.parts:
            self.events.emit("message", "every fix of this card is left out: D puts the one "
                             "under focus back, W skips the card")
            return None
        if fix is None:
            self.events.emit("message", "this finding proposes no fix: correct it by hand, or "
                             "dismiss it as not a problem")
            return None
        label = accept_label(stop.key, fix.edits)
        if len({e.frame_id for e in fix.edits}) > 1:
            # A fix over several frames (along a track) is one batch, one undo step.
            run: Callable[[], Any] = partial(self.project.apply_batch, fix.edits, label,
                                             action="AcceptFinding")
        else:
            run = partial(self._apply, EditGroup(stop.frame_id, fix.edits, label))
        if self._edited(stop, run, changes_labels=True, reload=False) is None:
            return None
        self.events.emit("message", f"done: {fix.summary} (Ctrl+Z takes it back)")
        return self.step(1)

    def dismiss(self) -> Stop | None:
        """Record the current finding as not a problem (undoable), then move on."""
        stop = self.walk.current
        if stop is None or stop.frame_id != self.frame_id:
            self.events.emit("message", "no finding chosen: W goes to the next one")
            return None
        if not stop.findings:
            self.events.emit("message", "a triage reason cannot be dismissed; run triage to "
                             "get findings")
            return None
        if stop.focused is not None:
            return self._dismiss_part(stop)
        # A card's riders (fixes that only mark joints occluded, walk.ride) are not what
        # it is about: they stay, for the frame's next stop.
        marks = tuple(DismissFinding(f.frame_id, f.fingerprint, f.kind, f.id, f.text)
                      for f in stop.own)
        edit = marks[0] if len(marks) == 1 else EditGroup(stop.frame_id, marks)
        if self._edited(stop, partial(self._apply, edit), changes_labels=False) is None:
            return None
        self.events.emit("message", "dismissed as not a problem (Ctrl+Z takes it back)")
        return self.step(1)

    def _dismiss_part(self, stop: Stop) -> Stop | None:
        """Dismiss the card's fix under focus alone (undoable); the card stays, without it."""
        part = stop.focused
        assert part is not None
        mark = DismissFinding(part.frame_id, part.fingerprint, part.kind, part.id, part.text)
        at = self.walk._index
        if self._edited(stop, partial(self._apply, mark), changes_labels=False) is None:
            return None
        keep = [n for n, p in enumerate(stop.parts) if p is not part]
        parts = tuple(stop.parts[n] for n in keep)
        rounds = tuple(stop.rounds[n] for n in keep) if stop.rounds else ()
        rest = replace(stop, parts=parts, rounds=rounds,
                       group=tuple(g for g in stop.group if g is not part),
                       left_out=stop.left_out - {part.id}, focus=None,
                       finding=parts[0], person_id=parts[0].person_id,
                       text=card_text(parts) if len(parts) > 1 else parts[0].text)
        self.walk._index = at
        self.events.emit("message", f"dismissed as not a problem: {part.text} (Ctrl+Z takes "
                         "it back); the card keeps the other fixes")
        return self._replace_current(rest)

    def _edited(self, stop: Stop, run: Callable[[], Any], changes_labels: bool,
                reload: bool = True) -> Any:
        """Run the edit of a stop; keep the frame's stops about other people. The frame
        shown is read again now, or (``reload`` False) by the step that follows, only if
        that step stays in it (:meth:`step`)."""
        touched = self._touched(stop, changes_labels)
        fix = stop.fix
        fid = stop.frame_id
        kept = [s for s in self.stops(fid) if s.key != stop.key and not touched & set(s.people)]
        # A fix along a track also changes other frames (:meth:`_read_ahead` reads them).
        others = sorted({e.frame_id for e in fix.edits} - {fid}) \
            if fix is not None and changes_labels else []
        self._applying.update([fid, *others])
        try:
            done = run()
        except EditRefused as exc:
            self.events.emit("message", f"not done: {exc}")
            return None
        finally:
            self._applying.difference_update([fid, *others])
        if done is None:
            return None
        self._stops[fid] = kept
        ahead, self._ahead = self._ahead, None
        # The frames around this one see its new labels: those within the edit's reach.
        if not changes_labels:
            self._forget_over_time(frames={fid})
        elif fix is not None:  # the stop's fix is what was applied
            fits = ahead is not None and ahead[0][:5] == self._ahead_token(stop)
            self._forget_over_time(edits=fix.edits)
            if fits:  # read ahead for exactly this accept (:meth:`_read_ahead_accept`)
                self._over_time.setdefault(ahead[0][5], ahead[1])
        else:
            self._forget_over_time()
        self._dirty.add(fid)
        self._left.discard(fid)
        self._revision[fid] += 1
        self._recompute(fid)
        try:
            self._own[fid] = labels_digest(self.project.labels(fid))
        except PosewrightError:
            log.exception("reading frame %s after an edit failed", fid)
        for other in others:
            self._read_ahead(other)
        if fid == self.frame_id:
            if reload:
                self.reload_frame()
            else:
                self._stale = fid
        return done

    @staticmethod
    def _touched(stop: Stop, changes_labels: bool) -> set[int]:
        """The people a stop's edit concerns: the frame's other stops about them are read
        again after it (:meth:`_edited`)."""
        touched = set(stop.people)
        fix = stop.fix
        if fix is not None and changes_labels:
            p = fix.preview
            touched |= {a for a, *_ in p.placed} | {a for a, _ in p.unlabeled} \
                | {a for a, _ in p.occluded} | set(p.deleted) | {a for m in p.merged for a in m}
        return touched

    def _read_ahead(self, frame_id: int) -> None:
        """A frame the walk's fix changed besides its own (a fix along a track): forget its
        stops and compute them again in the background, so that the step into it reads
        them ready instead of triaging it on the spot; the result is dropped if the frame
        or its findings over time change meanwhile (the step then computes them itself)."""
        try:
            self._own[frame_id] = labels_digest(self.project.labels(frame_id))
        except PosewrightError:
            log.exception("reading frame %s after an edit failed", frame_id)
            self._own.pop(frame_id, None)
        self._forget_stops(frame_id)
        token = self._revision[frame_id]
        self.pending.add(frame_id)

        def job() -> tuple[list[Stop], int] | None:
            if self._revision[frame_id] != token:
                return None
            gen = self._over_time_gen  # read before the labels around are
            try:
                stops = self._read_stops(frame_id, fold=True)
            except Exception:  # the step computes them itself; the log says why
                log.exception("computing the findings of frame %s again failed", frame_id)
                return None
            return stops, gen

        self._background(job, partial(self.read_ahead_in, frame_id, token))

    def _forget_stops(self, frame_id: int) -> None:
        """A frame's stops are read again when next needed; a recompute of them under way is
        stale now."""
        self._stops.pop(frame_id, None)
        self._dirty.discard(frame_id)
        self._fresh.pop(frame_id, None)
        self._left.discard(frame_id)
        self._revision[frame_id] += 1

    def read_ahead_in(self, frame_id: int, token: int,
                      result: tuple[list[Stop], int] | None) -> bool:
        """:meth:`_read_ahead`'s result, delivered on the session's thread: kept as the
        frame's stops (True) unless the frame was edited since, findings over time were
        forgotten since it started (labels changed around), or its stops were read
        meanwhile."""
        if token != self._revision[frame_id]:
            return False
        self.pending.discard(frame_id)
        if result is None or frame_id in self._stops:
            return False
        stops, gen = result
        if gen != self._over_time_gen:
            return False
        if frame_id in self._revisits:
            stops = self._unpassed(frame_id, stops)
        self._stops[frame_id] = stops
        return True

    # ------------------------------------------------------------------ outside changes

    def labels_changed(self, frame_ids: Sequence[int]) -> None:
        """Labels changed outside the walk (an edit by hand, undo, a colleague): the stops of
        those frames are read again when next needed."""
        outside = False
        for fid in frame_ids:
            if fid in self._applying:
                continue
            own = self._own.get(fid)
            if own is not None and own == labels_digest(self.project.labels(fid)):
                continue
            outside = True
            if self._tracked is False and any(p.track is not None
                                              for p in self.project.people(fid)):
                self._tracked = True  # a track was set here
            self._own.pop(fid, None)
            self._forget_stops(fid)
            self.pending.discard(fid)
        if outside:
            self._forget_over_time()

    def findings_changed(self, labels: bool = False) -> None:
        """Triage ran again (``labels``: or an import or new frames changed labels too):
        read every frame's stops again, except those the walk holds back for its own
        recompute."""
        if labels:
            self._forget_over_time()
            self._sequences = None
            if self._tracked is False:
                self._tracked = None  # an import may bring tracks
        for fid in list(self._stops):
            if fid not in self._dirty:
                self._stops.pop(fid)
