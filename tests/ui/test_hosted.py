"""The window over a hosted project (a throwaway PostgreSQL server, tests/pg.py): a colleague's
edit reaches the Canvas, their claim shows in the Worklist with their name, and an edit of a
joint they moved meanwhile is refused in the status bar. Synthetic project; "bea" is an
invented name."""

from __future__ import annotations

import pytest

from app.model import MoveJoint
from app.store import Project
from app.store.hosting import host
from tests.ui.conftest import WAIT_MS, make_project, person_id, show_window


@pytest.fixture
def hosted_window(qtbot, tmp_path, pg_url):
    make_project(tmp_path).close()
    host(tmp_path / "proj", pg_url)
    project = Project.open(pg_url, author="ana")
    w = show_window(qtbot, project)
    yield w
    w.shutdown()
    project.close()


def test_a_colleagues_edit_claim_and_conflict_reach_the_window(qtbot, hosted_window, pg_url):
    w = hosted_window
    frame, pid = w.frame_id, person_id(w, 2)
    other = next(f for f in w.worklist.ordered_ids() if f != frame)
    with Project.open(pg_url, author="bea") as bea:
        assert bea.claims()[frame].author == "ana"  # opening the frame claimed it
        bea.apply(MoveJoint(frame, pid, 0, 12.0, 34.0))
        qtbot.waitUntil(lambda: next(p for p in w.canvas.people if p.id == pid)
                        .keypoints[0, :2].tolist() == [12.0, 34.0], timeout=WAIT_MS)
        bea.claim(other)
        row = w.worklist_model.row_of(other)
        qtbot.waitUntil(lambda: w.worklist_model.work_row(row).claimed_by == "bea",
                        timeout=WAIT_MS)
        assert "bea" in w.worklist_model.index(row, 2).data()
        # bea moves a joint the window still shows where it was: ana's edit of it is refused.
        w.events.detach()  # hold the window's view as it was, as if the news were late
        bea.apply(MoveJoint(frame, pid, 1, 40.0, 41.0))
        w.apply(MoveJoint(frame, pid, 1, 50.0, 51.0))
        assert "changed by bea" in w.status_log.last
        assert bea.people(frame)[1].keypoints[1, :2].tolist() == [40.0, 41.0]
