"""The words a person reads: every string of the app's code and every command's help is checked
for counts that do not agree with their number, for the one spelling of "labelled" and
"unlabelled", and for words that name something else than our own vocabulary (the two sides of
a review are "mine" and "the reviewer's"; "return" is only the key).

Our own rules (README.md, "The desktop app"), no outside source; the English forms checked are
common practice. The walk over the window's menus, buttons and headers is
tests/ui/test_words.py.
"""

from __future__ import annotations

import argparse
import ast
import re
from collections.abc import Iterator
from pathlib import Path

import pytest

from app.cli import build_parser
from app.model.records import DECISIONS, OLD_DECISIONS
from app.wording import DECISION_WORDS, REASONS

APP = Path(__file__).resolve().parents[1] / "app"

#: Nouns a count goes with in our messages.
NOUNS = (r"(?:frames?|joints?|people|persons?|images?|notes?|findings?|fix(?:es)?|"
         r"differences?|edits?|changes?|limbs?|regions?|entries|entry|steps?|conflicts?|"
         r"pairs?|fields?|reasons?|flags?|packets?|decisions?|deletions?|rows?|"
         r"annotations?|peaks?|channels?|dancers?|corners?|areas?|sigmas?|boxes)")
#: After a number in an f-string: a noun, perhaps after one adjective ("open differences").
_AFTER_NUMBER = re.compile(r"^ (?:(?!(?:of|to|into|and|or|in|at|from|for|the|a|by)\b)"
                           r"[a-z-]+ )?" + NOUNS + r"\b")

#: What no text a person reads may say, and why.
FORBIDDEN = {
    r"\w\((?:s|es)\)": "a plural hedged with (s): use app.wording.count",
    r"\b1 (?:[a-z-]+ )?(?:frames|joints|people|persons|images|notes|findings|fixes|edits|"
    r"differences|limbs|regions|steps|conflicts)\b": "1 with a plural noun",
    r"\b[Uu]nlabel(?:ed|ing)\b": "one spelling: unlabelled, unlabelling (British, as labelled)",
    r"\b(?:theirs|ours)\b": "the sides of a review are mine and the reviewer's",
    r"(?i)three-way": "version-control words stay out of what a person reads",
}

#: Strings that are stored names, not text: kept as they are so that stored data still reads.
STORED = {
    "unlabeled",  # the key of a finding's preview in stored findings (app/analysis/triage)
    "theirs",     # the column of the reviewer's version (app/store/schema.py)
    r"\bkeep ours\b", r"\bunlabeled\b",  # older Ledger entries' words (app/wording.py)
}


def _docstrings(tree: ast.AST) -> set[int]:
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)) \
                and node.body and isinstance(node.body[0], ast.Expr) \
                and isinstance(node.body[0].value, ast.Constant):
            found.add(id(node.body[0].value))
    return found


def _is_sql(text: str) -> bool:
    return bool(re.search(r"\b(SELECT|INSERT|UPDATE|CREATE|DELETE)\b", text))


def app_strings() -> Iterator[tuple[str, ast.AST, str]]:
    """Every string constant of the app's code that is not a docstring: (where, node, text)."""
    for path in sorted(APP.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        skip = _docstrings(tree)
        for node in ast.walk(tree):
            if isinstance(node, ast.Constant) and isinstance(node.value, str) \
                    and id(node) not in skip:
                yield f"{path.relative_to(APP.parent)}:{node.lineno}", node, node.value


def uncounted(source: str) -> list[str]:
    """Where an f-string puts a number straight before a noun instead of going through
    :func:`app.wording.count`: ``"line: {value} noun"`` each. A value inside a call of
    ``count`` or ``plural``, and a size written ``{w}x{h}``, are left alone."""
    tree = ast.parse(source)
    inside: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Call) and getattr(node.func, "id", "") in ("count", "plural"):
            inside.update(id(n) for arg in node.args for n in ast.walk(arg))
    found = []
    for node in ast.walk(tree):
        if not isinstance(node, ast.JoinedStr) or id(node) in inside:
            continue
        parts = node.values
        for before, value, after in zip([None, *parts], parts, [*parts[1:], None]):
            if not isinstance(value, ast.FormattedValue) or value.format_spec is not None:
                continue
            if not (isinstance(after, ast.Constant) and isinstance(after.value, str)):
                continue
            if isinstance(before, ast.Constant) and str(before.value).endswith("x"):
                continue  # a size: {w}x{h} image
            if _AFTER_NUMBER.match(after.value):
                found.append(f"{node.lineno}: {{{ast.unparse(value.value)}}}{after.value[:30]}")
    return found


