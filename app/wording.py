"""Counts in messages ("1 frame", "2 frames") and the names of triage's reasons.

Every count a person reads (the window, its dialogs and status bar, the command line) goes
through :func:`count`, so that no message says "1 frames" or "frame(s)". A noun may be given in
the singular or in the plural; a phrase changes its last word ("1 unreadable image"), and a
phrase whose noun is not last, or a noun that is not made plural with an "s", names both forms::

    count(n, "frame")                                     # 1 frame, 2 frames
    count(n, "people")                                    # 1 person, 2 people
    count(n, "frame grouped", "frames grouped")           # the noun is not last
    f"{count(n, 'frame')} {plural(n, 'is', 'are')} disputed"   # 1 frame is, 2 frames are

The spelling is British, as in the rest of the app: "labelled", "unlabelled".
"""

from __future__ import annotations

import re

#: Nouns whose plural is not made with "s" (singular -> plural).
IRREGULAR = {"person": "people", "child": "children", "index": "indices", "is": "are",
             "was": "were", "has": "have", "this": "these", "that": "those"}
_SINGULAR = {many: one for one, many in IRREGULAR.items()}
#: Words that end in "s" in the singular.
_ENDS_IN_S = ("ss", "us", "is", "ics")


def count(n: int, noun: str, plural_form: str | None = None) -> str:
    """``n`` followed by ``noun`` in the singular when ``n`` is 1 and in the plural otherwise.

    Parameters
    ----------
    n
        How many.
    noun
        A noun or a phrase that ends in one, in the singular ("frame") or the plural
        ("frames"); without ``plural_form`` the phrase's last word takes the number.
    plural_form
        The whole phrase in the plural, when the rule cannot make it (then ``noun`` must be
        the singular).

    Examples
    --------
    >>> count(1, "frame"), count(2, "frame"), count(0, "frames"), count(1, "frames")
    ('1 frame', '2 frames', '0 frames', '1 frame')
    >>> count(1, "people"), count(3, "person"), count(3, "person", "people")
    ('1 person', '3 people', '3 people')
    >>> count(1, "ignore regions"), count(2, "unreadable image"), count(2, "fix")
    ('1 ignore region', '2 unreadable images', '2 fixes')
    >>> count(1, "frame grouped", "frames grouped"), count(4, "frame grouped", "frames grouped")
    ('1 frame grouped', '4 frames grouped')
    >>> count(2, "entry"), count(1, "entries"), count(2, "class"), count(1, "notes")
    ('2 entries', '1 entry', '2 classes', '1 note')
    """
    return f"{n} {plural(n, noun, plural_form)}"


#: Words that, placed after a noun, describe it rather than name it: in a phrase such as
#: "frames grouped" or "frames with maps" the FIRST word takes the number.
_AFTER_NOUN = re.compile(r"^\S+ (?:\S+ed|kept|with\b.*|without\b.*)$")


def count_phrase(n: int, phrase: str) -> str:
    """``n`` and a counted phrase from a job's counts ("frames grouped", "ignore regions"),
    the number given to the phrase's noun: the first word when the rest describes it, else the
    last.

    Examples
    --------
    >>> count_phrase(480, "frames grouped"), count_phrase(1, "frames with maps")
    ('480 frames grouped', '1 frame with maps')
    >>> count_phrase(1, "fields mended"), count_phrase(2, "ignore regions")
    ('1 field mended', '2 ignore regions')
    """
    if _AFTER_NOUN.match(phrase):
        noun, _, rest = phrase.partition(" ")
        return f"{count(n, noun)} {rest}"
    return count(n, phrase)


def plural(n: int, noun: str, plural_form: str | None = None) -> str:
    """The form of ``noun`` that goes with the number ``n``, without the number.

    Examples
    --------
    >>> plural(1, "is", "are"), plural(4, "is", "are"), plural(2, "joint"), plural(1, "people")
    ('is', 'are', 'joints', 'person')
    """
    if plural_form is not None:
        return noun if n == 1 else plural_form
    head, _, last = noun.rpartition(" ")
    word = singular(last) if n == 1 else pluralise(last)
    return f"{head} {word}" if head else word


def singular(word: str) -> str:
    """The singular of an English noun given in either number (the rules our nouns need).

    Examples
    --------
    >>> [singular(w) for w in ("frames", "people", "fixes", "entries", "class", "frame", "notes")]
    ['frame', 'person', 'fix', 'entry', 'class', 'frame', 'note']
    """
    lower = word.lower()
    if lower in _SINGULAR:
        return _keep_case(word, _SINGULAR[lower])
    if lower in IRREGULAR or len(word) <= 3 or not lower.endswith("s") \
            or lower.endswith(_ENDS_IN_S):
        return word
    if lower.endswith("ies"):
        return word[:-3] + "y"
    if lower.endswith(("sses", "xes", "ches", "shes")):
        return word[:-2]
    return word[:-1]


