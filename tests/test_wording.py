"""Counts in messages: singular and plural forms (app/wording.py).

The plural rules checked are those of English grammar for regular nouns (add -s; -es after s,
x, ch and sh; -ies after a consonant and y) and the irregular "person"/"people", from memory
(common practice of any English grammar, no source named).
"""

from __future__ import annotations

import pytest

from app.wording import REASONS, count, plural, pluralise, reason_count, singular


@pytest.mark.parametrize(("n", "noun", "expected"), [
    (0, "frame", "0 frames"), (1, "frame", "1 frame"), (2, "frame", "2 frames"),
    (1, "frames", "1 frame"), (7, "frames", "7 frames"),
    (1, "person", "1 person"), (2, "person", "2 people"), (1, "people", "1 person"),
    (3, "fix", "3 fixes"), (1, "fixes", "1 fix"), (2, "box", "2 boxes"),
    (2, "match", "2 matches"), (2, "entry", "2 entries"), (1, "entries", "1 entry"),
    (2, "day", "2 days"), (2, "class", "2 classes"), (1, "class", "1 class"),
    (1, "notes", "1 note"), (2, "note", "2 notes"),
    (1, "unreadable images", "1 unreadable image"), (4, "ignore region", "4 ignore regions"),
])
def test_a_count_agrees_with_its_number(n, noun, expected):
    assert count(n, noun) == expected


def test_a_phrase_whose_noun_is_not_last_names_both_forms():
    assert count(1, "frame grouped", "frames grouped") == "1 frame grouped"
    assert count(0, "frame grouped", "frames grouped") == "0 frames grouped"
    assert count(3, "person", "people") == "3 people"


def test_verbs_agree_with_a_count():
    for n, verb in ((1, "is"), (2, "are"), (0, "are")):
        assert plural(n, "is", "are") == verb
    assert f"{count(1, 'frame')} {plural(1, 'is', 'are')} disputed" == "1 frame is disputed"
    assert f"{count(3, 'frame')} {plural(3, 'is', 'are')} disputed" == "3 frames are disputed"


def test_singular_and_plural_are_each_others_inverse_on_our_nouns():
    nouns = ["frame", "joint", "person", "image", "note", "finding", "fix", "difference",
             "edit", "change", "limb", "region", "entry", "step", "conflict", "pair", "box",
             "channel", "sigma", "area", "match"]
    for noun in nouns:
        assert singular(pluralise(noun)) == noun, noun
        assert pluralise(pluralise(noun)) == pluralise(noun), noun
        assert singular(noun) == noun, noun


def test_a_reason_count_reads_as_a_count_not_as_an_id():
    """The Worklist's summary says "94 weak limbs", never "weak limb 94" (which reads as limb
    number 94)."""
    assert reason_count("weak-limb", 94) == "94 weak limbs"
    assert reason_count("missing-joints", 5) == "5 people missing joints"
    assert reason_count("stretched-limb", 1) == "stretched limb"
    for kind, (one, many) in REASONS.items():
        assert reason_count(kind, 2) == f"2 {many}", kind
        assert count(1, one, many) == f"1 {one}", kind
        assert not reason_count(kind, 3).endswith(" 3"), kind


def test_older_ledger_entries_are_shown_in_todays_words():
    """The Ledger keeps what it recorded; what is shown of entries recorded before the words
    changed says "keep mine", "rewind" and "unlabelled" (our own vocabulary)."""
    from app.wording import ledger_text

    assert ledger_text("keep ours") == "keep mine"
    assert ledger_text("redo: return to ledger entry 12") == "redo: rewind to ledger entry 12"
    assert ledger_text("mark 3 joints unlabeled") == "mark 3 joints unlabelled"
    assert ledger_text("give joint 9 to person 4") == "give joint 9 to person 4"
