"""Reading JSON strictly and writing it safely: every file the tool reads goes through here."""

import json
import sys

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from app.errors import BadInput
from app.fileio import MAX_DEPTH, json_ready, parse_json, read_json, write_json_atomic


@pytest.mark.parametrize("token, shown", [
    ("NaN", "NaN is not a finite number"),
    ("Infinity", "Infinity is not a finite number"),
    ("-Infinity", "-Infinity is not a finite number"),
    ("1e309", "Infinity is not a finite number"),
    ("-2.5e400", "-Infinity is not a finite number"),
])
def test_non_finite_numbers_are_refused_naming_the_record_and_field(token, shown):
    """RFC 8259, section 6: "Numeric values that cannot be represented in the grammar below
    (such as Infinity and NaN) are not permitted". Python's json module reads them anyway (its
    documentation calls this an extension), and reads numbers past the range of an IEEE 754
    double as infinity. Synthetic data."""
    text = '{"info": {"year": 1}, "images": [{"id": 3, "extra": {"deep": [0, 1, @]}}]}'
    text = text.replace("@", token)
    with pytest.raises(BadInput) as err:
        parse_json(text.encode(), "labels.json")
    assert str(err.value).startswith(
        f"labels.json: images[0] (id 3): field extra.deep.2: {shown}")
    assert "\n" not in str(err.value)


def test_a_top_level_list_names_its_records_by_root():
    with pytest.raises(BadInput, match=r"r\.json: results\[1\]: field score: NaN"):
        parse_json(b'[{"score": 1}, {"score": NaN}]', "r.json", root="results")


def test_deep_nesting_is_refused_in_one_line_at_any_depth():
    """Python's json reader raises RecursionError on deep nesting (around a thousand levels,
    from memory); anything past MAX_DEPTH is refused with the place named."""
    with pytest.raises(BadInput, match=r"x\.json: the config is nested too deeply"):
        parse_json(b"[" * 100_000 + b"]" * 100_000, "x.json", "the config")
    shallow_enough = b'{"a": ' + b"[" * (MAX_DEPTH - 1) + b"]" * (MAX_DEPTH - 1) + b"}"
    assert parse_json(shallow_enough, "x.json") is not None
    too_deep = b'{"a": ' + b"[" * MAX_DEPTH + b"]" * MAX_DEPTH + b"}"
    with pytest.raises(BadInput, match=rf"x\.json: a\[0\]: field 0(\.0)*: nested more than "
                                       rf"{MAX_DEPTH} levels deep"):
        parse_json(too_deep, "x.json")


@pytest.mark.skipif(not hasattr(sys, "get_int_max_str_digits"),
                    reason="this Python converts integers of any length")
def test_an_integer_too_long_to_convert_is_bad_input():
    """CPython 3.11 (and 3.10.7) refuse to convert integers of more than 4300 digits (a
    ValueError that is not a JSONDecodeError; Python documentation, "Integer string conversion
    length limitation")."""
    with pytest.raises(BadInput, match="not valid JSON"):
        parse_json(b"[" + b"7" * 5000 + b"]", "x.json")


def test_read_json_names_an_unreadable_file(tmp_path):
    with pytest.raises(BadInput, match="cannot read the skeleton"):
        read_json(tmp_path / "none.json", "the skeleton")


def test_json_ready_replaces_every_non_finite_number_and_says_where():
    data = {"a": [1.0, float("nan"), {"b": float("-inf")}], "c": (2.5, float("inf"))}
    clean, found = json_ready(data)
    assert clean == {"a": [1.0, None, {"b": None}], "c": [2.5, None]}
    assert sorted(map(str, found)) == ["('a', 1)", "('a', 2, 'b')", "('c', 1)"]
    assert json_ready({"a": [1, 2]}) == ({"a": [1, 2]}, [])