def pluralise(word: str) -> str:
    """The plural of an English noun given in either number (the rules our nouns need).

    Examples
    --------
    >>> [pluralise(w) for w in ("frame", "person", "fix", "entry", "class", "frames", "day")]
    ['frames', 'people', 'fixes', 'entries', 'classes', 'frames', 'days']
    """
    lower = word.lower()
    if lower in IRREGULAR:
        return _keep_case(word, IRREGULAR[lower])
    if lower in _SINGULAR:
        return word
    one = singular(word)
    if one != word:                     # it was a plural already
        return word
    if lower.endswith(("s", "x", "ch", "sh")):
        return word + "es"
    if lower.endswith("y") and lower[-2:-1] not in tuple("aeiou"):
        return word[:-1] + "ies"
    return word + "s"


def _keep_case(like: str, word: str) -> str:
    return word[:1].upper() + word[1:] if like[:1].isupper() else word


# ---------------------------------------------------------------------- triage's reasons

#: Each kind of triage reason or finding as a noun phrase, singular and plural, so that a
#: count reads as a count ("94 weak limbs"), never as an id ("weak limb 94").
REASONS: dict[str, tuple[str, str]] = {
    "weak-limb": ("weak limb", "weak limbs"),
    "stretched-limb": ("stretched limb", "stretched limbs"),
    "missing-joints": ("person missing joints", "people missing joints"),
    "missing-joint": ("missing joint", "missing joints"),
    "crossed-sides": ("crossed pair of sides", "crossed pairs of sides"),
    "mirrored": ("mirrored person", "mirrored people"),
    "duplicate": ("duplicate", "duplicates"),
    "split": ("split person", "split people"),
    "tangled": ("tangled person", "tangled people"),
    "low-score": ("low-scored person", "low-scored people"),
    "off-ground": ("person off the ground", "people off the ground"),
    "short-legs": ("person with short legs", "people with short legs"),
    "tilted-torso": ("tilted torso", "tilted torsos"),
    "crowded": ("crowded frame", "crowded frames"),
    "phantom": ("phantom", "phantoms"),
    "wrong-owner": ("joint with a wrong owner", "joints with a wrong owner"),
    "shared-spot": ("joint labelled on two people", "joints labelled on two people"),
    "invented": ("invented joint", "invented joints"),
    "held-tie": ("person held on a near tie", "people held on a near tie"),
    "opposed-field": ("person against the field", "people against the field"),
    "neighbour-face": ("eye and ear on a neighbour's face", "eyes and ears on a neighbour's face"),
    "far-side": ("side-on person mirrored", "side-on people mirrored"),
    "long-legs": ("person with another's legs", "people with another's legs"),
    "hidden": ("hidden joint labelled visible", "hidden joints labelled visible"),
    "missed-person": ("missed person", "missed people"),
    "exchanged-tracks": ("exchanged pair of tracks", "exchanged pairs of tracks"),
    "flipped-stretch": ("stretch flipped left to right", "stretches flipped left to right"),
    "missing-frames": ("track missing for a while", "tracks missing for a while"),
    "jumping-joint": ("jumping joint", "jumping joints"),
    "joint-gap": ("joint the frames around place", "joints the frames around place"),
}


def reason_label(kind: str) -> str:
    """A reason kind as a filter lists it: its name in words ("weak limb", "crowded").

    Examples
    --------
    >>> reason_label("long_limb"), reason_label("weak-limb"), reason_label("")
    ('long limb', 'weak limb', 'other')
    """
    return str(kind).replace("_", " ").replace("-", " ").strip() or "other"


def reason_count(kind: str, n: int) -> str:
    """``n`` reasons of one kind as a count: "94 weak limbs"; one alone is just its name.

    Examples
    --------
    >>> reason_count("weak-limb", 94), reason_count("weak-limb", 1), reason_count("crowded", 1)
    ('94 weak limbs', 'weak limb', 'crowded')
    >>> reason_count("missing-joints", 5), reason_count("something-new", 2)
    ('5 people missing joints', 'something new \u00d72')
    """
    if n == 1:
        return reason_label(kind)
    if str(kind) not in REASONS:      # a kind without a noun: the name and how many times
        return f"{reason_label(kind)} \u00d7{n}"
    return count(n, *REASONS[str(kind)])


# ---------------------------------------------------------------------- reviewers' decisions

#: A reviewer's decision (as stored, see :data:`app.model.records.DECISIONS`) as a person
#: reads it in the Worklist, the status bar and the Ledger.
DECISION_WORDS = {"looks-right": "looks right", "query": "queried", "ready": "ready for training"}


# ---------------------------------------------------------------------- older ledger entries

#: Words that Ledger summaries recorded before version 0.2 used, and what we say now. The
#: Ledger keeps what it recorded; only what is shown changes.
_OLD_LEDGER_WORDS = ((r"\bkeep ours\b", "keep mine"),
                     (r"\breturn to ledger entry\b", "rewind to ledger entry"),
                     (r"\bunlabeled\b", "unlabelled"))


def ledger_text(summary: str) -> str:
    """A Ledger entry's summary in today's words (entries recorded earlier said "keep ours",
    "return to ledger entry" and "unlabeled").

    Examples
    --------
    >>> ledger_text("undo: keep ours"), ledger_text("mark joint 9 of person 5 unlabeled")
    ('undo: keep mine', 'mark joint 9 of person 5 unlabelled')
    """
    for old, new in _OLD_LEDGER_WORDS:
        summary = re.sub(old, new, summary)
    return summary
