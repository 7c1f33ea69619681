"""Counts in messages: "1 frame", "2 frames"."""

from __future__ import annotations


def count(n: int, noun: str) -> str:
    """``n`` followed by ``noun`` (given in the plural), each word in the singular when ``n``
    is 1.

    Examples
    --------
    >>> count(2, "frames"), count(1, "frames"), count(1, "people"), count(1, "ignore regions")
    ('2 frames', '1 frame', '1 person', '1 ignore region')
    >>> count(1, "frames grouped"), count(0, "people")
    ('1 frame grouped', '0 people')
    """
    if n != 1:
        return f"{n} {noun}"
    return f"{n} " + " ".join(_singular(word) for word in noun.split(" "))


def _singular(word: str) -> str:
    if word == "people":
        return "person"
    if len(word) > 3 and word.endswith("s") and not word.endswith(("ss", "us")):
        return word[:-1]
    return word