def test_the_detectors_find_what_they_look_for():
    """Synthetic snippets: the checks can fail."""
    assert uncounted('x = f"{n} frames left"')
    assert uncounted('x = f"{len(a)} open differences keep mine"')
    assert not uncounted('x = f"{count(n, \'frame\')} left"')
    assert not uncounted('x = f"joint {j} of person {p}"')
    assert not uncounted('x = f"a {w}x{h} image"')
    assert not uncounted('x = count(n, f"{state} frame")')
    said = [why for text in ("4 joint(s)", "1 frames", "Unlabeled", "take theirs",
                             "three-way merge") for pattern, why in FORBIDDEN.items()
            if re.search(pattern, text)]
    assert len(said) == 5, said
    assert not any(re.search(p, "labelled, unlabelled; mine and the reviewer's; 1 frame")
                   for p in FORBIDDEN)


def test_every_count_in_the_code_goes_through_the_plural_helper():
    offenders = []
    for path in sorted(APP.rglob("*.py")):
        offenders += [f"{path.relative_to(APP.parent)}:{hit}"
                      for hit in uncounted(path.read_text(encoding="utf-8"))]
    assert not offenders, "counts that do not agree with their number:\n" + "\n".join(offenders)


def test_no_string_of_the_app_says_what_we_do_not_say():
    offenders = []
    for where, _node, text in app_strings():
        if text in STORED or _is_sql(text):
            continue
        for pattern, why in FORBIDDEN.items():
            if re.search(pattern, text):
                offenders.append(f"{where}: {why}: {text[:60]!r}")
    assert not offenders, "\n".join(offenders)


def _parsers(parser: argparse.ArgumentParser, name: str = "posewright"
             ) -> Iterator[tuple[str, argparse.ArgumentParser]]:
    yield name, parser
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            seen: set[int] = set()
            for sub_name, sub in action.choices.items():
                if id(sub) not in seen:
                    seen.add(id(sub))
                    yield from _parsers(sub, f"{name} {sub_name}")


def test_the_help_of_every_command_says_it_in_our_words():
    """Every subcommand's --help, as argparse prints it."""
    helps = dict(_parsers(build_parser()))
    assert {"posewright ledger", "posewright packet send-back", "posewright packet decide",
            "posewright findings", "posewright open"} <= set(helps)
    offenders = []
    for name, parser in helps.items():
        text = " ".join(parser.format_help().split())
        for pattern, why in FORBIDDEN.items():
            if re.search(pattern, text):
                offenders.append(f"{name}: {why}")
    assert not offenders, "\n".join(offenders)


@pytest.mark.parametrize(("old", "new"), [("history", "ledger"), ("return", "send-back")])
def test_a_renamed_command_keeps_its_old_name_for_a_release(old, new):
    commands = dict(_parsers(build_parser()))
    group = commands["posewright"] if f"posewright {new}" in commands else \
        commands["posewright packet"]
    choices = next(a for a in group._actions
                   if isinstance(a, argparse._SubParsersAction)).choices
    now = choices[new]
    assert choices[old] is now
    assert re.search(rf"`{old}`, its name until version \S+, still works", now.description)


def test_decisions_are_our_own_words_and_no_frame_state():
    """A reviewer's decision never repeats a frame state's name, nor sounds like a code
    review; old decisions map onto new ones one to one."""
    from app.model.labels import FrameState

    states = {s.value for s in FrameState} | {s.value.replace("-", " ") for s in FrameState}
    assert not states & set(DECISIONS)
    assert not {"agree", "approve", "approved", "needs-change", "request-changes"} & set(DECISIONS)
    assert sorted(OLD_DECISIONS.values()) == sorted(DECISIONS)
    shown = set(DECISION_WORDS.values())
    assert set(DECISION_WORDS) == set(DECISIONS) and len(shown) == len(DECISIONS)
    assert not shown & states


def test_every_kind_of_reason_has_a_noun_to_count_it_by():
    """The kinds triage and the findings name (read from the code) each have a singular and a
    plural in app/wording.py, so the Worklist can say "94 weak limbs"."""
    kinds = set()
    made = re.compile(r'(?:make_reason|Reason|Proposal|finding)\((?:\s*\w+,)?\s*"([a-z-]+)"')
    for path in (APP / "analysis" / "triage").glob("*.py"):
        kinds |= set(made.findall(path.read_text(encoding="utf-8")))
    assert {"weak-limb", "crowded", "duplicate", "wrong-owner", "jumping-joint"} <= kinds
    assert kinds <= set(REASONS), kinds - set(REASONS)
