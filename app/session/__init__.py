"""Qt-free application state: what the annotator is looking at and walking through.

- :mod:`app.session.session`: :class:`Session`, the frame on screen, its people (held by the
  view) and their names, the selection, the walk through the findings; intents in, edits and
  messages out, plain events.
- :mod:`app.session.walk`: the cursor from one problem to the next across frames.
- :mod:`app.session.owners`: who a selected joint could belong to, the owner's own fit beside
  the candidates', and what a give would swap.
- :mod:`app.session.settling`: a disputed frame's differences, their order and their words,
  and :class:`~app.session.settling.Settling`, what the settling keys do.
- :mod:`app.session.editing`: what the editing keys do (give, mark, place, add, split, merge,
  swap, delete, mark the frame).
- :mod:`app.session.actions`: which of the window's actions are enabled, which toggles on.
- :mod:`app.session.status`: what the status bar, the strips and Owners' selection line say.
- :mod:`app.session.view`: what the Canvas shows: the people in tag order, their flags and
  colours, its modes (region, pick, focus), and on a disputed frame ours or the reviewer's
  version with the marks where they differ.
- :mod:`app.session.selection`: what is selected; :mod:`app.session.events`: plain events.

The window (``app/ui``) shows what the session says and turns gestures into its intents;
everything here is tested without a window.
"""

from app.session.events import Events
from app.session.session import Session
from app.session.view import View
from app.session.walk import Stop, Walk

__all__ = ["Events", "Session", "Stop", "View", "Walk"]
