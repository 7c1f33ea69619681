"""The names of the kinds of finding, in a module of their own that imports nothing.

The command line lists them in ``findings --help``; building its parser must not import
triage (and with it scipy.stats), which would add most of a second to the start of every
command, ``import-maps``, ``targets`` and ``prelabel`` included. The checks themselves live
in :mod:`app.analysis.triage.fixes` (:data:`KINDS`) and :mod:`app.analysis.triage.temporal`
(:data:`TIME_KINDS`), which take the names from here.
"""

from __future__ import annotations

#: The kinds of finding, in the order they are proposed (and accepted) within a frame: first
#: whole people (duplicates, fragments, phantoms), then sides, then joints, then additions.
KINDS: tuple[str, ...] = ("duplicate", "split", "phantom", "mirrored", "crossed-sides",
                          "wrong-owner", "shared-spot", "invented", "hidden", "missing-joint",
                          "missed-person")

#: The kinds of finding over time, in the order their fixes are accepted.
TIME_KINDS: tuple[str, ...] = ("exchanged-tracks", "flipped-stretch", "missing-frames",
                               "jumping-joint", "joint-gap")

#: Every kind of finding, in the order fixes are accepted: a frame's own kinds, then those
#: over time.
ALL_KINDS: tuple[str, ...] = KINDS + TIME_KINDS