def test_write_json_refuses_non_finite_numbers_and_writes_nothing(tmp_path):
    out = tmp_path / "o.json"
    out.write_text("old")
    with pytest.raises(BadInput, match=r"o\.json: x\[1\]: Infinity.*nothing was written"):
        write_json_atomic(out, {"x": [1, float("inf")]})
    assert out.read_text() == "old" and [p.name for p in tmp_path.iterdir()] == ["o.json"]
    write_json_atomic(out, {"x": [1, 2.5]})
    assert json.loads(out.read_text()) == {"x": [1, 2.5]}


_TOKENS = ["NaN", "Infinity", "-Infinity", "1e309", "1" + "0" * 5000, "[" * 3000, "{", "\ud800"]


@settings(max_examples=80, deadline=None)
@given(value=st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(max_size=5),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=4), inner,
                                                                   max_size=3),
    max_leaves=15), token=st.sampled_from([None, *_TOKENS]), cut=st.integers(0, 3))
def test_any_text_parses_to_what_json_reads_or_is_refused_in_one_line(value, token, cut):
    """Synthetic JSON text, sometimes with a hostile token spliced in: parse_json returns what
    Python's json module reads, or refuses it with BadInput naming the file; nothing else."""
    text = json.dumps({"records": [value, "@@"]})
    if token is not None:
        text = text.replace('"@@"', token)
    text = text[: len(text) - cut]
    try:
        data = parse_json(text.encode("utf-8", "surrogatepass"), "f.json")
    except BadInput as exc:
        assert str(exc).startswith("f.json: ") and "\n" not in str(exc)
    else:
        assert data == json.loads(text)


@pytest.mark.parametrize("chunk", [1, 5, 64, 1 << 20])
@pytest.mark.parametrize("text", [
    '{"images": [1, 2],\n "annotations": [{"id": 1}, {"id": 2}\n {"id": 3}]}',
    '{"a": [1, 2, 3],\n\n "b": [tru]}',
    '[{"x": "abc"}, {"x": "unterminated}]',
    '{"a": 1} {"b": 2}',
    '{"a": [1, 2,]}',
    '{"a" 1}',
    '  ',
    '\ufeff{"a": 1}',
])
def test_json_stream_refuses_as_the_whole_file_reader_does(tmp_path, chunk, text, monkeypatch):
    """Python's json module (the reader parse_json uses) is the reference: a file read piece by
    piece, at any size of piece, is refused with the same message, line, column and character
    as the whole text (synthetic texts)."""
    from app.fileio import JsonStream, parse_json

    monkeypatch.setattr(JsonStream, "CHUNK", chunk)
    path = tmp_path / "t.json"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(BadInput) as whole:
        parse_json(path.read_bytes(), str(path))
    with pytest.raises(BadInput) as pieces, JsonStream(path) as stream:
        if stream.kind() == "object":
            for key in stream.members():
                if stream.is_array():
                    list(stream.items(key))
                else:
                    stream.value(key)
        else:
            list(stream.items())
    assert str(pieces.value) == str(whole.value)


def test_json_stream_reads_what_json_reads(tmp_path, monkeypatch):
    """Items and values equal json.loads of the same text, read 3 characters at a time
    (synthetic text with numbers split across pieces, escapes and nesting)."""
    from app.fileio import JsonStream

    monkeypatch.setattr(JsonStream, "CHUNK", 3)
    data = {"a": [12345678901234567, -1.5e-300, "x\u00e9\\\"y", {"n": [[], {}]}],
            "b": {"c": None, "d": True}, "e": [0.1] * 7}
    path = tmp_path / "t.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    got = {}
    with JsonStream(path) as stream:
        assert stream.kind() == "object"
        for key in stream.members():
            got[key] = list(stream.items(key)) if stream.is_array() else stream.value(key)
    assert got == data


def test_an_integer_beyond_any_float_inside_a_list_is_left_to_the_full_scan():
    """A list holding an integer too large for a float (JSON allows any length of digits)
    must not raise out of the quick check of streamed records (hypothesis found it)."""
    from app.fileio import _plainly_finite

    assert _plainly_finite({"description": [10 ** 400]}) is False
