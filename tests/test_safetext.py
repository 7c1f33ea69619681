"""app.safetext: what may be printed and what may be a name.

"Printable" is Python's str.isprintable, which follows the Unicode general categories (The
Unicode Standard, section 4.5): Cc, Cf, Cs, Co, Cn, Zl, Zp and Zs other than the space are
not printable. The sample strings are synthetic.
"""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from app.errors import BadInput
from app.safetext import MAX_NAME, check_name, shown


@given(st.text())
def test_shown_is_always_printable_and_keeps_printable_text(text):
    out = shown(text)
    assert out.isprintable()
    assert (out == text) is text.isprintable()


@pytest.mark.parametrize("text, expected", [
    ("\x1b[2J", "\\x1b[2J"),                 # ECMA-48 CSI: clear the screen
    ("\x9b2J", "\\x9b2J"),                   # the same as one C1 control
    ("a\u202eb", "a\\u202eb"),               # right-to-left override, category Cf
    ("a\u2028b", "a\\u2028b"),               # line separator, category Zl
    ("\U000e0041", "\\U000e0041"),           # a tag character, category Cf
    ("Zoë, 王芳, Ολγα", "Zoë, 王芳, Ολγα"),  # letters of any script pass
    ("C:\\frames\\a.jpg", "C:\\frames\\a.jpg"),
])
def test_shown_escapes_what_a_terminal_would_act_on(text, expected):
    assert shown(text) == expected


@pytest.mark.parametrize("name", ["a" * (MAX_NAME + 1), "bea\x1b", "bea\n", "bea\u200f",
                                  "\x00"])
def test_check_name_refuses_what_is_not_a_plain_bounded_name(name):
    with pytest.raises(BadInput, match=r"^--author: a name must be") as exc:
        check_name(name, "--author")
    assert str(exc.value).isprintable()


def test_check_name_accepts_plain_names():
    assert check_name("Ana Lindqvist-Øberg", "--author") == "Ana Lindqvist-Øberg"
    assert check_name("a" * MAX_NAME, "--author") == "a" * MAX_NAME
