"""Text that came from a file, made safe to print and to record.

A packet, a COCO file or a file name can carry any character, including the escape sequences
a terminal obeys (``ESC [ 2 J`` clears the screen, others retitle the window or rewrite what
was printed before) and the bidirectional controls that make text read differently from how
it is stored. Two rules keep them out:

- :func:`shown` escapes everything a terminal would act on, for every line the command line
  prints that holds text it did not write itself;
- :func:`check_name` refuses a person's name (an author, a reviewer) that is not plain
  printable text of bounded length, where a name is read from a file, so that no such name is
  ever stored in the ledger.

Notes
-----
"Printable" is Python's :meth:`str.isprintable`: every character except those of the Unicode
categories Other (Cc controls, Cf formats such as the bidirectional overrides, Cs, Co, Cn) and
Separator (Zl, Zp, Zs), the ASCII space excepted.

References
----------
The Unicode Standard, section 4.5 "General Category"; ECMA-48, "Control Functions for Coded
Character Sets", 5th edition (1991), sections 5.3-5.4 (the escape and control sequences a
terminal interprets).
"""

from __future__ import annotations

from app.errors import BadInput

#: Longest name of a person (an author or a reviewer), in characters.
MAX_NAME = 100

_SHORT = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}


def shown(text: object) -> str:
    """``text`` with every character that is not printable written as an escape.

    Parameters
    ----------
    text
        Anything; it is turned into a string with :class:`str` first.

    Returns
    -------
    str
        The same text where every character is printable: a newline, carriage return or tab
        becomes ``\\n``, ``\\r`` or ``\\t``, another control below U+0100 ``\\xHH``, any other
        non-printable character ``\\uHHHH`` (``\\UHHHHHHHH`` above U+FFFF). Printable text,
        including accented letters and other scripts, passes unchanged.

    Notes
    -----
    A backslash is left as it is, so a Windows path reads naturally; an escape can therefore
    not be told from the same characters typed literally, which is fine for a line meant for
    a person (machines get ``--json``, which escapes on its own).

    Examples
    --------
    >>> shown("bea\\x1b]0;owned\\x07")
    'bea\\\\x1b]0;owned\\\\x07'
    >>> shown("Zoë, line one\\nline two")
    'Zoë, line one\\\\nline two'
    >>> shown("abc\\u202edcba")
    'abc\\\\u202edcba'
    """
    text = str(text)
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else _escape(c) for c in text)


def _escape(c: str) -> str:
    if c in _SHORT:
        return _SHORT[c]
    code = ord(c)
    if code < 0x100:
        return f"\\x{code:02x}"
    if code < 0x10000:
        return f"\\u{code:04x}"
    return f"\\U{code:08x}"


def name_problem(name: str) -> str | None:
    """What is wrong with ``name`` as a person's name, or ``None`` when it will do.

    Examples
    --------
    >>> name_problem("Ana Lindqvist") is None
    True
    >>> name_problem("bea\\x1b[2J")
    'a name must be printable text; this one holds \\\\x1b'
    """
    if len(name) > MAX_NAME:
        return f"a name must be at most {MAX_NAME} characters; this one has {len(name)}"
    bad = next((c for c in name if not c.isprintable()), None)
    if bad is not None:
        return f"a name must be printable text; this one holds {_escape(bad)}"
    return None


def check_name(name: str, where: str) -> str:
    """``name`` when it is printable text of at most :data:`MAX_NAME` characters.

    Parameters
    ----------
    name
        The name, as read or typed.
    where
        Where it came from, for the message ("--reviewer", "p.zip: member 'manifest.json'").

    Returns
    -------
    str
        ``name``, unchanged.

    Raises
    ------
    BadInput
        When the name is longer, or holds a character that is not printable (see
        :func:`shown`); the message shows the offending character escaped.

    Examples
    --------
    >>> check_name("bea", "--reviewer")
    'bea'
    >>> check_name("bea\\n", "--reviewer")
    Traceback (most recent call last):
    ...
    app.errors.BadInput: --reviewer: a name must be printable text; this one holds \\n
    """
    problem = name_problem(name)
    if problem is not None:
        raise BadInput(problem, where=where)
    return name
